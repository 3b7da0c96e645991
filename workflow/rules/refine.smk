# Pricing at the refined level (PySCF single points on the GFN2-xTB structures). The pairs
# still to price are cut into batches like the other stages (listed in the manifest for
# refine.rows: all, in the shortlist checkpoint for refine.rows: N); each dienophile is priced
# once. Results live under results/refined/<level hash>/, so another level or more dienes
# compute only what is new.


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
        "results/refined/{rhash}/dienophiles/{dhash}.json",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/refined/{rhash}/dienophile_{dhash}.log",
    threads: 1
    resources:
        mem_mb=3000,
        runtime=30,
    script:
        "../scripts/refine_dienophile.py"


rule refine_pairs:
    input:
        manifest=ancient(MANIFEST),
        plan=ancient(MANIFEST if REFINE_ROWS == "all" else "results/shortlist.json"),
        needs=get_refine_input,
    output:
        batch_flag("refine", "{bid}"),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/refine/{bid}.log",
    threads: 1
    resources:
        mem_mb=3000,
        runtime=batch_runtime("refine", 10),
    script:
        "../scripts/refine_pairs.py"
