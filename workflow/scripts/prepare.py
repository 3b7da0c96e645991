from _log import setup
from dienes.run import prepare

log = setup(snakemake.log[0])
m = prepare(dict(snakemake.config), snakemake.output.manifest)
log.info("library %s: %d rows, %d structures to compute", m["library"], len(m["records"]), len(m["structures"]))
