"""Thermal corrections (dienes.thermo) against an independent implementation and a measured entropy."""
import numpy as np
import pytest

from dienes import thermo
from dienes.units import EV_KJMOL


@pytest.fixture(scope="module")
def ethylene(structure_settings):
    """GFN2-xTB minimum of ethylene and its harmonic wavenumbers."""
    from ase.data import atomic_masses
    from dienes.optimize import backend_energy_forces
    from dienes.pipeline import lowest_minimum
    from dienes.saddle import analyse_vibrations
    _, backend, r, _ = lowest_minimum("C=C", structure_settings)
    vib = analyse_vibrations(backend.numbers, r.positions_A, backend_energy_forces(backend))
    masses = [atomic_masses[int(z)] for z in backend.numbers]
    return vib.frequencies_cm1, masses, r.positions_A


def test_harmonic_limit_matches_ase_ideal_gas(ethylene):
    # ASE's IdealGasThermo (an independent implementation of the same ideal-gas formulas):
    # with the quasi-RRHO switched off, 1 bar, D2h (symmetry number 4) the two must agree
    from ase import Atoms
    from ase.thermochemistry import IdealGasThermo
    freqs, masses, pos = ethylene
    T = 298.15
    ours = thermo.thermal_correction(freqs, masses, pos, T, symmetry_number=4, standard_state="1bar",
                                     cutoff_cm1=0.0)
    energies_eV = np.asarray(freqs) / 8065.543937         # cm^-1 -> eV (CODATA 2018)
    atoms = Atoms(numbers=[6, 6, 1, 1, 1, 1], positions=pos, masses=masses)
    ase = IdealGasThermo(energies_eV, geometry="nonlinear", atoms=atoms, symmetrynumber=4, spin=0,
                         potentialenergy=0.0)
    g_ase = ase.get_gibbs_energy(T, 1.0e5, verbose=False) * EV_KJMOL
    s_ase = ase.get_entropy(T, 1.0e5, verbose=False) * EV_KJMOL * 1e3
    assert ours.entropy_J_molK == pytest.approx(s_ase, abs=0.05)
    assert ours.free_energy_kJmol == pytest.approx(g_ase, abs=0.02)


def test_ethylene_standard_entropy_matches_the_gas_tables(ethylene):
    # S(298.15 K, 1 bar) of ethylene gas: 219.3 J/(mol K) (NIST-JANAF thermochemical tables,
    # also the NIST Chemistry WebBook; value from memory). GFN2-xTB wavenumbers are good to a
    # few per cent and ethylene has no mode below 800 cm^-1, so the entropy is set by
    # translation and rotation and must land within 3 J/(mol K).
    freqs, masses, pos = ethylene
    ours = thermo.thermal_correction(freqs, masses, pos, 298.15, symmetry_number=4, standard_state="1bar")
    assert ours.entropy_J_molK == pytest.approx(219.3, abs=3.0)


def test_standard_state_1M_raises_each_species_by_RT_ln_24_8(ethylene):
    # G(1 mol/L) - G(1 bar) = +RT ln(c RT / p) = RT ln(24.79) per species at 298.15 K
    # (RT/p = 24.79 L/mol at 1 bar), so a bimolecular barrier drops by that much (common practice)
    freqs, masses, pos = ethylene
    a = thermo.thermal_correction(freqs, masses, pos, 298.15, standard_state="1bar")
    b = thermo.thermal_correction(freqs, masses, pos, 298.15, standard_state="1M")
    assert b.free_energy_kJmol - a.free_energy_kJmol == pytest.approx(0.0083145 * 298.15 * np.log(24.79),
                                                                      abs=0.01)


def test_quasi_rrho_caps_the_entropy_of_a_very_soft_mode():
    # a 5 cm^-1 mode has a harmonic entropy that diverges as nu -> 0; the quasi-RRHO entropy
    # follows the free rotor instead (Grimme, Chem. Eur. J. 2012, 18, 9955), which is far smaller
    pos = np.array([[0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [0.0, 1.5, 0.0], [0.0, 0.0, 1.5]])
    masses = [12.0, 12.0, 12.0, 12.0]
    harmonic = thermo.thermal_correction([5.0], masses, pos, 298.15, cutoff_cm1=0.0)
    quasi = thermo.thermal_correction([5.0], masses, pos, 298.15)
    s_harm_mode = 8.314462618 * (1.0 - np.log(1.4388 * 5.0 / 298.15))   # classical limit R(1 - ln x)
    assert harmonic.entropy_J_molK - quasi.entropy_J_molK > 0.3 * s_harm_mode
    # far above the cutoff the interpolation leaves the harmonic value (weight > 0.9999 at 1000 cm^-1)
    stiff_h = thermo.thermal_correction([1000.0], masses, pos, 298.15, cutoff_cm1=0.0)
    stiff_q = thermo.thermal_correction([1000.0], masses, pos, 298.15)
    assert stiff_q.free_energy_kJmol == pytest.approx(stiff_h.free_energy_kJmol, abs=1e-3)
