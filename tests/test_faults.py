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
from .test_workflow import _ranking, _setup, _setup_library, _snakemake, jobs_run


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


def _kill_when(workdir: Path, pattern: str, cores: int) -> None:
    """Start the workflow in `workdir` and kill -9 its whole process group as soon as a results
    file matching `pattern` appears that was not there before (or after 5 minutes)."""
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
           "--directory", str(workdir), "--cores", str(cores)]
    there = set((workdir / "results").glob(pattern))
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True, env=dict(os.environ, OMP_NUM_THREADS="1"))
    deadline = time.time() + 300
    while time.time() < deadline and not set((workdir / "results").glob(pattern)) - there:
        time.sleep(0.05)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()


@pytest.mark.slow
def test_kill_9_then_the_same_command_resumes_to_identical_results(tmp_path, reference_seed):
    clean, killed = tmp_path / "clean", tmp_path / "killed"
    for d in (clean, killed):          # the kill falls on the first result the killed run writes itself
        d.mkdir()
        _setup(d, LIB, seed=reference_seed, ranking=FAST)
    assert _snakemake(clean).returncode == 0
    seeded = set((killed / "results").rglob("*.json"))
    _kill_when(killed, "structures/*.json", cores=2)
    assert not (killed / "results" / "ranking.csv").exists()
    before = {p: (p.stat().st_mtime_ns, p.read_bytes()) for p in (killed / "results").rglob("*.json")
              if p.parent.name in ("structures", "transition", "dienophiles")}
    assert set(before) - seeded, "the kill came before the run wrote a result of its own"
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
def test_truncated_result_is_detected_and_recomputed(tmp_path, reference_seed):
    _setup(tmp_path, LIB[:2], seed=reference_seed, ranking=FAST)
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
def test_a_second_run_on_the_same_directory_is_refused(tmp_path, reference_seed):
    # one diene to compute (piperylene, about half a minute): the first run holds the directory
    # while the second starts
    _setup(tmp_path, LIB[1:2], seed=reference_seed, ranking=FAST)
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
    assert [r["status"] for r in _ranking(tmp_path)] == ["ok"]


# the density-functional stage: the shipped functional at a minimal basis (tests/test_workflow.py)
NOT_CONVERGING = '''
import dienes.backends as _b
_energy = _b.DFTLevel.energy
def _fails_for_one_size(self, numbers, positions_A):
    # the SCF of every structure of {n} atoms does not converge (a test's stand-in for a hard case)
    if len(numbers) == {n}:
        return _b.LevelEnergy(float("nan"), False)
    return _energy(self, numbers, positions_A)
_b.DFTLevel.energy = _fails_for_one_size
'''

# the standardisation of one row raises inside the workflow's prepare job (a stand-in for an RDKit
# failure no valid SMILES is known to trigger)
RAISES_FOR_ONE_ROW = '''
import dienes.library as _lib
_prepare = _lib._prepare
def _raises_for_one_row(row, rid, smiles, extra, limits):
    if rid == "{rid}":
        raise ValueError("stand-in for an RDKit failure")
    return _prepare(row, rid, smiles, extra, limits)
_lib._prepare = _raises_for_one_row
'''


def _level_results(d):
    return {p: (p.stat().st_mtime_ns, p.read_bytes()) for p in (d / "results" / "levels").rglob("*.json")}


@pytest.mark.slow
def test_faults_at_the_density_functional_stage(tmp_path, reference_seed):
    lib = [("K-1", "C=CC=C", ""), ("K-2", "C1=CCCC=C1", "")]
    clean, killed = tmp_path / "clean", tmp_path / "killed"
    for d in (clean, killed):
        d.mkdir()
        _setup(d, lib, seed=reference_seed if d is clean else None)
    assert _snakemake(clean).returncode == 0
    # the GFN2-xTB stage is shared, so the kill falls inside the density-functional stage
    import shutil
    for part in ("structures", "transition", "dienophiles"):
        shutil.copytree(clean / "results" / part, killed / "results" / part)
    _kill_when(killed, "levels/*/pairs/*.json", cores=1)
    before = _level_results(killed)
    assert list((killed / "results" / "levels").glob("*/pairs/*.json")), "the kill came before any single point"
    assert not (killed / "results" / "ranking.csv").exists()
    run = _snakemake(killed)
    assert run.returncode == 0, run.stderr[-3000:]
    # resumed: what was written is untouched, only the missing pairs were computed, and the ranking
    # is the uninterrupted run's
    assert all(p.stat().st_mtime_ns == t and p.read_bytes() == b for p, (t, b) in before.items())
    pairs_clean = len(list((clean / "results" / "levels").glob("*/pairs/*.json")))
    assert len(before) < len(_level_results(killed)) and \
        len(list((killed / "results" / "levels").glob("*/pairs/*.json"))) == pairs_clean
    pd.testing.assert_frame_equal(_numbers(clean), _numbers(killed))

    # a truncated single-point result: said, moved aside, computed again, the same numbers
    victim = sorted((killed / "results" / "levels").glob("*/pairs/*.json"))[0]
    text = victim.read_text()
    victim.write_text(text[: len(text) // 2])
    os.utime(victim, (1, 1))
    run = _snakemake(killed)
    assert run.returncode == 0, run.stderr[-3000:]
    assert "computed again" in run.stderr and victim.name in run.stderr
    assert json.loads(victim.read_text())["sites"] == json.loads(text)["sites"]
    pd.testing.assert_frame_equal(_numbers(clean), _numbers(killed))

    # an SCF that fails at the level for one row's transition structure (butadiene + maleic
    # anhydride, the only 19-atom structure here) inside a workflow run, that row's results at the
    # level removed so that the run computes them again (and nothing else at the level): that row
    # keeps its GFN2-xTB values and says why, every other row ranks at the level. A third row,
    # added now, fails in prepare (processing_error)
    butadiene = next(r for r in _ranking(killed) if r["id"] == "K-1")["transition_key"]
    for kind in ("pairs", "adducts"):
        for p in (killed / "results" / "levels").glob(f"*/{kind}/{butadiene}.json"):
            p.unlink()
    hook = tmp_path / "hook"
    hook.mkdir()
    (hook / "sitecustomize.py").write_text(NOT_CONVERGING.replace("{n}", "19")
                                           + RAISES_FOR_ONE_ROW.replace("{rid}", "K-3"))
    _setup_library(killed, lib + [("K-3", "C=CC(C)=C", "")])
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=os.pathsep.join(
        [str(hook)] + [p for p in os.environ.get("PYTHONPATH", "").split(os.pathsep) if p]))
    run = subprocess.run([sys.executable, "-m", "snakemake", "--snakefile", str(Path(REPO) / "Snakefile"),
                          "--directory", str(killed), "--cores", "2"],
                         capture_output=True, text=True, env=env, timeout=1200)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run)["level_pairs"] == 1
    rows = {r["id"]: r for r in _ranking(killed)}
    assert rows["K-1"]["level"] == "gfn2" and rows["K-1"]["rank"]
    assert float(rows["K-1"]["barrier_kJmol"]) == float(rows["K-1"]["gfn2_barrier_kJmol"])
    assert rows["K-1"]["dft_status"] == "scf_failed" and "SCF did not converge" in rows["K-1"]["message"]
    assert "ranked at gfn2" in rows["K-1"]["message"]
    assert rows["K-2"]["level"] == "dft" and rows["K-2"]["dft_status"] == "ok"
    assert rows["K-3"]["status"] == "processing_error" and not rows["K-3"]["rank"]
    assert rows["K-3"]["message"].startswith("RDKit could not process this structure (ValueError: stand-in")
