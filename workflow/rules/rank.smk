rule rank:
    input:
        manifest=MANIFEST,
        computed=get_rank_input,
    params:
        config_hash=CONFIG_HASH,
    output:
        ranking=str(L.output("ranking.csv")),
        sites=str(L.output("sites.csv")),
        model=str(L.output("model.json")),
        reference=str(L.output("reference_fit.csv")),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/rank.log",
    script:
        "../scripts/rank.py"


rule torsion_profiles:
    input:
        manifest=MANIFEST,
        ranking=str(L.output("ranking.csv")),
    output:
        str(L.output("profiles.json")),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/profiles.log",
    threads: 1
    script:
        "../scripts/torsion_profiles.py"


rule report:
    input:
        manifest=MANIFEST,
        ranking=str(L.output("ranking.csv")),
        sites=str(L.output("sites.csv")),
        model=str(L.output("model.json")),
        reference=str(L.output("reference_fit.csv")),
        profiles=str(L.output("profiles.json")),
    output:
        report=str(L.output("report.html")),
        sdf=str(L.output("dienes.sdf")),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/report.log",
    script:
        "../scripts/report.py"
