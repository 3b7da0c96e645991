import sys

from _log import setup

log = setup(snakemake)
from dienes.backends import BackendError  # noqa: E402
from dienes.library import LibraryError  # noqa: E402
from dienes.run import prepare  # noqa: E402
from dienes.settings import resolve  # noqa: E402

try:
    # the config was validated (and the backend decided) in the workflow's main process
    m = prepare(resolve(snakemake.config, fallback=False), snakemake.output.manifest)
except (LibraryError, BackendError) as exc:
    log.error("%s", exc)
    sys.exit(1)
log.info("library %s: %d rows; %d structures (%d to compute), %d transition-structure pairs (%d to compute)",
         m["library"], len(m["records"]), len(m["structures"]),
         sum(len(b) for b in m["batches"]["structures"].values()), len(m["transitions"]),
         sum(len(b["members"]) for b in m["batches"]["transition"].values()))
if m["backend_note"]:
    log.warning("%s", m["backend_note"])
