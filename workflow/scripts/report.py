from pathlib import Path

from _log import setup

log = setup(snakemake)
from dienes.run import report  # noqa: E402

out = report(snakemake.input.manifest, Path(snakemake.output.report).parent, snakemake.input.profiles)
log.info("report: %s; 3D structures: %s (%d records)", out["report"], out["sdf"], out["sdf_records"])
