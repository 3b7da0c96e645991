"""The pipeline's conformer protocol against an exhaustive reference search.

For a fixed panel of dienes (10-45 atoms: flexible, hindered and ring cases),
in one process:

(a) the pipeline's own protocol (dienes.pipeline.compute_structure with the
    config's settings);
(b) an exhaustive reference: many ETKDG conformers, every one optimised with
    GFN2-xTB at tight convergence; the planar s-cis of every flexible site
    started from every s-cis-like conformer and from every minimum rotated to
    planar, each planar structure released and re-optimised so that minima it
    finds count too.

It prints per-diene wall time and gradient calls of both and the penalty
difference of every flexible site, a scaling table (time and gradient calls
against heavy atoms and rotatable bonds, plus a PNG plot), and ends with

    speedup_vs_exhaustive=<x> penalty_agreement=<fraction within 1 kJ/mol> max_penalty_error_kJmol=<y>

With --ts it also times the transition-structure step against a denser search
over approaches (three forming-bond lengths and every planar start) and
prints the barrier agreement. --quick: 4 dienes, the reference with three times the protocol's embeddings.

    python benchmarks/conformer_protocol.py [--quick] [--ts] [--conformers 200] [--plot out.png]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from rdkit import Chem  # noqa: E402
from rdkit.Chem import rdMolDescriptors  # noqa: E402

from dienes import conformers as cf  # noqa: E402
from dienes import settings as cfg  # noqa: E402
from dienes.backends import Molecule  # noqa: E402
from dienes.optimize import backend_energy_forces, dihedral_deg, optimize  # noqa: E402
from dienes.pipeline import backend_settings, compute_dienophile, compute_structure, conformer_settings  # noqa: E402
from dienes.sites import ACYCLIC, RING_S_CIS, find_sites  # noqa: E402
from dienes.torsion import _planar_opt, _set_dihedral  # noqa: E402
from dienes.units import EV_KJMOL  # noqa: E402

CONFIG = Path(__file__).resolve().parent.parent / "config" / "config.yaml"
PANEL = [
    "C=CC=C", "C/C=C/C=C", "C/C=C\\C=C", "CC(C)=CC=C", "C=CC(=C)C(C)(C)C",
    "C=C(C(C)(C)C)C(=C)C(C)(C)C", "CO/C=C/C=C", "C=CC(=C)OC", "C=C/C=C/c1ccccc1", "C=CC(=C)c1ccccc1",
    "C=C1CCCCC1=C", "C=CC1=CCCCC1", "C=CC(=C)CCC=C(C)C", "C=C/C(C)=C/CC=C(C)C", "C/C=C/C=C/C(=O)OC",
    "CC(=O)O/C=C/C=C", "C=CC(=C)O[Si](C)(C)C", "CN(C)/C=C/C=C", "C1CCC(=CC1)C1=CCCCC1",
    "C1CC/C=C\\C=C/C1", "C/C=C/C=C/CO", "C=C(C)C=C(C)C", "CCCCC/C=C/C=C", "C=C(/C=C/OC)O[Si](C)(C)C",
    "C=CC(=C)CCC=C(C)CCC=C(C)C",
]
# the quick panel: one diene of each hard kind (a cis-substituent, a gauche well, a donor rotor, a
# twisted ring diene), searched by the reference with three times the protocol's embeddings
QUICK = ["C/C=C\\C=C", "C=CC(=C)C(C)(C)C", "CO/C=C/C=C", "C=C1CCCCC1=C"]
QUICK_REFERENCE_FACTOR = 3
TIGHT_FMAX_EV_A = 0.002
AGREE_KJMOL = 1.0


def exhaustive(smiles: str, st: dict, n_conformers: int) -> dict:
    """Reference penalties per flexible site: every conformer optimised tightly, every
    s-cis-like conformer and every minimum taken to planar s-cis."""
    t0 = time.perf_counter()
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    numbers = [a.GetAtomicNum() for a in mol.GetAtoms()]
    sites = [s for s in find_sites(mol) if s.kind != RING_S_CIS]
    reference = Chem.MolToSmiles(Chem.RemoveHs(mol))
    settings = cf.ConformerSettings(**(conformer_settings(st).__dict__ | {"n_conformers": n_conformers}))
    cids = cf.embed(mol, settings)
    for c in cids:
        cf.relax(mol, c)
    cids = [c for c in cids if cf.stereo_intact(mol, c, reference)]
    backend = Molecule(numbers, backend_settings(st))
    ef = backend_energy_forces(backend)
    minima = []
    for c in cids:
        r = optimize(numbers, cf.positions(mol, c), ef, fmax_eV_A=TIGHT_FMAX_EV_A, max_steps=2000)
        minima.append(r)
    rng = np.random.default_rng(st["seed"])
    out = {}
    for s in sites:
        starts = [cf.positions(mol, c) for c in cids if abs(dihedral_deg(cf.positions(mol, c), s.atoms)) < 90.0]
        held = {}
        for c in cids:   # every conformer relaxed by the force field with the diene held planar
            new = cf.copy_conformer(mol, c)
            held[new] = cf.relax(mol, new, torsion=s.atoms, target_deg=0.0)
        distinct = cf.prune(mol, [c for c in held if cf.stereo_intact(mol, c, reference)], held,
                            cf.ConformerSettings(energy_window_kJmol=1e9, rmsd_threshold_A=0.1))
        starts += [cf.positions(mol, c) for c in distinct]
        for m in _distinct(minima):
            starts.append(_rotated_to_planar(mol, cids[0], m.positions_A, s))
        planar = []
        seen = 0
        for _ in range(2):   # a second pass from every near-s-cis minimum the releases found
            for p in starts:
                r, _ = _planar_opt(numbers, p, ef, s.atoms, TIGHT_FMAX_EV_A, 2000)
                planar.append(r.energy_eV)
                kick = rng.normal(scale=0.02, size=r.positions_A.shape)
                minima.append(optimize(numbers, r.positions_A + kick, ef, fmax_eV_A=TIGHT_FMAX_EV_A,
                                       max_steps=2000))
            starts = [m.positions_A for m in _distinct(minima[seen:])
                      if abs(dihedral_deg(m.positions_A, s.atoms)) < 40.0]
            seen = len(minima)
        out[s.label] = min(planar)
    e_min = min(m.energy_eV for m in minima)
    return {"penalties": {k: (v - e_min) * EV_KJMOL for k, v in out.items()}, "n_gradients": backend.n_calls,
            "wall_s": time.perf_counter() - t0, "n_conformers": len(cids)}


def _distinct(minima):
    """Minima with distinct energies (0.01 kJ/mol): exact repeats add nothing."""
    seen, out = set(), []
    for m in minima:
        k = round(m.energy_eV * EV_KJMOL, 2)
        if k not in seen:
            seen.add(k)
            out.append(m)
    return out


def _rotated_to_planar(mol, cid, positions, site):
    """A minimum rotated rigidly to diene dihedral 0 (acyclic sites); ring sites as they are."""
    if site.kind != ACYCLIC:
        return np.asarray(positions)
    tmp = cf.copy_conformer(mol, cid)
    conf = mol.GetConformer(tmp)
    for i, p in enumerate(positions):
        conf.SetAtomPosition(i, p.tolist())
    return cf.positions(mol, tmp) if _set_dihedral(mol, tmp, site.atoms, 0.0) else np.asarray(positions)


def dense_ts(structure: dict, dph: dict, st: dict, ts_settings: dict) -> dict:
    """A denser transition-structure search: three forming-bond lengths for every
    approach of every located site; the lowest verified barrier of each site."""
    from dienes.transition import transition_states_for_structure
    t0 = time.perf_counter()
    n = 0
    best = {}
    for bond in (2.1, 2.25, 2.4):
        r = transition_states_for_structure(structure, dph, backend_settings(st),
                                            ts_settings | {"forming_bond_A": bond})
        n += r.get("n_gradients", 0)
        for label, s in r["sites"].items():
            if s.get("status") == "ok":
                best[label] = min(best.get(label, 1e9), s["barrier_kJmol"])
    return {"barriers": best, "n_gradients": n, "wall_s": time.perf_counter() - t0}


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="4 dienes, reference with 3x the protocol's embeddings")
    ap.add_argument("--conformers", type=int, default=None, help="reference ETKDG conformers (default 200)")
    ap.add_argument("--ts", action="store_true", help="also time the transition-structure step")
    ap.add_argument("--plot", default=None, help="PNG of time and gradient calls against size")
    ap.add_argument("--json", default=None, help="write every figure to this file")
    ap.add_argument("--cache", default=None,
                    help="JSON file of exhaustive results (read and extended): lets another version of "
                         "the protocol be compared against the same reference without recomputing it")
    args = ap.parse_args()
    config = cfg.load(CONFIG)
    st = config.structure_settings()
    panel = QUICK if args.quick else PANEL
    n_ref = args.conformers or (QUICK_REFERENCE_FACTOR * config["conformers"]["n_conformers"] if args.quick else 200)
    dph = compute_dienophile(config["dienophile"], st) if args.ts else None
    rows, ts_rows = [], []
    cache = json.loads(Path(args.cache).read_text()) if args.cache and Path(args.cache).is_file() else {}
    print(f"{'smiles':<32}{'atoms':>6}{'rot':>4}{'fast_s':>8}{'grads':>7}{'ref_s':>8}{'grads':>8}"
          f"{'site':>12}{'fast':>8}{'ref':>8}{'diff':>7}")
    for smi in panel:
        t0 = time.perf_counter()
        fast = compute_structure(smi, st)
        t_fast = time.perf_counter() - t0
        ckey = f"{smi} {n_ref} {cfg.settings_hash({k: v for k, v in st.items() if k != 'science_version'})}"
        if ckey not in cache:
            cache[ckey] = exhaustive(smi, st, n_ref)
            if args.cache:
                Path(args.cache).write_text(json.dumps(cache, indent=1))
        ref = cache[ckey]
        mol = Chem.MolFromSmiles(smi)
        n_atoms = Chem.AddHs(mol).GetNumAtoms()
        n_rot = rdMolDescriptors.CalcNumRotatableBonds(mol)
        diffs = {}
        for s in fast.get("sites", []):
            if s["label"] in ref["penalties"] and s["status"] == "ok":
                diffs[s["label"]] = (s["scis_penalty_kJmol"], ref["penalties"][s["label"]])
        rows.append({"smiles": smi, "atoms": n_atoms, "heavy": mol.GetNumHeavyAtoms(), "rotatable": n_rot,
                     "fast_s": t_fast, "fast_gradients": fast.get("n_gradients", 0), "ref_s": ref["wall_s"],
                     "ref_gradients": ref["n_gradients"], "sites": diffs})
        for k, (a, b) in (diffs.items() or [("-", (float("nan"), float("nan")))]):
            print(f"{smi[:31]:<32}{n_atoms:>6}{n_rot:>4}{t_fast:8.1f}{fast.get('n_gradients', 0):7d}"
                  f"{ref['wall_s']:8.1f}{ref['n_gradients']:8d}{k:>12}{a:8.2f}{b:8.2f}{a - b:7.2f}", flush=True)
        if args.ts and fast.get("status") == "ok":
            from dienes.transition import transition_states_for_structure
            t0 = time.perf_counter()
            quick_ts = transition_states_for_structure(fast, dph, backend_settings(st), config["transition_state"])
            t_ts = time.perf_counter() - t0
            dense = dense_ts(fast, dph, st, config["transition_state"])
            for label, b in dense["barriers"].items():
                q = quick_ts["sites"].get(label, {})
                if q.get("status") == "ok":
                    ts_rows.append({"smiles": smi, "site": label, "fast": q["barrier_kJmol"], "dense": b,
                                    "fast_s": t_ts, "dense_s": dense["wall_s"]})
            print(f"    TS: fast {t_ts:.1f} s ({quick_ts.get('n_gradients', 0)} gradients), dense "
                  f"{dense['wall_s']:.1f} s ({dense['n_gradients']} gradients): "
                  + ", ".join(f"{r['site']} {r['fast']:.1f} vs {r['dense']:.1f}" for r in ts_rows
                              if r["smiles"] == smi), flush=True)
    pairs = [(a, b) for r in rows for a, b in r["sites"].values()]
    errors = [abs(a - b) for a, b in pairs]
    t_fast = sum(r["fast_s"] for r in rows)
    t_ref = sum(r["ref_s"] for r in rows)
    print("\nscaling (pipeline protocol): heavy atoms, rotatable bonds -> median time (s), median gradient calls")
    print(f"{'heavy atoms':>12}{'rotatable':>10}{'n':>4}{'time_s':>8}{'grads':>8}{'ref_time_s':>11}")
    bins = {}
    for r in rows:
        key = (f"{(r['heavy'] - 1) // 5 * 5 + 1}-{(r['heavy'] - 1) // 5 * 5 + 5}",
               "0-1" if r["rotatable"] <= 1 else ("2-3" if r["rotatable"] <= 3 else "4+"))
        bins.setdefault(key, []).append(r)
    for (h, rot), rs in sorted(bins.items(), key=lambda kv: (int(kv[0][0].split("-")[0]), kv[0][1])):
        print(f"{h:>12}{rot:>10}{len(rs):>4}{statistics.median(x['fast_s'] for x in rs):8.2f}"
              f"{statistics.median(x['fast_gradients'] for x in rs):8.0f}"
              f"{statistics.median(x['ref_s'] for x in rs):11.1f}")
    if args.plot:
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
        fig, axes = plt.subplots(1, 2, figsize=(9, 3.6))
        for ax, key, label in ((axes[0], "fast_s", "wall time (s)"), (axes[1], "fast_gradients", "gradient calls")):
            sc = ax.scatter([r["heavy"] for r in rows], [r[key] for r in rows], c=[r["rotatable"] for r in rows],
                            cmap="viridis")
            ax.set_xlabel("heavy atoms")
            ax.set_ylabel(label)
        fig.colorbar(sc, ax=axes, label="rotatable bonds")
        fig.savefig(args.plot, dpi=120, bbox_inches="tight")
        print(f"plot: {args.plot}")
    if ts_rows:
        ts_err = [abs(r["fast"] - r["dense"]) for r in ts_rows]
        ts_speed = sum(r["dense_s"] for r in ts_rows) / max(sum(r["fast_s"] for r in ts_rows), 1e-9)
        print(f"transition step: speedup_vs_dense={ts_speed:.1f} barrier_agreement="
              f"{np.mean([e <= AGREE_KJMOL for e in ts_err]):.2f} max_barrier_error_kJmol={max(ts_err):.2f} "
              f"(fast minus dense, mean {np.mean([r['fast'] - r['dense'] for r in ts_rows]):+.2f} kJ/mol)")
    if args.json:
        Path(args.json).write_text(json.dumps({"rows": rows, "ts": ts_rows}, indent=1))
    print(f"speedup_vs_exhaustive={t_ref / t_fast:.1f} penalty_agreement="
          f"{np.mean([e <= AGREE_KJMOL for e in errors]):.2f} max_penalty_error_kJmol={max(errors):.2f}")


if __name__ == "__main__":
    main()
