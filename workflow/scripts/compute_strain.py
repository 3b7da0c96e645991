from _log import setup
from dienes.run import strain

log = setup(snakemake.log[0])
r = strain(dict(snakemake.config), snakemake.input.structure, snakemake.input.dienophile, snakemake.output[0])
for label, s in r["sites"].items():
    log.info("strain %s site %s: distortion %.1f, interaction %.1f, model barrier %.1f kJ/mol (%s)",
             r["key"], label, s["distortion_kJmol"], s["interaction_kJmol"], s["model_barrier_kJmol"],
             s["approach"])
