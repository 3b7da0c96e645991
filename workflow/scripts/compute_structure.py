from _log import setup
from dienes.run import compute

log = setup(snakemake.log[0])
key = snakemake.wildcards.key
r = compute(snakemake.params.smiles, key, dict(snakemake.config), snakemake.output[0])
log.info("done %s %s: %s in %.1f s, %s gradient calls", key, r["smiles"], r["status"],
         r.get("wall_time_s", 0.0), r.get("n_gradients", 0))
