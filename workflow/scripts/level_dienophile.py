from _log import setup

log = setup(snakemake)
from dienes.run import level_dienophile  # noqa: E402

r = level_dienophile(snakemake.input.manifest, snakemake.wildcards.lkey, snakemake.wildcards.dhash,
                     snakemake.output[0], threads=snakemake.threads)
log.info("dienophile %s at %s: %s in %.1f s", r["smiles"], r["level"], r["status"], r["wall_time_s"])
