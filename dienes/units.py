"""Physical constants and unit conversions: the one place they live.

Atomic units (Bohr, Hartree) appear only at the electronic-structure boundary
(:mod:`dienes.backends`); everything above it works in Angstrom, eV and kJ/mol.
Values are CODATA 2018.
"""

from __future__ import annotations

import math

import numpy as np

BOHR_ANGSTROM = 0.529177210903          # 1 Bohr in Angstrom
HARTREE_EV = 27.211386245988            # 1 Hartree in eV
HARTREE_KJMOL = 2625.4996394799         # 1 Hartree in kJ/mol
EV_KJMOL = HARTREE_KJMOL / HARTREE_EV   # 1 eV in kJ/mol (96.485...)
KCALMOL_KJMOL = 4.184                   # thermochemical calorie

GAS_CONSTANT_KJMOL_K = 8.314462618e-3   # R in kJ/(mol K)
BOLTZMANN_J_K = 1.380649e-23            # kB in J/K
PLANCK_J_S = 6.62607015e-34             # h in J s
ELECTRONVOLT_J = 1.602176634e-19        # 1 eV in J
ATOMIC_MASS_KG = 1.66053906660e-27      # 1 Dalton (amu) in kg
SPEED_OF_LIGHT_CM_S = 2.99792458e10     # c in cm/s
AVOGADRO_PER_MOL = 6.02214076e23        # N_A in 1/mol


def angstrom_to_bohr(x_angstrom):
    """Lengths (Angstrom) -> (Bohr)."""
    return x_angstrom / BOHR_ANGSTROM


def bohr_to_angstrom(x_bohr):
    """Lengths (Bohr) -> (Angstrom)."""
    return x_bohr * BOHR_ANGSTROM


def hartree_to_kjmol(e_hartree):
    """Energies (Hartree) -> (kJ/mol)."""
    return e_hartree * HARTREE_KJMOL


def hartree_to_ev(e_hartree):
    """Energies (Hartree) -> (eV)."""
    return e_hartree * HARTREE_EV


def gradient_to_forces_ev_angstrom(gradient_hartree_bohr):
    """Energy gradient (Hartree/Bohr) -> forces (eV/Angstrom), sign flipped."""
    return -gradient_hartree_bohr * HARTREE_EV / BOHR_ANGSTROM


def hessian_eigenvalue_to_wavenumber_cm1(eigenvalues_eV_A2_amu):
    """Mass-weighted Hessian eigenvalues (eV / (Angstrom^2 amu)) -> harmonic
    wavenumbers (cm^-1); a negative eigenvalue gives a negative (imaginary) wavenumber.

    nu = sqrt(lambda) / (2 pi c); 1 eV/(A^2 amu) is 521.47 cm^-1 squared.
    """
    lam = np.asarray(eigenvalues_eV_A2_amu, dtype=float)
    omega_s = np.sqrt(np.abs(lam) * ELECTRONVOLT_J / (1e-20 * ATOMIC_MASS_KG))
    return np.sign(lam) * omega_s / (2.0 * math.pi * SPEED_OF_LIGHT_CM_S)


def rt_kjmol(temperature_K: float) -> float:
    """R T (kJ/mol) at temperature (K)."""
    return GAS_CONSTANT_KJMOL_K * temperature_K


def log10_units_per_kjmol(temperature_K: float) -> float:
    """Slope of log10 k against a free-energy penalty: 1 / (R T ln 10) (per kJ/mol).

    0.1752 per kJ/mol at 298.15 K.
    """
    return 1.0 / (rt_kjmol(temperature_K) * math.log(10.0))


def eyring_log10_k(dg_kjmol: float, temperature_K: float) -> float:
    """log10 of the Eyring rate constant k = (kB T / h) exp(-dG / RT) (k in 1/s)."""
    prefactor = BOLTZMANN_J_K * temperature_K / PLANCK_J_S
    return math.log10(prefactor) - dg_kjmol * log10_units_per_kjmol(temperature_K)
