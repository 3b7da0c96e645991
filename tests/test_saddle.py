"""Saddle-point tools on analytic potentials (fast) and the located Diels-Alder
transition structure on GFN2-xTB (slow)."""
import math

import numpy as np
import pytest

from dienes import saddle
from dienes.units import ATOMIC_MASS_KG, ELECTRONVOLT_J, SPEED_OF_LIGHT_CM_S


def spring(k_eV_A2: float, r0: float = 0.74):
    """Energy/forces of a diatomic with a harmonic bond (eV, eV/Angstrom)."""
    def ef(x):
        d = x[1] - x[0]
        r = np.linalg.norm(d)
        e = 0.5 * k_eV_A2 * (r - r0) ** 2
        f1 = -k_eV_A2 * (r - r0) * d / r
        return e, np.array([-f1, f1])
    return ef


def test_diatomic_frequency_matches_the_harmonic_formula():
    # nu = sqrt(k / mu) / (2 pi c): the harmonic oscillator (textbook; common practice)
    k = 36.0  # eV/A^2, about the H2 force constant
    x = np.array([[0.0, 0.0, 0.0], [0.74, 0.0, 0.0]])
    masses = [1.008, 1.008]
    h, n = saddle.hessian(x, spring(k))
    vib = saddle.vibrations(h, x, masses, n)
    mu_kg = 0.5 * 1.008 * ATOMIC_MASS_KG
    expected = math.sqrt(k * ELECTRONVOLT_J * 1e20 / mu_kg) / (2 * math.pi * SPEED_OF_LIGHT_CM_S)
    assert len(vib.frequencies_cm1) == 1            # 3n - 5 for a linear molecule
    assert vib.frequencies_cm1[0] == pytest.approx(expected, rel=1e-3)
    assert n == 12                                  # 2 x 3n gradient calls


def test_hessian_recovers_an_analytic_quadratic():
    rng = np.random.default_rng(4)
    a = rng.normal(size=(6, 6))
    H = a @ a.T

    def ef(x):
        v = x.ravel()
        return 0.5 * v @ H @ v, -(H @ v).reshape(x.shape)

    h, _ = saddle.hessian(np.zeros((2, 3)), ef)
    assert np.allclose(h, H, atol=1e-8)


def test_imaginary_mode_of_a_double_well():
    # V = -a x^2 + b x^4 along the bond: the midpoint is a first-order saddle with
    # curvature -2a, so its wavenumber is -sqrt(2a / mu) / (2 pi c)
    a, b = 2.0, 1.0

    def ef(x):
        d = x[1] - x[0]
        r = np.linalg.norm(d)
        q = r - 1.0
        e = -a * q ** 2 + b * q ** 4
        dE = -2 * a * q + 4 * b * q ** 3
        f1 = -dE * d / r
        return e, np.array([-f1, f1])

    x = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0]])
    vib = saddle.analyse_vibrations([6, 6], x, ef)
    mu_kg = 0.5 * 12.011 * ATOMIC_MASS_KG
    expected = -math.sqrt(2 * a * ELECTRONVOLT_J * 1e20 / mu_kg) / (2 * math.pi * SPEED_OF_LIGHT_CM_S)
    assert vib.frequencies_cm1[0] == pytest.approx(expected, rel=1e-3)
    assert list(vib.imaginary(50.0)) == [0]
    # the mode stretches the bond: +1 per unit displacement (both atoms move apart)
    assert abs(saddle.bond_change_along(vib.modes_A[0], x, 0, 1)) == pytest.approx(math.sqrt(2), rel=1e-6)
