"""Activation-strain descriptor (model transition structure)."""
import numpy as np
import pytest

from dienes.pipeline import backend_settings, compute_dienophile, compute_structure
from dienes.strain import place_dienophile, strain_for_structure


def test_placement_puts_the_forming_bonds_at_length():
    # planar s-cis butadiene carbons and an ethylene C=C (Angstrom)
    diene = np.array([[-1.45, 1.25, 0.0], [-0.73, 0.0, 0.0], [0.73, 0.0, 0.0], [1.45, 1.25, 0.0]])
    dph = np.array([[-0.67, 0.0, 0.0], [0.67, 0.0, 0.0], [-1.2, 0.9, 0.0], [-1.2, -0.9, 0.0],
                    [1.2, 0.9, 0.0], [1.2, -0.9, 0.0]])
    for swap in (False, True):
        placed = place_dienophile(diene, (0, 1, 2, 3), dph, (0, 1), forming_bond_A=2.25,
                                  endo=True, swap=swap)
        a, b = (1, 0) if swap else (0, 1)
        assert np.linalg.norm(placed[a] - diene[0]) == pytest.approx(2.25, abs=1e-6)
        assert np.linalg.norm(placed[b] - diene[3]) == pytest.approx(2.25, abs=1e-6)
        # rigid placement: the dienophile's own geometry is unchanged
        assert np.linalg.norm(placed[0] - placed[1]) == pytest.approx(1.34, abs=1e-6)
        assert placed[:, 2].min() > 1.0  # above the diene plane, not in it


@pytest.fixture(scope="module")
def ethylene(backend_settings):
    return compute_dienophile("C=C", backend_settings)


def _strain(smiles, settings, dph):
    res = compute_structure(smiles, settings)
    out = strain_for_structure(res, dph, backend_settings(settings), 2.25)
    return next(iter(out["sites"].values())), res


@pytest.mark.slow
def test_cyclopentadiene_distorts_less_than_cyclohexadiene(backend_settings, ethylene):
    # trend reported by Levandowski and Houk, J. Org. Chem. 2015, 80, 3530 (cited as remembered);
    # GFN2-xTB here: 40 vs 60 kJ/mol with ethylene at 2.25 A
    cpd, _ = _strain("C1=CCC=C1", backend_settings, ethylene)
    chd, _ = _strain("C1=CCCC=C1", backend_settings, ethylene)
    assert cpd["distortion_kJmol"] < chd["distortion_kJmol"] - 10.0
    assert cpd["model_barrier_kJmol"] < chd["model_barrier_kJmol"]


@pytest.mark.slow
def test_inside_substituent_is_seen(backend_settings, ethylene):
    # (Z)-1,3-pentadiene's 1-methyl sits inside the diene: more distortion than (E) (common practice)
    e, _ = _strain("C/C=C/C=C", backend_settings, ethylene)
    z, _ = _strain("C/C=C\\C=C", backend_settings, ethylene)
    assert z["distortion_kJmol"] > e["distortion_kJmol"] + 5.0


@pytest.mark.slow
def test_butadiene_ethylene_barrier_below_the_high_level_value(backend_settings, ethylene):
    # RMG kinetics database, CCSD(T)-F12//wB97X-D3 Arrhenius fit: Ea about 92 kJ/mol.
    # GFN2-xTB is known to underestimate barriers; a fixed-bond model TS from the s-trans
    # minimum gives about 29 kJ/mol here (observed error about -63 kJ/mol).
    s, res = _strain("C=CC=C", backend_settings, ethylene)
    from_s_trans = s["model_barrier_kJmol"] + res["sites"][0]["scis_penalty_kJmol"]
    assert 10.0 < from_s_trans < 92.0
    assert s["distortion_kJmol"] > 0 and s["interaction_kJmol"] < 0
