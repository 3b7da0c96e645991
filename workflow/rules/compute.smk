rule compute_structure:
    output:
        "results/structures/{key}.json",
    params:
        smiles=get_compute_params,
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/structures/{key}.log",
    threads: 1
    resources:
        mem_mb=1000,
        runtime=60,
    script:
        "../scripts/compute_structure.py"


rule compute_dienophile:
    output:
        "results/dienophile_{dhash}.json",
    params:
        smiles=get_dienophile_params,
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/dienophile_{dhash}.log",
    threads: 1
    script:
        "../scripts/compute_dienophile.py"


rule compute_strain:
    input:
        structure="results/structures/{key}.json",
        dienophile=f"results/dienophile_{STRAIN_DIENOPHILE}.json",
    output:
        "results/strain/{key}__{shash}.json",
    conda:
        "../envs/dienes.yaml"
    log:
        "logs/strain/{key}__{shash}.log",
    threads: 1
    resources:
        mem_mb=1000,
        runtime=60,
    script:
        "../scripts/compute_strain.py"
