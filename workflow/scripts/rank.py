from pathlib import Path

from _log import setup

log = setup(snakemake)
from dienes.run import rank  # noqa: E402

for line in rank(dict(snakemake.config), snakemake.input.manifest, Path(snakemake.output.ranking).parent,
                shortlist_path=snakemake.params.shortlist):
    log.info("%s", line)
