from _log import setup

log = setup(snakemake)
from dienes.run import shortlist  # noqa: E402

s = shortlist(snakemake.input.manifest, snakemake.output[0])
log.info("shortlist for %s (ranking.rows = %s): %d pairs, reference dienes included", s["level"], s["rows"],
         len(s["pairs"]))
