from _log import setup

log = setup(snakemake)
from dienes.run import refine_pair  # noqa: E402

r = refine_pair(dict(snakemake.config), snakemake.input.manifest, snakemake.wildcards.stem,
                snakemake.input.dienophile, snakemake.output[0], threads=snakemake.threads)
log.info("refined %s at %s: %s %s (%.1f s)", snakemake.wildcards.stem, r["level"], r["status"],
         r.get("message", ""), r.get("wall_time_s", 0.0))
