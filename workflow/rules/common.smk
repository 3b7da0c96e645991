# Shared helpers: config validation and the manifest lookups.
import json
from pathlib import Path

from dienes import settings as dienes_settings

config.update(dienes_settings.validate(config))
STRUCTURE_HASH = dienes_settings.settings_hash(dienes_settings.structure_settings(config))

wildcard_constraints:
    key=r"[A-Z]{14}-[A-Z]{10}-[A-Z]_[0-9a-f]{10}",
    dhash=r"[0-9a-f]{10}",


def manifest():
    """The manifest written by the prepare checkpoint (read once per process)."""
    path = checkpoints.prepare.get().output.manifest
    cache = manifest.__dict__.setdefault("cache", {})
    if path not in cache:
        cache[path] = json.loads(Path(path).read_text())
    return cache[path]


def get_compute_params(wildcards):
    return manifest()["structures"][wildcards.key]


def get_rank_input(wildcards):
    return [f"results/structures/{key}.json" for key in manifest()["structures"]]
