from _log import setup

log = setup(snakemake)
from dienes.run import compute_structures  # noqa: E402

s = compute_structures(snakemake.input.manifest, snakemake.wildcards.bid, snakemake.output[0])
log.info("batch %s: %d structures, %d computed, %.1f s", s["batch"], len(s["members"]), s["n_computed"],
         s["wall_time_s"])
