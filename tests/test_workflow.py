"""The whole workflow through Snakemake on a tiny library, and what a rerun
recomputes, counted job by job (slow)."""
import csv
import json
import os
import re
import subprocess
import sys
from collections import Counter
from pathlib import Path

import pytest
import yaml

from .conftest import REPO

pytestmark = pytest.mark.slow

REFERENCE_IDS = {"ref-01", "ref-02", "ref-03", "ref-04", "ref-05", "ref-09"}


def _write_reference(path: Path, ids):
    with open(Path(REPO) / "config" / "reference_rates.csv") as fh:
        rows = [r for r in csv.DictReader(fh) if r["id"] in ids]
    with open(path, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)


def _setup_library(tmp_path, rows):
    with open(tmp_path / "lib.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles", "note"])
        w.writerows(rows)


def _setup(tmp_path: Path, library_rows, **config_updates):
    (tmp_path / "config").mkdir(exist_ok=True)
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS)
    _setup_library(tmp_path, library_rows)
    cfg = yaml.safe_load(open(Path(REPO) / "config" / "config.yaml"))
    cfg.update(library="lib.csv", reference="config/reference.csv", **config_updates)
    cfg["conformers"].update(n_conformers=4, xtb_per_family=1, planar_starts=1)
    (tmp_path / "config" / "config.yaml").write_text(yaml.safe_dump(cfg))


def _snakemake(tmp_path, *extra):
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
           "--directory", str(tmp_path), "--cores", "2", *extra]
    env = dict(os.environ, OMP_NUM_THREADS="1")
    return subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=1200)


def _ranking(tmp_path):
    with open(tmp_path / "results" / "ranking.csv") as fh:
        return list(csv.DictReader(fh))


def jobs_run(run) -> Counter:
    """Jobs Snakemake started in one run, by rule (from its own output)."""
    return Counter(re.findall(r"^(?:localrule|rule|localcheckpoint|checkpoint) (\w+):$", run.stderr, re.M)) - Counter({"all": 99})


def computed_in(tmp_path, since_ns: int) -> Counter:
    """Per-structure results computed (not reused) by the batch jobs finished after `since_ns`."""
    out = Counter()
    for stage in ("structures", "transition"):
        for p in (tmp_path / "results" / "batches" / stage).glob("*.json"):
            if p.stat().st_mtime_ns > since_ns:
                out[stage] += json.loads(p.read_text())["n_computed"]
    return out


def test_tiny_library_end_to_end_and_incremental(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c")])
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    assert [r["id"] for r in rows] == ["T-1", "T-2", "T-3"]
    assert [r["status"] for r in rows] == ["ok", "ok", "invalid_smiles"]
    assert rows[2]["message"].startswith("RDKit:") and rows[2]["rank"] == ""
    # cyclopentadiene reacts faster than butadiene (about 1000-fold with maleic anhydride; reference set)
    assert rows[1]["rank"] == "1" and rows[0]["rank"] == "2"
    assert rows[0]["note"] == "a"                              # extra columns carried through
    # butadiene s-cis penalty: 12-14 kJ/mol from rotational spectroscopy (docs/validation.md);
    # GFN2-xTB gives about 9; a value outside 6-16 means the planar search broke
    assert 6.0 <= float(rows[0]["scis_penalty_kJmol"]) <= 16.0
    assert rows[0]["ts_verified"] == "True" and float(rows[0]["ts_imag_cm1"]) < -100
    structures = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert all("T-" not in p.name for p in structures)        # named by structure, not by id
    mtimes = {p.name: p.stat().st_mtime_ns for p in structures}
    for batch in (tmp_path / "results" / "batches").glob("*/*.json"):
        assert json.loads(batch.read_text())["threads"] == "1"  # the rule's threads, pinned

    # nothing changed: nothing runs
    run = _snakemake(tmp_path)
    assert run.returncode == 0 and "Nothing to be done" in run.stderr

    # a new diene arrives: one structure and one transition structure are computed, nothing else
    _setup_library(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c"),
                              ("T-4", "C=CC(Cl)=C", "d")])
    t0 = max(p.stat().st_mtime_ns for p in (tmp_path / "results").rglob("*.json"))
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, compute_structures=1, compute_transitions=1, rank=1, report=1)
    assert computed_in(tmp_path, t0) == Counter(structures=1, transition=1)
    after = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert len(after) == len(structures) + 1
    assert all(p.stat().st_mtime_ns == mtimes[p.name] for p in after if p.name in mtimes)
    assert [r["id"] for r in _ranking(tmp_path)] == ["T-1", "T-2", "T-3", "T-4"]

    # a new reference file of known dienes: the model is refitted, no GFN2-xTB work
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS - {"ref-05"})
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, rank=1, report=1)
    assert json.loads((tmp_path / "results" / "model.json").read_text())["n_reference"] == 5

    # another dienophile: its own minimum and the library's transition structures only;
    # conformers and the reference set's transition structures (their own dienophile) are reused
    t0 = max(p.stat().st_mtime_ns for p in (tmp_path / "results").rglob("*.json"))
    run = _snakemake(tmp_path, "--config", "dienophile=C=CC#N")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "compute_structures" not in jobs and jobs["compute_dienophile"] == 1
    assert computed_in(tmp_path, t0) == Counter(transition=3)   # butadiene, cyclopentadiene, chloroprene
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["run_dienophile"] == "C=CC#N" and model["note"]  # not the reference dienophile: said so


def test_unreadable_library_stops_before_computing(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a")])
    (tmp_path / "bad.csv").write_text("name,structure\nx,C=CC=C\n")
    run = _snakemake(tmp_path, "--config", "library=bad.csv")
    assert run.returncode != 0
    assert "bad.csv" in run.stderr and "'id' and 'smiles'" in run.stderr
    assert not (tmp_path / "results" / "structures").exists()


def test_a_bad_dienophile_stops_at_once_with_one_line(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a")])
    run = _snakemake(tmp_path, "--config", "dienophile=O=C1OC(=O)C=C")
    assert run.returncode != 0
    assert "dienes: dienophile 'O=C1OC(=O)C=C': not a valid SMILES" in run.stderr
    assert "Traceback" not in run.stderr
    assert not (tmp_path / "results" / "manifest.json").exists()
