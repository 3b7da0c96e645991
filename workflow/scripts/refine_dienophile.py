from _log import setup

log = setup(snakemake)
from dienes.run import refine_dienophile  # noqa: E402

r = refine_dienophile(dict(snakemake.config), snakemake.input[0], snakemake.output[0], snakemake.threads)
log.info("refined dienophile %s at %s: %s in %.1f s", r["smiles"], r["level"], r["status"], r["wall_time_s"])
