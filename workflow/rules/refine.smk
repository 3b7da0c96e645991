# Density-functional refinement of a shortlist (config refine.top > 0): one job per
# dienophile and one per (structure, dienophile) pair, cached by the level's hash.


checkpoint shortlist:
    input:
        manifest=MANIFEST,
        computed=get_rank_input,
    params:
        config_hash=CONFIG_HASH,
    output:
        "results/shortlist.json",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/shortlist.log",
    script:
        "../scripts/shortlist.py"


rule refine_dienophile:
    input:
        "results/dienophiles/{dhash}.json",
    output:
        "results/refined/dienophile_{dhash}_{rhash}.json",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/refined/dienophile_{dhash}_{rhash}.log",
    threads: 2
    resources:
        mem_mb=4000,
        runtime=60,
    script:
        "../scripts/refine_dienophile.py"


rule refine_pair:
    input:
        manifest=ancient(MANIFEST),
        dienophile=get_refine_dienophile,
    output:
        "results/refined/{stem}_{rhash}.json",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/refined/{stem}_{rhash}.log",
    threads: 2
    resources:
        mem_mb=4000,
        runtime=240,
    script:
        "../scripts/refine_pair.py"
