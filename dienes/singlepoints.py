"""Single points on the GFN2-xTB structures at a named level (pricing them).

GFN2-xTB places every atom: conformers, planar s-cis, the located transition
structure. It does not order dienes well by its own energies (too much
dispersion, too generous to alkyl groups and large flat dienes), so the
barrier the ranking rests on is priced again at a better level, a density
functional by default. A level is any object with ``label()``, ``as_dict()``
and ``energy(numbers, positions_A)`` in kJ/mol (:mod:`dienes.backends`:
:class:`~dienes.backends.DFTLevel`, :class:`~dienes.backends.GFN2Level`), so
every function here takes the level as a parameter.

Only the single points the ranking needs are computed:

- the diene's lowest GFN2-xTB minima (up to LOW_MINIMA_KEPT, those within
  MINIMA_WINDOW_KJMOL of the global one: the better level may order them
  differently, and a barrier measured from the wrong minimum is wrong by that
  difference); the priced minimum is the lowest of them. The window was set by
  measurement on the demo: the gauche conformers GFN2-xTB puts 8-10 kJ/mol up
  lie 14-18 kJ/mol up at B3LYP/def2-SVP and weigh nothing in the ensemble;
  leaving out everything above 8 kJ/mol saved 27 of 104 single points and moved
  no free-energy barrier by more than 0.46 kJ/mol (docs/validation.md). A minimum
  that is the mirror image of one already priced (a gauche pair: same interatomic
  distances) takes its twin's energy instead of a single point of its own. One result per
  structure and level, shared by every dienophile.
- the dienophile's minimum, once per run (one result per dienophile and level);
- the transition structure of every reactive site whose GFN2-xTB barrier lies
  within SITE_WINDOW_KJMOL of the site's best (the better level may prefer
  another site of a polyene or an acene);
- the cycloadduct of the pair's best site (:func:`price_adduct`): its reaction free
  energy says whether the adduct may revert (:func:`dienes.kinetics.reversal`), which no
  GFN2-xTB number can (GFN2-xTB puts the maleic anhydride adducts of furan and
  cyclopentadiene 50-100 kJ/mol below the DARC benchmark's energies, docs/validation.md).

Not computed: the planar s-cis structure (the s-cis penalty column stays at GFN2-xTB,
named so; the barrier from the global minimum already contains the penalty): it would
cost a single point per diene without changing the ranking.

Barriers (kJ/mol) at the level, per priced site:

- electronic: E(TS) - E(lowest priced diene minimum) - E(dienophile);
- free energy: [E + G_corr](TS) - G(diene) - [E + G_corr](dienophile), where G_corr is
  the thermal correction of each structure from GFN2-xTB harmonic wavenumbers
  (:mod:`dienes.thermo`: quasi-RRHO, 1 mol/L, the run's temperature) and the diene is the
  Boltzmann ensemble of its priced minima, G(diene) = -RT ln sum exp(-[E + G_corr]_i / RT):
  a flexible diene pays for the torsions and conformers it gives up, which cyclopentadiene
  never had. The level's ``barrier`` (config ``levels``) names the one the model uses.

An SCF that does not converge (after the second-order fallback) gives the
status ``scf_failed`` naming the structure; the row is then ranked at the next level
of ``ranking.levels`` and says so.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from .backends import Settings as BackendSettings, d3_dispersion_kJmol
from .units import rt_kjmol

SITE_WINDOW_KJMOL = 15.0          # sites priced: GFN2-xTB barrier within this of the site's best
MIRROR_TOLERANCE_A = 0.04         # minima whose sorted interatomic distances agree this well ...
MIRROR_ENERGY_KJMOL = 0.1         # ... and whose GFN2-xTB energies this well are mirror images
PRICED_SITE_STATUSES = ("ok", "ts_unverified")
MINIMA_WINDOW_KJMOL = 8.0         # diene minima priced: GFN2-xTB energy within this of the lowest


@dataclass
class Thermal:
    """Where thermal corrections come from: GFN2-xTB (these backend settings) at temperature_K."""

    backend: BackendSettings
    temperature_K: float


def thermal_correction_kJmol(numbers, positions_A, thermal: Thermal, frequencies_cm1=None) -> float:
    """G - E (kJ/mol) of one structure: harmonic wavenumbers (given, or from a GFN2-xTB
    finite-difference Hessian), quasi-RRHO, 1 mol/L standard state (dienes.thermo)."""
    from ase.data import atomic_masses
    from .thermo import thermal_correction
    if not frequencies_cm1:
        from .backends import Molecule
        from .optimize import backend_energy_forces
        from .saddle import analyse_vibrations
        frequencies_cm1 = analyse_vibrations(numbers, positions_A, backend_energy_forces(
            Molecule(numbers, thermal.backend))).frequencies_cm1
    masses = [atomic_masses[int(z)] for z in numbers]
    return thermal_correction(frequencies_cm1, masses, positions_A, thermal.temperature_K).free_energy_kJmol


def ensemble_free_energy_kJmol(free_energies_kJmol, temperature_K: float) -> float:
    """-RT ln sum exp(-G_i / RT): the free energy of a set of conformers (kJ/mol)."""
    g = list(free_energies_kJmol)
    low = min(g)
    return low - rt_kjmol(temperature_K) * math.log(sum(math.exp(-(x - low) / rt_kjmol(temperature_K)) for x in g))


class SCFFailure(RuntimeError):
    """A single point at the level did not converge."""


def _energy(level, numbers, positions, what: str, log: list) -> float:
    r = level.energy(numbers, positions)
    # a failed SCF may leave no finite energy: logged as null (JSON has no NaN)
    log.append({"what": what, "energy_kJmol": round(r.energy_kJmol, 4) if math.isfinite(r.energy_kJmol) else None,
                "dispersion_kJmol": round(r.dispersion_kJmol, 4), "converged": r.converged,
                "cycles": r.cycles, "wall_s": r.wall_s})
    if not r.converged:
        raise SCFFailure(f"SCF did not converge for the {what}")
    return r.energy_kJmol


def _result(level, **fields) -> dict:
    return {"level": level.label(), "settings": level.as_dict(), "status": "ok", "message": ""} | fields


def price_dienophile(dienophile: dict, level, thermal: Thermal | None = None) -> dict:
    """Energy (kJ/mol) of a dienophile at its GFN2-xTB minimum, at `level` (and its thermal
    correction when `thermal` is given)."""
    t0 = time.perf_counter()
    log: list = []
    out = _result(level, smiles=dienophile["smiles"], single_points=log)
    geo = dienophile["geometry"]
    try:
        out["energy_kJmol"] = round(_energy(level, geo["numbers"], geo["minimum_A"], "dienophile minimum", log), 4)
    except SCFFailure as exc:
        out |= {"status": "scf_failed", "message": str(exc)}
    if thermal is not None:
        out["g_corr_kJmol"] = round(thermal_correction_kJmol(geo["numbers"], geo["minimum_A"], thermal), 4)
    return out | {"wall_time_s": round(time.perf_counter() - t0, 2)}


def mirror_twins(geometries, energies_kJmol=None) -> list[int]:
    """For each geometry, the index of the first earlier one it is the mirror image of (or
    itself). A reflection keeps every interatomic distance, and so does relabelling the
    hydrogens of a methyl group: the sorted distances of two mirror-image conformers agree,
    those of two different conformers do not. With `energies_kJmol` (GFN2-xTB), twins must
    also agree in energy within MIRROR_ENERGY_KJMOL."""
    import numpy as np
    n = len(np.asarray(geometries[0]))
    iu = np.triu_indices(n, 1)
    dist = [np.sort(np.linalg.norm(np.asarray(g)[:, None] - np.asarray(g)[None], axis=-1)[iu]) for g in geometries]
    e = list(energies_kJmol) if energies_kJmol is not None else [0.0] * len(geometries)
    out = []
    for k, d in enumerate(dist):
        out.append(next((j for j in range(k) if out[j] == j and abs(e[j] - e[k]) < MIRROR_ENERGY_KJMOL
                         and np.max(np.abs(dist[j] - d)) < MIRROR_TOLERANCE_A), k))
    return out


def price_structure(structure: dict, level, thermal: Thermal | None = None) -> dict:
    """Energies (kJ/mol) of a diene's lowest GFN2-xTB minima at `level`; the priced
    minimum is the lowest of them. With `thermal`, each minimum's thermal correction too."""
    t0 = time.perf_counter()
    log: list = []
    out = _result(level, key=structure.get("key", ""), single_points=log)
    if structure.get("status") != "ok":
        return out | {"status": "nothing_to_price", "message": "no GFN2-xTB structure to price"}
    geo = structure["geometry"]
    geometries = geo.get("low_minima_A") or [geo["minimum_A"]]
    rel = structure.get("minima_rel_kJmol", [])[:len(geometries)]   # sorted, lowest first
    if rel:
        geometries = geometries[:max(1, sum(e <= MINIMA_WINDOW_KJMOL for e in rel))]
        rel = rel[:len(geometries)]
    twins = mirror_twins(geometries, rel or None)
    try:
        minima = []
        for k, pos in enumerate(geometries):
            minima.append(minima[twins[k]] if twins[k] != k
                          else _energy(level, geo["numbers"], pos, f"diene minimum {k + 1}", log))
    except SCFFailure as exc:
        return out | {"status": "scf_failed", "message": str(exc),
                      "wall_time_s": round(time.perf_counter() - t0, 2)}
    best = min(range(len(minima)), key=minima.__getitem__)
    out |= {"minima_kJmol": [round(e, 4) for e in minima], "energy_min_kJmol": round(minima[best], 4),
            "minimum_index": best}
    out["mirror_of"] = twins
    if thermal is not None:
        g_corr = []
        for k, pos in enumerate(geometries):
            g_corr.append(g_corr[twins[k]] if twins[k] != k
                          else round(thermal_correction_kJmol(geo["numbers"], pos, thermal), 4))
        out["g_corr_kJmol"] = g_corr
        out["temperature_K"] = thermal.temperature_K
        out["free_energy_kJmol"] = round(ensemble_free_energy_kJmol(
            [e + g for e, g in zip(minima, out["g_corr_kJmol"])], thermal.temperature_K), 4)
    return out | {"wall_time_s": round(time.perf_counter() - t0, 2)}


def sites_to_price(transition: dict) -> list[str]:
    """Reactive sites of a transition-structure result worth pricing: a structure to
    price (verified saddle, or the model structure of an unverified one) and a GFN2-xTB
    barrier within SITE_WINDOW_KJMOL of the best such site, lowest first."""
    cands = sorted((s["barrier_kJmol"], label) for label, s in transition.get("sites", {}).items()
                   if s.get("status") in PRICED_SITE_STATUSES and s.get("positions_A")
                   and s.get("barrier_kJmol") is not None)
    return [label for e, label in cands if e - cands[0][0] <= SITE_WINDOW_KJMOL]


def contact_dispersion(transition: dict, label: str) -> float:
    """London dispersion between the two partners at a site's transition structure (kJ/mol):
    D3(BJ) with B3LYP's damping, E(complex) - E(diene part) - E(dienophile part). A geometry
    term, no SCF: it says how much a dispersion-rich level (GFN2-xTB) rewards the contact."""
    site = transition["sites"][label]
    pos, numbers, nd = site["positions_A"], transition["numbers"], site["n_diene_atoms"]
    return (d3_dispersion_kJmol(numbers, pos) - d3_dispersion_kJmol(numbers[:nd], pos[:nd])
            - d3_dispersion_kJmol(numbers[nd:], pos[nd:]))


def price_pair(structure_priced: dict, transition: dict, dienophile_priced: dict, level,
               thermal: Thermal | None = None) -> dict:
    """Barriers (kJ/mol) at `level` of every priced site of one (diene, dienophile) pair,
    from the diene's and the dienophile's priced minima: electronic, and with `thermal`
    (and thermal corrections priced for both partners) the free-energy barrier too."""
    t0 = time.perf_counter()
    log: list = []
    out = _result(level, key=transition.get("key", ""), dienophile=transition.get("dienophile", ""),
                  single_points=log, sites={})
    labels = sites_to_price(transition)
    if not labels:
        return out | {"status": "nothing_to_price", "message": "no transition structure to price"}
    for what, priced in (("diene", structure_priced), ("dienophile", dienophile_priced)):
        if priced.get("status") != "ok":
            return out | {"status": priced.get("status", "missing"),
                          "message": f"{what}: {priced.get('message') or 'not priced'}"}
    e_ref = structure_priced["energy_min_kJmol"] + dienophile_priced["energy_kJmol"]
    for label in labels:
        site = transition["sites"][label]
        try:
            e_ts = _energy(level, transition["numbers"], site["positions_A"],
                           f"transition structure of site {label}", log)
        except SCFFailure as exc:
            out["sites"][label] = {"status": "scf_failed", "message": str(exc)}
            continue
        out["sites"][label] = {"status": "ok", "electronic_barrier_kJmol": round(e_ts - e_ref, 3),
                               "ts_status": site["status"],
                               "contact_dispersion_kJmol": round(contact_dispersion(transition, label), 3)}
        if thermal is not None and "free_energy_kJmol" in structure_priced and "g_corr_kJmol" in dienophile_priced:
            # a verified saddle carries the wavenumbers of its own check; a model structure has none
            g_ts = thermal_correction_kJmol(transition["numbers"], site["positions_A"], thermal,
                                            site.get("frequencies_cm1"))
            g_dph = dienophile_priced["energy_kJmol"] + dienophile_priced["g_corr_kJmol"]
            out["sites"][label] |= {"g_corr_ts_kJmol": round(g_ts, 3), "free_energy_barrier_kJmol": round(
                e_ts + g_ts - structure_priced["free_energy_kJmol"] - g_dph, 3)}
    if not any(s["status"] == "ok" for s in out["sites"].values()):
        out |= {"status": "scf_failed", "message": "; ".join(s["message"] for s in out["sites"].values())}
    return out | {"minimum_index": structure_priced["minimum_index"],
                  "wall_time_s": round(time.perf_counter() - t0, 2)}


def best_site(pair_priced: dict, barrier: str = "free_energy") -> str | None:
    """The site with the lowest barrier of a pair at its level, by the level's barrier kind
    ('free_energy' or 'electronic'; the electronic barrier where no site has a free energy)."""
    ok = {label: s for label, s in pair_priced.get("sites", {}).items() if s.get("status") == "ok"}
    for key in dict.fromkeys((f"{barrier}_barrier_kJmol", "electronic_barrier_kJmol")):
        have = {label: s[key] for label, s in ok.items() if s.get(key) is not None}
        if have:
            return min(have, key=have.get)
    return None


def reaction_dispersion(level):
    """The London dispersion a level's reaction energies need added: D3(BJ) with the level's own
    functional (a geometry-only term, no SCF), or None where the level has dispersion of its own
    (a dispersion keyword, or GFN2-xTB). Measured: on the DARC benchmark's own geometries (Diels-Alder
    reaction energies, estimated CCSD(T)/CBS), B3LYP/def2-SVP alone under-binds furan and
    cyclopentadiene + maleic anhydride by 43-54 kJ/mol and with D3(BJ) by 3-17 (docs/validation.md)."""
    d = level.as_dict()
    method = str(d.get("method") or "")
    if d.get("dispersion") or not method or method.startswith("gfn"):
        return None
    return lambda numbers, positions_A: d3_dispersion_kJmol(numbers, positions_A, functional=method)


def price_adduct(structure: dict, structure_priced: dict, transition: dict, dienophile: dict,
                 dienophile_priced: dict, pair_priced: dict, level, thermal: Thermal | None = None,
                 barrier: str = "free_energy") -> dict:
    """The cycloadduct of the pair's best site at `level` (`best_site` by the level's `barrier`
    kind; the GFN2-xTB structure the saddle's
    downhill path reached): the reaction energy E(adduct) - E(diene) - E(dienophile) and, with
    `thermal`, the reaction free energy at the run's temperature (1 mol/L; the diene as the
    ensemble of its computed minima, as for the barrier), each with the level's dispersion
    (`reaction_dispersion`; a reaction energy, unlike a barrier between similar structures, is
    wrong by tens of kJ/mol without it). `structure` and `dienophile` are the GFN2-xTB results
    (their geometries). One single point and one GFN2-xTB Hessian per pair; what the reaction
    free energy says about reversal is :func:`dienes.kinetics.reversal`."""
    t0 = time.perf_counter()
    log: list = []
    out = _result(level, key=transition.get("key", ""), dienophile=transition.get("dienophile", ""),
                  single_points=log)
    label = best_site(pair_priced, barrier)
    site = transition.get("sites", {}).get(label or "", {})
    if label is None:
        why = pair_priced.get("message") or "no site computed at this level"
        return out | {"status": "nothing_to_price", "message": f"no cycloadduct to compute ({why})"}
    if not site.get("adduct_A"):
        return out | {"status": "nothing_to_price", "site": label,
                      "message": f"site {label} has no GFN2-xTB cycloadduct (its saddle was not verified, so no "
                                 "downhill path reached one)"}
    out |= {"site": label, "adduct_converged": bool(site.get("adduct_converged", False))}
    numbers, adduct = transition["numbers"], site["adduct_A"]
    try:
        e_add = _energy(level, numbers, adduct, f"cycloadduct of site {label}", log)
    except SCFFailure as exc:
        return out | {"status": "scf_failed", "message": str(exc), "wall_time_s": round(time.perf_counter() - t0, 2)}
    geo = structure["geometry"]
    minima_A = (geo.get("low_minima_A") or [geo["minimum_A"]])[:len(structure_priced["minima_kJmol"])]
    dgeo = dienophile["geometry"]
    disp = reaction_dispersion(level)
    d_add = d_dph = 0.0
    d_min = [0.0] * len(minima_A)
    if disp is not None:
        d_add, d_dph = disp(numbers, adduct), disp(dgeo["numbers"], dgeo["minimum_A"])
        d_min = [disp(geo["numbers"], pos) for pos in minima_A]
        out["dispersion"] = "D3(BJ) added"
    e_minima = [e + d for e, d in zip(structure_priced["minima_kJmol"], d_min)]
    out["reaction_energy_kJmol"] = round(e_add + d_add - min(e_minima) - dienophile_priced["energy_kJmol"] - d_dph, 3)
    if thermal is not None and "g_corr_kJmol" in structure_priced and "g_corr_kJmol" in dienophile_priced:
        g_add = thermal_correction_kJmol(numbers, adduct, thermal)
        g_diene = ensemble_free_energy_kJmol([e + g for e, g in zip(e_minima, structure_priced["g_corr_kJmol"])],
                                             thermal.temperature_K)
        out |= {"g_corr_adduct_kJmol": round(g_add, 3), "temperature_K": thermal.temperature_K,
                "reaction_free_energy_kJmol": round(
                    e_add + d_add + g_add - g_diene
                    - dienophile_priced["energy_kJmol"] - d_dph - dienophile_priced["g_corr_kJmol"], 3)}
    return out | {"wall_time_s": round(time.perf_counter() - t0, 2)}
