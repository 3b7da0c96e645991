"""Checks of the pipeline's numbers against outside references.

Each check computes an observed value through the project's own functions and
compares it with a published (or, where marked, remembered) reference value.
``python -m dienes.validation`` runs them all and rewrites docs/validation.md;
tests/test_validation.py runs them too and fails when a check leaves its
tolerance or the document no longer matches the code.
"""

from __future__ import annotations

import argparse
import functools
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
from rdkit import Chem
from rdkit.Chem import AllChem
from scipy import stats

from . import settings as cfg
from .backends import Molecule, Settings as BackendSettings
from .optimize import backend_energy_forces, dihedral_deg, optimize
from .pipeline import compute_structure, lowest_minimum
from .torsion import torsion_scan
from .units import BOHR_ANGSTROM, EV_KJMOL, HARTREE_EV

DOC_PATH = Path(__file__).resolve().parent.parent / "docs" / "validation.md"
CONFIG_PATH = Path(__file__).resolve().parent.parent / "config" / "config.yaml"

# Ionisation energies (eV): NIST Chemistry WebBook evaluated values, or from memory where marked.
IONISATION_ENERGIES_EV = {
    "C=CC=C": (9.072, "NIST Chemistry WebBook"),
    "C1=CCC=C1": (8.57, "NIST Chemistry WebBook"),
    "c1ccoc1": (8.88, "NIST Chemistry WebBook"),
}
GAS_KINETICS_PATH = Path(__file__).resolve().parent.parent / "tests" / "data" / "gas_phase_kinetics.csv"


@dataclass
class Check:
    name: str
    unit: str
    reference: float
    source: str
    tolerance: float           # |observed - reference| allowed, or the bound for "min"/"max" checks
    observe: Callable[[dict], float]
    kind: str = "abs"          # "abs": |obs - ref| <= tol; "min": obs >= tol; "max": obs <= tol;
                               # "known": a known error of the level, reported and not tested
    why: str = ""              # why the tolerance has this width

    def passes(self, observed: float) -> bool:
        if self.kind == "known":
            return True
        if self.kind == "min":
            return observed >= self.tolerance
        if self.kind == "max":
            return observed <= self.tolerance
        return abs(observed - self.reference) <= self.tolerance

    def tolerance_text(self) -> str:
        return {"min": f">= {self.tolerance:g}", "max": f"<= {self.tolerance:g}", "known": "reported"}.get(
            self.kind, f"+/- {self.tolerance:g}")


def default_settings(backend: str = "xtb-python") -> dict:
    return cfg.load(CONFIG_PATH, fallback=False).structure_settings() | {"backend": backend}


def _butadiene(seed: int = 3):
    m = Chem.AddHs(Chem.MolFromSmiles("C=CC=C"))
    AllChem.EmbedMolecule(m, randomSeed=seed)
    AllChem.MMFFOptimizeMolecule(m)
    return m, [a.GetAtomicNum() for a in m.GetAtoms()]


@functools.lru_cache(maxsize=4)
def butadiene_scan(backend: str):
    """Relaxed scan of butadiene's C1-C2-C3-C4 dihedral, 0..180 deg in 5 deg steps:
    (angles, energies kJ/mol, geometries)."""
    m, numbers = _butadiene()
    return torsion_scan(numbers, m.GetConformer().GetPositions(), Molecule(numbers, BackendSettings(backend)),
                        (0, 1, 2, 3), step_deg=5.0, fmax_eV_A=0.005)


def butadiene_profile(backend: str):
    a, e, _ = butadiene_scan(backend)
    return a, e


@functools.lru_cache(maxsize=4)
def butadiene_gauche(backend: str):
    """(gauche dihedral (deg), gauche - s-trans (kJ/mol)) from free optimisations."""
    from rdkit.Chem import rdMolTransforms
    m, numbers = _butadiene()
    ef = backend_energy_forces(Molecule(numbers, BackendSettings(backend)))
    conf = m.GetConformer()
    out = {}
    for start in (40.0, 180.0):
        rdMolTransforms.SetDihedralDeg(conf, 0, 1, 2, 3, start)
        out[start] = optimize(numbers, conf.GetPositions(), ef, fmax_eV_A=0.001, max_steps=2000)
    return (abs(dihedral_deg(out[40.0].positions_A, (0, 1, 2, 3))),
            (out[40.0].energy_eV - out[180.0].energy_eV) * EV_KJMOL, out[40.0].positions_A,
            out[180.0].positions_A)


def _barrier(backend):
    """Parabola through the highest scan point and its neighbours: (position deg, height kJ/mol)."""
    a, e = butadiene_profile(backend)
    k = int(np.argmax(e))
    k = min(max(k, 1), len(a) - 2)
    c = np.polyfit(a[k - 1:k + 2], e[k - 1:k + 2], 2)
    x = -c[1] / (2 * c[0])
    return float(x), float(np.polyval(c, x))


@functools.lru_cache(maxsize=32)
def minimum_energy_kJmol(smiles: str, backend: str) -> float:
    return lowest_minimum(smiles, default_settings(backend))[3].energy_kJmol


def conjugation_butadiene(backend):
    e = functools.partial(minimum_energy_kJmol, backend=backend)
    return 2 * e("C=CCC") - e("C=CC=C") - e("CCCC")


def conjugation_pentadiene(backend):
    e = functools.partial(minimum_energy_kJmol, backend=backend)
    return e("C=CCCC") + e("C/C=C/CC") - e("C/C=C/C=C") - e("CCCCC")


@functools.lru_cache(maxsize=4)
def homo_vs_ie(backend):
    """Pearson r and Spearman rho of -HOMO (GFN2-xTB) against the ionisation energies."""
    st = default_settings(backend)
    ie = [v for v, _ in IONISATION_ENERGIES_EV.values()]
    homo = [-compute_structure(s, st)["sites"][0]["homo_eV"] for s in IONISATION_ENERGIES_EV]
    return float(stats.pearsonr(ie, homo).statistic), float(stats.spearmanr(ie, homo).statistic)


def backend_agreement(smiles_list, accuracy: float = 0.01) -> tuple[float, float]:
    """Largest |E| (Hartree) and |gradient| (Hartree/Bohr) difference between
    xtb-python and tblite single points on MMFF geometries."""
    de = dg = 0.0
    for smi in smiles_list:
        m = Chem.AddHs(Chem.MolFromSmiles(smi))
        if AllChem.EmbedMolecule(m, randomSeed=1) != 0:
            continue
        AllChem.MMFFOptimizeMolecule(m)
        numbers = [a.GetAtomicNum() for a in m.GetAtoms()]
        pos = m.GetConformer().GetPositions()
        a = Molecule(numbers, BackendSettings("xtb-python", accuracy=accuracy)).singlepoint(pos)
        b = Molecule(numbers, BackendSettings("tblite", accuracy=accuracy)).singlepoint(pos)
        de = max(de, abs(a.energy_eV - b.energy_eV) / HARTREE_EV)
        dg = max(dg, float(np.abs(a.forces_eV_A - b.forces_eV_A).max()) / HARTREE_EV * BOHR_ANGSTROM)
    return de, dg


def demo_structures() -> list[str]:
    from .library import Limits, read_library
    recs = read_library(Path(__file__).resolve().parent.parent / "config" / "demo_library.csv", Limits())
    return sorted({i.smiles for r in recs for i in r.isomers})


@functools.lru_cache(maxsize=1)
def _agreement():
    return backend_agreement(demo_structures())


@functools.lru_cache(maxsize=16)
def located_ts(smiles: str, dienophile: str, backend: str) -> dict:
    """The verified transition structure of a diene's lowest site with a dienophile,
    with the site's s-cis penalty added (kJ/mol)."""
    from .pipeline import backend_settings, compute_dienophile
    from .transition import transition_states_for_structure
    config = cfg.load(CONFIG_PATH, fallback=False)
    st = default_settings(backend)
    res = compute_structure(smiles, st)
    ts = transition_states_for_structure(res, compute_dienophile(dienophile, st), backend_settings(st),
                                         config["transition_state"])
    label, site = min(((k, v) for k, v in ts["sites"].items() if v.get("status") == "ok"),
                      key=lambda kv: kv[1]["barrier_kJmol"])
    penalty = next(s["scis_penalty_kJmol"] for s in res["sites"] if s["label"] == label)
    return site | {"scis_penalty_kJmol": penalty}


def _face_gap(smiles: str, dienophile: str, backend: str) -> float:
    """Lowest exo saddle minus lowest endo saddle (kJ/mol) of a diene's best site."""
    site = located_ts(smiles, dienophile, backend)
    best = {}
    for a in site.get("approaches", []):
        if a.get("usable", True) and a.get("saddle_converged"):
            face = a["approach"].split(",")[0]
            best[face] = min(best.get(face, np.inf), a["saddle_kJmol"])
    return float(best.get("exo", np.nan) - best.get("endo", np.nan))


MALEIC_ANHYDRIDE = "O=C1OC(=O)C=C1"
ETHYLENE = "C=C"
def _measured_activation_enthalpy(record_id: str) -> tuple[float, str]:
    """Ea - 2RT at the middle of the measured range (bimolecular gas reaction, transition-state
    theory) of one row of the gas-phase kinetics file, with its citation."""
    import csv
    from .units import rt_kjmol
    with open(GAS_KINETICS_PATH, newline="", encoding="utf-8") as fh:
        row = next(r for r in csv.DictReader(fh) if r["record_id"] == record_id)
    t_mid = 0.5 * (float(row["Tmin_K"]) + float(row["Tmax_K"]))
    return (float(row["Ea_kJmol"]) - 2.0 * rt_kjmol(t_mid),
            f"measured Ea {row['Ea_kJmol']} kJ/mol, {row['Tmin_K']}-{row['Tmax_K']} K, less 2RT at "
            f"{t_mid:.0f} K ({row['citation']}; {row['compiled_in']})")


CHD_ETHYLENE_DH_KJMOL, CHD_ETHYLENE_SOURCE = _measured_activation_enthalpy("G10")

# butadiene planar s-cis above s-trans: gauche above s-trans 12 kJ/mol (rotational spectroscopy)
# plus planar s-cis above gauche 0.4-0.8 kcal/mol (ab initio: SZALAY_SOURCE), i.e. about 14.5 kJ/mol
SZALAY_SOURCE = ("Szalay, Lischka, Karpfen, 'Relative stabilities of the s-cis and gauche structures of "
                 "1,3-butadiene': SCF 0.8, ACPF 0.4 kcal/mol (computed; read from the abstract)")
SCIS_ABOVE_STRANS_KJMOL = 12.0 + 0.6 * 4.184


def checks(backend: str = "xtb-python") -> list[Check]:
    """Checks of the GFN2-xTB level (run by the tests on every backend)."""
    b = backend
    return [
        Check("butadiene gauche above s-trans", "kJ/mol", 12.0,
              "Martin-Drumel et al., ISMS 2019, doi:10.15278/isms.2019.TJ01 (conference abstract on the "
              "gas-phase spectra, read; no journal value was at hand)", 4.0,
              lambda _: butadiene_gauche(b)[1],
              why="a third of GFN2-xTB's 11 kJ/mol mean error on conformer energies (TMCONF40, "
                  "Bursch et al., PCCP 2021): a broken torsion treatment leaves it"),
        Check("butadiene gauche dihedral", "deg", 34.0,
              "Baraban et al., Angew. Chem. Int. Ed. 2018, 57, 1821", 0.0,
              lambda _: butadiene_gauche(b)[0], kind="known",
              why="known error, not tested: GFN2-xTB's gauche well is flat and lies too near planar; "
                  "the s-cis penalty uses energies, which the rows above and below check"),
        Check("butadiene s-trans -> gauche barrier", "kJ/mol", 25.4,
              "Bock, George, Trachtman, Theor. Chim. Acta 1984, 64, 293 (computed)", 5.0,
              lambda _: _barrier(b)[1],
              why="20 % of the barrier: the reference is itself computed; an error this size changes "
                  "no s-cis penalty by more than about 2 kJ/mol"),
        Check("butadiene barrier position from s-cis", "deg", 103.0,
              "Bock, George, Trachtman, Theor. Chim. Acta 1984, 64, 293 (computed)", 15.0,
              lambda _: _barrier(b)[0],
              why="the barrier top is broad (within 1 kJ/mol over about 20 deg)"),
        Check("butadiene torsion profile minimum", "deg", 180.0,
              "s-trans is the global minimum (common practice)", 0.0,
              lambda _: float(butadiene_profile(b)[0][np.argmin(butadiene_profile(b)[1])]),
              why="exact: the scan's lowest point must be s-trans"),
        Check("butadiene planar s-cis above gauche", "kJ/mol", 2.5,
              SZALAY_SOURCE, 0.0,
              lambda _: float(butadiene_profile(b)[1][0]) - butadiene_gauche(b)[1], kind="known",
              why="known error, not tested: GFN2-xTB's flat gauche well puts planar s-cis almost level "
                  "with it, against 1.7-3.3 kJ/mol computed"),
        Check("conjugation, 2 E(1-butene) - E(butadiene) - E(butane)", "kJ/mol", 15.0,
              "heats of hydrogenation of 1-butene and butadiene, -127 and -239 kJ/mol (Kistiakowsky "
              "et al., J. Am. Chem. Soc. 1935-36, as compiled in the NIST Chemistry WebBook; values "
              "from memory)", 5.0,
              lambda _: conjugation_butadiene(b),
              why="a third of the effect; the experimental difference of enthalpies is good to ~2 kJ/mol"),
        Check("conjugation, E(1-pentene) + E((E)-2-pentene) - E((E)-1,3-pentadiene) - E(pentane)",
              "kJ/mol", 15.0,
              "heats of hydrogenation of 1-pentene, (E)-2-pentene, (E)-1,3-pentadiene, -126, -115, "
              "-226 kJ/mol (Kistiakowsky et al. and Dolliver et al., J. Am. Chem. Soc. 1936-37, as "
              "compiled in the NIST Chemistry WebBook; values from memory)", 5.0,
              lambda _: conjugation_pentadiene(b), why="as above"),
        Check("Spearman rho, -HOMO against ionisation energy (butadiene, cyclopentadiene, furan)", "",
              1.0, "NIST Chemistry WebBook ionisation energies 9.07, 8.57, 8.88 eV", 0.0,
              lambda _: homo_vs_ie(b)[1], kind="known",
              why="known error, not tested: GFN2-xTB puts furan's HOMO below butadiene's (furan is "
                  "ionised more easily); the HOMO feature of the model inherits it"),
        Check("cyclopentadiene + maleic anhydride: exo saddle minus endo saddle", "kJ/mol", 0.0,
              "the endo adduct forms faster (Alder's endo rule; common practice)", 0.0,
              lambda _: _face_gap("C1=CCC=C1", MALEIC_ANHYDRIDE, b), kind="min",
              why="only the sign: the endo preference of cyclopentadiene + maleic anhydride is a few "
                  "kJ/mol in solution; a search that mislabels the faces or loses one fails it"),
        Check("barrier, butadiene minus cyclopentadiene (maleic anhydride)", "kJ/mol", 0.0,
              "cyclopentadiene reacts about 1000 times faster (reference set, from memory; "
              "common practice)", 0.0,
              lambda _: located_ts("C=CC=C", MALEIC_ANHYDRIDE, b)["barrier_kJmol"]
              - located_ts("C1=CCC=C1", MALEIC_ANHYDRIDE, b)["barrier_kJmol"], kind="min",
              why="only the sign: GFN2-xTB barriers are for ordering"),
        Check("barrier, furan minus butadiene (maleic anhydride)", "kJ/mol", 0.0,
              "furan adds slowly and reversibly (common practice)", 0.0,
              lambda _: located_ts("c1ccoc1", MALEIC_ANHYDRIDE, b)["barrier_kJmol"]
              - located_ts("C=CC=C", MALEIC_ANHYDRIDE, b)["barrier_kJmol"], kind="min",
              why="only the sign"),
        Check("1,3-cyclohexadiene + ethylene barrier, located saddle", "kJ/mol", CHD_ETHYLENE_DH_KJMOL,
              CHD_ETHYLENE_SOURCE, 0.0,
              lambda _: located_ts("C1=CCCC=C1", ETHYLENE, b)["barrier_kJmol"], kind="known",
              why="known error, not tested: GFN2-xTB barriers are far too low (the model's slope "
                  "absorbs the scale; the refined level is checked against the same measurement)"),
    ]


def level_checks(level) -> list[Check]:
    """Checks of a single-point level (a settings.Level; run by hand: minutes to hours)."""
    key = level
    return [
        Check("butadiene planar s-cis above s-trans (refined)", "kJ/mol", SCIS_ABOVE_STRANS_KJMOL,
              "gauche - s-trans 12 kJ/mol (Martin-Drumel et al., ISMS 2019, doi:10.15278/isms.2019.TJ01) + planar s-cis - gauche "
              "0.4-0.8 kcal/mol (" + SZALAY_SOURCE + ")", 3.0,
              lambda _: level_scis_minus_strans(key),
              why="3 kJ/mol, the combined uncertainty of the two parts (0.8 and 1.7 kJ/mol) doubled"),
        Check("butadiene s-trans -> gauche barrier (refined, on the GFN2-xTB scan)", "kJ/mol", 25.4,
              "Bock, George, Trachtman, Theor. Chim. Acta 1984, 64, 293 (computed)", 5.0,
              lambda _: level_butadiene(key)["barrier"], kind="known",
              why="known error, not tested: single points on the GFN2-xTB scan (geometries not relaxed at thi"
                  "s level) put the barrier top 7 kJ/mol high; no ranked number uses it (the s-cis penalty column stays at GFN2-xTB)"),
        Check("1,3-cyclohexadiene + ethylene barrier (refined)", "kJ/mol", CHD_ETHYLENE_DH_KJMOL,
              CHD_ETHYLENE_SOURCE, 20.0,
              lambda _: level_pair_barrier("C1=CCCC=C1", ETHYLENE, key),
              why="electronic barrier on GFN2-xTB geometries against an activation enthalpy: zero-point "
                  "and thermal terms alone move it by about 10 kJ/mol, and B3LYP barriers run about "
                  "13 kJ/mol high on the gas-phase set (docs/validation.md)"),
        Check("barrier, butadiene minus cyclopentadiene, maleic anhydride (refined)", "kJ/mol",
              3.13 * 5.80, "about three orders of magnitude with maleic anhydride (reference set, from "
              "memory): 3.13 log units x RT ln 10 at 303 K", 8.0,
              lambda _: level_pair_barrier("C=CC=C", MALEIC_ANHYDRIDE, key)
              - level_pair_barrier("C1=CCC=C1", MALEIC_ANHYDRIDE, key),
              why="about 1.4 log units: the from-memory reference is sure of the order of magnitude"),
    ]


def _any_backend() -> str:
    from .backends import available
    return "xtb-python" if available("xtb-python") else "tblite"


@functools.lru_cache(maxsize=4)
def level_scis_minus_strans(level) -> float:
    """Planar s-cis minus s-trans butadiene (kJ/mol) at a level (a settings.Level): single points on
    the two ends of the GFN2-xTB scan (two single points: cheap enough for every test run)."""
    energies = level.energy_backend()
    _, numbers = _butadiene()
    _, _, geometries = butadiene_scan(_any_backend())
    return float(energies.energy(numbers, geometries[0]).energy_kJmol
                 - energies.energy(numbers, geometries[-1]).energy_kJmol)


@functools.lru_cache(maxsize=4)
def level_butadiene(level) -> dict:
    """Single points at a level (a settings.Level) on the GFN2-xTB butadiene scan (kJ/mol)."""
    level = level.energy_backend()
    _, numbers = _butadiene()
    _, _, geometries = butadiene_scan(_any_backend())
    e = np.array([level.energy(numbers, g).energy_kJmol for g in geometries])
    k = int(np.argmax(e[3:-3])) + 3          # the barrier between gauche and s-trans
    return {"barrier": float(e[k] - e[-1])}


@functools.lru_cache(maxsize=8)
def level_pair_barrier(smiles: str, dienophile: str, level) -> float:
    """Electronic barrier (kJ/mol) at a level (a settings.Level) of a diene with a dienophile on
    the project's own GFN2-xTB structures."""
    from .pipeline import backend_settings, compute_dienophile
    from .singlepoints import price_dienophile, price_pair, price_structure
    from .transition import transition_states_for_structure
    name, level = level.name, level.energy_backend()
    st = default_settings(_any_backend())
    res = compute_structure(smiles, st)
    dph = compute_dienophile(dienophile, st)
    ts = transition_states_for_structure(res, dph, backend_settings(st), cfg.load(CONFIG_PATH, fallback=False)["transition_state"])
    out = price_pair(price_structure(res, level), ts, price_dienophile(dph, level), level)
    ok = [s["electronic_barrier_kJmol"] for s in out["sites"].values() if s["status"] == "ok"]
    if out["status"] != "ok" or not ok:
        raise RuntimeError(f"{smiles} at {name}: {out['status']}: {out['message']}")
    return float(min(ok))


def demo_agreement(results_dir, level: str, other: str) -> list[tuple[str, float]]:
    """Another ranking level against the ranking level over a finished run's rows ranked at
    `level`: how many, Spearman of the two barrier orders and of the two rankings, largest
    rank change (level and other are level names, e.g. dft and gfn2)."""
    import pandas as pd
    t = pd.read_csv(Path(results_dir) / "ranking.csv")
    t = t[(t["level"] == level) & t["rank"].notna() & t[f"{other}_rank"].notna()]
    rho = stats.spearmanr(t[f"{other}_barrier_kJmol"], t["barrier_kJmol"]).statistic
    rho_rank = stats.spearmanr(t["rank"], t[f"{other}_rank"]).statistic
    return [(f"rows ranked at {level}", float(len(t))),
            (f"Spearman rho, {other} barrier order against {level}", float(rho)),
            (f"Spearman rho, {other} ranking against the {level} ranking", float(rho_rank)),
            ("largest rank change between the levels", float((t["rank"] - t[f"{other}_rank"]).abs().max()))]


def backend_checks() -> list[Check]:
    return [
        Check("tblite vs xtb-python, max abs(dE) over the demo dienes", "Hartree", 0.0,
              "independent GFN2-xTB implementations (tblite 0.4+, xtb 22.1)", 1e-6,
              lambda _: _agreement()[0], kind="max",
              why="1e-6 Hartree = 0.003 kJ/mol: far below any energy difference the pipeline reports"),
        Check("tblite vs xtb-python, max abs(gradient difference) over the demo dienes", "Hartree/Bohr", 0.0,
              "as above (SCF accuracy 0.01; at the default 1.0 the SCF tolerance allows ~1e-5)", 1e-6,
              lambda _: _agreement()[1], kind="max",
              why="well below the optimiser's force threshold (0.01 eV/A = 2e-4 Hartree/Bohr)"),
    ]


def run_all(backend: str = "xtb-python") -> list[tuple[Check, float]]:
    return [(c, float(c.observe({}))) for c in checks(backend) + backend_checks()]


def run_level(level) -> list[tuple[Check, float]]:
    return [(c, float(c.observe({}))) for c in level_checks(level)]


def _fmt(x: float) -> str:
    if x != 0 and (abs(x) < 1e-3 or abs(x) >= 1e5):
        return f"{x:.2e}"
    return f"{x:.2f}"


def _verdict(c: Check, observed: float) -> str:
    if c.kind == "known":
        return "known error"
    return "yes" if c.passes(observed) else "NO"


def table(rows: list[tuple[Check, float]]) -> str:
    lines = ["| check | reference | source | observed | tolerance | why this tolerance | error | pass |",
             "|---|---|---|---|---|---|---|---|"]
    for c, obs in rows:
        err = obs - c.reference
        lines.append(f"| {c.name} | {_fmt(c.reference)} {c.unit} | {c.source} | {_fmt(obs)} | "
                     f"{c.tolerance_text()} | {c.why} | {_fmt(err)} | {_verdict(c, obs)} |")
    return "\n".join(lines)


BEGIN_MARK = "<!-- generated by python -m dienes.validation: begin -->"
END_MARK = "<!-- generated by python -m dienes.validation: end -->"
TITLE = "# Validation against outside references\n\n"
HEADER = """## GFN2-xTB (the catalogue level)

Generated by `python -m dienes.validation` (this block only: the sections outside it are written
by hand and kept as they are). The table uses the default config (xtb-python backend, gas phase)
and `tests/test_validation.py` checks, on both backends, that every tested row still passes and that
the table still matches the code. Energies are electronic energies (no zero-point or thermal terms).
A row marked "known error" is something the fast level gets wrong: it is reported with its error,
not tested against a tolerance widened to let it pass.

"""
REFINED_HEADER = """

### The refined level on the project's own structures

Regenerated by hand with `python -m dienes.validation --refined` (slow: minutes to an hour on
2 cores). The tests check this table against the code (level, checks, references, tolerances,
verdicts) and recompute three of its rows at the shipped level: the s-cis penalty
(tests/test_validation.py), butadiene minus cyclopentadiene and cyclohexadiene + ethylene on
stored GFN2-xTB structures (tests/test_known_orders.py, tests/test_gas_kinetics.py); the scan's
barrier top is recomputed only by hand.

"""


def generated_block(text: str) -> str:
    """The generated part of a validation document ('' when it has none)."""
    if BEGIN_MARK not in text or END_MARK not in text:
        return ""
    return text[text.index(BEGIN_MARK) + len(BEGIN_MARK):text.index(END_MARK)]


def refined_table(text: str | None = None) -> tuple[str, dict[str, list[str]]]:
    """The refined-level table of a validation document (default: docs/validation.md): the label
    of its level and its rows (the table's eight cells) by check name."""
    block = generated_block(DOC_PATH.read_text() if text is None else text)
    head = REFINED_HEADER.strip().splitlines()[0]
    if head not in block:
        raise ValueError("no refined-level table: run python -m dienes.validation --refined")
    text = block.split(head)[1]
    label = re.search(r"^Level: (.+)$", text, re.M).group(1).strip()
    rows = {}
    for line in text.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 8 and cells[0] not in ("check", "---"):
            rows[cells[0]] = cells
    return label, rows


def replace_generated(old: str, block: str) -> str:
    """`old` with its generated block replaced by `block`; the hand-written rest kept as is
    (a document without a block gets one after its title)."""
    wrapped = f"{BEGIN_MARK}\n{block.strip()}\n{END_MARK}"
    if BEGIN_MARK in old and END_MARK in old:
        return old[:old.index(BEGIN_MARK)] + wrapped + old[old.index(END_MARK) + len(END_MARK):]
    rest = old[len(TITLE):] if old.startswith(TITLE) else old
    return TITLE + wrapped + ("\n\n" + rest.strip() + "\n" if rest.strip() else "\n")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--write", default=str(DOC_PATH))
    ap.add_argument("--refined", action="store_true",
                    help="also run the checks of the first ranking level of the default config (slow)")
    ap.add_argument("--refined-results", default=None,
                    help="results/ of a run ranked at that level: the GFN2-xTB level against it")
    args = ap.parse_args(argv)
    old = Path(args.write).read_text() if Path(args.write).is_file() else ""
    block = HEADER + table(run_all()) + "\n"
    if args.refined:
        settings = cfg.load(CONFIG_PATH, fallback=False)
        level = settings.priced_levels[0]
        block += (REFINED_HEADER + f"Level: {level.label()}\n\n" + table(run_level(level)) + "\n")
        if args.refined_results:
            block += (f"\n{settings.placing.name} against {level.name} over the rows of "
                      f"`{Path(args.refined_results).name}`:\n\n| quantity | value |\n|---|---|\n"
                      + "".join(f"| {k} | {_fmt(v)} |\n"
                                for k, v in demo_agreement(args.refined_results, level.name, settings.placing.name)))
    else:
        kept = generated_block(old)
        if REFINED_HEADER.strip().splitlines()[0] in kept:     # keep the last refined-level table
            block += kept[kept.index(REFINED_HEADER.strip().splitlines()[0]) - 1:]
    text = replace_generated(old, block)
    Path(args.write).parent.mkdir(parents=True, exist_ok=True)
    Path(args.write).write_text(text)
    print(text)


if __name__ == "__main__":
    main()
