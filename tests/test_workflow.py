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
# the density-functional level at a minimal basis and PySCF's coarsest grid: the whole single-point
# path runs (functional, grid, density fitting, thermal corrections, cycloadduct), in seconds per
# structure (grid 0 against the shipped grid 1: 3.9 s against 9.6 s for a 25-atom saddle, measured
# 2026-12-04 on one core)
SMALL_LEVEL = {"program": "pyscf", "method": "b3lyp", "basis": "sto-3g", "dispersion": "none", "solvent": "none",
               "grid_level": 0}


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


def _setup(tmp_path: Path, library_rows, seed: Path | None = None, **config_updates):
    """A working directory with the library, the small reference set and the test config; with
    `seed` (the reference_seed fixture), the reference dienes' GFN2-xTB results already in it."""
    config_updates = dict(config_updates)
    if seed is not None:
        import shutil
        for part in ("structures", "transition", "dienophiles"):
            shutil.copytree(seed / part, tmp_path / "results" / part, dirs_exist_ok=True)
    (tmp_path / "config").mkdir(exist_ok=True)
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS)
    _setup_library(tmp_path, library_rows)
    cfg = yaml.safe_load(open(Path(REPO) / "config" / "config.yaml"))
    cfg.update(library="lib.csv", reference="config/reference.csv", **config_updates)
    cfg["conformers"].update(n_conformers=4, xtb_per_family=1, planar_starts=1)
    cfg["levels"]["dft"] = dict(SMALL_LEVEL)
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


def _level_files(tmp_path) -> dict:
    return {p.relative_to(tmp_path / "results" / "levels"): p.stat().st_mtime_ns
            for p in (tmp_path / "results" / "levels").rglob("*.json")}


def test_tiny_library_end_to_end_and_incremental(tmp_path, reference_seed, capsys):
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C1=CC=C", "c")], seed=reference_seed)
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    assert [r["id"] for r in rows] == ["T-1", "T-2", "T-3"]
    assert [r["status"] for r in rows] == ["ok", "ok", "invalid_smiles"]
    assert rows[2]["message"].startswith("RDKit:") and rows[2]["rank"] == ""
    # every reactive row is ranked at the density-functional level, and says so; the GFN2-xTB
    # view (its own model, rank and barrier) stands beside it, fitted by the same code
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["ranking_level"] == "dft" and model["ranking_levels"] == ["dft", "corrected", "gfn2"]
    assert model["levels"]["dft"]["level"] == "B3LYP/STO-3G" and model["levels"]["gfn2"]["level"] == "GFN2-xTB"
    assert model["levels"]["dft"]["base_features"] == ["barrier_kJmol"] and model["levels"]["dft"]["n_reference"] == 5
    # every candidate descriptor is open to every level's fit (none dropped for want of a level's name)
    shipped = yaml.safe_load(open(Path(REPO) / "config" / "config.yaml"))["model"]["candidates"]
    assert model["levels"]["dft"]["candidates"] == model["levels"]["gfn2"]["candidates"] == shipped
    assert [r["level"] for r in rows[:2]] == ["dft"] * 2 and rows[0]["barrier_kind"] == "free_energy"
    for r in rows[:2]:   # the unprefixed barrier is the one the row is ranked by
        assert float(r["barrier_kJmol"]) == float(r["dft_barrier_kJmol"]) != float(r["gfn2_barrier_kJmol"])
        assert float(r["log10_k_pred"]) == float(r["dft_log10_k_pred"]) and r["gfn2_rank"]
        assert float(r["electronic_barrier_kJmol"]) != float(r["barrier_kJmol"])
        # the cycloadduct computed at the row's level beside its barrier, and read as a flag
        assert float(r["reaction_free_energy_kJmol"]) == float(r["dft_reaction_free_energy_kJmol"])
        assert r["may_revert"] in ("True", "False") and bool(r["reversal_note"]) == (r["may_revert"] == "True")
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
    level_before = _level_files(tmp_path)
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, compute_structures=1, compute_transitions=1, level_pairs=1,
                                    rank=1, torsion_profiles=1, report=1)
    assert computed_in(tmp_path, t0) == Counter(structures=1, transition=1)
    after = sorted((tmp_path / "results" / "structures").glob("*.json"))
    assert len(after) == len(structures) + 1
    assert all(p.stat().st_mtime_ns == mtimes[p.name] for p in after if p.name in mtimes)
    level_after = _level_files(tmp_path)
    assert all(level_after[p] == t for p, t in level_before.items())       # computed files untouched
    assert len(level_after) == len(level_before) + 3       # the new pair, its cycloadduct and its diene
    assert [r["id"] for r in _ranking(tmp_path)] == ["T-1", "T-2", "T-3", "T-4"]

    # a new reference file of known dienes: the models are refitted, nothing is computed
    _write_reference(tmp_path / "config" / "reference.csv", REFERENCE_IDS - {"ref-05"})
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert jobs_run(run) == Counter(prepare=1, rank=1, torsion_profiles=1, report=1)
    assert json.loads((tmp_path / "results" / "model.json").read_text())["levels"]["dft"]["n_reference"] == 4
    dft_ma = {r["id"]: (float(r["dft_barrier_kJmol"]), float(r["log10_k_pred"])) for r in _ranking(tmp_path) if r["rank"]}

    # other settings of the dft level (Hartree-Fock: no grid, the cheapest): every pair is computed
    # again, no GFN2-xTB work
    run = _snakemake(tmp_path, "--config", "levels={dft: {method: hf}}")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "compute_structures" not in jobs and "compute_transitions" not in jobs
    assert jobs["level_dienophile"] == 1 and jobs["level_pairs"] == 7     # 3 library + 4 reference pairs, one job each
    assert {r["level_method"].split(",")[0] for r in _ranking(tmp_path) if r["rank"]} == {"HF/STO-3G"}

    # another dienophile: its own minimum, the library's transition structures and their pricing;
    # conformers, the dienes' priced minima and the reference set (its own dienophile) are reused
    t0 = max(p.stat().st_mtime_ns for p in (tmp_path / "results").rglob("*.json"))
    n_priced_dienes = len(list((tmp_path / "results" / "levels").glob("*/structures/*.json")))
    with_ma = {r["id"]: float(r["gfn2_barrier_kJmol"]) for r in _ranking(tmp_path) if r["gfn2_barrier_kJmol"]}
    run = _snakemake(tmp_path, "--config", "dienophile=C=CC#N")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "compute_structures" not in jobs and jobs["compute_dienophile"] == 1
    assert jobs["level_dienophile"] == 1 and jobs["level_pairs"] == 3
    assert computed_in(tmp_path, t0) == Counter(transition=3)   # butadiene, cyclopentadiene, chloroprene
    assert len(list((tmp_path / "results" / "levels").glob("*/structures/*.json"))) == n_priced_dienes
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["run_dienophile"] == "C=CC#N" and model["levels"]["dft"]["note"]  # not the reference dienophile
    # ranking.csv carries the run's dienophile's barriers: acrylonitrile is a much weaker dienophile
    # than maleic anhydride (common practice), so every diene's barrier rises, and every row says
    # that its rate is a transfer from the reference dienophile
    rows = _ranking(tmp_path)
    with_an = {r["id"]: float(r["gfn2_barrier_kJmol"]) for r in rows if r["gfn2_barrier_kJmol"]}
    assert set(with_an) == set(with_ma) and all(with_an[i] > with_ma[i] + 5.0 for i in with_ma)
    # and so does the barrier the rows are ranked by: every row reads the single points with the
    # run's dienophile (its pair file at the level), so every barrier and prediction changes. (At
    # the minimal basis of these tests the size and even the sign of the change is not physics:
    # B3LYP/STO-3G puts acrylonitrile's barriers 3-17 kJ/mol below maleic anhydride's.)
    dft_an = {r["id"]: (float(r["dft_barrier_kJmol"]), float(r["log10_k_pred"])) for r in rows if r["rank"]}
    assert set(dft_an) == set(dft_ma) and all(r["level"] == "dft" for r in rows if r["rank"])
    assert all(abs(dft_an[i][0] - dft_ma[i][0]) > 1.0 and dft_an[i][1] != dft_ma[i][1] for i in dft_ma)
    for r in rows:
        if r["rank"]:
            pair = json.loads(next((tmp_path / "results" / "levels").glob(f"dft-*/pairs/{r['transition_key']}.json"))
                              .read_text())
            assert pair["dienophile"] == "C=CC#N"
            assert float(r["dft_barrier_kJmol"]) == pytest.approx(min(
                s["free_energy_barrier_kJmol"] for s in pair["sites"].values() if s.get("status") == "ok"), abs=1e-6)
    assert all(r["dienophile"] == "C=CC#N" and r["dienophile_in_reference"] == "False" for r in rows if r["rank"])

    # an SDF library with a record RDKit cannot read, and a located saddle that failed its check
    # (cyclopentadiene's result marked so, as a search that runs out of steps leaves it): every row
    # reaches ranking.csv in input order with its status and message, the unverified row still ranks
    from rdkit import Chem
    blocks = []
    for rid, smi in (("S-1", "C=CC=C"), ("S-3", "C1=CCC=C1")):
        mol = Chem.MolFromSmiles(smi)
        mol.SetProp("_Name", rid)
        blocks.append(Chem.MolToMolBlock(mol) + "$$$$\n")
    broken = "S-2\n  broken\n\n  2  1  0  0  0  0  0  0  0  0999 V2000\nthis is not an atom line\nM  END\n$$$$\n"
    (tmp_path / "lib.sdf").write_text(blocks[0] + broken + blocks[1])
    cpd = next(p for p in (tmp_path / "results" / "transition").glob("*.json")
               if json.loads(p.read_text()).get("key", "").startswith(Chem.MolToInchiKey(Chem.MolFromSmiles("C1=CCC=C1")))
               and json.loads(p.read_text())["dienophile"] == "O=C1OC(=O)C=C1")
    result = json.loads(cpd.read_text())
    for site in result["sites"].values():
        if site.get("status") == "ok":
            site.update(status="ts_unverified", ts_verified=False,
                        message="saddle search stopped after 100 steps; barrier from the fixed-bond model structure")
    cpd.write_text(json.dumps(result))
    run = _snakemake(tmp_path, "--config", "library=lib.sdf")
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    assert [r["status"] for r in rows] == ["ok", "unreadable_sdf_record", "ts_unverified"]
    assert rows[1]["message"] == "unreadable SDF record" and rows[1]["rank"] == ""
    assert rows[0]["rank"] and rows[2]["rank"] and rows[2]["ts_verified"] == "False"
    assert "saddle search stopped after 100 steps" in rows[2]["message"]
    assert "saddle not verified" in rows[2]["domain_note"] and rows[2]["in_domain"] == "False"

    # `look` on a diene new to the run ((E,E)-2,4-hexadiene) answers what `rank` answers once the
    # diene is in the library: prediction, both bounds and the multiple of butadiene, as printed
    from dienes import cli
    capsys.readouterr()
    assert cli.main(["look", "C/C=C/C=C/C", "--workdir", str(tmp_path), "--no-profile"]) == 0
    said = capsys.readouterr().out
    m = re.search(r"log10 k ([+-][\d.]+) \[([+-][\d.]+), ([+-][\d.]+)\], x(\S+) butadiene; level (\w+)", said)
    assert m, said[-2000:]
    _setup_library(tmp_path, [("T-1", "C=CC=C", "a"), ("T-5", "C/C=C/C=C/C", "e")])
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    assert "compute_structures" not in jobs_run(run)        # look's results are the run's
    new = next(r for r in _ranking(tmp_path) if r["id"] == "T-5")
    from dienes.outputs import times_text
    assert [f"{float(new[c]):+.2f}" for c in ("log10_k_pred", "log10_k_low", "log10_k_high")] == list(m.groups()[:3])
    assert times_text(float(new["times_faster_than_butadiene"])) == m.group(4) and new["level"] == m.group(5)


def test_the_quick_screen_a_shortlist_contenders_and_a_third_level_by_configuration(tmp_path, reference_seed):
    # butadiene, cyclopentadiene, chloroprene and 1,3-cyclohexadiene: none of them in this reference set
    _setup(tmp_path, [("T-1", "C=CC=C", "a"), ("T-2", "C1=CCC=C1", "b"), ("T-3", "C=CC(Cl)=C", "c"),
                      ("T-4", "C1=CCCC=C1", "d")], seed=reference_seed, ranking={"levels": ["gfn2"]})
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert "level_pairs" not in jobs and "level_dienophile" not in jobs
    rows = _ranking(tmp_path)
    assert {r["level"] for r in rows} == {"gfn2"} and all(r["rank"] for r in rows)
    assert all(r["barrier_kind"] == "electronic" and r["barrier_kJmol"] == r["gfn2_barrier_kJmol"] for r in rows)
    assert json.loads((tmp_path / "results" / "model.json").read_text())["ranking_level"] == "gfn2"
    assert "GFN2-xTB level only" in (tmp_path / "results" / "report.html").read_text()

    # ranking.rows 1 computes the best GFN2-xTB row and the reference set at dft, nothing else;
    # the other rows are ranked at gfn2 and say why
    run = _snakemake(tmp_path, "--config", "ranking={levels: [dft, gfn2], rows: 1}")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert jobs["level_round"] == 1 and jobs["level_pairs"] == 1 + len(REFERENCE_IDS)
    assert "compute_structures" not in jobs and "compute_transitions" not in jobs
    rows = {r["id"]: r for r in _ranking(tmp_path)}
    best_gfn2 = min(rows.values(), key=lambda r: int(r["gfn2_rank"]))
    assert best_gfn2["level"] == "dft"
    for other in (r for r in rows.values() if r is not best_gfn2):
        assert other["level"] == "gfn2"
        assert "ranked at gfn2: not computed at dft: not among the 1 best rows at gfn2" in other["message"]

    # contenders: round 0 adds a first sample (here one row) to the reference set, later rounds the
    # rows whose corrected estimate could reach the top (here the first place); the rest are ranked
    # on the corrected level, and no row of the full ranking's tier 1 is left to the estimate
    contenders = ("ranking={levels: [dft, corrected, gfn2], rows: contenders, "
                  "contenders: {top: 1, min_first: 1, first_share: 0.01}}")
    run = _snakemake(tmp_path, "--config", contenders, "levels={corrected: {min_sites: 5}}")
    assert run.returncode == 0, run.stderr[-3000:]
    rounds = [json.loads(p.read_text()) for p in sorted((tmp_path / "results" / "rounds").glob("round*.json"))]
    assert jobs_run(run)["level_round"] == len(rounds) >= 2 and rounds[-1]["done"]
    assert rounds[0]["first_sample"] == 1 and rounds[1]["correction"]["n_sites"] >= 5
    part = {r["id"]: r for r in _ranking(tmp_path)}
    computed = sum(len(r["pairs"]) for r in rounds)
    assert {r["level"] for r in part.values()} <= {"dft", "corrected"} and all(r["rank"] for r in part.values())
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    corr = model["levels"]["corrected"]
    assert corr["level"] == "B3LYP/STO-3G estimated from GFN2-xTB" and corr["correction"]["half_width_log10"] > 0
    for r in part.values():
        if r["level"] == "corrected":
            # its interval adds the correction's own error to the model's
            half = (float(r["log10_k_high"]) - float(r["log10_k_low"])) / 2
            assert half >= corr["correction"]["half_width_log10"] - 1e-6
            assert "could not reach the top 1 or tier 1" in r["message"]
    run = _snakemake(tmp_path, "--config", "ranking={levels: [dft, corrected, gfn2], rows: all}")
    assert run.returncode == 0, run.stderr[-3000:]
    full = {r["id"]: r for r in _ranking(tmp_path)}
    assert all(r["level"] == "dft" for r in full.values())
    tier1 = [i for i, r in full.items() if r["tier"] == "1"]
    assert tier1 and all(part[i]["level"] == "dft" for i in tier1), (tier1, computed)
    assert part[min(full, key=lambda i: int(full[i]["rank"]))]["rank"] == "1"

    # a third level named in the config alone ranks, the other two beside it: no code knows its name
    run = _snakemake(tmp_path, "--config", "levels={hf: {program: pyscf, method: hf, basis: sto-3g}}",
                     "ranking={levels: [hf, dft, gfn2], rows: all}")
    assert run.returncode == 0, run.stderr[-3000:]
    jobs = jobs_run(run)
    assert jobs["level_dienophile"] == 1 and "compute_transitions" not in jobs   # hf's; dft's is kept
    model = json.loads((tmp_path / "results" / "model.json").read_text())
    assert model["ranking_level"] == "hf" and set(model["levels"]) == {"hf", "dft", "gfn2"}
    assert model["levels"]["hf"]["level"] == "HF/STO-3G"
    rows = _ranking(tmp_path)
    assert {r["level"] for r in rows} == {"hf"}
    for r in rows:
        assert float(r["barrier_kJmol"]) == float(r["hf_barrier_kJmol"])
        assert r["dft_rank"] and r["gfn2_rank"] and r["dft_barrier_kJmol"] and r["gfn2_barrier_kJmol"]
    assert (tmp_path / "results" / "levels").is_dir() and len(list((tmp_path / "results" / "levels").iterdir())) == 2

    # the corrected level started from that third level's barrier (computed for every row, so before
    # round 0): the rounds, the model and the label say so; nothing is computed again
    run = _snakemake(tmp_path, "--config", "levels={hf: {program: pyscf, method: hf, basis: sto-3g}, "
                     "corrected: {min_sites: 5, base: hf}}", contenders.replace("[dft, corrected, gfn2]",
                                                                            "[dft, corrected, hf, gfn2]"))
    assert run.returncode == 0, run.stderr[-3000:]
    assert "level_pairs" not in jobs_run(run) and jobs_run(run)["level_round"] >= 2
    rounds = [json.loads(p.read_text()) for p in sorted((tmp_path / "results" / "rounds").glob("round*.json"))]
    assert rounds[1]["correction"]["base"] == "hf" and rounds[1]["correction"]["terms"][0] == "hf_barrier_kJmol"
    corr = json.loads((tmp_path / "results" / "model.json").read_text())["levels"]["corrected"]
    assert corr["level"] == "B3LYP/STO-3G estimated from HF/STO-3G and GFN2-xTB"


def test_unreadable_library_stops_before_computing(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a")])
    (tmp_path / "bad.csv").write_text("name,structure\nx,C=CC=C\n")
    run = _snakemake(tmp_path, "--config", "library=bad.csv")
    assert run.returncode != 0
    assert "bad.csv" in run.stderr and "needs a column of SMILES" in run.stderr
    assert not (tmp_path / "results" / "structures").exists()


def test_a_bad_dienophile_stops_at_once_with_one_line(tmp_path):
    _setup(tmp_path, [("T-1", "C=CC=C", "a")])
    run = _snakemake(tmp_path, "--config", "dienophile=O=C1OC(=O)C=C")
    assert run.returncode != 0
    assert "dienes: dienophile 'O=C1OC(=O)C=C': not a valid SMILES" in run.stderr
    assert "Traceback" not in run.stderr
    assert not (tmp_path / "results" / "manifest.json").exists()
