checkpoint prepare:
    input:
        library=config["library"],
        reference=config["reference"],
    params:
        config_hash=CONFIG_HASH,
    output:
        manifest=MANIFEST,
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/prepare.log",
    script:
        "../scripts/prepare.py"
