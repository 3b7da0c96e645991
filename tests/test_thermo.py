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


def test_two_equal_conformers_lower_the_free_energy_by_RT_ln_2():
    # a diene with two mirror-image gauche minima has twice the partition function of one:
    # G = G_i - RT ln 2 = G_i - 1.718 kJ/mol at 298.15 K (statistical mechanics, common practice)
    from dienes.singlepoints import ensemble_free_energy_kJmol
    assert ensemble_free_energy_kJmol([10.0, 10.0], 298.15) == pytest.approx(10.0 - 1.7185, abs=1e-3)
    # a conformer 30 kJ/mol up adds almost nothing (exp(-12) of the weight)
    assert ensemble_free_energy_kJmol([10.0, 40.0], 298.15) == pytest.approx(10.0, abs=1e-3)


@pytest.mark.slow
def test_activation_entropy_of_butadiene_plus_acrolein_matches_the_gas_phase_a_factor(structure_settings, config):
    # measured: A = 1.46e6 L/mol/s and Ea = 82.4 kJ/mol over 428-605 K (Kistiakowsky & Lacher,
    # J. Am. Chem. Soc. 1936, 58, 123; read from the NIST Chemical Kinetics Database): at the middle
    # of the range dS = R ln(A h / (e^2 kB T)) = -148 J/(mol K) in the 1 mol/L standard state.
    # Computed from GFN2-xTB wavenumbers at the located transition structure and both minima
    # (quasi-RRHO). Tolerance 20 J/(mol K): the measured A sums endo and exo channels (R ln 2 =
    # 6 J/(mol K)) and the soft intermolecular modes of the complex carry the largest error of the
    # quasi-RRHO treatment; a lost rotation or translation would be off by 100 or more.
    from pathlib import Path

    from ase.data import atomic_masses
    from dienes.kinetics import read_measurements
    from dienes.optimize import backend_energy_forces
    from dienes.pipeline import backend_settings, compute_dienophile, compute_structure
    from dienes.saddle import analyse_vibrations
    from dienes.backends import Molecule
    from dienes.transition import transition_states_for_structure
    m = next(x for x in read_measurements(Path(__file__).parent / "data" / "gas_phase_kinetics.csv")
             if x.record_ids == ["G01"])
    measured = 1e3 * (m.dh_kJmol - m.dg_kJmol) / m.temperature_K
    assert measured == pytest.approx(-148.0, abs=1.0)
    bs = backend_settings(structure_settings)
    diene = compute_structure("C=CC=C", structure_settings)
    dph = compute_dienophile("C=CC=O", structure_settings)
    ts = transition_states_for_structure(diene, dph, bs, config["transition_state"])
    site = min((s for s in ts["sites"].values() if s["status"] == "ok"), key=lambda s: s["barrier_kJmol"])

    def entropy(numbers, positions):
        vib = analyse_vibrations(numbers, positions, backend_energy_forces(Molecule(numbers, bs)))
        masses = [atomic_masses[int(z)] for z in numbers]
        return thermo.thermal_correction(vib.frequencies_cm1, masses, positions, m.temperature_K).entropy_J_molK

    computed = (entropy(ts["numbers"], site["positions_A"])
                - entropy(diene["geometry"]["numbers"], diene["geometry"]["minimum_A"])
                - entropy(dph["geometry"]["numbers"], dph["geometry"]["minimum_A"]))
    assert computed == pytest.approx(measured, abs=20.0)
