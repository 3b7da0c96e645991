from pathlib import Path

from _log import setup
from dienes.run import rank

log = setup(snakemake.log[0])
out = Path(snakemake.output.ranking).parent
lines = rank(dict(snakemake.config), snakemake.input.manifest, out / "structures",
             snakemake.input.dienophile, out, strain_dir=out / "strain")
for line in lines:
    log.info("%s", line)
