rule rank:
    input:
        manifest=MANIFEST,
        computed=get_rank_input,
        refined=get_refined_input,
    params:
        config_hash=CONFIG_HASH,
        shortlist="results/shortlist.json" if REFINE_ROWS not in ("all", "none") else None,
    output:
        ranking="results/ranking.csv",
        sites="results/sites.csv",
        model="results/model.json",
        reference="results/reference_fit.csv",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/rank.log",
    script:
        "../scripts/rank.py"


rule report:
    input:
        manifest=MANIFEST,
        ranking="results/ranking.csv",
        sites="results/sites.csv",
        model="results/model.json",
        reference="results/reference_fit.csv",
    output:
        report="results/report.html",
        sdf="results/dienes.sdf",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/report.log",
    script:
        "../scripts/report.py"
