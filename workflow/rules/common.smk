# Shared helpers: the settings validated once, start-up checks and the manifest lookups.
# Paths come from dienes.layout, the same module the Python steps use.
import sys
from pathlib import Path

import dienes
from dienes import runlock
from dienes import run as dienes_run
from dienes import settings as dienes_settings
from dienes.layout import Layout, read_json
from dienes.library import check_dienophile

try:
    # the edge: validated here once; a missing xtb-python is replaced by tblite in the main
    # process only, and the manifest records what was decided for every job
    SETTINGS = dienes_settings.resolve(config, fallback=workflow.is_main_process)
except dienes_settings.ConfigError as _exc:
    sys.exit(f"dienes: {_exc}")
config.update(SETTINGS.as_config())
_problem = check_dienophile(config["dienophile"])
if _problem:
    sys.exit(f"dienes: dienophile {config['dienophile']!r}: {_problem}")

L = Layout("results")
MANIFEST = str(L.manifest)
SHORTLIST = str(L.shortlist)
if workflow.is_main_process:
    runlock.claim()
    # before Snakemake looks at the files: an unreadable result is moved aside, and a
    # manifest that counts a missing result as done is dropped, so both are computed again
    moved = runlock.quarantine_invalid(sorted(Path("results").glob("structures/*.json"))
                                       + sorted(Path("results").glob("transition/*.json"))
                                       + sorted(Path("results").glob("levels/*/pairs/*.json")))
    _stale = dienes_run.stale_manifest(MANIFEST)
    if dienes_run.drop_stale_batches() or moved or _stale:
        Path(MANIFEST).unlink(missing_ok=True)
        Path("results/ranking.csv").unlink(missing_ok=True)

# any config change reruns the cheap whole-run steps (prepare, rank); per-structure
# results are named by their own settings hash and are reused
CONFIG_HASH = SETTINGS.config_hash(dienes.__version__)

# ranking.rows N: the first ranking level computes only the rows the shortlist names
NEEDS_SHORTLIST = any(SETTINGS.rows_for(level) != "all" for level in SETTINGS.priced_levels)


# cheap whole-run steps stay on the submit host when a cluster executor is used
localrules:
    all,
    prepare,
    shortlist,
    rank,
    report,


wildcard_constraints:
    bid=r"[0-9a-f]{12}",
    dhash=r"[0-9a-f]{10}",
    lkey=r"[a-z][a-z0-9]{0,15}-[0-9a-f]{10}",


def manifest():
    """The manifest written by the prepare checkpoint (read once per process)."""
    path = checkpoints.prepare.get().output.manifest
    cache = manifest.__dict__.setdefault("cache", {})
    if path not in cache:
        cache[path] = read_json(path)
    return cache[path]


def batch_flag(stage, bid):
    return str(L.batch(stage, bid))


def level_plan() -> dict:
    """Every batch of single points of this run: listed in the manifest (levels that compute
    every row) and, with ranking.rows N, in the shortlist checkpoint."""
    plan = dict(manifest()["batches"]["level"])
    if NEEDS_SHORTLIST:
        plan |= read_json(checkpoints.shortlist.get().output[0])["batches"]
    return plan


def get_transition_input(wildcards):
    batch = manifest()["batches"]["transition"][wildcards.bid]
    return ([batch_flag("structures", b) for b in batch["needs"]]
            + [str(L.dienophile(d)) for d in batch["dienophiles"]])


def batch_runtime(stage, minutes_each):
    """Cluster runtime (minutes) of a batch job: minutes_each per member, at least 10."""
    def runtime(wildcards):
        batch = (level_plan() if stage == "level" else manifest()["batches"][stage])[wildcards.bid]
        members = batch["members"] if isinstance(batch, dict) else batch
        return max(10, minutes_each * len(members))
    return runtime


def get_computed_input(wildcards):
    """The GFN2-xTB batches of the run and the single points every level computes for all rows."""
    m = manifest()
    return ([batch_flag("structures", b) for b in m["batches"]["structures"]]
            + [batch_flag("transition", b) for b in m["batches"]["transition"]]
            + [str(L.dienophile(d)) for d in m["dienophiles"]]
            + [batch_flag("level", b) for b in m["batches"]["level"]])


def get_level_plan_file(wildcards):
    """Where a batch of single points is listed: the manifest, or the shortlist."""
    return ancient(MANIFEST if wildcards.bid in manifest()["batches"]["level"] else SHORTLIST)


def get_level_input(wildcards):
    batch = level_plan()[wildcards.bid]
    return ([batch_flag("transition", b) for b in batch["needs"]]
            + [str(L.level_dienophile(batch["lkey"], d)) for d in batch["dienophiles"]])


def get_rank_input(wildcards):
    """Everything the ranking reads: the computed batches, and the shortlist's with ranking.rows N."""
    extra = ([SHORTLIST] + [batch_flag("level", b) for b in level_plan() if b not in manifest()["batches"]["level"]]
             if NEEDS_SHORTLIST else [])
    return get_computed_input(wildcards) + extra
