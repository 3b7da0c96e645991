"""Density-functional refinement of GFN2-xTB structures (single points, PySCF).

GFN2-xTB places the atoms; a density functional prices them. For one diene
structure and one dienophile the refinement computes single points at:

- the diene's lowest GFN2-xTB minima (the refined minimum is the lowest of them),
- the planar s-cis structure of the refined site,
- the located transition structure of the site and its cycloadduct,
- the dienophile's minimum (its own cached result).

Energies (kJ/mol) at the refined level, measured like the GFN2-xTB ones:

- ``scis_penalty_refined``   = E(planar s-cis) - E(refined minimum)
- ``barrier_refined``        = E(TS) - E(refined diene minimum) - E(dienophile)
- ``intrinsic_barrier_refined`` = E(TS) - E(planar s-cis) - E(dienophile)
- ``reaction_energy_refined``   = E(adduct) - E(refined diene minimum) - E(dienophile)

An SCF that does not converge (after the second-order fallback) gives the
status ``scf_failed`` with the step named; the GFN2-xTB values stay in place.
"""

from __future__ import annotations

import time

from .backends import DFTSettings, dft_energy


def level_settings(refine: dict) -> DFTSettings:
    """The DFTSettings of the config's `refine` section."""
    def given(v):
        return None if v in (None, "", "none") else v
    return DFTSettings(method=refine["method"], basis=refine["basis"],
                       dispersion=given(refine.get("dispersion")), solvent=given(refine.get("solvent")))


def level_dict(level: DFTSettings) -> dict:
    return {"method": level.method, "basis": level.basis, "dispersion": level.dispersion,
            "solvent": level.solvent, "grid_level": level.grid_level}


class SCFFailure(RuntimeError):
    """A refined single point did not converge."""


def _energy(numbers, positions, level, threads, what: str, log: list) -> float:
    r = dft_energy(numbers, positions, level, threads=threads)
    log.append({"what": what, "energy_kJmol": round(r.energy_kJmol, 4),
                "dispersion_kJmol": round(r.dispersion_kJmol, 4), "converged": r.converged,
                "cycles": r.cycles, "wall_s": r.wall_s})
    if not r.converged:
        raise SCFFailure(f"SCF did not converge for the {what}")
    return r.energy_kJmol


def refine_dienophile(dienophile: dict, level: DFTSettings, threads: int = 1) -> dict:
    """Refined energy of a dienophile at its GFN2-xTB minimum."""
    t0 = time.perf_counter()
    log: list = []
    out = {"smiles": dienophile["smiles"], "level": level.label(), "settings": level_dict(level),
           "status": "ok", "message": "", "single_points": log}
    try:
        out["energy_kJmol"] = round(_energy(dienophile["geometry"]["numbers"],
                                            dienophile["geometry"]["minimum_A"], level, threads,
                                            "dienophile minimum", log), 4)
    except SCFFailure as exc:
        out |= {"status": "scf_failed", "message": str(exc)}
    out["wall_time_s"] = round(time.perf_counter() - t0, 2)
    return out


def best_located_site(transition: dict) -> str | None:
    """The site whose verified saddle is lowest: the one the refinement prices."""
    ok = [(s["barrier_kJmol"], label) for label, s in transition.get("sites", {}).items()
          if s.get("status") == "ok"]
    return min(ok)[1] if ok else None


def refine_pair(structure: dict, transition: dict, dienophile_refined: dict, level: DFTSettings,
                threads: int = 1) -> dict:
    """Refined penalty, barrier and reaction energy of one diene structure with the
    dienophile of its transition-structure result."""
    t0 = time.perf_counter()
    log: list = []
    out = {"key": structure.get("key", ""), "dienophile": transition.get("dienophile", ""),
           "level": level.label(), "settings": level_dict(level), "status": "ok", "message": "",
           "single_points": log}
    site = best_located_site(transition)
    if structure.get("status") != "ok" or site is None:
        return out | {"status": "not_refined", "message": "no verified transition structure to refine"}
    if dienophile_refined.get("status") != "ok":
        return out | {"status": dienophile_refined.get("status", "missing"),
                      "message": f"dienophile: {dienophile_refined.get('message', 'not refined')}"}
    geo = structure["geometry"]
    numbers = geo["numbers"]
    ts = transition["sites"][site]
    try:
        minima = [_energy(numbers, pos, level, threads, f"diene minimum {k + 1}", log)
                  for k, pos in enumerate(geo.get("low_minima_A") or [geo["minimum_A"]])]
        e_min = min(minima)
        penalty_gfn2 = next(s["scis_penalty_kJmol"] for s in structure["sites"] if s["label"] == site)
        if penalty_gfn2 > 1e-3:
            e_planar = _energy(numbers, geo["planar_s_cis_A"][site], level, threads, "planar s-cis", log)
        else:  # ring-locked or already planar at its minimum: the planar structure is the minimum
            e_planar = e_min
        e_ts = _energy(transition["numbers"], ts["positions_A"], level, threads, "transition structure", log)
        e_adduct = _energy(transition["numbers"], ts["adduct_A"], level, threads, "cycloadduct", log)
    except SCFFailure as exc:
        return out | {"status": "scf_failed", "message": str(exc),
                      "wall_time_s": round(time.perf_counter() - t0, 2)}
    e_dph = dienophile_refined["energy_kJmol"]
    return out | {
        "site": site, "minimum_index": minima.index(e_min),
        "scis_penalty_refined_kJmol": round(max(e_planar - e_min, 0.0), 3),
        "barrier_refined_kJmol": round(e_ts - e_min - e_dph, 3),
        "intrinsic_barrier_refined_kJmol": round(e_ts - e_planar - e_dph, 3),
        "reaction_energy_refined_kJmol": round(e_adduct - e_min - e_dph, 3),
        "n_single_points": len(log), "wall_time_s": round(time.perf_counter() - t0, 2)}
