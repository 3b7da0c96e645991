"""The s-cis analysis of one structure: global minimum, planar s-cis penalty,
reactive fraction and torsion profile, for every diene site.

Definitions (kJ/mol, degrees):
- global minimum: lowest GFN2-xTB energy over every unconstrained optimisation;
- planar s-cis: lowest energy with the site's C1-C2-C3-C4 dihedral held at 0,
  reached from several force-field-relaxed s-cis rotamers;
- penalty = E(planar s-cis) - E(global minimum) >= 0. Every planar structure
  is released and re-optimised, and the result joins the minima, so a missed
  minimum lowers the reference instead of giving a negative penalty.
- reactive fraction: Boltzmann weight of the minima with |dihedral| < 40 deg.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from rdkit import Chem
from rdkit.Chem import rdMolTransforms

from . import conformers as cf
from .backends import Molecule
from .optimize import (EnergyForces, OptResult, backend_energy_forces, constrained_dihedral_path,
                       dihedral_deg, optimize)
from .sites import ACYCLIC, RING_OTHER, RING_S_CIS, Site
from .units import EV_KJMOL, rt_kjmol

S_CIS_FAMILY_DEG = 40.0         # |dihedral| below this counts as reactive s-cis
S_TRANS_LOCK_DEG = 135.0        # a ring site with every |dihedral| above this is locked s-trans
FAMILY_SPLIT_DEG = 90.0         # s-cis vs s-trans family for choosing starts
RELEASE_KICK_A = 0.03           # random displacement before releasing a constraint (Angstrom)
GAUCHE_PROBE_DEG = 35.0         # a planar s-cis is released twisted to this dihedral: a flat planar
                                # top (2-tert-butylbutadiene) then still rolls into its gauche well
PLANAR_START_TOLERANCE_DEG = 5.0


@dataclass
class Minimum:
    """An unconstrained GFN2-xTB stationary structure (energy kJ/mol)."""

    energy_kJmol: float
    positions_A: np.ndarray
    converged: bool
    origin: str


@dataclass
class SiteResult:
    site: Site
    status: str = "ok"
    penalty_kJmol: float = 0.0
    planar_energy_kJmol: float | None = None
    planar_positions_A: np.ndarray | None = None
    planar_converged: bool = True
    n_planar_starts: int = 0
    dihedral_at_minimum_deg: float = 0.0
    reactive_fraction: float = 1.0


@dataclass
class StructureAnalysis:
    minima: list[Minimum]
    sites: list[SiteResult]
    global_min: Minimum
    n_gradients: int
    n_embedded: int
    force_field: str
    all_converged: bool
    notes: list[str] = field(default_factory=list)


def _set_dihedral(mol: Chem.Mol, cid: int, atoms, value_deg: float) -> bool:
    try:
        rdMolTransforms.SetDihedralDeg(mol.GetConformer(cid), *map(int, atoms), value_deg)
        return True
    except (RuntimeError, ValueError):
        return False


def boltzmann_weights(energies_kJmol, temperature_K: float) -> np.ndarray:
    """Boltzmann weights (sum 1) of energies (kJ/mol) at temperature (K)."""
    e = np.asarray(energies_kJmol, dtype=float)
    w = np.exp(-(e - e.min()) / rt_kjmol(temperature_K))
    return w / w.sum()


def unique_minima(minima: list[Minimum], sites: list[Site],
                  energy_tol_kJmol: float = 0.1, dihedral_tol_deg: float = 5.0) -> list[Minimum]:
    """Drop repeats: same energy and same diene dihedrals within tolerance."""
    out: list[Minimum] = []
    keys = []
    for m in sorted(minima, key=lambda m: m.energy_kJmol):
        d = np.array([dihedral_deg(m.positions_A, s.atoms) for s in sites])
        if any(abs(m.energy_kJmol - e) < energy_tol_kJmol and
               np.all(np.abs((d - dk + 180) % 360 - 180) < dihedral_tol_deg) for e, dk in keys):
            continue
        keys.append((m.energy_kJmol, d))
        out.append(m)
    return out


def analyse_structure(mol_h: Chem.Mol, sites: list[Site], backend: Molecule,
                      settings: cf.ConformerSettings, temperature_K: float,
                      fmax_eV_A: float = 0.01, max_steps: int = 300) -> StructureAnalysis:
    """Conformer search, GFN2-xTB minima and the planar s-cis of every site."""
    rng = np.random.default_rng(settings.seed)
    numbers = [a.GetAtomicNum() for a in mol_h.GetAtoms()]
    ef: EnergyForces = backend_energy_forces(backend)
    notes: list[str] = []
    n_grad = 0
    all_converged = True

    reference = Chem.MolToSmiles(Chem.RemoveHs(mol_h))
    base = cf.embed(mol_h, settings)
    n_embedded = len(base)
    ff_energy = {cid: cf.relax(mol_h, cid) for cid in base}
    base = [cid for cid in base if cf.stereo_intact(mol_h, cid, reference)]
    if not base:
        raise cf.ConformerError("no embedded conformer kept the given stereochemistry")
    free_pool = list(base)
    planar_pool: dict[int, list[int]] = {}
    flexible = [k for k, s in enumerate(sites) if s.kind != RING_S_CIS]
    for k in flexible:
        atoms = sites[k].atoms
        planar_pool[k] = []
        for cid in base:
            for target in (0.0, 180.0):
                new = cf.copy_conformer(mol_h, cid)
                e_restrained = cf.relax(mol_h, new, torsion=atoms, target_deg=target)
                if target == 0.0:
                    ff_energy[new] = e_restrained
                    planar_pool[k].append(new)
                    new = cf.copy_conformer(mol_h, new)
                ff_energy[new] = cf.relax(mol_h, new)
                free_pool.append(new)

    intact = {c for c in free_pool + sum(planar_pool.values(), [])
              if cf.stereo_intact(mol_h, c, reference)}
    free_pool = [c for c in free_pool if c in intact]
    planar_pool = {k: [c for c in v if c in intact] for k, v in planar_pool.items()}
    kept = cf.prune(mol_h, free_pool, ff_energy, settings)
    # GFN2-xTB starts: the lowest few of each family, for every site
    starts: list[int] = []
    for s in sites or []:
        for want_cis in (True, False):
            fam = [c for c in kept
                   if (abs(dihedral_deg(cf.positions(mol_h, c), s.atoms)) < FAMILY_SPLIT_DEG) == want_cis]
            starts += [c for c in fam[:settings.xtb_per_family] if c not in starts]
    if kept and kept[0] not in starts:
        starts.insert(0, kept[0])

    minima: list[Minimum] = []
    for cid in starts:
        r = optimize(numbers, cf.positions(mol_h, cid), ef, fmax_eV_A=fmax_eV_A, max_steps=max_steps)
        n_grad += r.n_gradients
        all_converged &= r.converged
        minima.append(Minimum(r.energy_eV * EV_KJMOL, r.positions_A, r.converged, f"conformer {cid}"))

    results = [SiteResult(site=s) for s in sites]
    for k in flexible:
        s = sites[k]
        every = [dihedral_deg(cf.positions(mol_h, c), s.atoms) for c in kept]
        every += [dihedral_deg(m.positions_A, s.atoms) for m in minima]
        if s.kind == RING_OTHER and all(abs(d) >= S_TRANS_LOCK_DEG for d in every):
            results[k].status = "locked_s_trans"
            continue
        planar = cf.prune(mol_h, planar_pool[k], ff_energy, settings)[:settings.planar_starts]
        best: OptResult | None = None

        def release(r: OptResult, angle: float):
            nonlocal n_grad, all_converged
            rel, n = _release(mol_h, base[0], numbers, r.positions_A, ef, s, angle, rng, fmax_eV_A, max_steps)
            n_grad += n
            all_converged &= rel.converged
            minima.append(Minimum(rel.energy_eV * EV_KJMOL, rel.positions_A, rel.converged,
                                  f"planar s-cis of site {s.label} released at {angle:+.0f} deg"))

        for cid in planar:
            r, n = _planar_opt(numbers, cf.positions(mol_h, cid), ef, s.atoms, fmax_eV_A, max_steps)
            n_grad += n
            results[k].n_planar_starts += 1
            if best is None or r.energy_eV < best.energy_eV:
                best = r
            release(r, GAUCHE_PROBE_DEG)
        # one more start from the lowest minimum itself, rotated to planar: catches a
        # better substituent arrangement that the force field did not offer
        low = min(minima, key=lambda m: m.energy_kJmol)
        if s.kind == ACYCLIC:
            start = _twisted(mol_h, base[0], low.positions_A, s.atoms, 0.0)
            if start is not None:
                r, n = _planar_opt(numbers, start, ef, s.atoms, fmax_eV_A, max_steps)
                n_grad += n
                results[k].n_planar_starts += 1
                if best is None or r.energy_eV < best.energy_eV:
                    best = r
        if best is not None:
            release(best, -GAUCHE_PROBE_DEG)   # the other gauche well of the structure that counts
        if best is None:
            results[k].status = "no_planar_start"
            continue
        results[k].planar_energy_kJmol = best.energy_eV * EV_KJMOL
        results[k].planar_positions_A = best.positions_A
        results[k].planar_converged = best.converged
        all_converged &= best.converged

    minima = unique_minima(minima, sites)
    gmin = minima[0]
    for k, res in enumerate(results):
        s = res.site
        d_all = np.array([dihedral_deg(m.positions_A, s.atoms) for m in minima])
        res.dihedral_at_minimum_deg = float(d_all[0])
        w = boltzmann_weights([m.energy_kJmol for m in minima], temperature_K)
        if s.kind == RING_S_CIS:
            res.penalty_kJmol, res.reactive_fraction = 0.0, 1.0
            res.planar_energy_kJmol = gmin.energy_kJmol
            res.planar_positions_A = gmin.positions_A
        elif res.status == "ok":
            raw = res.planar_energy_kJmol - gmin.energy_kJmol
            if raw < -0.05:  # cannot happen once released planar minima are in the pool
                notes.append(f"site {s.label}: planar s-cis {raw:.2f} kJ/mol below the minimum; "
                             "the planar structure's own release is taken as the minimum")
            res.penalty_kJmol = max(raw, 0.0)
            res.reactive_fraction = float(w[np.abs(d_all) < S_CIS_FAMILY_DEG].sum())
        else:
            res.reactive_fraction = float(w[np.abs(d_all) < S_CIS_FAMILY_DEG].sum())
    return StructureAnalysis(minima=minima, sites=results, global_min=gmin, n_gradients=n_grad,
                             n_embedded=n_embedded, force_field=cf.force_field_name(mol_h),
                             all_converged=bool(all_converged), notes=notes)


def _twisted(mol_h: Chem.Mol, template_cid: int, positions_A, atoms, angle_deg: float):
    """`positions_A` with the dihedral `atoms` set to `angle_deg` by rotating one side
    (None when the central bond is in a ring)."""
    tmp = cf.copy_conformer(mol_h, template_cid)
    conf = mol_h.GetConformer(tmp)
    for i, p in enumerate(np.asarray(positions_A)):
        conf.SetAtomPosition(i, p.tolist())
    return cf.positions(mol_h, tmp) if _set_dihedral(mol_h, tmp, atoms, angle_deg) else None


def _release(mol_h, template_cid, numbers, planar_A, ef, site: Site, angle_deg: float, rng,
             fmax_eV_A: float, max_steps: int) -> tuple[OptResult, int]:
    """Free optimisation from a planar s-cis structure twisted to `angle_deg` (with a small
    seeded kick); ring-bound sites are walked there under the constraint first."""
    n = 0
    start = _twisted(mol_h, template_cid, planar_A, site.atoms, angle_deg) if site.kind == ACYCLIC else None
    if start is None:
        walked, n = constrained_dihedral_path(numbers, planar_A, ef, site.atoms, angle_deg,
                                              fmax_eV_A=max(fmax_eV_A, 0.05), max_steps=max_steps)
        start = walked.positions_A
    kick = rng.normal(scale=RELEASE_KICK_A, size=np.shape(start))
    rel = optimize(numbers, np.asarray(start) + kick, ef, fmax_eV_A=fmax_eV_A, max_steps=max_steps)
    return rel, n + rel.n_gradients


def _planar_opt(numbers, start_A, ef, atoms, fmax_eV_A, max_steps) -> tuple[OptResult, int]:
    if abs(dihedral_deg(start_A, atoms)) <= PLANAR_START_TOLERANCE_DEG:
        r = optimize(numbers, start_A, ef, dihedrals_deg=[(0.0, atoms)],
                     fmax_eV_A=fmax_eV_A, max_steps=max_steps)
        return r, r.n_gradients
    return constrained_dihedral_path(numbers, start_A, ef, atoms, 0.0,
                                     fmax_eV_A=fmax_eV_A, max_steps=max_steps)


def torsion_scan(numbers, start_A, backend: Molecule, atoms, step_deg: float = 15.0,
                 fmax_eV_A: float = 0.02):
    """Relaxed scan of the diene dihedral from 0 to 180 deg.

    Returns (dihedrals_deg, energies_kJmol relative to the lowest point, positions_A
    of every point). Starts at planar s-cis from `start_A` and walks outwards, each
    point relaxed with the dihedral held.
    """
    ef = backend_energy_forces(backend)
    r, _ = _planar_opt(numbers, np.asarray(start_A), ef, atoms, fmax_eV_A, 300)
    angles = np.arange(0.0, 180.0 + 1e-9, step_deg)
    energies, geometries = [], []
    pos = r.positions_A
    for a in angles:
        res, _ = constrained_dihedral_path(numbers, pos, ef, atoms, float(a), step_deg=step_deg,
                                           fmax_eV_A=fmax_eV_A)
        pos = res.positions_A
        energies.append(res.energy_eV * EV_KJMOL)
        geometries.append(pos.copy())
    e = np.array(energies)
    return angles, e - e.min(), geometries


def torsion_profile(numbers, start_A, backend: Molecule, atoms, step_deg: float = 15.0,
                    fmax_eV_A: float = 0.02) -> tuple[np.ndarray, np.ndarray]:
    """Relaxed scan of the diene dihedral, 0 to 180 deg: (dihedrals_deg, energies_kJmol
    relative to the lowest point)."""
    angles, energies, _ = torsion_scan(numbers, start_A, backend, atoms, step_deg, fmax_eV_A)
    return angles, energies
