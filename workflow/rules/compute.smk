# Per-structure work, cut into batches by the prepare step: each job computes the
# members of its batch whose result file is absent and writes a summary.


rule compute_structures:
    input:
        manifest=ancient(MANIFEST),
    output:
        batch_flag("structures", "{bid}"),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/structures/{bid}.log",
    threads: 1
    resources:
        mem_mb=1500,
        runtime=batch_runtime("structures", 3),
    script:
        "../scripts/compute_structures.py"


rule compute_dienophile:
    input:
        manifest=ancient(MANIFEST),
    output:
        str(L.dienophile()),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/dienophiles/{dhash}.log",
    threads: 1
    script:
        "../scripts/compute_dienophile.py"


rule compute_transitions:
    input:
        manifest=ancient(MANIFEST),
        needs=get_transition_input,
    output:
        batch_flag("transition", "{bid}"),
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/transition/{bid}.log",
    threads: 1
    resources:
        mem_mb=1500,
        runtime=batch_runtime("transition", 5),
    script:
        "../scripts/compute_transitions.py"
