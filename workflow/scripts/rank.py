from pathlib import Path

from _log import setup
from dienes.run import rank

log = setup(snakemake.log[0])
lines = rank(dict(snakemake.config), snakemake.input.manifest,
             Path(snakemake.output.ranking).parent / "structures",
             snakemake.input.dienophile, Path(snakemake.output.ranking).parent)
for line in lines:
    log.info("%s", line)
