checkpoint prepare:
    input:
        library=config["library"],
        reference=config["reference"],
    output:
        manifest="results/manifest.json",
    log:
        "logs/prepare.log",
    script:
        "../scripts/prepare.py"
