from _log import setup

log = setup(snakemake)
from dienes.run import level_round  # noqa: E402

r = level_round(snakemake.input.manifest, int(snakemake.wildcards.round), snakemake.output[0])
log.info("round %d at %s (ranking.rows %s): %d pairs added after %d%s", r["round"], r["level"], r["rows"],
         len(r["pairs"]), r["computed_before"], "; the rounds end here" if r["done"] else "")
