# Rank a diene library by predicted Diels-Alder reactivity.
# snakemake --cores N                          (demo library)
# snakemake --cores N --config library=PATH    (your library)

configfile: "config/config.yaml"


include: "workflow/rules/common.smk"
include: "workflow/rules/prepare.smk"
include: "workflow/rules/compute.smk"
include: "workflow/rules/levels.smk"
include: "workflow/rules/rank.smk"


rule all:
    input:
        "results/ranking.csv",
        "results/model.json",
        "results/report.html",
        "results/dienes.sdf",
    default_target: True
