"""One structure, end to end: 3D conformers, GFN2-xTB, s-cis penalty and
frontier orbitals of every site. The result is a JSON-ready dict; nothing
here knows about the library row it came from."""

from __future__ import annotations

import platform
import time

import numpy as np
from rdkit import Chem, rdBase

from . import __version__
from .backends import BackendError, Molecule, Settings as BackendSettings, atom_orbital_weights
from .layout import read_json, write_json  # noqa: F401 - the one way a result is written
from .conformers import ConformerError, ConformerSettings, embed, positions, prune, relax
from .optimize import backend_energy_forces, optimize
from .orbitals import site_frontier
from .sites import find_sites
from .torsion import analyse_structure

RESULT_SCHEMA = 2
LOW_MINIMA_KEPT = 4              # distinct minima whose geometries are kept ...
LOW_MINIMA_WINDOW_KJMOL = 10.0   # ... when within this of the global minimum (kJ/mol)


def backend_settings(settings: dict) -> BackendSettings:
    solvent = settings.get("solvent", "none")
    return BackendSettings(name=settings.get("backend", "xtb-python"),
                           solvent=None if solvent in (None, "none") else solvent)


def conformer_settings(settings: dict) -> ConformerSettings:
    return ConformerSettings(seed=int(settings["seed"]), **settings.get("conformers", {}))


def software_versions() -> dict:
    out = {"dienes": __version__, "rdkit": rdBase.rdkitVersion, "python": platform.python_version(),
           "numpy": np.__version__}
    for mod in ("xtb", "tblite", "ase"):
        try:
            out[mod] = __import__(mod).__version__
        except Exception:  # noqa: BLE001 - a version string is optional
            pass
    return out


def _xyz(pos) -> list:
    return np.round(np.asarray(pos, dtype=float), 5).tolist()


def compute_structure(smiles: str, settings: dict, key: str = "") -> dict:
    """Analyse one fully specified structure. Never raises for chemistry or
    convergence trouble: the returned dict carries a status and a message."""
    t0 = time.perf_counter()
    out = {"schema": RESULT_SCHEMA, "key": key, "smiles": smiles, "status": "ok", "message": "",
           "settings": settings, "seed": settings["seed"], "versions": software_versions()}
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        return out | {"status": "invalid_smiles", "message": "RDKit cannot parse this SMILES"}
    mol_h = Chem.AddHs(mol)
    sites = find_sites(mol_h)
    if not sites:
        return out | {"status": "no_diene", "message": "no conjugated C=C-C=C unit"}
    numbers = [a.GetAtomicNum() for a in mol_h.GetAtoms()]
    opt = settings.get("optimisation", {})
    try:
        backend = Molecule(numbers, backend_settings(settings))
        an = analyse_structure(mol_h, sites, backend, conformer_settings(settings),
                               float(settings["temperature_K"]),
                               fmax_eV_A=opt.get("fmax_eV_A", 0.01), max_steps=opt.get("max_steps", 300))
        sp_min = backend.singlepoint(an.global_min.positions_A)
    except ConformerError as exc:
        return out | {"status": "embed_failed", "message": str(exc)}
    except BackendError as exc:
        return out | {"status": "scf_failed", "message": f"GFN2-xTB ({settings.get('backend')}): {exc}"}
    site_rows = []
    planar = {}
    for res in an.sites:
        s = res.site
        fr = site_frontier(sp_min, numbers, s.atoms)
        row = {"label": s.label, "atoms": list(s.atoms), "kind": s.kind, "aromatic": s.aromatic,
               "status": res.status,
               "scis_penalty_kJmol": round(res.penalty_kJmol, 4) if res.status == "ok" else None,
               "reactive_fraction": round(res.reactive_fraction, 6),
               "dihedral_min_deg": round(res.dihedral_at_minimum_deg, 2),
               "homo_eV": round(fr.homo_eV, 5), "lumo_eV": round(fr.lumo_eV, 5),
               "homo_share": round(fr.homo_share, 4), "lumo_share": round(fr.lumo_share, 4),
               "homo_termini": [round(x, 5) for x in fr.homo_termini],
               "lumo_termini": [round(x, 5) for x in fr.lumo_termini],
               "n_planar_starts": res.n_planar_starts, "planar_converged": res.planar_converged}
        site_rows.append(row)
        if res.planar_positions_A is not None:
            planar[s.label] = _xyz(res.planar_positions_A)
    statuses = {r["status"] for r in site_rows}
    status = "ok" if "ok" in statuses else ("locked_s_trans" if statuses == {"locked_s_trans"}
                                            else sorted(statuses)[0])
    message = "; ".join(an.notes)
    if status == "locked_s_trans":
        message = "every diene site is held s-trans by its ring: no concerted [4+2]"
    elif status == "no_planar_start":
        message = "; ".join(filter(None, [message, "no planar s-cis structure could be started for any "
                                          "diene site (the force field kept every start away from 0 deg)"]))
    if not an.all_converged:
        message = "; ".join(filter(None, [message, "an optimisation hit max_steps before converging"]))
    return out | {
        "status": status, "message": message,
        "n_atoms": len(numbers), "n_gradients": backend.n_calls, "n_embedded": an.n_embedded,
        "n_minima": len(an.minima), "scf_retries": backend.retries, "converged": an.all_converged,
        "force_field": an.force_field, "wall_time_s": round(time.perf_counter() - t0, 3),
        "energy_min_kJmol": round(an.global_min.energy_kJmol, 4),
        "homo_mol_eV": round(sp_min.homo_eV, 5), "lumo_mol_eV": round(sp_min.lumo_eV, 5),
        "sites": site_rows,
        "minima_rel_kJmol": [round(m.energy_kJmol - an.global_min.energy_kJmol, 4) for m in an.minima],
        "geometry": {"numbers": numbers, "minimum_A": _xyz(an.global_min.positions_A),
                     # the lowest distinct minima, for a better level to choose its own minimum from
                     "low_minima_A": [_xyz(m.positions_A) for m in an.minima[:LOW_MINIMA_KEPT]
                                      if m.energy_kJmol - an.global_min.energy_kJmol <= LOW_MINIMA_WINDOW_KJMOL],
                     "planar_s_cis_A": planar},
    }


def lowest_minimum(smiles: str, settings: dict, n_starts: int = 3):
    """GFN2-xTB global minimum of a small molecule: the lowest of `n_starts`
    optimisations from the lowest distinct force-field conformers.

    Returns (mol_h, backend Molecule, OptResult, SinglePoint at the minimum)."""
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        raise ValueError(f"SMILES {smiles!r} cannot be parsed")
    mol_h = Chem.AddHs(mol)
    numbers = [a.GetAtomicNum() for a in mol_h.GetAtoms()]
    cs = conformer_settings(settings)
    cids = embed(mol_h, cs)
    energies = {c: relax(mol_h, c) for c in cids}
    starts = prune(mol_h, cids, energies, cs)[:n_starts]
    backend = Molecule(numbers, backend_settings(settings))
    opt = settings.get("optimisation", {})
    ef = backend_energy_forces(backend)
    best = None
    for cid in starts:
        r = optimize(numbers, positions(mol_h, cid), ef,
                     fmax_eV_A=opt.get("fmax_eV_A", 0.01), max_steps=opt.get("max_steps", 300))
        if best is None or r.energy_eV < best.energy_eV:
            best = r
    return mol_h, backend, best, backend.singlepoint(best.positions_A)


def compute_dienophile(smiles: str, settings: dict) -> dict:
    """Frontier orbitals of the dienophile at its GFN2-xTB minimum, with the LUMO
    weights on the two carbons of its most LUMO-rich C=C (for the regio hint)."""
    mol_h, backend, r, sp = lowest_minimum(smiles, settings)
    numbers = backend.numbers
    lumo = sp.homo_index + 1
    w = atom_orbital_weights(sp, numbers, lumo)
    w_homo = atom_orbital_weights(sp, numbers, sp.homo_index)
    cc = [(b.GetBeginAtomIdx(), b.GetEndAtomIdx()) for b in mol_h.GetBonds()
          if b.GetBondType() in (Chem.BondType.DOUBLE, Chem.BondType.TRIPLE)
          and b.GetBeginAtom().GetAtomicNum() == 6 and b.GetEndAtom().GetAtomicNum() == 6]
    if not cc:
        raise ValueError(f"dienophile {smiles!r} has no C=C or C#C bond")
    a, b = max(cc, key=lambda ab: w[ab[0]] + w[ab[1]])
    ranks = list(Chem.CanonicalRankAtoms(mol_h, breakTies=False))
    return {"smiles": smiles, "homo_eV": round(sp.homo_eV, 5), "lumo_eV": round(sp.lumo_eV, 5),
            "reactive_bond": [a, b], "symmetric_bond": ranks[a] == ranks[b],
            "homo_termini": [round(float(w_homo[a]), 5), round(float(w_homo[b]), 5)], "lumo_termini": [round(float(w[a]), 5), round(float(w[b]), 5)],
            "energy_min_kJmol": round(sp.energy_kJmol, 4), "geometry": {
                "numbers": numbers.tolist(), "minimum_A": _xyz(r.positions_A)},
            "converged": r.converged, "n_gradients": backend.n_calls, "seed": settings["seed"],
            "settings": settings, "versions": software_versions()}

