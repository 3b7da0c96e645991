"""The planar s-cis analysis on real dienes with GFN2-xTB (slow)."""
import pytest

from dienes.pipeline import compute_structure
from dienes.units import EV_KJMOL

from .conftest import ase_calculator

pytestmark = pytest.mark.slow

_CACHE = {}


def result(smiles, settings):
    key = (smiles, settings["backend"])
    if key not in _CACHE:
        _CACHE[key] = compute_structure(smiles, settings)
    return _CACHE[key]


def site(smiles, settings):
    r = result(smiles, settings)
    assert r["status"] in ("ok", "locked_s_trans"), r["message"]
    return r["sites"][0]


def test_butadiene_penalty_matches_an_independent_constrained_optimisation(backend_settings):
    # the pipeline's planar s-cis search (conformers, its own optimiser and dihedral restraint)
    # against a route that shares none of its code: RDKit builds butadiene, the GFN2-xTB library's
    # own ASE calculator gives energies, ASE's BFGS relaxes s-trans freely and planar s-cis with
    # ASE's FixInternals holding the C=C-C=C dihedral at 0. How far GFN2-xTB itself lies from the
    # measured 12 kJ/mol gauche gap is a known error in docs/validation.md, not asserted here
    from ase import Atoms
    from ase.constraints import FixInternals
    from ase.optimize import BFGS
    from rdkit import Chem
    from rdkit.Chem import AllChem

    mol = Chem.AddHs(Chem.MolFromSmiles("C=CC=C"))
    AllChem.EmbedMolecule(mol, randomSeed=7)
    atoms = Atoms([a.GetSymbol() for a in mol.GetAtoms()], positions=mol.GetConformer().GetPositions())
    atoms.calc = ase_calculator(backend_settings["backend"])
    # the atoms on C3's side of the C2-C3 bond move when the dihedral is set
    moving = {2}
    while True:
        more = {n.GetIdx() for i in moving for n in mol.GetAtomWithIdx(i).GetNeighbors()} - {1} - moving
        if not more:
            break
        moving |= more
    energies = {}
    for name, angle in (("s-trans", 180.0), ("planar s-cis", 0.0)):
        atoms.set_constraint()
        atoms.set_dihedral(0, 1, 2, 3, angle, indices=sorted(moving))
        if name == "planar s-cis":
            atoms.set_constraint(FixInternals(dihedrals_deg=[[0.0, [0, 1, 2, 3]]]))
        BFGS(atoms, logfile=None).run(fmax=0.005, steps=500)
        energies[name] = atoms.get_potential_energy() * EV_KJMOL
    independent = energies["planar s-cis"] - energies["s-trans"]
    s = site("C=CC=C", backend_settings)
    assert s["scis_penalty_kJmol"] == pytest.approx(independent, abs=0.5)
    assert abs(s["dihedral_min_deg"]) == pytest.approx(180.0, abs=5.0)  # s-trans global minimum


def test_cyclopentadiene_is_locked_s_cis(backend_settings):
    s = site("C1=CCC=C1", backend_settings)
    assert s["kind"] == "ring_s_cis"
    # the optimised ring holds the diene planar s-cis (geometry): the dihedral is measured on
    # the GFN2-xTB minimum, not set from the site's kind
    assert abs(s["dihedral_min_deg"]) < 2.0


def test_z_pentadiene_pays_more_than_e(backend_settings):
    # (Z)-1,3-pentadiene is the slow isomer: its 1-methyl points into the s-cis diene (common practice)
    e = site("C/C=C/C=C", backend_settings)["scis_penalty_kJmol"]
    z = site("C/C=C\\C=C", backend_settings)["scis_penalty_kJmol"]
    assert z > e + 2.0


def test_locked_s_trans_is_flagged(backend_settings):
    r = result("C=C1CCCC=C1", backend_settings)  # 3-methylenecyclohexene
    assert r["status"] == "locked_s_trans"
    assert r["sites"][0]["scis_penalty_kJmol"] is None


def test_ring_that_lets_the_diene_twist(backend_settings):
    # 1,2-dimethylenecyclohexane twists its exocyclic diene away from 0 deg at the minimum
    s = site("C=C1CCCCC1=C", backend_settings)
    assert s["kind"] == "ring_other" and s["status"] == "ok"
    assert abs(s["dihedral_min_deg"]) > 20.0
    assert s["scis_penalty_kJmol"] > 0.0


def test_planar_release_finds_the_gauche_well(backend_settings):
    # 2-tert-butylbutadiene: the planar s-cis is a flat top between two gauche wells. Regression
    # check, no outside value: 3.0 kJ/mol is what this project's dense search
    # (benchmarks/conformer_protocol.py) gave at GFN2-xTB. A search that stops at the planar top
    # reports 0 here
    s = site("C=CC(=C)C(C)(C)C", backend_settings)
    assert s["scis_penalty_kJmol"] == pytest.approx(3.0, abs=1.0)
    assert 20.0 < abs(s["dihedral_min_deg"]) < 60.0


def test_di_tert_butyl_cannot_planarise(backend_settings):
    # 2,3-di-tert-butylbutadiene does not react (common practice): a huge planar s-cis penalty
    s = site("C=C(C(C)(C)C)C(=C)C(C)(C)C", backend_settings)
    assert s["scis_penalty_kJmol"] > 60.0


def test_same_input_same_numbers(backend_settings):
    a = compute_structure("C/C=C/C=C", backend_settings)
    b = compute_structure("C/C=C/C=C", backend_settings)
    assert a["sites"] == b["sites"]
    assert a["energy_min_kJmol"] == b["energy_min_kJmol"]
