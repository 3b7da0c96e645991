"""Speed and memory of the per-structure computation.

Prints, for a fixed panel of dienes, wall time, GFN2-xTB gradient calls and
peak memory, and every time as a ratio to a baseline measured in the same
process: the time of one GFN2-xTB single point of 1,3-butadiene. Ratios move
with the code, not with the machine. Run: python benchmarks/bench.py [--backend tblite]

With --refine N the pricing at the refined level of the first N panel dienes is
timed too, against the refinement as it first landed, run in the same process
on the same structures: every low minimum, the planar s-cis, the transition
structure and the cycloadduct without density fitting at grid level 3 and SCF
tolerance 1e-8 Hartree. The ratio per diene (with its atom counts) is the
speed-up of today's pricing.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")

from rdkit import Chem  # noqa: E402
from rdkit.Chem import AllChem  # noqa: E402

from dienes import settings as cfg  # noqa: E402
from dienes.backends import Molecule, Settings  # noqa: E402
from dienes.pipeline import backend_settings, compute_dienophile, compute_structure  # noqa: E402
from dienes.transition import transition_states_for_structure  # noqa: E402

PANEL = ["C=CC=C", "C/C=C/C=C", "C/C=C\\C=C", "C1=CCC=C1", "C1=CCCC=C1", "CO/C=C/C=C",
         "C=C1CCCCC1=C", "C=C/C=C/c1ccccc1", "CC(C)C1=CC=C(C)CC1", "C=CC(=C)CCC=C(C)C"]


def baseline_singlepoint_s(backend: str, repeats: int = 50) -> float:
    m = Chem.AddHs(Chem.MolFromSmiles("C=CC=C"))
    AllChem.EmbedMolecule(m, randomSeed=1)
    pos = m.GetConformer().GetPositions()
    mol = Molecule([a.GetAtomicNum() for a in m.GetAtoms()], Settings(backend))
    mol.singlepoint(pos)
    t = time.perf_counter()
    for k in range(repeats):
        mol.singlepoint(pos + 1e-4 * k)
    return (time.perf_counter() - t) / repeats


LANDED = {"density_fit": False, "grid_level": 3, "conv_tol_hartree": 1e-8}


def time_refinement(smiles: str, structure: dict, ts: dict, dph: dict, config: dict, threads: int) -> dict:
    """Today's pricing of one diene (its single points and the GFN2-xTB Hessians of the thermal
    corrections) and the landed refinement's five kinds of single point, timed on the same
    structures (the dienophile is paid once per run by both and left out)."""
    from dataclasses import replace

    from dienes import singlepoints as refine
    from dienes.backends import DFTLevel
    from dienes.run import thermal_source
    settings = config.ranking_levels[0].dft_settings()
    today = DFTLevel(settings, threads)
    landed = DFTLevel(replace(settings, **LANDED), threads)
    thermal = thermal_source(config)
    dph_priced = refine.price_dienophile(dph, today, thermal)
    t = time.perf_counter()
    priced = refine.price_structure(structure, today, thermal)
    pair = refine.price_pair(priced, ts, dph_priced, today, thermal)
    t_today = time.perf_counter() - t
    n_today = len(priced["single_points"]) + len(pair["single_points"])
    geo = structure["geometry"]
    site = refine.sites_to_price(ts)[0]
    penalty = next(s["scis_penalty_kJmol"] for s in structure["sites"] if s["label"] == site)
    t = time.perf_counter()
    shapes = ([(geo["numbers"], p) for p in geo.get("low_minima_A") or [geo["minimum_A"]]]
              + [(geo["numbers"], geo["planar_s_cis_A"][site])] * bool(penalty > 1e-3)
              + [(ts["numbers"], ts["sites"][site]["positions_A"])]
              + [(ts["numbers"], ts["sites"][site]["adduct_A"])] * bool(ts["sites"][site].get("adduct_A")))
    for numbers, pos in shapes:
        landed.energy(numbers, pos)
    return {"smiles": smiles, "level": today.label(), "atoms": len(geo["numbers"]), "ts_atoms": len(ts["numbers"]),
            "today_s": t_today, "landed_s": time.perf_counter() - t, "n_today": n_today, "n_landed": len(shapes)}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--backend", default="xtb-python")
    ap.add_argument("--config", default=os.path.join(os.path.dirname(__file__), "..", "config", "config.yaml"))
    ap.add_argument("--refine", type=int, default=0, metavar="N",
                    help="also time the density-functional refinement of the first N panel dienes "
                         "(minutes each) at the config's first ranking level")
    ap.add_argument("--threads", type=int, default=1, help="threads for the refinement")
    args = ap.parse_args()
    config = cfg.load(args.config)
    config = config | {"levels": config.as_config()["levels"] | {config.placing.name: {
        "program": "xtb", "backend": args.backend}}}
    st = config.structure_settings()
    base = baseline_singlepoint_s(args.backend)
    print(f"baseline: one GFN2-xTB single point of butadiene = {base * 1e3:.2f} ms ({args.backend})")
    dph = compute_dienophile(config["dienophile"], st)
    print(f"{'smiles':<26}{'status':<10}{'time_s':>8}{'x_base':>10}{'grads':>7}{'ms/grad':>9}"
          f"{'ts_s':>10}{'x_base':>9}{'ts_grads':>9}")
    times, grads, ts_times = [], [], []
    refine_rows = []
    for smi in PANEL:
        t = time.perf_counter()
        r = compute_structure(smi, st)
        dt = time.perf_counter() - t
        t = time.perf_counter()
        ts = transition_states_for_structure(r, dph, backend_settings(st), config["transition_state"])
        ds = time.perf_counter() - t
        times.append(dt)
        ts_times.append(ds)
        if len(refine_rows) < args.refine:
            refine_rows.append(time_refinement(smi, r, ts, dph, config, args.threads))
        grads.append(r.get("n_gradients", 0))
        print(f"{smi:<26}{r['status']:<10}{dt:8.2f}{dt / base:10.0f}{grads[-1]:7d}"
              f"{1e3 * dt / max(grads[-1], 1):9.2f}{ds:10.2f}{ds / base:9.0f}{ts.get('n_gradients', 0):9d}")
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"median per diene: {statistics.median(times):.2f} s = {statistics.median(times) / base:.0f} x baseline; "
          f"median gradient calls {statistics.median(grads):.0f}; total {sum(times):.1f} s; "
          f"peak RSS {peak_mb:.0f} MB")
    if refine_rows:
        print(f"\npricing at {refine_rows[0]['level']} (today) against the first landed refinement, same structures:")
        print(f"{'smiles':<26}{'atoms':>6}{'TS atoms':>9}{'landed_s':>10}{'today_s':>9}{'ratio':>7}{'SPs':>8}")
        for x in refine_rows:
            print(f"{x['smiles']:<26}{x['atoms']:>6}{x['ts_atoms']:>9}{x['landed_s']:10.1f}{x['today_s']:9.1f}"
                  f"{x['landed_s'] / x['today_s']:7.1f}{x['n_landed']:>4}/{x['n_today']}")
        ratios = [x["landed_s"] / x["today_s"] for x in refine_rows]
        print(f"median speed-up {statistics.median(ratios):.1f}x; median today {statistics.median(x['today_s'] for x in refine_rows):.0f} s "
              f"= {statistics.median(x['today_s'] for x in refine_rows) / base:.0f} x baseline per diene")
    print(f"transition-structure step (with {config['dienophile']}): median {statistics.median(ts_times):.2f} s "
          f"= {statistics.median(ts_times) / base:.0f} x baseline; total {sum(ts_times):.1f} s")


if __name__ == "__main__":
    main()
