"""Faults: SCF trouble, unconverged optimisations, hard kills, truncated files,
concurrent runs (the workflow ones are slow)."""
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from dienes import backends
from dienes.backends import BackendError, Molecule
from dienes.pipeline import compute_structure

from .conftest import REPO
from .test_workflow import _ranking, _setup, _snakemake


class _FlakySession:
    """Fails the SCF below a given electronic temperature, then behaves like xtb."""
    fail_below_K = 1000.0

    def __init__(self, numbers, charge, uhf, settings, etemp_K):
        self.etemp_K = etemp_K
        self.inner = backends._TbliteSession(numbers, charge, uhf, settings, etemp_K)

    def compute(self, positions_bohr):
        if self.etemp_K < self.fail_below_K:
            raise BackendError("SCF did not converge in 250 iterations")
        return self.inner.compute(positions_bohr)


def test_scf_failure_is_retried_at_higher_electronic_temperature(monkeypatch):
    monkeypatch.setitem(backends._SESSIONS, "xtb-python", _FlakySession)   # Molecule's default backend
    mol = Molecule([1, 1])
    sp = mol.singlepoint(np.array([[0.0, 0.0, 0.0], [0.74, 0.0, 0.0]]))
    assert sp.electronic_temperature_K == 1000.0 and mol.retries == 1


def test_scf_failure_everywhere_gives_a_status(monkeypatch, structure_settings):
    monkeypatch.setattr(_FlakySession, "fail_below_K", 1e9)
    monkeypatch.setitem(backends._SESSIONS, structure_settings["backend"], _FlakySession)   # the backend in use
    r = compute_structure("C=CC=C", structure_settings)
    assert r["status"] == "scf_failed"
    assert "SCF did not converge" in r["message"]


@pytest.mark.slow
def test_unconverged_optimisation_is_recorded(structure_settings):
    st = dict(structure_settings, optimisation={"fmax_eV_A": 1e-6, "max_steps": 3})
    r = compute_structure("C=CC=C", st)
    assert r["status"] == "ok" and r["converged"] is False
    assert "max_steps" in r["message"]


# faults are the workflow's, not the level's: these runs stop at GFN2-xTB (the refined stage's
# own reruns are counted in tests/test_workflow.py)
FAST = {"levels": ["gfn2"]}
LIB = [("K-1", "C=CC=C", ""), ("K-2", "C/C=C/C=C", ""), ("K-3", "C=CC(=C)CCC=C(C)C", ""),
       ("K-4", "C1=CCCC=C1", "")]


def _numbers(tmp_path):
    df = pd.DataFrame(_ranking(tmp_path))
    return df[["id", "status", "rank", "log10_k_pred", "scis_penalty_kJmol", "homo_eV",
               "barrier_kJmol"]]


@pytest.mark.slow
def test_kill_9_then_the_same_command_resumes_to_identical_results(tmp_path):
    clean, killed = tmp_path / "clean", tmp_path / "killed"
    for d in (clean, killed):
        d.mkdir()
        _setup(d, LIB, ranking=FAST)
    assert _snakemake(clean).returncode == 0
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
           "--directory", str(killed), "--cores", "2"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True, env=dict(os.environ, OMP_NUM_THREADS="1"))
    deadline = time.time() + 300
    while time.time() < deadline and not list((killed / "results" / "structures").glob("*.json")):
        time.sleep(0.2)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    assert not (killed / "results" / "ranking.csv").exists()
    before = {p: (p.stat().st_mtime_ns, p.read_bytes()) for p in (killed / "results").rglob("*.json")
              if p.parent.name in ("structures", "transition", "dienophiles")}
    assert before, "the kill came before any result was written"
    run = _snakemake(killed)
    assert run.returncode == 0, run.stderr[-3000:]
    pd.testing.assert_frame_equal(_numbers(clean), _numbers(killed))
    # resumed, not recomputed: what was written before the kill is untouched, and the resumed run
    # computed only the rest
    assert all(p.stat().st_mtime_ns == t and p.read_bytes() == b for p, (t, b) in before.items())
    n_all = sum(1 for p in (killed / "results").rglob("*.json")
                if p.parent.name in ("structures", "transition", "dienophiles"))
    assert len(before) < n_all


@pytest.mark.slow
def test_truncated_result_is_detected_and_recomputed(tmp_path):
    _setup(tmp_path, LIB[:2], ranking=FAST)
    assert _snakemake(tmp_path).returncode == 0
    before = _numbers(tmp_path)
    victim = sorted((tmp_path / "results" / "structures").glob("*.json"))[0]
    text = victim.read_text()
    victim.write_text(text[: len(text) // 2])
    os.utime(victim, (1, 1))  # old, so that nothing else would make it rerun
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert "computed again" in run.stderr
    def same(t):
        d = json.loads(t)
        d.pop("wall_time_s")
        return d
    assert same(victim.read_text()) == same(text)   # recomputed, same numbers
    pd.testing.assert_frame_equal(before, _numbers(tmp_path))


@pytest.mark.slow
def test_a_second_run_on_the_same_directory_is_refused(tmp_path):
    _setup(tmp_path, LIB, ranking=FAST)
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
           "--directory", str(tmp_path), "--cores", "1"]
    first = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                             env=dict(os.environ, OMP_NUM_THREADS="1"))
    deadline = time.time() + 120
    while time.time() < deadline and not (tmp_path / "results" / ".run.lock").exists():
        time.sleep(0.1)
    time.sleep(1.0)
    second = _snakemake(tmp_path)
    assert second.returncode != 0
    assert "another run" in second.stderr
    _, err = first.communicate(timeout=600)
    assert first.returncode == 0, err[-3000:]
    assert [r["status"] for r in _ranking(tmp_path)] == ["ok"] * 4
