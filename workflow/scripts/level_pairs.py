from _log import setup

log = setup(snakemake)
from dienes.run import compute_level_pairs  # noqa: E402

s = compute_level_pairs(snakemake.input.manifest, snakemake.input.plan, snakemake.wildcards.bid, snakemake.output[0],
                        threads=snakemake.threads)
log.info("%s batch %s: %d pairs, %d computed, %.1f s", s["level"], s["batch"], len(s["members"]), s["n_computed"],
         s["wall_time_s"])
