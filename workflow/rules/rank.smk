rule rank:
    input:
        manifest="results/manifest.json",
        structures=get_rank_input,
        dienophile=f"results/dienophile_{STRUCTURE_HASH}.json",
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
