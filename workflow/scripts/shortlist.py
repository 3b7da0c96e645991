from _log import setup

log = setup(snakemake)
from dienes.run import shortlist  # noqa: E402

s = shortlist(dict(snakemake.config), snakemake.input.manifest, snakemake.output[0])
log.info("refinement shortlist: %d pairs (%d library rows, the rest reference dienes)", len(s["pairs"]),
         len(s["library_rows"]))
