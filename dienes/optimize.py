"""Free and constrained geometry optimisation on top of a backend.

The optimiser (ASE's LBFGS) talks to an energy/forces
interface only, so the algorithms here are testable with a toy analytic
potential. Every optimisation returns a converged flag and its gradient-call
count.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
from ase import Atoms
from ase.calculators.calculator import Calculator, all_changes
from ase.constraints import FixInternals
from ase.optimize import LBFGS

from .backends import Molecule, SinglePoint

# ASE's LBFGS starts from a Hessian guess of alpha * identity (eV/A^2; ASE default 70).
# Measured on 24 MMFF conformers of 6 dienes with GFN2-xTB: 35 needs 27 % fewer
# gradient calls to fmax 0.01 and reaches the same minima (benchmarks/conformer_protocol.py).
LBFGS_ALPHA_EV_A2 = 35.0

# (energy_eV, forces_eV_A) from positions (Angstrom)
EnergyForces = Callable[[np.ndarray], tuple[float, np.ndarray]]


class _FunctionCalculator(Calculator):
    implemented_properties = ["energy", "forces"]

    def __init__(self, energy_forces: EnergyForces):
        super().__init__()
        self._energy_forces = energy_forces
        self.n_calls = 0

    def calculate(self, atoms=None, properties=("energy",), system_changes=all_changes):
        super().calculate(atoms, properties, system_changes)
        energy_eV, forces_eV_A = self._energy_forces(self.atoms.get_positions())
        self.n_calls += 1
        self.results = {"energy": float(energy_eV), "forces": np.asarray(forces_eV_A)}


def backend_energy_forces(molecule: Molecule, keep: list | None = None) -> EnergyForces:
    """Energy/forces callable over a backend molecule; the last SinglePoint is kept in `keep`."""
    def energy_forces(positions):
        sp: SinglePoint = molecule.singlepoint(positions)
        if keep is not None:
            keep[:] = [sp]
        return sp.energy_eV, sp.forces_eV_A
    return energy_forces


@dataclass
class OptResult:
    """positions_A: final geometry (Angstrom); energy_eV (eV); converged; n_gradients."""

    positions_A: np.ndarray
    energy_eV: float
    converged: bool
    n_gradients: int


def dihedral_deg(positions, idx: Sequence[int]) -> float:
    """Signed dihedral angle (degrees, -180..180) of four atoms."""
    p0, p1, p2, p3 = (np.asarray(positions[i], dtype=float) for i in idx)
    b0, b1, b2 = p0 - p1, p2 - p1, p3 - p2
    b1n = b1 / np.linalg.norm(b1)
    v = b0 - np.dot(b0, b1n) * b1n
    w = b2 - np.dot(b2, b1n) * b1n
    x = np.dot(v, w)
    y = np.dot(np.cross(b1n, v), w)
    return float(np.degrees(np.arctan2(y, x)))


def optimize(numbers, positions_A, energy_forces: EnergyForces, *,
             fmax_eV_A: float = 0.01, max_steps: int = 300,
             dihedrals_deg: Sequence[tuple[float, Sequence[int]]] = (),
             bonds_A: Sequence[tuple[float, Sequence[int]]] = ()) -> OptResult:
    """Minimise the energy, optionally holding dihedrals (deg) and bond lengths (A) fixed.

    A constrained coordinate must already be at (or near) its target value:
    the constraint is imposed on the starting geometry by projection.
    """
    atoms = Atoms(numbers=numbers, positions=np.asarray(positions_A, dtype=float))
    calc = _FunctionCalculator(energy_forces)
    atoms.calc = calc
    constrained = bool(dihedrals_deg or bonds_A)
    if constrained:
        atoms.set_constraint(FixInternals(
            dihedrals_deg=[[float(v), list(map(int, i))] for v, i in dihedrals_deg] or None,
            bonds=[[float(v), list(map(int, i))] for v, i in bonds_A] or None))
        # impose the targets on the start geometry (ASE projects on set_positions)
        atoms.set_positions(atoms.get_positions(), apply_constraint=True)
    opt = LBFGS(atoms, logfile=None, maxstep=0.2, alpha=LBFGS_ALPHA_EV_A2)
    converged = bool(opt.run(fmax=fmax_eV_A, steps=max_steps))
    energy = atoms.get_potential_energy()
    return OptResult(atoms.get_positions().copy(), float(energy), converged, calc.n_calls)


def constrained_dihedral_path(numbers, positions_A, energy_forces: EnergyForces,
                              idx: Sequence[int], target_deg: float, *,
                              step_deg: float = 20.0, **kwargs) -> tuple[OptResult, int]:
    """Walk a dihedral to `target_deg` in steps of at most `step_deg`, relaxing at each.

    Used where the dihedral cannot be set by rotating a fragment (ring bonds).
    Returns the final constrained result and the total gradient calls.
    """
    pos = np.asarray(positions_A, dtype=float)
    start = dihedral_deg(pos, idx)
    delta = (target_deg - start + 180.0) % 360.0 - 180.0
    n = max(1, int(np.ceil(abs(delta) / step_deg)))
    total = 0
    res = None
    for k in range(1, n + 1):
        value = (start + delta * k / n + 180.0) % 360.0 - 180.0
        res = optimize(numbers, pos, energy_forces, dihedrals_deg=[(value, idx)], **kwargs)
        total += res.n_gradients
        pos = res.positions_A
    return res, total
