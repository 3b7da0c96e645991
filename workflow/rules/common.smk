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
if workflow.is_main_process:
    runlock.claim()
    # before Snakemake looks at the files: an unreadable result is moved aside, and a
    # manifest that counts a missing result as done is dropped, so both are computed again
    moved = runlock.quarantine_invalid(sorted(Path("results").glob("structures/*.json"))
                                       + sorted(Path("results").glob("transition/*.json"))
                                       + sorted(Path("results").glob("levels/*/pairs/*.json"))
                                       + sorted(Path("results").glob("levels/*/adducts/*.json")))
    _stale = dienes_run.stale_manifest(MANIFEST)
    if dienes_run.drop_stale_batches() or moved or _stale:
        Path(MANIFEST).unlink(missing_ok=True)
        Path("results/ranking.csv").unlink(missing_ok=True)

# any config change reruns the cheap whole-run steps (prepare, rank); per-structure
# results are named by their own settings hash and are reused
CONFIG_HASH = SETTINGS.config_hash(dienes.__version__)

# ranking.rows N, contenders or auto: prepare records what the first level computes; where it is
# not every row, the rows come in rounds (the level_round checkpoints)
MAX_ROUNDS = int(SETTINGS["ranking"]["contenders"]["max_rounds"])


# cheap whole-run steps stay on the submit host when a cluster executor is used
localrules:
    all,
    prepare,
    level_round,
    rank,
    report,


wildcard_constraints:
    bid=r"[0-9a-f]{12}",
    dhash=r"[0-9a-f]{10}",
    lkey=r"[a-z][a-z0-9]{0,15}-[0-9a-f]{10}",
    round=r"[0-9]+",


def manifest():
    """The manifest written by the prepare checkpoint (read once per process)."""
    path = checkpoints.prepare.get().output.manifest
    cache = manifest.__dict__.setdefault("cache", {})
    if path not in cache:
        cache[path] = read_json(path)
    return cache[path]


def batch_flag(stage, bid):
    return str(L.batch(stage, bid))


def in_rounds() -> bool:
    """Whether the first ranking level computes its rows in rounds (prepare decided)."""
    first = SETTINGS.ranking_levels[0].name
    return manifest()["levels"].get(first, {}).get("rows", "all") != "all"


def iter_rounds(upto=None):
    """The rounds of the first level, in order, up to the one that ends them (or round `upto`,
    exclusive), as (round file, its content). Lazy: a caller that stops early never asks for a
    later round, and asking for a round not yet written makes Snakemake run its checkpoint and
    come back."""
    for r in range(MAX_ROUNDS if upto is None else upto):
        path = checkpoints.level_round.get(round=r).output[0]
        data = read_json(path)
        yield path, data
        if data["done"]:
            return


def level_batch(bid: str) -> tuple[str, dict]:
    """(plan file, batch) of one batch of single points: the manifest's, or the round that added
    it. Rounds are read only up to that round, so a batch never waits for a later round (which
    waits for it)."""
    if bid in manifest()["batches"]["level"]:
        return MANIFEST, manifest()["batches"]["level"][bid]
    for path, data in iter_rounds() if in_rounds() else ():
        if bid in data["batches"]:
            return path, data["batches"][bid]
    raise ValueError(f"batch {bid} is in no plan of this run")


def get_earlier_round_input(wildcards):
    """Round r reads what rounds 0..r-1 computed: the previous round's file and its batches."""
    r = int(wildcards.round)
    if r == 0:
        return []
    path, data = list(iter_rounds(r))[-1]
    return [path] + [batch_flag("level", b) for b in data["batches"]]


def get_transition_input(wildcards):
    batch = manifest()["batches"]["transition"][wildcards.bid]
    return ([batch_flag("structures", b) for b in batch["needs"]]
            + [str(L.dienophile(d)) for d in batch["dienophiles"]])


def batch_runtime(stage, minutes_each):
    """Cluster runtime (minutes) of a batch job: minutes_each per member, at least 10."""
    def runtime(wildcards):
        batch = level_batch(wildcards.bid)[1] if stage == "level" else manifest()["batches"][stage][wildcards.bid]
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
    """Where a batch of single points is listed: the manifest, or the round that added it."""
    return ancient(level_batch(wildcards.bid)[0])


def get_level_input(wildcards):
    batch = level_batch(wildcards.bid)[1]
    return ([batch_flag("transition", b) for b in batch["needs"]]
            + [str(L.level_dienophile(batch["lkey"], d)) for d in batch["dienophiles"]])


def get_rank_input(wildcards):
    """Everything the ranking reads: the computed batches, and the rounds' files and batches."""
    extra = []
    if in_rounds():
        for path, data in iter_rounds():
            extra += [path] + [batch_flag("level", b) for b in data["batches"]]
    return get_computed_input(wildcards) + extra
