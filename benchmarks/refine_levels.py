"""Compare density-functional levels for the refinement on the reference set.

Runs the project's own refinement (dienes.refine) at several levels on the
GFN2-xTB structures of a finished run (its results/ directory must hold the
reference dienes and their transition structures), then fits the barrier
model at each level and prints leave-one-out figures and the outside checks
that decide the default level. Refined results are cached per level under
<results>/refined_study/, so a rerun only computes what is new.

    python benchmarks/refine_levels.py --results results --threads 2 \
        --level b3lyp/def2-svp/d3bj/none --level b3lyp/def2-svp/d3bj/1,4-dioxane

A level is method/basis/dispersion/solvent ('none' for no dispersion or gas phase).
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

from dienes import ranking  # noqa: E402
from dienes import settings as cfg  # noqa: E402
from dienes.pipeline import read_json, write_json  # noqa: E402
from dienes.refine import level_settings, refine_dienophile, refine_pair  # noqa: E402
from dienes.run import load_computed  # noqa: E402

CONFIG = Path(__file__).resolve().parent.parent / "config" / "config.yaml"
# orders every level is checked against (relative rates with maleic anhydride; the
# reference file's provenance says how sure each is)
FASTER_THAN = [("cyclopentadiene", "2,3-dimethyl-1,3-butadiene"), ("cyclopentadiene", "2-tert-butyl-1,3-butadiene"),
               ("cyclopentadiene", "1,3-butadiene"), ("(E)-1,3-pentadiene", "(Z)-1,3-pentadiene")]


def parse_level(text: str) -> dict:
    method, basis, disp, solvent = (text.split("/") + ["none", "none"])[:4]
    return {"method": method, "basis": basis, "dispersion": disp, "solvent": solvent}


def refine_reference(results: Path, manifest: dict, level_cfg: dict, threads: int) -> dict:
    """Refined pair results of every usable reference row at one level (cached)."""
    config = cfg.load(CONFIG) | {"refine": level_cfg | {"top": 1}}
    level = level_settings(config["refine"])
    rhash = cfg.refine_hash(config)
    out_dir = results / "refined_study" / rhash
    out_dir.mkdir(parents=True, exist_ok=True)
    write_json({"level": level.label(), **level_cfg}, out_dir / "level.json")
    dph_done = {}
    out = {}
    for rec in manifest["reference_records"]:
        if rec["status"] != "ok" or not rec["isomers"]:
            continue
        key, d = rec["isomers"][0]["key"], rec["dienophile"]
        stem = f"{key}__{d['thash']}"
        path = out_dir / f"{stem}.json"
        if d["dhash"] not in dph_done:
            dpath = out_dir / f"dienophile_{d['dhash']}.json"
            if not dpath.is_file():
                write_json(refine_dienophile(read_json(results / "dienophiles" / f"{d['dhash']}.json"),
                                             level, threads), dpath)
            dph_done[d["dhash"]] = read_json(dpath)
        if not path.is_file():
            t0 = time.perf_counter()
            r = refine_pair(read_json(results / "structures" / f"{key}.json"),
                            read_json(results / "transition" / f"{stem}.json"), dph_done[d["dhash"]],
                            level, threads)
            write_json(r, path)
            print(f"  {rec['id']:<8} {rec['smiles']:<22} {r['status']:<10} barrier "
                  f"{r.get('barrier_refined_kJmol', float('nan')):7.1f}  penalty "
                  f"{r.get('scis_penalty_refined_kJmol', float('nan')):6.1f} kJ/mol  "
                  f"({time.perf_counter() - t0:.0f} s)", flush=True)
        out[stem] = read_json(path)
    return out


def evaluate(manifest: dict, computed, refined: dict, config: dict) -> dict:
    computed.refined = refined
    fit, summary, table = ranking.fit_reference(manifest["reference_records"], computed, config,
                                                config["dienophile"], suffix="_refined")
    used = table[table["used"]]
    bar = {n: float(used.loc[used["id"] == rid, "barrier_refined_kJmol"].iloc[0])
           for n, rid in names_to_ids(manifest).items() if (used["id"] == rid).any()}
    orders = {f"{a} faster than {b}": bool(bar.get(a, np.nan) < bar.get(b, np.nan))
              for a, b in FASTER_THAN if a in bar and b in bar}
    return {"summary": summary, "barriers": bar, "orders": orders, "table": table}


def names_to_ids(manifest):
    return {r["extra"].get("name", r["id"]): r["id"] for r in manifest["reference_records"]}


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", default="results", help="results/ of a finished run (default: results)")
    ap.add_argument("--level", action="append", required=True, help="method/basis/dispersion/solvent")
    ap.add_argument("--threads", type=int, default=1)
    args = ap.parse_args()
    results = Path(args.results)
    manifest = read_json(results / "manifest.json")
    config = cfg.load(CONFIG)
    base_fit, base, _ = ranking.fit_reference(manifest["reference_records"], load_computed(manifest, results),
                                              config, config["dienophile"])
    print(f"GFN2-xTB model {base['features']} ({base['variant']}): LOO RMSE {base['cv_rmse_log10k']:.2f}, "
          f"Spearman {base['cv_spearman']:.2f}, pairwise {base['cv_pairwise_accuracy']:.2f}")
    rows = []
    for text in args.level:
        lvl = parse_level(text)
        print(f"level {text}:", flush=True)
        t0 = time.perf_counter()
        refined = refine_reference(results, manifest, lvl, args.threads)
        ev = evaluate(manifest, load_computed(manifest, results), refined, config)
        s = ev["summary"]
        walls = [r.get("wall_time_s", 0.0) for r in refined.values()]
        b = s["coefficients"].get("barrier_refined_kJmol", float("nan"))
        rows.append((text, s, ev, float(np.median(walls)) if walls else 0.0))
        print(f"  LOO RMSE {s['cv_rmse_log10k']:.2f}, Spearman {s['cv_spearman']:.2f}, pairwise "
              f"{s['cv_pairwise_accuracy']:.2f}; slope {b:+.4f} per kJ/mol = "
              f"{b / s['physical_slope_per_kJmol']:.2f} x TST; features {s['features']} ({s['variant']}); "
              f"median {rows[-1][3]:.0f} s per diene; {time.perf_counter() - t0:.0f} s this run")
        for k, v in ev["orders"].items():
            print(f"    {k}: {'yes' if v else 'NO'}")
    print("\nlevel | LOO RMSE | Spearman | pairwise | slope/TST | orders right | median s/diene")
    for text, s, ev, wall in rows:
        b = s["coefficients"].get("barrier_refined_kJmol", float("nan"))
        print(f"{text} | {s['cv_rmse_log10k']:.2f} | {s['cv_spearman']:.2f} | {s['cv_pairwise_accuracy']:.2f} | "
              f"{b / s['physical_slope_per_kJmol']:.2f} | {sum(ev['orders'].values())}/{len(ev['orders'])} | "
              f"{wall:.0f}")
    rho = [stats.spearmanr(list(rows[0][2]["barriers"].values()), list(r[2]["barriers"].values())).statistic
           for r in rows[1:]]
    if rho:
        print("Spearman of barrier orders against the first level:", ", ".join(f"{x:.2f}" for x in rho))


if __name__ == "__main__":
    main()
