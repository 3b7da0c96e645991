import sys

from _log import setup
from dienes.backends import BackendError
from dienes.library import LibraryError
from dienes.run import prepare

log = setup(snakemake.log[0])
try:
    m = prepare(dict(snakemake.config), snakemake.output.manifest)
except LibraryError as exc:
    log.error("cannot read the library: %s", exc)
    sys.exit(1)
except BackendError as exc:
    log.error("%s", exc)
    sys.exit(1)
log.info("library %s: %d rows, %d structures to compute", m["library"], len(m["records"]), len(m["structures"]))
