"""The Diels-Alder transition structure of a diene site with a dienophile.

For every computed diene site and one dienophile:

1. **Screen** every approach (endo and exo face; both regio-orientations of an
   unsymmetrical dienophile) with a fixed-bond model structure: the diene's
   own planar s-cis with the dienophile's reactive C=C face to face above the
   termini, both forming C-C bonds held at ``forming_bond_A``, everything
   else relaxed loosely with GFN2-xTB.
2. **Locate** a first-order saddle from each model structure (sella,
   internal coordinates; :mod:`dienes.saddle`).
3. **Verify** the lowest located saddle, and the next ones when it fails:
   exactly one imaginary mode, that mode stretching both forming bonds
   together, and the two downhill minimisations from it ending one at the
   cycloadduct (both new bonds formed) and one on the reactant side.
4. **Decompose** the verified saddle (activation strain) and record the
   reaction energy to the adduct.

Energies (kJ/mol, GFN2-xTB electronic energies) are measured from the
diene's global minimum and the dienophile's minimum, so the s-cis
pre-equilibrium is inside the barrier:

- ``barrier``           = E(TS) - E(diene minimum) - E(dienophile minimum)
- ``intrinsic_barrier`` = E(TS) - E(diene planar s-cis) - E(dienophile minimum)
- ``distortion``        = E(diene frozen at the TS) - E(diene minimum)
- ``dienophile_distortion`` likewise against the dienophile's minimum
- ``interaction``       = E(TS) - E(diene frozen) - E(dienophile frozen);
  barrier = distortion + dienophile_distortion + interaction
- ``reaction_energy``   = E(adduct) - E(diene minimum) - E(dienophile minimum)

When no saddle passes the checks the site keeps the model structure's
energy as its barrier, with status ``ts_unverified`` and the reason.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from .backends import BackendError, Molecule, Settings as BackendSettings
from .optimize import backend_energy_forces, optimize
from .saddle import analyse_vibrations, bond_change_along, downhill_pair, find_saddle
from .units import EV_KJMOL

SCREEN_FMAX_EV_A = 0.05       # fixed-bond model structures are relaxed to this before the search
IMAGINARY_MIN_CM1 = 100.0     # the reaction mode is at least this imaginary (cm^-1)
SPURIOUS_CM1 = 50.0           # any other mode more imaginary than this fails the check (cm^-1)
MIN_BOND_CHANGE = 0.2         # each forming bond changes at least this much along the unit mode
FORMED_A = 1.75               # both new bonds shorter than this: the cycloadduct
SEPARATED_A = 2.5             # both longer than this: the reactant side
SADDLE_BOND_RANGE_A = (1.8, 3.0)  # forming bonds at a located saddle lie in this range
DOWNHILL_BOND_STEP_A = 0.3    # the downhill starts move the forming bonds by about this much
COVALENT_SCALE = 1.25         # pairs within 1.25 x the sum of covalent radii count as bonded
SITE_WINDOW_KJMOL = 40.0      # sites whose model structure lies further above the best are not located


@dataclass(frozen=True)
class Approach:
    """One way the dienophile meets the diene: its face and its orientation.
    pairs: the two forming bonds as (diene atom, complex atom index of the dienophile carbon)."""

    endo: bool | None
    swap: bool
    pairs: tuple[tuple[int, int], tuple[int, int]]

    @property
    def name(self) -> str:
        face = "face to face" if self.endo is None else ("endo" if self.endo else "exo")
        return face + (", reversed" if self.swap else "")


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
    (the reverse when `swap`), substituents over C2-C3 when `endo`, on the diene's
    emptier face."""
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


def approaches(site_atoms, n_diene_atoms: int, dph_A, bond, symmetric_bond: bool) -> list[Approach]:
    """Every distinct approach: endo/exo unless the dienophile's substituents are spread
    evenly around its C=C (ethylene), and both orientations unless its C=C is symmetric."""
    dph_A = np.asarray(dph_A)
    others = [i for i in range(len(dph_A)) if i not in bond]
    mid = 0.5 * (dph_A[bond[0]] + dph_A[bond[1]])
    one_face = not others or np.linalg.norm(dph_A[others].mean(axis=0) - mid) < 0.1
    faces = (None,) if one_face else (True, False)
    out = []
    c1, c4 = site_atoms[0], site_atoms[3]
    for endo in faces:
        for swap in ((False,) if symmetric_bond else (False, True)):
            a, b = (bond[1], bond[0]) if swap else (bond[0], bond[1])
            out.append(Approach(endo, swap, ((c1, n_diene_atoms + a), (c4, n_diene_atoms + b))))
    return out


def _distance(pos, pair) -> float:
    return float(np.linalg.norm(np.asarray(pos)[pair[0]] - np.asarray(pos)[pair[1]]))


def covalent_pairs(numbers, positions_A, exclude=()) -> list[tuple[int, int]]:
    """Atom pairs closer than COVALENT_SCALE x the sum of covalent radii."""
    from ase.data import covalent_radii
    pos = np.asarray(positions_A)
    radii = np.array([covalent_radii[int(z)] for z in numbers])
    d = np.linalg.norm(pos[:, None, :] - pos[None, :, :], axis=-1)
    skip = {tuple(sorted(p)) for p in exclude}
    n = len(numbers)
    return [(i, j) for i in range(n) for j in range(i + 1, n)
            if d[i, j] < COVALENT_SCALE * (radii[i] + radii[j]) and (i, j) not in skip]


@dataclass
class Verification:
    """Outcome of the saddle checks; reason is '' when verified."""

    verified: bool
    reason: str
    imaginary_cm1: float | None = None
    n_imaginary: int = 0
    bond_changes: tuple[float, float] = (0.0, 0.0)
    adduct: object = None        # OptResult of the product-side minimisation
    reactant_side: object = None  # OptResult of the reactant-side minimisation
    n_gradients: int = 0
    frequencies_cm1: tuple = ()   # the harmonic wavenumbers at the saddle (imaginary ones negative)


def verify(numbers, ts_A, pairs, energy_forces) -> Verification:
    """The checks that make a located structure a Diels-Alder transition structure."""
    vib = analyse_vibrations(numbers, ts_A, energy_forces)
    n_grad = vib.n_gradients
    imag = vib.imaginary(SPURIOUS_CM1)
    lowest = float(vib.frequencies_cm1[0])
    base = dict(imaginary_cm1=round(lowest, 1), n_imaginary=int(len(imag)),
                frequencies_cm1=tuple(round(float(f), 2) for f in vib.frequencies_cm1))
    if lowest > -IMAGINARY_MIN_CM1:
        return Verification(False, f"no imaginary mode beyond {IMAGINARY_MIN_CM1:.0f}i cm-1 "
                                   f"(lowest {lowest:.0f} cm-1)", n_gradients=n_grad, **base)
    if len(imag) > 1:
        return Verification(False, f"{len(imag)} imaginary modes (a higher-order saddle): "
                                   + ", ".join(f"{f:.0f}" for f in vib.frequencies_cm1[imag]) + " cm-1",
                            n_gradients=n_grad, **base)
    mode = vib.modes_A[0]
    g = tuple(bond_change_along(mode, ts_A, *p) for p in pairs)
    base["bond_changes"] = tuple(round(x, 3) for x in g)
    others = [abs(bond_change_along(mode, ts_A, i, j))
              for i, j in covalent_pairs(numbers, ts_A, exclude=pairs)]
    if min(abs(g[0]), abs(g[1])) < MIN_BOND_CHANGE or g[0] * g[1] <= 0 or (
            others and max(others) > max(abs(g[0]), abs(g[1]))):
        return Verification(False, "the imaginary mode does not form both new bonds together "
                                   f"(changes {g[0]:+.2f}, {g[1]:+.2f})", n_gradients=n_grad, **base)
    # downhill both ways: the direction that shortens the forming bonds leads to the adduct
    sign = -1.0 if g[0] + g[1] > 0 else 1.0
    step = DOWNHILL_BOND_STEP_A / max(0.5 * (abs(g[0]) + abs(g[1])), MIN_BOND_CHANGE)
    forward, backward = downhill_pair(numbers, ts_A, sign * mode, energy_forces, displacement_A=step)
    n_grad += forward.n_gradients + backward.n_gradients
    d_fwd = [_distance(forward.positions_A, p) for p in pairs]
    d_bwd = [_distance(backward.positions_A, p) for p in pairs]
    base |= dict(adduct=forward, reactant_side=backward, n_gradients=n_grad)
    if max(d_fwd) > FORMED_A:
        return Verification(False, "downhill towards the product did not reach the cycloadduct "
                                   f"(new bonds {d_fwd[0]:.2f}, {d_fwd[1]:.2f} A)", **base)
    if min(d_bwd) < SEPARATED_A:
        return Verification(False, "downhill towards the reactants did not separate the partners "
                                   f"(bonds {d_bwd[0]:.2f}, {d_bwd[1]:.2f} A)", **base)
    return Verification(True, "", **base)


@dataclass
class Screened:
    """The fixed-bond model structures of one site, lowest first: (energy kJ/mol, Approach, OptResult)."""

    label: str
    models: list


def screen_site(label, site_atoms, diene_A, complex_numbers, n_diene_atoms: int, dph_A, dph_bond,
                dph_symmetric: bool, energy_forces, forming_bond_A: float) -> Screened:
    """Fixed-bond model structure of every approach of one site, relaxed loosely."""
    diene_A, dph_A = np.asarray(diene_A, dtype=float), np.asarray(dph_A, dtype=float)
    models = []
    for ap in approaches(site_atoms, n_diene_atoms, dph_A, dph_bond, dph_symmetric):
        placed = place_dienophile(diene_A, site_atoms, dph_A, dph_bond, forming_bond_A=forming_bond_A,
                                  endo=ap.endo is not False, swap=ap.swap)
        r = optimize(complex_numbers, np.vstack([diene_A, placed]), energy_forces,
                     bonds_A=[(forming_bond_A, p) for p in ap.pairs],
                     fmax_eV_A=SCREEN_FMAX_EV_A, max_steps=300)
        models.append((r.energy_eV * EV_KJMOL, ap, r))
    models.sort(key=lambda t: t[0])
    return Screened(label, models)


def locate_site(screened: Screened, complex_numbers, n_diene_atoms: int, energies: dict,
                energy_forces, complex_mol: Molecule, diene_mol: Molecule, dph_mol: Molecule, *,
                fmax_eV_A: float = 0.01, max_steps: int = 100) -> dict:
    """Locate, verify and decompose the transition structure of one screened site.

    energies (kJ/mol): 'diene_min', 'diene_planar', 'dienophile_min'. Returns a
    JSON-ready dict (energies kJ/mol, distances Angstrom, wavenumbers cm^-1)."""
    t0 = time.perf_counter()
    n_start = complex_mol.n_calls + diene_mol.n_calls + dph_mol.n_calls
    nd, numbers = n_diene_atoms, list(complex_numbers)
    e_ref = energies["diene_min"] + energies["dienophile_min"]
    located = []
    for e_model, ap, r in screened.models:
        ts = find_saddle(numbers, r.positions_A, energy_forces, fmax_eV_A=fmax_eV_A, max_steps=max_steps)
        d = [_distance(ts.positions_A, p) for p in ap.pairs]
        in_range = all(SADDLE_BOND_RANGE_A[0] <= x <= SADDLE_BOND_RANGE_A[1] for x in d)
        located.append({"approach": ap, "model_kJmol": e_model, "model": r, "ts": ts,
                        "usable": ts.converged and in_range, "bonds_A": d})
    attempts = []
    chosen = None
    for cand in sorted((c for c in located if c["usable"]), key=lambda c: c["ts"].energy_eV):
        check = verify(numbers, cand["ts"].positions_A, cand["approach"].pairs, energy_forces)
        attempts.append(f"{cand['approach'].name}: {check.reason or 'verified'}")
        if check.verified:
            chosen = (cand, check)
            break
    out = {"approaches": [{"approach": c["approach"].name,
                           "model_barrier_kJmol": round(c["model_kJmol"] - e_ref, 3),
                           "saddle_kJmol": round(c["ts"].energy_eV * EV_KJMOL - e_ref, 3),
                           "saddle_converged": c["ts"].converged, "saddle_gradients": c["ts"].n_gradients,
                           "forming_bonds_A": [round(x, 3) for x in c["bonds_A"]], "usable": c["usable"]}
                          for c in located],
           "checks": attempts}

    def spent():
        return {"n_gradients": complex_mol.n_calls + diene_mol.n_calls + dph_mol.n_calls - n_start,
                "wall_time_s": round(time.perf_counter() - t0, 3)}

    def decompose(positions_A, e_total):
        """Barrier and its distortion/interaction parts for a complex structure (kJ/mol)."""
        e_diene_frozen = diene_mol.singlepoint(positions_A[:nd]).energy_kJmol
        e_dph_frozen = dph_mol.singlepoint(positions_A[nd:]).energy_kJmol
        return {
            "barrier_kJmol": round(e_total - e_ref, 3),
            "intrinsic_barrier_kJmol": round(e_total - energies["diene_planar"] - energies["dienophile_min"], 3),
            "distortion_kJmol": round(e_diene_frozen - energies["diene_min"], 3),
            "dienophile_distortion_kJmol": round(e_dph_frozen - energies["dienophile_min"], 3),
            "interaction_kJmol": round(e_total - e_diene_frozen - e_dph_frozen, 3)}

    if chosen is None:
        e_model, ap, r = screened.models[0]
        why = ("no saddle search converged with both forming bonds in "
               f"{SADDLE_BOND_RANGE_A[0]}-{SADDLE_BOND_RANGE_A[1]} A" if not attempts
               else "no located saddle passed the checks (" + "; ".join(attempts) + ")")
        # the fixed-bond model structure stands in for the saddle, decomposed the same way
        return out | {
            "status": "ts_unverified", "message": why, "approach": ap.name, "ts_verified": False,
            "model_barrier_kJmol": round(e_model - e_ref, 3), **decompose(r.positions_A, e_model),
            "pairs": [list(p) for p in ap.pairs],
            "positions_A": np.round(r.positions_A, 5).tolist(), "n_diene_atoms": nd} | spent()
    cand, check = chosen
    ts_A = cand["ts"].positions_A
    e_ts = cand["ts"].energy_eV * EV_KJMOL
    e_adduct = check.adduct.energy_eV * EV_KJMOL
    d1, d2 = (_distance(ts_A, p) for p in cand["approach"].pairs)
    return out | {
        "status": "ok", "message": "", "approach": cand["approach"].name, "ts_verified": True,
        **decompose(ts_A, e_ts),
        "reaction_energy_kJmol": round(e_adduct - e_ref, 3),
        "complex_kJmol": round(check.reactant_side.energy_eV * EV_KJMOL - e_ref, 3),
        "model_barrier_kJmol": round(cand["model_kJmol"] - e_ref, 3),
        "ts_imag_cm1": check.imaginary_cm1, "n_imaginary": check.n_imaginary,
        "frequencies_cm1": list(check.frequencies_cm1),
        "mode_bond_changes": list(check.bond_changes),
        "forming_bonds_A": [round(d1, 3), round(d2, 3)], "asynchronicity_A": round(abs(d1 - d2), 3),
        "pairs": [list(p) for p in cand["approach"].pairs],
        **_preferences(located, cand),
        "adduct_converged": bool(check.adduct.converged),
        "positions_A": np.round(ts_A, 5).tolist(),
        "adduct_A": np.round(check.adduct.positions_A, 5).tolist(), "n_diene_atoms": nd} | spent()


def _preferences(located: list[dict], chosen: dict) -> dict:
    """Endo/exo and orientation preferences from the located saddles (kJ/mol).

    face_preference: the face of the lowest located saddle when both faces were
    located ('endo'/'exo'), with face_gap_kJmol = E(best of the other face) - E(best);
    orientation_gap_kJmol likewise for the two orientations of an unsymmetrical
    dienophile, the preferred one being that of the lowest saddle."""
    usable = [c for c in located if c["usable"]] or [chosen]

    def split(key):
        groups = {}
        for c in usable:
            e = c["ts"].energy_eV * EV_KJMOL
            k = key(c["approach"])
            groups[k] = min(groups.get(k, e), e)
        if len(groups) < 2:
            return None, None
        (k_best, e_best), (_, e_next) = sorted(groups.items(), key=lambda kv: kv[1])[:2]
        return k_best, round(e_next - e_best, 3)

    face, face_gap = split(lambda a: a.endo)
    orient, orient_gap = split(lambda a: a.swap)
    best_pairs = next((c["approach"].pairs for c in sorted(usable, key=lambda c: c["ts"].energy_eV)
                       if orient is None or c["approach"].swap == orient), chosen["approach"].pairs)
    return {"face_preference": None if face is None else ("endo" if face else "exo"),
            "face_gap_kJmol": face_gap, "orientation_gap_kJmol": orient_gap,
            "preferred_pairs": [list(p) for p in best_pairs]}


def transition_states_for_structure(structure: dict, dienophile: dict, settings: BackendSettings,
                                    ts_settings: dict) -> dict:
    """Transition structure of every computed site of a per-structure result with one
    dienophile. Every site is screened; saddles are located for the sites whose best
    model structure lies within SITE_WINDOW_KJMOL of the best site's (the others keep
    their model energy with status 'not_located')."""
    t0 = time.perf_counter()
    out = {"key": structure.get("key", ""), "dienophile": dienophile["smiles"],
           "settings": ts_settings, "sites": {}, "status": "ok", "message": ""}
    if structure.get("status") != "ok":
        return out | {"status": structure.get("status", "missing"), "message": "no structure to react"}
    geo = structure["geometry"]
    dgeo = dienophile["geometry"]
    nd = len(geo["numbers"])
    numbers = list(geo["numbers"]) + list(dgeo["numbers"])
    try:
        complex_mol = Molecule(numbers, settings)
        diene_mol, dph_mol = Molecule(geo["numbers"], settings), Molecule(dgeo["numbers"], settings)
        ef = backend_energy_forces(complex_mol)
        sites = [s for s in structure["sites"] if s["status"] == "ok" and s["label"] in geo["planar_s_cis_A"]]
        screened = {s["label"]: screen_site(s["label"], s["atoms"], geo["planar_s_cis_A"][s["label"]], numbers,
                                            nd, dgeo["minimum_A"], tuple(dienophile["reactive_bond"]),
                                            bool(dienophile["symmetric_bond"]), ef, ts_settings["forming_bond_A"])
                    for s in sites}
        e_ref = structure["energy_min_kJmol"] + dienophile["energy_min_kJmol"]
        best = min((sc.models[0][0] for sc in screened.values()), default=None)
        for s in sites:
            sc = screened[s["label"]]
            e_model = sc.models[0][0]
            if e_model - best > SITE_WINDOW_KJMOL:
                out["sites"][s["label"]] = {
                    "status": "not_located", "ts_verified": False, "approach": sc.models[0][1].name,
                    "model_barrier_kJmol": round(e_model - e_ref, 3),
                    "message": f"model structure {e_model - best:.0f} kJ/mol above the best site's: "
                               "no saddle searched"}
                continue
            energies = {"diene_min": structure["energy_min_kJmol"],
                        "diene_planar": structure["energy_min_kJmol"] + s["scis_penalty_kJmol"],
                        "dienophile_min": dienophile["energy_min_kJmol"]}
            out["sites"][s["label"]] = locate_site(
                sc, numbers, nd, energies, ef, complex_mol, diene_mol, dph_mol,
                fmax_eV_A=ts_settings["fmax_eV_A"], max_steps=ts_settings["max_steps"])
        out["n_gradients"] = complex_mol.n_calls + diene_mol.n_calls + dph_mol.n_calls
    except BackendError as exc:
        out |= {"status": "scf_failed", "message": f"GFN2-xTB failed on the complex: {exc}"}
    out["numbers"] = numbers
    out["wall_time_s"] = round(time.perf_counter() - t0, 3)
    return out
