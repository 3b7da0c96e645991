from _log import setup

log = setup(snakemake)
from dienes.run import shortlist  # noqa: E402

s = shortlist(dict(snakemake.config), snakemake.input.manifest, snakemake.output[0])
log.info("refinement shortlist (refine.rows = %s): %d pairs, reference dienes included", s["rows"],
         len(s["pairs"]))
