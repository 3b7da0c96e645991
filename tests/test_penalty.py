"""The planar s-cis analysis on real dienes with GFN2-xTB (slow)."""
import pytest

from dienes.pipeline import compute_structure

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


def test_butadiene_penalty_in_range(backend_settings):
    # planar s-cis above s-trans: gauche 12 kJ/mol above s-trans (Martin-Drumel et al., ISMS 2019,
    # rotational spectroscopy) plus 0.4-0.8 kcal/mol for planar over gauche (ab initio): 14-15 kJ/mol.
    # GFN2-xTB underestimates conformer energies (docs/validation.md: gauche -3 kJ/mol); 6-16 allows
    # that and catches a planar search that failed (0) or found a broken structure (far above)
    s = site("C=CC=C", backend_settings)
    assert 6.0 <= s["scis_penalty_kJmol"] <= 16.0
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
    # 2-tert-butylbutadiene: the planar s-cis is a flat top between two gauche wells; an
    # exhaustive search (benchmarks/conformer_protocol.py) puts the gauche 3.0 kJ/mol below it.
    # A search that stops at the planar top reports 0 here
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
