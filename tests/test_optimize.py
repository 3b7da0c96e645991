"""The optimiser on toy analytic potentials (no electronic structure)."""
import numpy as np
import pytest

from dienes.optimize import constrained_dihedral_path, dihedral_deg, optimize


def harmonic(centre, k=5.0):
    def ef(pos):
        d = pos - centre
        return 0.5 * k * float(np.sum(d * d)), -k * d
    return ef


def test_free_minimisation_reaches_the_minimum():
    centre = np.array([[0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [2.0, 1.4, 0.0], [3.5, 1.4, 0.3]])
    start = centre + np.random.default_rng(0).normal(scale=0.2, size=centre.shape)
    r = optimize([6, 6, 6, 6], start, harmonic(centre), fmax_eV_A=1e-4)
    assert r.converged and r.n_gradients > 0
    np.testing.assert_allclose(r.positions_A, centre, atol=1e-4)


def test_dihedral_constraint_is_held():
    # minimum at a ~ -170 deg dihedral; hold it at 0 (planar cis) and at 60 deg
    centre = np.array([[0.0, 1.2, 0.0], [0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [1.5, -1.2, 0.2]])
    for target in (0.0, 60.0):
        start = centre.copy()
        r, n = constrained_dihedral_path([6, 6, 6, 6], start, harmonic(centre), (0, 1, 2, 3), target)
        assert dihedral_deg(r.positions_A, (0, 1, 2, 3)) == pytest.approx(target, abs=1e-3)
        assert n > 0


def test_dihedral_sign_convention():
    p = np.array([[1.0, 0, 0], [0, 0, 0], [0, 0, 1.0], [1.0, 0, 1.0]])
    assert dihedral_deg(p, (0, 1, 2, 3)) == pytest.approx(0.0)
    p[3] = [-1.0, 0, 1.0]
    assert abs(dihedral_deg(p, (0, 1, 2, 3))) == pytest.approx(180.0)
    p[3] = [0, 1.0, 1.0]
    assert dihedral_deg(p, (0, 1, 2, 3)) == pytest.approx(90.0)
