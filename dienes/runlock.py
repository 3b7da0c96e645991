"""One run per working directory, and clean resumption after a hard kill.

The main Snakemake process takes an exclusive flock on results/.run.lock for
its whole life. The operating system drops the flock when the process dies,
even by kill -9, so holding it proves that no other run is alive here: any
Snakemake lock or incomplete marker left in .snakemake/ is then stale and is
removed (every output of this workflow is written atomically, so a file that
exists is complete). A second run started while one is alive stops at once
with a clear message instead of writing into the same results.
"""

from __future__ import annotations

import fcntl
import json
import logging
import os
import shutil
from pathlib import Path

log = logging.getLogger("dienes")

_HELD = []  # keeps the lock file open (and so locked) for the life of the process


class RunLockError(RuntimeError):
    """Another run holds this working directory."""


def claim(workdir=".", results="results") -> Path:
    workdir = Path(workdir)
    lock_path = workdir / results / ".run.lock"
    lock_path.parent.mkdir(parents=True, exist_ok=True)
    fh = open(lock_path, "a+")
    try:
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        fh.seek(0)
        owner = fh.read().strip() or "unknown"
        fh.close()
        raise RunLockError(f"another run (pid {owner}) is using {workdir.resolve() / results}; "
                           "wait for it to finish, or use a separate working directory") from None
    fh.seek(0)
    fh.truncate()
    fh.write(str(os.getpid()))
    fh.flush()
    _HELD.append(fh)
    stale = []
    for sub in ("locks", "incomplete"):
        d = workdir / ".snakemake" / sub
        if d.is_dir() and any(d.iterdir()):
            stale.append(sub)
            shutil.rmtree(d)
    if stale:
        log.warning("removed stale Snakemake %s left by a run that was killed", " and ".join(stale))
    return lock_path


def valid_result(path: Path) -> bool:
    """A per-structure or strain result that parses and carries a status."""
    try:
        with open(path) as fh:
            return "status" in json.load(fh)
    except (OSError, ValueError):
        return False


def quarantine_invalid(paths, workdir=".", results="results") -> list[Path]:
    """Move unreadable result files aside so that they are computed again."""
    moved = []
    qdir = Path(workdir) / results / "quarantine"
    for p in map(Path, paths):
        if p.is_file() and not valid_result(p):
            qdir.mkdir(parents=True, exist_ok=True)
            target = qdir / p.name
            os.replace(p, target)
            moved.append(target)
            log.warning("%s was unreadable (truncated?): moved to %s and computed again", p, target)
    return moved
