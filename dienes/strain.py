"""Activation strain in a model transition structure (distortion/interaction).

The model TS starts from the diene's own planar s-cis structure with the
dienophile's reactive C=C placed face to face above the diene termini; both
forming C-C bonds are held at a typical transition-state length and
everything else is optimised with GFN2-xTB. Endo and exo approaches, and both
regio-orientations of an unsymmetrical dienophile, are tried; the lowest is
kept. Energies (kJ/mol):

- distortion  = E(diene frozen at its TS geometry) - E(diene, planar s-cis)
- dienophile distortion likewise, against its own minimum
- interaction = E(TS model) - E(diene frozen) - E(dienophile frozen)
- model barrier = E(TS model) - E(diene, planar s-cis) - E(dienophile minimum)
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from .backends import Molecule, Settings as BackendSettings
from .optimize import backend_energy_forces, optimize
from .units import EV_KJMOL

SCREEN_FMAX_EV_A = 0.1  # force threshold for comparing approaches before the lowest is refined


@dataclass
class StrainResult:
    """Energies in kJ/mol; approach names the orientation kept."""

    distortion_kJmol: float
    dienophile_distortion_kJmol: float
    interaction_kJmol: float
    model_barrier_kJmol: float
    approach: str
    converged: bool
    n_gradients: int
    positions_A: np.ndarray
    n_diene_atoms: int


def _frame(e1, s):
    """Orthonormal frame from an axis e1 and a rough second direction s."""
    e1 = e1 / np.linalg.norm(e1)
    s = s - np.dot(s, e1) * e1
    if np.linalg.norm(s) < 1e-6:
        s = np.cross(e1, [0.0, 0.0, 1.0])
        if np.linalg.norm(s) < 1e-6:
            s = np.cross(e1, [0.0, 1.0, 0.0])
    e2 = s / np.linalg.norm(s)
    return np.column_stack([e1, e2, np.cross(e1, e2)])


def place_dienophile(diene_A: np.ndarray, site_atoms, dph_A: np.ndarray, bond, *,
                     forming_bond_A: float, endo: bool, swap: bool) -> np.ndarray:
    """Dienophile coordinates above the diene: bond atom 0 over C1 and atom 1 over C4
    (the reverse when `swap`), substituents over C2-C3 when `endo`."""
    c1, c2, c3, c4 = (diene_A[i] for i in site_atoms)
    a, b = (bond[1], bond[0]) if swap else (bond[0], bond[1])
    mid_t = 0.5 * (c1 + c4)
    u = c4 - c1
    v = 0.5 * (c2 + c3) - mid_t                      # towards the diene's inner carbons
    n = np.cross(u, v)
    n /= np.linalg.norm(n)
    side = np.sign(np.dot(diene_A.mean(axis=0) - mid_t, n)) or 1.0
    n = -side * n                                    # the emptier face of the diene
    others = [i for i in range(len(dph_A)) if i not in (a, b)]
    mid_d = 0.5 * (dph_A[a] + dph_A[b])
    sub = dph_A[others].mean(axis=0) - mid_d if others else np.zeros(3)
    src = _frame(dph_A[b] - dph_A[a], sub)
    dst = _frame(u, v if endo else -v)
    rot = dst @ src.T
    placed = (dph_A - mid_d) @ rot.T
    half_gap = 0.5 * (np.linalg.norm(u) - np.linalg.norm(dph_A[b] - dph_A[a]))
    height = np.sqrt(max(forming_bond_A ** 2 - half_gap ** 2, 1.0))
    return placed + mid_t + height * n


def model_ts(diene_numbers, diene_A, site_atoms, diene_energy_kJmol: float,
             dph_numbers, dph_A, dph_bond, dph_energy_kJmol: float, dph_symmetric: bool,
             settings: BackendSettings, forming_bond_A: float = 2.25,
             fmax_eV_A: float = 0.02, max_steps: int = 400) -> StrainResult:
    """Build, optimise and decompose the model TS for one diene site."""
    nd = len(diene_numbers)
    numbers = list(diene_numbers) + list(dph_numbers)
    complex_mol = Molecule(numbers, settings)
    diene_mol = Molecule(diene_numbers, settings)
    dph_mol = Molecule(dph_numbers, settings)
    ef = backend_energy_forces(complex_mol)
    c1, c4 = site_atoms[0], site_atoms[3]
    others = [i for i in range(len(dph_numbers)) if i not in dph_bond]
    mid = 0.5 * (np.asarray(dph_A)[dph_bond[0]] + np.asarray(dph_A)[dph_bond[1]])
    faces = (True, False)
    if not others or np.linalg.norm(np.asarray(dph_A)[others].mean(axis=0) - mid) < 0.1:
        faces = (True,)  # substituents spread evenly (ethylene): endo and exo are one approach
    approaches = [(endo, swap) for endo in faces for swap in (False, True)
                  if not (swap and dph_symmetric)]
    # every approach is relaxed loosely; only the lowest is refined to fmax_eV_A
    best = None
    for endo, swap in approaches:
        placed = place_dienophile(np.asarray(diene_A), site_atoms, np.asarray(dph_A), dph_bond,
                                  forming_bond_A=forming_bond_A, endo=endo, swap=swap)
        a, b = (dph_bond[1], dph_bond[0]) if swap else (dph_bond[0], dph_bond[1])
        start = np.vstack([diene_A, placed])
        bonds = [(forming_bond_A, (c1, nd + a)), (forming_bond_A, (c4, nd + b))]
        loose = max(fmax_eV_A, SCREEN_FMAX_EV_A) if len(approaches) > 1 else fmax_eV_A
        r = optimize(numbers, start, ef, bonds_A=bonds, fmax_eV_A=loose, max_steps=max_steps)
        if best is None or r.energy_eV < best[0].energy_eV:
            face = "face to face" if len(faces) == 1 else ("endo" if endo else "exo")
            best = (r, f"{face}{', reversed' if swap else ''}", bonds)
    r, approach, bonds = best
    if len(approaches) > 1:
        r = optimize(numbers, r.positions_A, ef, bonds_A=bonds, fmax_eV_A=fmax_eV_A, max_steps=max_steps)
    e_complex = r.energy_eV * EV_KJMOL
    e_diene_frozen = diene_mol.singlepoint(r.positions_A[:nd]).energy_kJmol
    e_dph_frozen = dph_mol.singlepoint(r.positions_A[nd:]).energy_kJmol
    return StrainResult(
        distortion_kJmol=e_diene_frozen - diene_energy_kJmol,
        dienophile_distortion_kJmol=e_dph_frozen - dph_energy_kJmol,
        interaction_kJmol=e_complex - e_diene_frozen - e_dph_frozen,
        model_barrier_kJmol=e_complex - diene_energy_kJmol - dph_energy_kJmol,
        approach=approach, converged=r.converged,
        n_gradients=complex_mol.n_calls + diene_mol.n_calls + dph_mol.n_calls,
        positions_A=r.positions_A, n_diene_atoms=nd)


def strain_for_structure(structure: dict, dienophile: dict, settings: BackendSettings,
                         forming_bond_A: float = 2.25) -> dict:
    """Model-TS strain of every computed site of a per-structure result."""
    t0 = time.perf_counter()
    out = {"key": structure.get("key", ""), "dienophile": dienophile["smiles"],
           "forming_bond_A": forming_bond_A, "sites": {}, "status": "ok", "message": ""}
    if structure.get("status") != "ok":
        return out | {"status": structure.get("status", "missing"), "message": "no structure to strain"}
    geo = structure["geometry"]
    for site in structure["sites"]:
        if site["status"] != "ok" or site["label"] not in geo["planar_s_cis_A"]:
            continue
        r = model_ts(geo["numbers"], np.asarray(geo["planar_s_cis_A"][site["label"]]), site["atoms"],
                     structure["energy_min_kJmol"] + site["scis_penalty_kJmol"],
                     dienophile["geometry"]["numbers"], np.asarray(dienophile["geometry"]["minimum_A"]),
                     tuple(dienophile["reactive_bond"]), dienophile["energy_min_kJmol"],
                     bool(dienophile["symmetric_bond"]), settings, forming_bond_A)
        out["sites"][site["label"]] = {
            "distortion_kJmol": round(r.distortion_kJmol, 4),
            "dienophile_distortion_kJmol": round(r.dienophile_distortion_kJmol, 4),
            "interaction_kJmol": round(r.interaction_kJmol, 4),
            "model_barrier_kJmol": round(r.model_barrier_kJmol, 4),
            "approach": r.approach, "converged": r.converged, "n_gradients": r.n_gradients,
            "positions_A": np.round(r.positions_A, 5).tolist()}
    out["wall_time_s"] = round(time.perf_counter() - t0, 3)
    return out
