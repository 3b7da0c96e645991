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

# Density-functional single points: integration grid and SCF energy tolerance, chosen by
# their measured effect on barriers over the reference set (docs/validation.md).
DFT_GRID_LEVEL = 1
DFT_CONV_TOL_HARTREE = 1e-6

# Methods with a second-order (MP2-like) correlation term on top of the self-consistent part:
# name -> (PySCF exchange-correlation string of the self-consistent part, opposite-spin scale,
# same-spin scale). The MP2 term is computed with density fitting on the converged orbitals
# (frozen core). Sources: B2PLYP, Grimme, J. Chem. Phys. 124, 034108 (2006); B2GP-PLYP, Karton
# et al., J. Phys. Chem. A 112, 12868 (2008); DSD-BLYP, Kozuch, Gruzman and Martin, J. Phys.
# Chem. C 114, 20801 (2010), with frozen core (the parameters Psi4's functional table lists as
# CORE-DSD-BLYP); the scales of B2PLYP and B2GP-PLYP as Psi4's table lists them; SCS-MP2,
# Grimme, J. Chem. Phys. 118, 9095 (2003); SOS-MP2, Jung et al., J. Chem. Phys. 121, 9793 (2004).
SECOND_ORDER_METHODS = {
    "b2plyp": ("0.53*HF + 0.47*B88, 0.73*LYP", 0.27, 0.27),
    "b2gpplyp": ("0.65*HF + 0.35*B88, 0.64*LYP", 0.36, 0.36),
    "dsdblyp": ("0.69*HF + 0.31*B88, 0.54*LYP", 0.46, 0.37),
    "mp2": ("HF", 1.0, 1.0),
    "scsmp2": ("HF", 6.0 / 5.0, 1.0 / 3.0),
    "sosmp2": ("HF", 1.3, 0.0),
}


def second_order_parts(method: str) -> tuple[str, float, float]:
    """(exchange-correlation string, opposite-spin scale, same-spin scale) of a method: the
    scales are zero for a plain functional, whose string is its name."""
    return SECOND_ORDER_METHODS.get(method.lower().replace("-", "").replace("_", ""), (method, 0.0, 0.0))

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


# ------------------------------------------------------------ density functional

@dataclass
class LevelEnergy:
    """One single point at a level: energy_kJmol (kJ/mol), converged, cycles (SCF
    iterations, 0 where the level does not say), wall_s, dispersion_kJmol (its part)."""

    energy_kJmol: float
    converged: bool
    cycles: int = 0
    wall_s: float = 0.0
    dispersion_kJmol: float = 0.0


@dataclass
class DFTSettings:
    """A density-functional level for single points (PySCF, CPU).

    method: exchange-correlation functional as PySCF names it ('b3lyp', 'pbe0', 'm062x', ...);
    basis: orbital basis set ('def2-svp', ...); dispersion: PySCF dispersion keyword
    ('d3bj', 'd3zero', 'd4') or None; solvent: SMD solvent name as PySCF's SMD table spells
    it ('1,4-dioxane', 'toluene', ...), or None for the gas phase; density_fit: Coulomb and
    exchange through an auxiliary basis (PySCF's default fitting basis for the orbital basis);
    grid_level: PySCF integration grid (0-9); conv_tol_hartree: SCF energy convergence;
    max_cycles: SCF iterations before the second-order fallback. The defaults of the last
    three were chosen by their measured effect on barriers (docs/validation.md)."""

    method: str = "b3lyp"
    basis: str = "def2-svp"
    dispersion: str | None = None
    solvent: str | None = None
    density_fit: bool = True
    grid_level: int = DFT_GRID_LEVEL
    conv_tol_hartree: float = DFT_CONV_TOL_HARTREE
    max_cycles: int = 100

    def label(self) -> str:
        disp = f"-{self.dispersion.upper()}" if self.dispersion else ""
        solv = f", SMD({self.solvent})" if self.solvent else ""
        b = self.basis
        basis = "def2-" + b[5:].upper() if b.lower().startswith("def2-") else b.upper()
        return f"{self.method.upper()}{disp}/{basis}{solv}"

    def as_dict(self) -> dict:
        return {"method": self.method, "basis": self.basis, "dispersion": self.dispersion,
                "solvent": self.solvent, "density_fit": self.density_fit, "grid_level": self.grid_level,
                "conv_tol_hartree": self.conv_tol_hartree}


def _pyscf_mol(numbers, positions_A, basis: str, ghost=(), charge: int = 0):
    from pyscf import gto
    from ase.data import chemical_symbols
    atoms = []
    for k, (z, xyz) in enumerate(zip(numbers, np.asarray(positions_A, dtype=float))):
        sym = chemical_symbols[int(z)]
        atoms.append((f"ghost-{sym}" if k in ghost else sym, tuple(float(c) for c in xyz)))
    # positions in Angstrom: PySCF converts to Bohr itself (unit="Angstrom")
    return gto.M(atom=atoms, basis=basis, charge=charge, spin=0, unit="Angstrom", verbose=0)


def smd_solvents() -> list[str]:
    """Solvent names PySCF's SMD model knows."""
    from pyscf.solvent import smd
    return sorted(smd.solvent_db)


def _rks(mol, settings: DFTSettings, xc: str, dispersion: bool = True):
    """A closed-shell Kohn-Sham object with the level's functional, density fitting and dispersion."""
    from pyscf import dft
    mf = dft.RKS(mol)
    mf.xc = xc
    if settings.density_fit:
        mf = mf.density_fit()
    if settings.dispersion and dispersion:
        mf.disp = settings.dispersion
    return mf


def dft_energy(numbers, positions_A, settings: DFTSettings, *, ghost=(), threads: int | None = None,
               charge: int = 0) -> LevelEnergy:
    """Closed-shell Kohn-Sham single point. Atoms whose indices are in `ghost` carry
    basis functions only (counterpoise). The SCF is retried with second-order
    convergence when the plain iterations fail; `converged` tells whether either worked."""
    import time as _time
    from pyscf import lib
    if threads:
        lib.num_threads(int(threads))
    t0 = _time.perf_counter()
    mol = _pyscf_mol(numbers, positions_A, settings.basis, ghost, charge)
    xc, c_os, c_ss = second_order_parts(settings.method)
    mf = _rks(mol, settings, xc, dispersion=not ghost)
    if settings.solvent:
        mf = mf.SMD()
        mf.with_solvent.solvent = settings.solvent
    mf.grids.level = settings.grid_level
    mf.max_cycle = settings.max_cycles
    mf.conv_tol = settings.conv_tol_hartree
    cycles = {"n": 0}
    mf.callback = lambda env: cycles.__setitem__("n", cycles["n"] + 1)
    e_h = mf.kernel()
    if not mf.converged:
        mf = mf.newton()
        e_h = mf.kernel()
    disp_h = float(np.sum(mf.scf_summary.get("dispersion", 0.0))) if settings.dispersion and not ghost else 0.0
    if (c_os or c_ss) and mf.converged:
        e_h += second_order_correlation_hartree(mf, c_os, c_ss)
    return LevelEnergy(energy_kJmol=float(units.hartree_to_kjmol(e_h)), converged=bool(mf.converged),
                       cycles=cycles["n"], wall_s=round(_time.perf_counter() - t0, 2),
                       dispersion_kJmol=float(units.hartree_to_kjmol(disp_h)))


def dft_energy_forces(numbers, settings: DFTSettings, threads: int | None = None):
    """positions (Angstrom) -> (energy eV, forces eV/Angstrom) at a density-functional level with
    analytic gradients (PySCF), for the optimisers of dienes.optimize and dienes.saddle. The SCF
    restarts from the previous step's density. Methods with a second-order term have no
    gradient here."""
    from pyscf import lib
    xc, c_os, c_ss = second_order_parts(settings.method)
    if c_os or c_ss or settings.solvent:
        raise ValueError(f"no analytic gradient here for {settings.label()}")
    if threads:
        lib.num_threads(int(threads))
    state = {"dm": None}

    def energy_forces(positions_A):
        mol = _pyscf_mol(numbers, positions_A, settings.basis)
        mf = _rks(mol, settings, xc)
        mf.grids.level = settings.grid_level
        mf.conv_tol = min(settings.conv_tol_hartree, 1e-8)
        e_h = mf.kernel(dm0=state["dm"])
        if not mf.converged:
            raise BackendError(f"{settings.label()} SCF did not converge during an optimisation")
        state["dm"] = mf.make_rdm1()
        grad = mf.nuc_grad_method().kernel()
        return float(units.hartree_to_ev(e_h)), units.gradient_to_forces_ev_angstrom(np.asarray(grad))
    return energy_forces


def second_order_correlation_hartree(mf, c_os: float, c_ss: float) -> float:
    """Spin-scaled MP2 correlation (Hartree) on a converged closed-shell SCF's orbitals and
    orbital energies: density-fitted with the orbital basis's MP2 fitting basis, core frozen."""
    from pyscf import df
    from pyscf.data.elements import chemcore
    from pyscf.mp import dfmp2
    pt = dfmp2.DFMP2(mf, frozen=chemcore(mf.mol))
    pt.with_df = df.DF(mf.mol, auxbasis=df.make_auxbasis(mf.mol, mp2fit=True))
    pt.verbose = 0
    pt.kernel(with_t2=False)
    return float(c_os * pt.e_corr_os + c_ss * pt.e_corr_ss)


def d3_dispersion_kJmol(numbers, positions_A, functional: str = "b3lyp", version: str = "d3bj") -> float:
    """Grimme's D3 dispersion energy (kJ/mol) of a structure with one functional's damping
    parameters: a geometry-only term, no SCF (simple-dftd3 through pyscf-dispersion)."""
    from pyscf.dispersion.dftd3 import DFTD3Dispersion
    mol = _pyscf_mol(numbers, positions_A, "sto-3g")
    return float(units.hartree_to_kjmol(DFTD3Dispersion(mol, functional, version).get_dispersion()["energy"]))


# ------------------------------------------------------------------ levels

class GFN2Level:
    """GFN2-xTB as a level: energy at positions (Angstrom in, kJ/mol out)."""

    def __init__(self, settings: Settings | None = None):
        self.settings = settings or Settings()
        self._molecules: dict[tuple, Molecule] = {}

    def label(self) -> str:
        return "GFN2-xTB"

    def as_dict(self) -> dict:
        return {"method": "gfn2-xtb", "backend": self.settings.name, "solvent": self.settings.solvent}

    def energy(self, numbers, positions_A) -> LevelEnergy:
        import time as _time
        t0 = _time.perf_counter()
        key = tuple(int(z) for z in numbers)
        mol = self._molecules.setdefault(key, Molecule(key, self.settings))
        try:
            e = mol.singlepoint(positions_A).energy_kJmol
        except BackendError:
            return LevelEnergy(float("nan"), False, wall_s=round(_time.perf_counter() - t0, 3))
        return LevelEnergy(e, True, wall_s=round(_time.perf_counter() - t0, 3))


class DFTLevel:
    """A density functional (PySCF) as a level: energy at positions (Angstrom in, kJ/mol out)."""

    def __init__(self, settings: DFTSettings, threads: int | None = None):
        self.settings = settings
        self.threads = threads

    def label(self) -> str:
        return self.settings.label()

    def as_dict(self) -> dict:
        return self.settings.as_dict()

    def energy(self, numbers, positions_A) -> LevelEnergy:
        return dft_energy(numbers, positions_A, self.settings, threads=self.threads)
