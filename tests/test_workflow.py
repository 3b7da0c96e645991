"""The whole workflow through Snakemake on a tiny library (slow)."""
import csv
import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from .conftest import REPO

pytestmark = pytest.mark.slow

REFERENCE_IDS = {"ref-01", "ref-02", "ref-03", "ref-04", "ref-05", "ref-09"}


def _setup(tmp_path: Path, library_rows):
    (tmp_path / "config").mkdir()
    with open(Path(REPO) / "config" / "reference_rates.csv") as fh:
        rows = [r for r in csv.DictReader(fh) if r["id"] in REFERENCE_IDS]
    with open(tmp_path / "config" / "reference.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    with open(tmp_path / "lib.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles", "note"])
        w.writerows(library_rows)
    cfg = yaml.safe_load(open(Path(REPO) / "config" / "config.yaml"))
    cfg.update(library="lib.csv", reference="config/reference.csv")
    cfg["conformers"].update(n_conformers=4, xtb_per_family=1, planar_starts=1)
    (tmp_path / "config" / "config.yaml").write_text(yaml.safe_dump(cfg))


def _setup_library(tmp_path, rows):
    with open(tmp_path / "lib.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles", "note"])
        w.writerows(rows)


def _snakemake(tmp_path, *extra):
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
           "--directory", str(tmp_path), "--cores", "2", *extra]
    env = dict(os.environ, OMP_NUM_THREADS="1")
    return subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=900)


def _ranking(tmp_path):
    with open(tmp_path / "results" / "ranking.csv") as fh:
        return list(csv.DictReader(fh))


def test_tiny_library_end_to_end_and_incremental(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c")])
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    assert [r["id"] for r in rows] == ["T-1", "T-2", "T-3"]
    assert [r["status"] for r in rows] == ["ok", "ok", "invalid_smiles"]
    assert rows[2]["message"] and rows[2]["rank"] == ""
    assert rows[1]["rank"] == "1" and rows[0]["rank"] == "2"   # cyclopentadiene above butadiene
    assert rows[0]["note"] == "a"                              # extra columns carried through
    assert 6.0 <= float(rows[0]["scis_penalty_kJmol"]) <= 16.0
    assert (tmp_path / "results" / "model.json").is_file()
    structures = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert all("T-" not in p.name for p in structures)        # named by structure, not by id
    mtimes = {p.name: p.stat().st_mtime_ns for p in structures}

    # a new diene arrives: only its structure is computed
    _setup_more = [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c"),
                   ("T-4", "C=CC(Cl)=C", "d")]
    with open(tmp_path / "lib.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles", "note"])
        w.writerows(_setup_more)
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    after = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert len(after) == len(structures) + 1
    assert all(p.stat().st_mtime_ns == mtimes[p.name] for p in after if p.name in mtimes)
    assert [r["id"] for r in _ranking(tmp_path)] == ["T-1", "T-2", "T-3", "T-4"]


def test_unreadable_library_stops_before_computing(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a")])
    (tmp_path / "bad.csv").write_text("name,structure\nx,C=CC=C\n")
    run = _snakemake(tmp_path, "--config", "library=bad.csv")
    assert run.returncode != 0
    assert "bad.csv" in run.stderr and "'id' and 'smiles'" in run.stderr
    assert not (tmp_path / "results" / "structures").exists()
