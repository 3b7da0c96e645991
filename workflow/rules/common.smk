# Shared helpers: config validation and the manifest lookups.
import json
from pathlib import Path

import dienes
from dienes import runlock
from dienes import settings as dienes_settings

config.update(dienes_settings.validate(config))
if workflow.is_main_process:
    runlock.claim()
    # before Snakemake looks at the files: an unreadable result is moved aside and recomputed
    if runlock.quarantine_invalid(sorted(Path("results").glob("structures/*.json"))
                                  + sorted(Path("results").glob("strain/*.json"))):
        Path("results/ranking.csv").unlink(missing_ok=True)  # so the ranking is redone with it

# dienophile result files, by hash: the run's dienophile and the model-TS partner
DIENOPHILES = {
    dienes_settings.dienophile_hash(config, smi): smi
    for smi in {config["dienophile"], dienes_settings.strain_dienophile(config)}
}
RUN_DIENOPHILE = dienes_settings.dienophile_hash(config, config["dienophile"])
STRAIN_DIENOPHILE = dienes_settings.dienophile_hash(config, dienes_settings.strain_dienophile(config))
STRAIN_HASH = dienes_settings.strain_hash(config)
# any config change reruns the cheap whole-run steps (prepare, rank); per-structure
# results are named by their own settings hash and are reused
CONFIG_HASH = dienes_settings.settings_hash(config | {"version": dienes.__version__})


wildcard_constraints:
    key=r"[A-Z]{14}-[A-Z]{10}-[A-Z]_[0-9a-f]{10}",
    dhash=r"[0-9a-f]{10}",
    shash=r"[0-9a-f]{10}",


def manifest():
    """The manifest written by the prepare checkpoint (read once per process)."""
    path = checkpoints.prepare.get().output.manifest
    cache = manifest.__dict__.setdefault("cache", {})
    if path not in cache:
        cache[path] = json.loads(Path(path).read_text())
    return cache[path]


def get_compute_params(wildcards):
    return manifest()["structures"][wildcards.key]


def get_dienophile_params(wildcards):
    return DIENOPHILES[wildcards.dhash]


def get_rank_input(wildcards):
    return [f"results/structures/{key}.json" for key in manifest()["structures"]]


def get_rank_strain_input(wildcards):
    if not config["strain"]["enabled"]:
        return []
    return [f"results/strain/{key}__{STRAIN_HASH}.json" for key in manifest()["structures"]]
