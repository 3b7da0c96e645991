"""Where a run keeps its files, for the workflow rules and the Python steps alike, and
the one way every file is written (atomically: a killed job never leaves half a file).

    results/manifest.json                         what the run needs (prepare)
    results/structures/<key>.json                 one structure under its settings hash
    results/dienophiles/<dhash>.json              one dienophile
    results/transition/<key>__<thash>.json        a (structure, dienophile) pair's transition structures
    results/levels/<level>-<hash>/...             single points at a named level:
        structures/<key>.json, dienophiles/<dhash>.json, pairs/<key>__<thash>.json,
        adducts/<key>__<thash>.json (the best site's cycloadduct: reaction free energy)
    results/batches/<stage>/<bid>.json            what one batch job did
    results/rounds/round<r>.json                  ranking.rows N or contenders: the pairs the first
                                                  level computes in round r, and its jobs
    results/profiles/<key>__<site>.json           torsion profiles the report draws
    results/ranking.csv, sites.csv, reference_fit.csv, model.json, report.html, dienes.sdf
"""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

_UMASK = os.umask(0)
os.umask(_UMASK)


def transition_stem(key: str, thash: str) -> str:
    """The name of a (structure, dienophile) pair's files."""
    return f"{key}__{thash}"


@dataclass(frozen=True)
class Layout:
    """File names under one results folder. Arguments left out stay Snakemake wildcards
    ('{bid}', ...), so the rules take their patterns from here too."""

    root: Path = Path("results")

    def __post_init__(self):
        object.__setattr__(self, "root", Path(self.root))

    @property
    def manifest(self) -> Path:
        return self.root / "manifest.json"

    def level_round(self, r="{round}") -> Path:
        return self.root / "rounds" / f"round{r}.json"

    def structure(self, key="{key}") -> Path:
        return self.root / "structures" / f"{key}.json"

    def dienophile(self, dhash="{dhash}") -> Path:
        return self.root / "dienophiles" / f"{dhash}.json"

    def transition(self, stem="{stem}") -> Path:
        return self.root / "transition" / f"{stem}.json"

    def batch(self, stage: str, bid="{bid}") -> Path:
        return self.root / "batches" / stage / f"{bid}.json"

    def level_dir(self, lkey="{lkey}") -> Path:
        return self.root / "levels" / lkey

    def level_pair(self, lkey: str, stem="{stem}") -> Path:
        """A (structure, dienophile) pair's barriers at a level."""
        return self.level_dir(lkey) / "pairs" / f"{stem}.json"

    def level_adduct(self, lkey: str, stem="{stem}") -> Path:
        """The cycloadduct of a pair's best site at a level (its reaction free energy)."""
        return self.level_dir(lkey) / "adducts" / f"{stem}.json"

    def level_structure(self, lkey: str, key="{key}") -> Path:
        """A structure's minima at a level (shared by every dienophile)."""
        return self.level_dir(lkey) / "structures" / f"{key}.json"

    def level_dienophile(self, lkey="{lkey}", dhash="{dhash}") -> Path:
        return self.level_dir(lkey) / "dienophiles" / f"{dhash}.json"

    def profile(self, key: str, site: str) -> Path:
        return self.root / "profiles" / f"{key}__{site}.json"

    def output(self, name: str) -> Path:
        """ranking.csv, sites.csv, reference_fit.csv, model.json, report.html, dienes.sdf"""
        return self.root / name


OUTPUTS = ("ranking.csv", "sites.csv", "reference_fit.csv", "model.json", "report.html", "dienes.sdf")


def write_atomic(path, write) -> Path:
    """Write a file atomically: `write(tmp_path)` fills a temporary file beside `path`, which
    then replaces it. Readable like any other file the user writes."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    os.chmod(tmp, 0o666 & ~_UMASK)
    try:
        write(Path(tmp))
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def write_text(path, text: str) -> Path:
    return write_atomic(path, lambda tmp: tmp.write_text(text, encoding="utf-8"))


def _plain(obj):
    """JSON for read-only settings (dienes.settings hands out mapping views)."""
    if isinstance(obj, Mapping):
        return dict(obj)
    raise TypeError(f"Object of type {type(obj).__name__} is not JSON serializable")


def write_json(obj, path) -> Path:
    return write_text(path, json.dumps(obj, indent=1, sort_keys=False, allow_nan=False, default=_plain))


def read_json(path) -> dict:
    with open(path) as fh:
        return json.load(fh)
