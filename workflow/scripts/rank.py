from pathlib import Path

from _log import setup

log = setup(snakemake)
from dienes.run import rank  # noqa: E402

for line in rank(snakemake.input.manifest, Path(snakemake.output.ranking).parent):
    log.info("%s", line)
