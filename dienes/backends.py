"""GFN2-xTB behind one small interface.

Two independent implementations of the same Hamiltonian are supported:
``xtb-python`` (the default) and ``tblite``. This module is the only place
that sees atomic units: positions go in as Angstrom, energies come out as eV
and kJ/mol, gradients as eV/Angstrom, orbital energies as eV.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import units

BACKENDS = ("xtb-python", "tblite")

# Atomic-orbital basis functions per element in GFN2-xTB (s / sp / spd shells),
# measured on hydrides with xtb-python 22.1; the order of AOs follows the atoms.
GFN2_AOS_PER_ELEMENT = {1: 1, 5: 4, 6: 4, 7: 4, 8: 4, 9: 4,
                        14: 9, 15: 9, 16: 9, 17: 9, 34: 9, 35: 9, 53: 9}
SUPPORTED_ELEMENTS = frozenset(GFN2_AOS_PER_ELEMENT)

# Solvent names accepted in the config, mapped to each backend's own name.
SOLVENTS = {
    "acetone": ("acetone", "acetone"),
    "acetonitrile": ("acetonitrile", "acetonitrile"),
    "benzene": ("benzene", "benzene"),
    "dichloromethane": ("ch2cl2", "dichloromethane"),
    "chloroform": ("chcl3", "chloroform"),
    "dmf": ("dmf", "dmf"),
    "dmso": ("dmso", "dmso"),
    "diethyl_ether": ("ether", "ether"),
    "water": ("h2o", "water"),
    "methanol": ("methanol", "methanol"),
    "hexane": ("nhexane", "hexane"),
    "thf": ("thf", "thf"),
    "toluene": ("toluene", "toluene"),
}

# Electronic temperatures tried in turn when the SCF does not converge (K).
ELECTRONIC_TEMPERATURES_K = (300.0, 1000.0, 3000.0)


class BackendError(RuntimeError):
    """The electronic-structure calculation failed (after all retries)."""


_MODULES = {"xtb-python": "xtb.interface", "tblite": "tblite.interface"}


def available(name: str) -> bool:
    """Whether the backend's Python package can be imported here."""
    import importlib.util
    try:
        return importlib.util.find_spec(_MODULES[name].split(".")[0]) is not None
    except (KeyError, ValueError):
        return False


def require(name: str) -> None:
    if name not in _MODULES:
        raise ValueError(f"unknown backend {name!r}; choose from {BACKENDS}")
    if not available(name):
        other = [b for b in BACKENDS if b != name and available(b)]
        hint = f"; set backend: {other[0]} in the config" if other else ""
        raise BackendError(f"backend {name!r} is not installed here (xtb-python has wheels up to "
                           f"Python 3.11){hint}")


@dataclass
class SinglePoint:
    """One GFN2-xTB single point.

    energy_eV: total energy (eV)
    forces_eV_A: forces (eV/Angstrom), shape (n_atoms, 3)
    orbital_energies_eV: orbital energies (eV), ascending
    occupations: orbital occupation numbers (0..2)
    coefficients: MO coefficients, shape (n_ao, n_mo); column j is orbital j
    electronic_temperature_K: the electronic temperature that converged (K)
    """

    energy_eV: float
    forces_eV_A: np.ndarray
    orbital_energies_eV: np.ndarray
    occupations: np.ndarray
    coefficients: np.ndarray
    electronic_temperature_K: float = 300.0

    @property
    def energy_kJmol(self) -> float:
        return self.energy_eV * units.EV_KJMOL

    @property
    def homo_index(self) -> int:
        occupied = np.nonzero(self.occupations > 1e-3)[0]
        return int(occupied[-1])

    @property
    def homo_eV(self) -> float:
        return float(self.orbital_energies_eV[self.homo_index])

    @property
    def lumo_eV(self) -> float:
        return float(self.orbital_energies_eV[self.homo_index + 1])


def ao_atom_index(numbers) -> np.ndarray:
    """Atom index of every atomic orbital, in the backend's AO order."""
    counts = [GFN2_AOS_PER_ELEMENT[int(z)] for z in numbers]
    return np.repeat(np.arange(len(counts)), counts)


def atom_orbital_weights(sp: SinglePoint, numbers, orbital: int) -> np.ndarray:
    """Share of one orbital's density on each atom (sums to 1).

    Squared MO coefficients summed over each atom's AOs and normalised: a
    simple population measure, good enough to say where an orbital lives.
    """
    c2 = sp.coefficients[:, orbital] ** 2
    per_atom = np.bincount(ao_atom_index(numbers), weights=c2, minlength=len(numbers))
    return per_atom / per_atom.sum()


@dataclass
class Settings:
    """What a backend needs to know besides the molecule."""

    name: str = "xtb-python"
    solvent: str | None = None
    accuracy: float = 1.0
    max_iterations: int = 250


class _XtbPythonSession:
    def __init__(self, numbers, charge, uhf, settings: Settings, etemp_K: float):
        from xtb.interface import Calculator, Param
        from xtb.libxtb import VERBOSITY_MUTED
        self._numbers = np.asarray(numbers)
        pos = np.zeros((len(numbers), 3))
        pos[:, 0] = np.arange(len(numbers)) * 2.0  # placeholder, replaced on update
        self._calc = Calculator(Param.GFN2xTB, self._numbers, pos, charge=charge, uhf=uhf)
        self._calc.set_verbosity(VERBOSITY_MUTED)
        self._calc.set_accuracy(settings.accuracy)
        self._calc.set_max_iterations(settings.max_iterations)
        self._calc.set_electronic_temperature(etemp_K)
        if settings.solvent:
            from xtb.utils import Solvent
            self._calc.set_solvent(getattr(Solvent, SOLVENTS[settings.solvent][0]))
        self._res = None

    def compute(self, positions_bohr):
        from xtb.interface import XTBException
        self._calc.update(positions_bohr)
        try:
            self._res = self._calc.singlepoint(self._res, copy=True)
        except XTBException as exc:
            self._res = None
            raise BackendError(str(exc)) from exc
        r = self._res
        return (r.get_energy(), r.get_gradient(), r.get_orbital_eigenvalues(),
                r.get_orbital_occupations(), r.get_orbital_coefficients())


class _TbliteSession:
    def __init__(self, numbers, charge, uhf, settings: Settings, etemp_K: float):
        self._numbers = np.asarray(numbers)
        self._charge, self._uhf = charge, uhf
        self._settings, self._etemp_K = settings, etemp_K
        self._res = None

    def compute(self, positions_bohr):
        from tblite.interface import Calculator
        calc = Calculator("GFN2-xTB", self._numbers, positions_bohr,
                          charge=self._charge, uhf=self._uhf)
        calc.set("verbosity", 0)
        calc.set("accuracy", self._settings.accuracy)
        calc.set("max-iter", self._settings.max_iterations)
        calc.set("temperature", self._etemp_K * 3.166808578545117e-06)  # K -> Hartree (kB)
        if self._settings.solvent:
            calc.add("gbsa-solvation", SOLVENTS[self._settings.solvent][1])
        try:
            res = calc.singlepoint(self._res, copy=True)
        except RuntimeError as exc:
            self._res = None
            raise BackendError(str(exc)) from exc
        self._res = res
        return (res.get("energy"), res.get("gradient"), res.get("orbital-energies"),
                res.get("orbital-occupations"), res.get("orbital-coefficients"))


_SESSIONS = {"xtb-python": _XtbPythonSession, "tblite": _TbliteSession}


class Molecule:
    """A molecule bound to a backend: call :meth:`singlepoint` with Angstrom positions.

    Keeps the previous wavefunction as the SCF guess for the next call. When
    the SCF fails it is retried at higher electronic temperatures
    (ELECTRONIC_TEMPERATURES_K); a BackendError is raised if all fail.
    """

    def __init__(self, numbers, settings: Settings | None = None, charge: int = 0, uhf: int = 0):
        self.numbers = np.asarray(numbers, dtype=int)
        unsupported = sorted(set(self.numbers.tolist()) - SUPPORTED_ELEMENTS)
        if unsupported:
            raise BackendError(f"elements not treated by this GFN2-xTB setup: Z={unsupported}")
        self.settings = settings or Settings()
        if self.settings.name not in _SESSIONS:
            raise ValueError(f"unknown backend {self.settings.name!r}; choose from {BACKENDS}")
        self.charge, self.uhf = charge, uhf
        self.n_calls = 0
        self.retries = 0
        self._level = 0
        self._session = None

    def singlepoint(self, positions_angstrom) -> SinglePoint:
        positions_bohr = units.angstrom_to_bohr(np.asarray(positions_angstrom, dtype=float))
        last_error = None
        while self._level < len(ELECTRONIC_TEMPERATURES_K):
            etemp_K = ELECTRONIC_TEMPERATURES_K[self._level]
            if self._session is None:
                self._session = _SESSIONS[self.settings.name](
                    self.numbers, self.charge, self.uhf, self.settings, etemp_K)
            try:
                e_h, g_hb, eps_h, occ, coef = self._session.compute(positions_bohr)
            except BackendError as exc:
                last_error = exc
                self._level += 1
                self.retries += 1
                self._session = None
                continue
            self.n_calls += 1
            return SinglePoint(
                energy_eV=float(units.hartree_to_ev(e_h)),
                forces_eV_A=units.gradient_to_forces_ev_angstrom(np.asarray(g_hb)),
                orbital_energies_eV=units.hartree_to_ev(np.asarray(eps_h)),
                occupations=np.asarray(occ, dtype=float),
                coefficients=np.asarray(coef, dtype=float),
                electronic_temperature_K=etemp_K,
            )
        raise BackendError(f"SCF did not converge at electronic temperatures "
                           f"{ELECTRONIC_TEMPERATURES_K} K: {last_error}")
