"""First-order saddle points and what proves them, on top of an energy/forces callable.

Like :mod:`dienes.optimize`, this module knows nothing of chemistry: it takes
atomic numbers, positions (Angstrom) and an energy/forces function (eV,
eV/Angstrom) and returns the same kind of result as the minimiser (positions,
energy, converged flag, gradient calls). On top of the saddle search
(sella's partitioned rational-function optimiser in internal coordinates) it
gives the finite-difference Hessian, harmonic frequencies with translations
and rotations projected out, and the two downhill minimisations that start
from a saddle displaced along its imaginary mode.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .optimize import EnergyForces, OptResult, _FunctionCalculator, optimize
from .units import hessian_eigenvalue_to_wavenumber_cm1

HESSIAN_STEP_A = 0.005      # central-difference displacement (Angstrom)
LINEAR_TOLERANCE = 1e-8     # below this a rotation vector is dropped (linear molecules)


@dataclass
class Vibrations:
    """frequencies_cm1: harmonic wavenumbers (cm^-1), imaginary ones negative, ascending;
    modes_A: the matching Cartesian displacement directions (n_modes, n_atoms, 3), each
    normalised to unit length; n_gradients: gradient calls spent on the Hessian."""

    frequencies_cm1: np.ndarray
    modes_A: np.ndarray
    n_gradients: int

    def imaginary(self, threshold_cm1: float) -> np.ndarray:
        """Indices of modes more imaginary than -threshold_cm1."""
        return np.nonzero(self.frequencies_cm1 < -abs(threshold_cm1))[0]


def find_saddle(numbers, positions_A, energy_forces: EnergyForces, *, fmax_eV_A: float = 0.01,
                max_steps: int = 150) -> OptResult:
    """First-order saddle search from `positions_A` (sella, internal coordinates)."""
    from ase import Atoms
    from sella import Sella
    atoms = Atoms(numbers=list(numbers), positions=np.asarray(positions_A, dtype=float))
    calc = _FunctionCalculator(energy_forces)
    atoms.calc = calc
    opt = Sella(atoms, order=1, internal=True, logfile=None)
    try:
        converged = bool(opt.run(fmax=fmax_eV_A, steps=max_steps))
    except (np.linalg.LinAlgError, ValueError, RuntimeError):
        converged = False  # a degenerate internal-coordinate step: report, do not crash
    energy = float(atoms.get_potential_energy())
    return OptResult(atoms.get_positions().copy(), energy, converged, calc.n_calls)


def hessian(positions_A, energy_forces: EnergyForces, step_A: float = HESSIAN_STEP_A):
    """Cartesian Hessian (eV/Angstrom^2) by central differences of the forces,
    symmetrised; returns (hessian (3n, 3n), gradient calls)."""
    x0 = np.asarray(positions_A, dtype=float)
    n3 = x0.size
    h = np.empty((n3, n3))
    for k in range(n3):
        xp = x0.copy().ravel()
        xm = xp.copy()
        xp[k] += step_A
        xm[k] -= step_A
        fp = energy_forces(xp.reshape(x0.shape))[1].ravel()
        fm = energy_forces(xm.reshape(x0.shape))[1].ravel()
        h[k] = -(fp - fm) / (2.0 * step_A)
    return 0.5 * (h + h.T), 2 * n3


def _rigid_body_basis(positions_A, masses) -> np.ndarray:
    """Orthonormal mass-weighted translation and rotation vectors (rows)."""
    x = np.asarray(positions_A, dtype=float)
    m = np.asarray(masses, dtype=float)
    com = (m[:, None] * x).sum(axis=0) / m.sum()
    r = x - com
    sq = np.sqrt(m)[:, None]
    vectors = []
    for axis in np.eye(3):
        vectors.append((sq * axis).ravel())
    for axis in np.eye(3):
        vectors.append((sq * np.cross(axis, r)).ravel())
    basis = []
    for v in vectors:
        for b in basis:
            v = v - np.dot(v, b) * b
        norm = np.linalg.norm(v)
        if norm > LINEAR_TOLERANCE:
            basis.append(v / norm)
    return np.array(basis)


def vibrations(hessian_eV_A2, positions_A, masses_amu, n_gradients: int = 0) -> Vibrations:
    """Harmonic frequencies of a Cartesian Hessian, translations and rotations
    projected out (so a structure that is not exactly stationary still gives
    3n - 6 clean internal modes)."""
    m = np.repeat(np.asarray(masses_amu, dtype=float), 3)
    inv_sq = 1.0 / np.sqrt(m)
    hm = hessian_eV_A2 * np.outer(inv_sq, inv_sq)
    rigid = _rigid_body_basis(positions_A, masses_amu)
    proj = np.eye(len(m)) - rigid.T @ rigid
    hp = proj @ hm @ proj
    values, vectors = np.linalg.eigh(hp)
    # drop the rigid-body directions: the eigenvectors with the largest overlap with them
    overlap = np.sum((rigid @ vectors) ** 2, axis=0)
    keep = np.argsort(overlap)[:len(m) - len(rigid)]
    keep = keep[np.argsort(values[keep])]
    freqs = hessian_eigenvalue_to_wavenumber_cm1(values[keep])
    cart = vectors[:, keep] * inv_sq[:, None]
    cart /= np.linalg.norm(cart, axis=0)
    modes = cart.T.reshape(len(keep), -1, 3)
    return Vibrations(np.asarray(freqs), modes, n_gradients)


def analyse_vibrations(numbers, positions_A, energy_forces: EnergyForces) -> Vibrations:
    """Finite-difference Hessian and harmonic analysis at `positions_A`."""
    from ase.data import atomic_masses
    h, n = hessian(positions_A, energy_forces)
    masses = [atomic_masses[int(z)] for z in numbers]
    return vibrations(h, positions_A, masses, n)


def bond_change_along(mode_A, positions_A, i: int, j: int) -> float:
    """First-order change of the distance i-j along a unit displacement (Angstrom per Angstrom)."""
    x = np.asarray(positions_A, dtype=float)
    d = x[j] - x[i]
    return float(np.dot(d / np.linalg.norm(d), mode_A[j] - mode_A[i]))


def downhill_pair(numbers, positions_A, mode_A, energy_forces: EnergyForces, *,
                  displacement_A: float = 0.25, fmax_eV_A: float = 0.02,
                  max_steps: int = 400) -> tuple[OptResult, OptResult]:
    """Minimise from the saddle displaced along `mode_A` both ways: (result from
    +mode, result from -mode). The step is `displacement_A` along the unit
    Cartesian mode: large enough that a flat saddle is left for good."""
    x0 = np.asarray(positions_A, dtype=float)
    mode = np.asarray(mode_A, dtype=float)
    return tuple(optimize(numbers, x0 + sign * displacement_A * mode, energy_forces,
                          fmax_eV_A=fmax_eV_A, max_steps=max_steps) for sign in (1.0, -1.0))
