"""Cyclopentadiene's advantage over butadiene at each candidate level: the outside check
that fixes the size of the ranking level's scale.

Reference (electronic barriers with ethylene, W1-F12/W2-F12 quality, from the s-trans diene):
butadiene 22.3 kcal/mol = 93.3 kJ/mol, cyclopentadiene 18.0 kcal/mol = 75.3 kJ/mol, a gap of
18.0 kJ/mol (Karton and Goerigk, J. Comput. Chem. 36, 622 (2015), as collected in the GMTKN55
pericyclic subset, Goerigk et al., Phys. Chem. Chem. Phys. 19, 32184 (2017)).

Each level prices the pipeline's own GFN2-xTB structures (diene minima, ethylene, the located
transition structure) with the pipeline's own single-point code, so a level's gap here is the
gap a run at that level would rank with. With --optimise LEVEL the same pairs are also priced on
structures optimised at LEVEL (minima and saddle, PySCF gradients, sella), which separates the
error of the GFN2-xTB geometry from the error of the level.

    python benchmarks/level_gap.py --results /tmp/gap --level b3lyp/def2-svp \\
        --level dsd-blyp/def2-svp --json gap.json
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from pathlib import Path
from types import SimpleNamespace

os.environ.setdefault("OMP_NUM_THREADS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402

import refine_levels as rl  # noqa: E402
from dienes import settings as cfg  # noqa: E402
from dienes.pipeline import read_json, write_json  # noqa: E402

ETHYLENE = "C=C"
# name, diene SMILES, reference barrier with ethylene (kJ/mol; source in the module text)
PAIRS = (("1,3-butadiene", "C=CC=C", 93.3), ("cyclopentadiene", "C1=CCC=C1", 75.3))
REFERENCE_GAP_KJMOL = 18.0


def structures(results: Path, config) -> dict:
    """name -> (structure key, transition stem, dienophile hash) of each pair's GFN2-xTB
    structures, computed with the pipeline's functions (cached under results/gas_phase)."""
    wanted = [SimpleNamespace(diene=n, dienophile="ethylene", diene_smiles=s, dienophile_smiles=ETHYLENE)
              for n, s, _ in PAIRS]
    found = rl.gas_phase_pairs(results, config, wanted)
    return {n: found[(s, ETHYLENE)] for n, s, _ in PAIRS}


def electronic_barrier(priced: dict) -> float | None:
    ok = [s["electronic_barrier_kJmol"] for s in priced["pair"].get("sites", {}).values() if s.get("status") == "ok"]
    return min(ok) if ok else None


def optimised(results: Path, pairs: dict, text: str, threads: int) -> dict:
    """Each pair's lowest diene minimum, ethylene and the transition structure re-optimised at the
    level `text` (PySCF gradients; minima with the pipeline's optimiser, the saddle with sella
    from the GFN2-xTB one): name -> {"diene", "dienophile", "ts": (numbers, positions_A), "imag_cm1"}.
    Cached under results/optimised/<level>/."""
    from dienes.backends import dft_energy_forces
    from dienes.optimize import optimize
    from dienes.saddle import analyse_vibrations, find_saddle
    settings = rl.level_of(rl.parse_level(text)).dft_settings()
    base, out_dir = results / "gas_phase", results / "optimised" / text.replace("/", "_")
    out = {}
    for name, (key, stem, dhash) in pairs.items():
        path = out_dir / f"{key}.json"
        if not path.is_file():
            t0 = time.perf_counter()
            structure = read_json(base / "structures" / f"{key}.json")["geometry"]
            dienophile = read_json(base / "dienophiles" / f"{dhash}.json")["geometry"]
            transition = read_json(base / "transition" / f"{stem}.json")
            site = min((s for s in transition["sites"].values() if s.get("status") == "ok"),
                       key=lambda s: s["barrier_kJmol"])
            parts = {}
            for what, numbers, pos, saddle in (
                    ("diene", structure["numbers"], structure["minimum_A"], False),
                    ("dienophile", dienophile["numbers"], dienophile["minimum_A"], False),
                    ("ts", transition["numbers"], site["positions_A"], True)):
                ef = dft_energy_forces(numbers, settings, threads)
                run = find_saddle if saddle else optimize
                r = run(numbers, np.asarray(pos), ef, fmax_eV_A=0.01, max_steps=200)
                parts[what] = {"numbers": list(numbers), "positions_A": r.positions_A.tolist(),
                               "converged": r.converged, "n_gradients": r.n_gradients}
                if saddle:
                    vib = analyse_vibrations(numbers, r.positions_A, ef)
                    parts[what]["imaginary_cm1"] = [round(float(f), 1) for f in vib.frequencies_cm1 if f < -50.0]
            write_json(parts | {"wall_s": round(time.perf_counter() - t0, 1)}, path)
            print(f"  optimised {name} at {text}: TS imaginary {parts['ts'].get('imaginary_cm1')} "
                  f"({time.perf_counter() - t0:.0f} s)", flush=True)
        out[name] = read_json(path)
    return out


def barrier_on(geometries: dict, text: str, threads: int) -> float | None:
    """Electronic barrier (kJ/mol) at level `text` on one pair's optimised geometries."""
    from dienes.backends import DFTLevel
    level = DFTLevel(rl.level_of(rl.parse_level(text)).dft_settings(), threads)
    e = {w: level.energy(g["numbers"], np.asarray(g["positions_A"])) for w, g in geometries.items()
         if w in ("diene", "dienophile", "ts")}
    if not all(v.converged for v in e.values()):
        return None
    return e["ts"].energy_kJmol - e["diene"].energy_kJmol - e["dienophile"].energy_kJmol


def gap_row(text: str, barriers: dict, wall_s: float) -> dict:
    (n1, _, ref1), (n2, _, ref2) = PAIRS
    b1, b2 = barriers.get(n1), barriers.get(n2)
    gap = None if b1 is None or b2 is None else b1 - b2
    return {"level": text, "barriers_kJmol": barriers, "gap_kJmol": gap,
            "gap_error_kJmol": None if gap is None else gap - REFERENCE_GAP_KJMOL,
            "mean_error_kJmol": None if gap is None else ((b1 - ref1) + (b2 - ref2)) / 2,
            "wall_s": round(wall_s, 1), "geometry": "GFN2-xTB (the pipeline's)"}


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", required=True, help="folder for the structures and priced results")
    ap.add_argument("--level", action="append", default=[], help="method/basis[/grid=N] (as refine_levels.py)")
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--optimise", help="also price every level on structures optimised at this level "
                                       "(method/basis, a functional with analytic gradients)")
    ap.add_argument("--json", help="write the table to this file")
    args = ap.parse_args()
    results = Path(args.results)
    config = cfg.load(rl.CONFIG)
    pairs = structures(results, config)
    base = results / "gas_phase"
    rows = []
    for text in args.level:
        t0 = time.perf_counter()
        barriers = {}
        for name, (key, stem, dhash) in pairs.items():
            barriers[name] = electronic_barrier(rl.price(results, base, rl.parse_level(text), key, stem, dhash,
                                                         args.threads))
        row = gap_row(text, barriers, time.perf_counter() - t0)
        rows.append(row)
        b = "  ".join(f"{n} {v:6.1f}" if v is not None else f"{n} failed" for n, v in barriers.items())
        print(f"{text:<32} {b}  gap {row['gap_kJmol'] if row['gap_kJmol'] is None else round(row['gap_kJmol'], 1)}"
              f"  ({row['wall_s']:.0f} s)", flush=True)
    if args.optimise:
        geometries = optimised(results, pairs, args.optimise, args.threads)
        for text in args.level:
            t0 = time.perf_counter()
            barriers = {name: barrier_on(g, text, args.threads) for name, g in geometries.items()}
            row = gap_row(text, barriers, time.perf_counter() - t0) | {"geometry": args.optimise}
            rows.append(row)
            gap = "failed" if row["gap_kJmol"] is None else f"{row['gap_kJmol']:.1f}"
            print(f"{text:<32} on {args.optimise} structures: "
                  + "  ".join(f"{n} {v:6.1f}" for n, v in barriers.items() if v is not None) + f"  gap {gap}",
                  flush=True)
    if args.json:
        Path(args.json).write_text(json.dumps({"reference_gap_kJmol": REFERENCE_GAP_KJMOL, "rows": rows}, indent=1))


if __name__ == "__main__":
    main()
