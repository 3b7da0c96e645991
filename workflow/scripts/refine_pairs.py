from _log import setup

log = setup(snakemake)
from dienes.run import refine_pairs  # noqa: E402

s = refine_pairs(dict(snakemake.config), snakemake.input.manifest, snakemake.input.plan, snakemake.wildcards.bid,
                 snakemake.output[0], threads=snakemake.threads)
log.info("refine batch %s: %d pairs, %d priced, %.1f s", s["batch"], len(s["members"]), s["n_computed"],
         s["wall_time_s"])
