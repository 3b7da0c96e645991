import sys

from _log import setup

log = setup(snakemake)
from dienes.backends import BackendError  # noqa: E402
from dienes.library import LibraryError  # noqa: E402
from dienes.run import prepare  # noqa: E402

try:
    m = prepare(dict(snakemake.config), snakemake.output.manifest)
except (LibraryError, BackendError) as exc:
    log.error("%s", exc)
    sys.exit(1)
log.info("library %s: %d rows; %d structures (%d to compute), %d transition-structure pairs (%d to compute)",
         m["library"], len(m["records"]), len(m["structures"]),
         sum(len(b) for b in m["batches"]["structures"].values()), len(m["transitions"]),
         sum(len(b["members"]) for b in m["batches"]["transition"].values()))
