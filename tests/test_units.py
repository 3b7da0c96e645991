import math

import numpy as np
import pytest

from dienes import units


def test_codata_conversions():
    # CODATA 2018: 1 Hartree = 27.211386245988 eV = 2625.4996394799 kJ/mol; 1 Bohr = 0.529177210903 A
    assert units.hartree_to_ev(1.0) == pytest.approx(27.211386245988, rel=1e-12)
    assert units.hartree_to_kjmol(1.0) == pytest.approx(2625.4996394799, rel=1e-12)
    assert units.EV_KJMOL == pytest.approx(96.485332, rel=1e-7)  # CODATA 2018 eV -> kJ/mol
    assert units.bohr_to_angstrom(units.angstrom_to_bohr(1.7)) == pytest.approx(1.7, rel=1e-14)
    assert units.angstrom_to_bohr(0.529177210903) == pytest.approx(1.0, rel=1e-14)


def test_gradient_to_forces_sign_and_scale():
    g = np.array([[0.01, -0.02, 0.0]])  # Hartree/Bohr
    f = units.gradient_to_forces_ev_angstrom(g)
    assert f[0, 0] == pytest.approx(-0.01 * 27.211386245988 / 0.529177210903, rel=1e-12)
    assert f[0, 1] > 0


def test_penalty_slope_at_298K():
    # science notes: at 298 K, 1 kJ/mol of penalty costs 0.175 log10 units (1 / (R T ln 10))
    assert units.log10_units_per_kjmol(298.15) == pytest.approx(0.1752, abs=5e-4)


def test_eyring_prefactor():
    # kB T / h at 298.15 K = 6.2124e12 1/s (CODATA constants; textbook value)
    assert units.eyring_log10_k(0.0, 298.15) == pytest.approx(math.log10(6.2124e12), abs=1e-4)
    assert units.eyring_log10_k(10.0, 298.15) == pytest.approx(math.log10(6.2124e12) - 1.752, abs=2e-3)
