from _log import setup

log = setup(snakemake)
from dienes.run import compute_transitions  # noqa: E402

s = compute_transitions(snakemake.input.manifest, snakemake.wildcards.bid, snakemake.output[0])
log.info("batch %s: %d pairs, %d computed, %.1f s", s["batch"], len(s["members"]), s["n_computed"],
         s["wall_time_s"])
