# Single points at each priced level of the ranking (PySCF on the GFN2-xTB structures). The
# pairs still to compute are cut into batches like the other stages (listed in the manifest,
# or, where the first level does not compute every row, in its rounds: one checkpoint per
# round, each reading what the rounds before it computed); each dienophile is computed once per
# level. Results live under results/levels/<level>-<settings hash>/, so another level or more
# dienes compute only what is new.


checkpoint level_round:
    input:
        manifest=MANIFEST,
        computed=get_computed_input,
        earlier=get_earlier_round_input,
    params:
        config_hash=CONFIG_HASH,
    output:
        str(L.level_round()),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/rounds/round{round}.log",
    script:
        "../scripts/level_round.py"


rule level_dienophile:
    input:
        manifest=ancient(MANIFEST),
        dienophile=str(L.dienophile()),
    output:
        str(L.level_dienophile()),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/levels/{lkey}/dienophile_{dhash}.log",
    threads: 1
    resources:
        mem_mb=3000,
        runtime=30,
    script:
        "../scripts/level_dienophile.py"


rule level_pairs:
    input:
        manifest=ancient(MANIFEST),
        plan=get_level_plan_file,
        needs=get_level_input,
    output:
        batch_flag("level", "{bid}"),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/levels/{bid}.log",
    threads: 1
    resources:
        mem_mb=3000,
        runtime=batch_runtime("level", 10),
    script:
        "../scripts/level_pairs.py"
