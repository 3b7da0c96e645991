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

# neither butadiene nor cyclopentadiene: their order in the library is predicted, not fitted
REFERENCE_IDS = {"ref-02", "ref-03", "ref-04", "ref-05", "ref-06"}
# the refined level at a minimal basis: the whole refined path runs, in seconds per structure
SMALL_LEVEL = {"rows": "all", "method": "b3lyp", "basis": "sto-3g", "dispersion": "none", "solvent": "none"}


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
    config_updates = dict(config_updates)
    (tmp_path / "config").mkdir(exist_ok=True)
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS)
    _setup_library(tmp_path, library_rows)
    cfg = yaml.safe_load(open(Path(REPO) / "config" / "config.yaml"))
    cfg.update(library="lib.csv", reference="config/reference.csv",
               **{k: v for k, v in config_updates.items() if k != "refine"})
    cfg["conformers"].update(n_conformers=4, xtb_per_family=1, planar_starts=1)
    cfg["refine"] = dict(SMALL_LEVEL) | config_updates.get("refine", {})
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


def _refined_files(tmp_path) -> dict:
    return {p.relative_to(tmp_path / "results" / "refined"): p.stat().st_mtime_ns
            for p in (tmp_path / "results" / "refined").rglob("*.json")}


def test_tiny_library_end_to_end_and_incremental(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c")])
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    assert [r["id"] for r in rows] == ["T-1", "T-2", "T-3"]
    assert [r["status"] for r in rows] == ["ok", "ok", "invalid_smiles"]
    assert rows[2]["message"].startswith("RDKit:") and rows[2]["rank"] == ""
    # every reactive row is ranked at the refined level, and says so; the GFN2-xTB rank stands beside it
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["ranking_level"] == "B3LYP/STO-3G" and model["features"] == ["barrier_refined_kJmol"]
    assert model["fast"]["level"] == "GFN2-xTB" and model["n_reference"] == 5
    assert [r["level"] for r in rows[:2]] == ["B3LYP/STO-3G"] * 2
    assert all(r["barrier_refined_kJmol"] and r["rank_xtb"] for r in rows[:2])
    # cyclopentadiene reacts faster than butadiene (about 1000-fold with maleic anhydride; Sauer &
    # Sustmann 1980, from memory; common practice); neither is in the fitted reference set here
    assert rows[1]["rank"] == "1" and rows[0]["rank"] == "2"
    assert rows[0]["note"] == "a"                              # extra columns carried through
    assert rows[0]["ts_verified"] == "True" and float(rows[0]["ts_imag_cm1"]) < -100
    structures = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert all("T-" not in p.name for p in structures)        # named by structure, not by id
    mtimes = {p.name: p.stat().st_mtime_ns for p in structures}
    for batch in (tmp_path / "results" / "batches").glob("*/*.json"):
        assert json.loads(batch.read_text())["threads"] == "1"  # the rule's threads, pinned

    # nothing changed: nothing runs
    run = _snakemake(tmp_path)
    assert run.returncode == 0 and "Nothing to be done" in run.stderr

    # a new diene arrives: one structure, one transition structure and one pricing, nothing else
    _setup_library(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c"),
                              ("T-4", "C=CC(Cl)=C", "d")])
    t0 = max(p.stat().st_mtime_ns for p in (tmp_path / "results").rglob("*.json"))
    refined_before = _refined_files(tmp_path)
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, compute_structures=1, compute_transitions=1, refine_pairs=1,
                                    rank=1, report=1)
    assert computed_in(tmp_path, t0) == Counter(structures=1, transition=1)
    after = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert len(after) == len(structures) + 1
    assert all(p.stat().st_mtime_ns == mtimes[p.name] for p in after if p.name in mtimes)
    refined_after = _refined_files(tmp_path)
    assert all(refined_after[p] == t for p, t in refined_before.items())   # priced files untouched
    assert len(refined_after) == len(refined_before) + 2                   # the new pair and its diene
    assert [r["id"] for r in _ranking(tmp_path)] == ["T-1", "T-2", "T-3", "T-4"]

    # a new reference file of known dienes: the models are refitted, nothing is computed
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS - {"ref-05"})
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, rank=1, report=1)
    assert json.loads((tmp_path / "results" / "model.json").read_text())["n_reference"] == 4

    # another refined level (Hartree-Fock: no grid, the cheapest): every pair is priced again,
    # no GFN2-xTB work
    run = _snakemake(tmp_path, "--config", "refine={method: hf}")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "compute_structures" not in jobs and "compute_transitions" not in jobs
    assert jobs["refine_dienophile"] == 1 and jobs["refine_pairs"] == 7     # 3 library + 4 reference pairs, one job each
    assert {r["level"] for r in _ranking(tmp_path) if r["rank"]} == {"HF/STO-3G"}

    # another dienophile: its own minimum, the library's transition structures and their pricing;
    # conformers, the dienes' priced minima and the reference set (its own dienophile) are reused
    t0 = max(p.stat().st_mtime_ns for p in (tmp_path / "results").rglob("*.json"))
    n_priced_dienes = len(list((tmp_path / "results" / "refined").glob("*/structures/*.json")))
    with_ma = {r["id"]: float(r["barrier_kJmol"]) for r in _ranking(tmp_path) if r["barrier_kJmol"]}
    run = _snakemake(tmp_path, "--config", "dienophile=C=CC#N")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "compute_structures" not in jobs and jobs["compute_dienophile"] == 1
    assert jobs["refine_dienophile"] == 1 and jobs["refine_pairs"] == 3
    assert computed_in(tmp_path, t0) == Counter(transition=3)   # butadiene, cyclopentadiene, chloroprene
    assert len(list((tmp_path / "results" / "refined").glob("*/structures/*.json"))) == n_priced_dienes
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["run_dienophile"] == "C=CC#N" and model["note"]  # not the reference dienophile: said so
    # ranking.csv carries the run's dienophile's barriers: acrylonitrile is a much weaker dienophile
    # than maleic anhydride (common practice), so every diene's barrier rises, and every row says
    # that its rate is a transfer from the reference dienophile
    rows = _ranking(tmp_path)
    with_an = {r["id"]: float(r["barrier_kJmol"]) for r in rows if r["barrier_kJmol"]}
    assert set(with_an) == set(with_ma) and all(with_an[i] > with_ma[i] + 5.0 for i in with_ma)
    assert all(r["dienophile"] == "C=CC#N" and r["dienophile_in_reference"] == "False" for r in rows if r["rank"])


def test_the_quick_screen_is_labelled_as_the_fast_level(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b")], refine={"rows": "none"})
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "refine_pairs" not in jobs and "refine_dienophile" not in jobs
    rows = _ranking(tmp_path)
    assert {r["level"] for r in rows} == {"GFN2-xTB"} and all(r["rank"] for r in rows)
    assert json.loads((tmp_path / "results" / "model.json").read_text())["ranking_level"] == "GFN2-xTB"
    assert "GFN2-xTB level only" in (tmp_path / "results" / "report.html").read_text()

    # refine.rows: 1 prices the best GFN2-xTB row and the reference set, nothing else; the
    # other row stays at GFN2-xTB and says why
    run = _snakemake(tmp_path, "--config", "refine={rows: 1}")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert jobs["shortlist"] == 1 and jobs["refine_pairs"] == 1 + len(REFERENCE_IDS)
    assert "compute_structures" not in jobs and "compute_transitions" not in jobs
    rows = {r["id"]: r for r in _ranking(tmp_path)}
    best_xtb = min(rows.values(), key=lambda r: int(r["rank_xtb"]))
    other = next(r for r in rows.values() if r is not best_xtb)
    assert best_xtb["level"] == "B3LYP/STO-3G" and other["level"] == "GFN2-xTB"
    assert "not among the 1 best GFN2-xTB rows" in other["message"]


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
