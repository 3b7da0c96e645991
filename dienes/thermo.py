"""Ideal-gas thermochemistry from harmonic frequencies, with low modes treated
quasi-rigid-rotor style.

A barrier measured as an electronic energy leaves out what a flexible diene
loses on the way to the transition structure: soft torsions that become stiff
ring modes, rotors that freeze. This module turns a structure's harmonic
wavenumbers into its thermal correction to the free energy, so that

    dG_barrier = dE_barrier + [G_corr(TS) - G_corr(diene) - G_corr(dienophile)].

Contributions (per mole, ideal gas):

- translation: Sackur-Tetrode entropy in the volume of the standard state
  (1 mol/L by default, the state a bimolecular rate constant in L mol^-1 s^-1
  refers to; '1 bar' gives the gas-phase tables' state), H = 5/2 RT
  (3/2 RT kinetic + RT for pV);
- rotation: rigid rotor from the principal moments, H = 3/2 RT (nonlinear);
- vibration: harmonic ZPE, enthalpy and entropy per mode, with the quasi-RRHO
  interpolation for modes below ``cutoff_cm1``: the entropy of a mode is
  mixed with that of a free rotor of the same moment, weight
  w = 1 / (1 + (cutoff/nu)^4) (Grimme, Chem. Eur. J. 2012, 18, 9955), and its
  enthalpy (ZPE and thermal part) with RT/2 by the same weight (Li, Gomes,
  Head-Gordon and co-workers, J. Phys. Chem. C 2015, 119, 1840). Imaginary
  wavenumbers (a transition structure's reaction mode) are left out.

Electronic degeneracy is 1 (closed shells). The rotational symmetry number
is a parameter (1 by default).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .units import (ATOMIC_MASS_KG, AVOGADRO_PER_MOL, BOLTZMANN_J_K, GAS_CONSTANT_KJMOL_K, PLANCK_J_S,
                    SPEED_OF_LIGHT_CM_S)

QRRHO_CUTOFF_CM1 = 100.0            # quasi-RRHO switching wavenumber (Grimme 2012)
QRRHO_B_AV_KG_M2 = 1.0e-44          # average molecular moment of inertia in the free-rotor limit (Grimme 2012)
STANDARD_STATES = {"1M": None, "1bar": 1.0e5}   # concentration 1 mol/L, or pressure (Pa)


@dataclass
class ThermalCorrection:
    """Thermal corrections of one structure at one temperature (kJ/mol, J/(mol K)).

    zpe_kJmol: zero-point energy; enthalpy_kJmol: H - E_electronic (ZPE included);
    entropy_J_molK: total entropy; free_energy_kJmol: G - E_electronic = H - T S;
    n_low_modes: real modes below the quasi-RRHO cutoff; temperature_K: T."""

    zpe_kJmol: float
    enthalpy_kJmol: float
    entropy_J_molK: float
    free_energy_kJmol: float
    n_low_modes: int
    temperature_K: float


def principal_moments_kg_m2(masses_amu, positions_A) -> np.ndarray:
    """Principal moments of inertia (kg m^2), ascending."""
    m = np.asarray(masses_amu, dtype=float)
    x = np.asarray(positions_A, dtype=float)
    r = x - (m[:, None] * x).sum(axis=0) / m.sum()
    inertia = np.zeros((3, 3))
    for mi, ri in zip(m, r):
        inertia += mi * (np.dot(ri, ri) * np.eye(3) - np.outer(ri, ri))
    return np.linalg.eigvalsh(inertia) * ATOMIC_MASS_KG * 1e-20


def _translational_entropy(mass_kg: float, temperature_K: float, standard_state: str) -> float:
    """Sackur-Tetrode entropy (J/(mol K)) in the volume per molecule of the standard state."""
    kT = BOLTZMANN_J_K * temperature_K
    pressure = STANDARD_STATES[standard_state]
    volume_m3 = kT / pressure if pressure else 1.0e-3 / AVOGADRO_PER_MOL
    lam3 = (PLANCK_J_S ** 2 / (2.0 * math.pi * mass_kg * kT)) ** 1.5
    return 1e3 * GAS_CONSTANT_KJMOL_K * (math.log(volume_m3 / lam3) + 2.5)


def _rotational_entropy(moments_kg_m2, temperature_K: float, symmetry_number: int) -> tuple[float, bool]:
    """Rigid-rotor entropy (J/(mol K)) and whether the rotor is linear."""
    kT = BOLTZMANN_J_K * temperature_K
    R = 1e3 * GAS_CONSTANT_KJMOL_K
    moments = np.asarray(moments_kg_m2)
    linear = moments[0] < 1e-3 * moments[2]
    if linear:
        q = 8.0 * math.pi ** 2 * moments[2] * kT / (symmetry_number * PLANCK_J_S ** 2)
        return R * (math.log(q) + 1.0), True
    q = (math.sqrt(math.pi * float(np.prod(moments))) / symmetry_number
         * (8.0 * math.pi ** 2 * kT / PLANCK_J_S ** 2) ** 1.5)
    return R * (math.log(q) + 1.5), False


def _free_rotor_entropy(nu_cm1: np.ndarray, temperature_K: float) -> np.ndarray:
    """Entropy (J/(mol K)) of a free rotor with the moment of a mode of wavenumber nu (Grimme 2012)."""
    mu = PLANCK_J_S / (8.0 * math.pi ** 2 * nu_cm1 * SPEED_OF_LIGHT_CM_S)
    mu_eff = mu * QRRHO_B_AV_KG_M2 / (mu + QRRHO_B_AV_KG_M2)
    kT = BOLTZMANN_J_K * temperature_K
    return 1e3 * GAS_CONSTANT_KJMOL_K * (0.5 + np.log(np.sqrt(8.0 * math.pi ** 3 * mu_eff * kT
                                                                   / PLANCK_J_S ** 2)))


def thermal_correction(frequencies_cm1, masses_amu, positions_A, temperature_K: float, *,
                       symmetry_number: int = 1, standard_state: str = "1M",
                       cutoff_cm1: float = QRRHO_CUTOFF_CM1) -> ThermalCorrection:
    """Thermal correction of one structure (see the module text).

    frequencies_cm1: harmonic wavenumbers (cm^-1), imaginary ones negative (left out);
    masses_amu: atomic masses (amu); positions_A: coordinates (Angstrom);
    cutoff_cm1: quasi-RRHO switching wavenumber; 0 gives the plain harmonic oscillator."""
    if standard_state not in STANDARD_STATES:
        raise ValueError(f"standard_state must be one of {sorted(STANDARD_STATES)}")
    T = float(temperature_K)
    R = GAS_CONSTANT_KJMOL_K
    nu = np.asarray([f for f in np.asarray(frequencies_cm1, dtype=float) if f > 0.0])
    x = PLANCK_J_S * SPEED_OF_LIGHT_CM_S * nu / (BOLTZMANN_J_K * T)        # h nu / kT
    zpe_modes = 0.5 * R * T * x                                          # kJ/mol
    h_modes = zpe_modes + R * T * x / np.expm1(x)                        # ZPE + thermal (kJ/mol)
    s_modes = 1e3 * R * (x / np.expm1(x) - np.log1p(-np.exp(-x)))        # J/(mol K)
    if cutoff_cm1 > 0.0:
        w = 1.0 / (1.0 + (cutoff_cm1 / nu) ** 4)
        s_modes = w * s_modes + (1.0 - w) * _free_rotor_entropy(nu, T)
        h_modes = w * h_modes + (1.0 - w) * 0.5 * R * T
    moments = principal_moments_kg_m2(masses_amu, positions_A)
    s_rot, linear = _rotational_entropy(moments, T, symmetry_number)
    mass_kg = float(np.sum(masses_amu)) * ATOMIC_MASS_KG
    s_trans = _translational_entropy(mass_kg, T, standard_state)
    h = float(np.sum(h_modes)) + 2.5 * R * T + (1.0 if linear else 1.5) * R * T
    s = float(np.sum(s_modes)) + s_rot + s_trans
    return ThermalCorrection(zpe_kJmol=float(np.sum(0.5 * R * T * x)), enthalpy_kJmol=h, entropy_J_molK=s,
                             free_energy_kJmol=h - T * s / 1e3,
                             n_low_modes=int(np.sum(nu < cutoff_cm1)), temperature_K=T)
