# Shared helpers: config validation, start-up checks and the manifest lookups.
import json
import sys
from pathlib import Path

import dienes
from dienes import runlock
from dienes import run as dienes_run
from dienes import settings as dienes_settings
from dienes.library import check_dienophile

config.update(dienes_settings.validate(config))
_problem = check_dienophile(config["dienophile"])
if _problem:
    sys.exit(f"dienes: dienophile {config['dienophile']!r}: {_problem}")

MANIFEST = "results/manifest.json"
if workflow.is_main_process:
    runlock.claim()
    # before Snakemake looks at the files: an unreadable result is moved aside, and a
    # manifest that counts a missing result as done is dropped, so both are computed again
    moved = runlock.quarantine_invalid(sorted(Path("results").glob("structures/*.json"))
                                       + sorted(Path("results").glob("transition/*.json")))
    _stale = dienes_run.stale_manifest(MANIFEST)
    if dienes_run.drop_stale_batches() or moved or _stale:
        Path(MANIFEST).unlink(missing_ok=True)
        Path("results/ranking.csv").unlink(missing_ok=True)

# any config change reruns the cheap whole-run steps (prepare, rank); per-structure
# results are named by their own settings hash and are reused
CONFIG_HASH = dienes_settings.settings_hash(config | {"version": dienes.__version__})


# which rows are priced at the refined level: all (default), none, or the N best by GFN2-xTB
REFINE_ROWS = config["refine"]["rows"]


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
    rhash=r"[0-9a-f]{10}",


def manifest():
    """The manifest written by the prepare checkpoint (read once per process)."""
    path = checkpoints.prepare.get().output.manifest
    cache = manifest.__dict__.setdefault("cache", {})
    if path not in cache:
        cache[path] = json.loads(Path(path).read_text())
    return cache[path]


def batch_flag(stage, bid):
    return f"results/batches/{stage}/{bid}.json"


def get_dienophile_smiles(wildcards):
    return manifest()["dienophiles"][wildcards.dhash]


def get_transition_input(wildcards):
    batch = manifest()["batches"]["transition"][wildcards.bid]
    return ([batch_flag("structures", b) for b in batch["needs"]]
            + [f"results/dienophiles/{d}.json" for d in batch["dienophiles"]])


def batch_runtime(stage, minutes_each):
    """Cluster runtime (minutes) of a batch job: minutes_each per member, at least 10."""
    def runtime(wildcards):
        batch = (refine_plan() if stage == "refine" else manifest()["batches"][stage])[wildcards.bid]
        members = batch["members"] if isinstance(batch, dict) else batch
        return max(10, minutes_each * len(members))
    return runtime


def get_rank_input(wildcards):
    m = manifest()
    return ([batch_flag("structures", b) for b in m["batches"]["structures"]]
            + [batch_flag("transition", b) for b in m["batches"]["transition"]]
            + [f"results/dienophiles/{d}.json" for d in m["dienophiles"]])


def refine_plan() -> dict:
    """The refine batches of this run: listed in the manifest (refine.rows: all), in the
    shortlist checkpoint (refine.rows: N), or none."""
    if REFINE_ROWS == "none":
        return {}
    if REFINE_ROWS == "all":
        return manifest()["batches"]["refine"]
    return json.loads(Path(checkpoints.shortlist.get().output[0]).read_text())["batches"]


def get_refine_input(wildcards):
    batch = refine_plan()[wildcards.bid]
    return ([batch_flag("transition", b) for b in batch["needs"]]
            + [f"results/refined/{batch['rhash']}/dienophiles/{d}.json" for d in batch["dienophiles"]])


def get_refined_input(wildcards):
    """The refine batches the ranking waits for (and the shortlist, for refine.rows: N)."""
    shortlist = [checkpoints.shortlist.get().output[0]] if REFINE_ROWS not in ("all", "none") else []
    return shortlist + [batch_flag("refine", bid) for bid in refine_plan()]
