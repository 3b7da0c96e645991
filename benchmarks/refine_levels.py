"""Choose the refined level by evidence: price the same GFN2-xTB structures at several
levels and compare what each gets right.

For every level (a density functional and basis, priced with the pipeline's own
dienes.refine on the GFN2-xTB structures of a finished run) and every barrier
variant built from it:

- E        electronic barrier (what the pipeline ranks by),
- E+D3     with Grimme's D3 dispersion added (a geometry term: no extra SCF),
- E+dG     with GFN2-xTB quasi-RRHO thermal corrections at the reference temperature
           (1 mol/L standard state; TS minus the priced diene minimum minus the dienophile),
- E+dG(ens) the diene as a Boltzmann ensemble of its priced minima (each with its own
           thermal correction): a flexible diene's conformer mixing counts,
- E+D3+dG(ens),

it reports on the reference set (one slope and an intercept, leave-one-out, the
variant of the pipeline's model chosen inside the fit): RMSE, Spearman, pairwise
order, nested leave-one-out, the slope against transition-state theory; the
known orders with maleic anhydride; and, with --gas-phase, the measured gas-phase
kinetics (tests/data/gas_phase_kinetics.csv): errors of the computed activation
enthalpy and free energy against Ea - 2RT and the Eyring free energy at the middle
of each measured range, and the order of the pairs measured 8 kJ/mol or more apart.
Cost: median wall time of a transition-structure single point per level.

Results are cached: single points under <results>/levels/dft-<settings hash>/ (the
pipeline's own layout, so a later run at the same level reuses them), GFN2-xTB
Hessians under <results>/thermo/, gas-phase structures under <results>/gas_phase/.

    python benchmarks/refine_levels.py --results results --level b3lyp/def2-svp \\
        --level m062x/def2-svp/grid=3 --level pbe/def2-svp --gas-phase --json levels.json
"""

from __future__ import annotations

import argparse
import json
import math
import os
import statistics
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

from dienes import model as mdl  # noqa: E402
from dienes import singlepoints as refine, thermo  # noqa: E402
from dienes import settings as cfg  # noqa: E402
from dienes.backends import DFTLevel, Molecule, d3_dispersion_kJmol  # noqa: E402
from dienes.kinetics import pair_order_fraction, read_measurements  # noqa: E402
from dienes.pipeline import backend_settings, compute_dienophile, compute_structure, read_json, write_json  # noqa: E402
from dienes.layout import Layout  # noqa: E402
from dienes.transition import transition_states_for_structure  # noqa: E402
from dienes.units import rt_kjmol  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
CONFIG = ROOT / "config" / "config.yaml"
GAS_PHASE = ROOT / "tests" / "data" / "gas_phase_kinetics.csv"
# orders checked at every level, with maleic anhydride (faster first; common practice and the
# reference set): name in the reference file or id in the demo library
FASTER_THAN = [("cyclopentadiene", "2,3-dimethyl-1,3-butadiene"), ("cyclopentadiene", "2-tert-butyl-1,3-butadiene"),
               ("cyclopentadiene", "2-phenyl-1,3-butadiene"), ("cyclopentadiene", "anthracene"),
               ("9,10-dimethylanthracene", "anthracene"), ("furan", "thiophene"),
               ("(E)-1,3-pentadiene", "(Z)-1,3-pentadiene"), ("cyclopentadiene", "1,3-butadiene")]
EXTRA_NAMES = ("anthracene", "9,10-dimethylanthracene", "furan", "thiophene")
D3_VERSION = {"m062x": "d3zero", "m06-2x": "d3zero"}
VARIANTS = ("E", "E+D3", "E+dG", "E+dG(ens)", "E+D3+dG(ens)")


def parse_level(text: str) -> dict:
    """'b3lyp/def2-svp/grid=2/dispersion=d3bj' -> a pyscf level's config."""
    method, basis, *opts = text.split("/")
    out = {"program": "pyscf", "method": method, "basis": basis, "dispersion": "none", "solvent": "none"}
    for o in opts:
        k, v = o.split("=")
        out[{"grid": "grid_level"}.get(k, k)] = int(v) if v.isdigit() else v
    return out


def level_of(level_cfg: dict):
    """The level a config gives, named dft (its results share the pipeline's folder when its
    settings are the shipped level's)."""
    shipped = cfg.load(CONFIG, fallback=False)
    return (shipped | {"levels": {shipped.placing.name: dict(shipped.placing.options) | {"program": "xtb"},
                                  "dft": level_cfg},
                       "ranking": {"levels": ["dft", shipped.placing.name], "rows": "all"}}).levels["dft"]


# ------------------------------------------------------------------ the pairs

def demo_pairs(results: Path, manifest: dict) -> dict:
    """name -> (structure key, transition stem) for the reference rows and a few library rows."""
    out = {}
    for rec in manifest["reference_records"]:
        if rec["status"] == "ok":
            key = rec["isomers"][0]["key"]
            out[rec["extra"].get("name", rec["id"])] = (key, f"{key}__{rec['dienophile']['thash']}", rec)
    for rec in manifest["records"]:
        name = rec["extra"].get("name", "")
        if name in EXTRA_NAMES and rec["status"] == "ok":
            key = rec["isomers"][0]["key"]
            out[name] = (key, f"{key}__{rec['dienophile']['thash']}", rec)
    return out


def gas_phase_pairs(results: Path, config: dict, measurements) -> dict:
    """(diene smiles, dienophile smiles) -> (structure key, stem, dienophile hash): GFN2-xTB
    structures and transition structures computed with the pipeline's own functions."""
    st = config.structure_settings()
    base = results / "gas_phase"
    out = {}
    for m in measurements:
        pair = (m.diene_smiles, m.dienophile_smiles)
        if pair in out:
            continue
        from rdkit import Chem
        key = config.structure_key(Chem.MolToInchiKey(Chem.MolFromSmiles(m.diene_smiles)))
        dhash = config.dienophile_hash(m.dienophile_smiles)
        stem = f"{key}__{config.transition_hash(m.dienophile_smiles)}"
        spath, dpath, tpath = (base / "structures" / f"{key}.json", base / "dienophiles" / f"{dhash}.json",
                               base / "transition" / f"{stem}.json")
        if not spath.is_file():
            write_json(compute_structure(m.diene_smiles, st, key=key), spath)
        if not dpath.is_file():
            write_json(compute_dienophile(m.dienophile_smiles, st), dpath)
        if not tpath.is_file():
            t0 = time.perf_counter()
            r = transition_states_for_structure(read_json(spath), read_json(dpath), backend_settings(st),
                                                config["transition_state"])
            r["key"] = key
            write_json(r, tpath)
            print(f"  gas-phase TS {m.diene} + {m.dienophile}: {r['status']} "
                  f"{[s.get('status') for s in r['sites'].values()]} ({time.perf_counter() - t0:.0f} s)", flush=True)
        out[pair] = (key, stem, dhash)
    return out


# ----------------------------------------------------------- thermal terms

def frequencies(numbers, positions, st, cache: Path) -> list[float]:
    """GFN2-xTB harmonic wavenumbers (cm^-1) at a structure (cached by file name)."""
    from dienes.optimize import backend_energy_forces
    from dienes.saddle import analyse_vibrations
    if cache.is_file():
        return read_json(cache)["frequencies_cm1"]
    mol = Molecule(numbers, backend_settings(st))
    vib = analyse_vibrations(numbers, np.asarray(positions), backend_energy_forces(mol))
    write_json({"frequencies_cm1": [round(float(f), 3) for f in vib.frequencies_cm1]}, cache)
    return read_json(cache)["frequencies_cm1"]


def g_corr(numbers, positions, freqs, T: float) -> dict:
    from ase.data import atomic_masses
    masses = [atomic_masses[int(z)] for z in numbers]
    t = thermo.thermal_correction(freqs, masses, positions, T)
    return {"G": t.free_energy_kJmol, "H": t.enthalpy_kJmol}


# ------------------------------------------------------------------ pricing

def price(results: Path, base: Path, level_cfg: dict, key: str, stem: str, dhash: str, threads: int) -> dict:
    """Priced structure, dienophile and pair at one level (cached in the pipeline's layout)."""
    named = level_of(level_cfg)
    level = DFTLevel(named.dft_settings(), threads)
    layout, lkey = Layout(results), named.key()
    sp, dp, pp = (layout.level_structure(lkey, key), layout.level_dienophile(lkey, dhash), layout.level_pair(lkey, stem))
    if not sp.is_file():
        write_json(refine.price_structure(read_json(base / "structures" / f"{key}.json"), level), sp)
    if not dp.is_file():
        write_json(refine.price_dienophile(read_json(base / "dienophiles" / f"{dhash}.json"), level), dp)
    if not pp.is_file():
        r = refine.price_pair(read_json(sp), read_json(base / "transition" / f"{stem}.json"), read_json(dp), level)
        write_json(r | {"stem": stem}, pp)
    return {"structure": read_json(sp), "dienophile": read_json(dp), "pair": read_json(pp), "label": level.label()}


def barrier_variants(priced: dict, structure: dict, dienophile: dict, dhash: str, transition: dict, st,
                     base: Path, T: float, method: str) -> dict | None:
    """Every barrier variant (kJ/mol) of one pair at one level, with its enthalpy twin."""
    pair = priced["pair"]
    ok = [(s["electronic_barrier_kJmol"], lab) for lab, s in pair.get("sites", {}).items() if s.get("status") == "ok"]
    if pair.get("status") != "ok" or not ok:
        return None
    e_bar, label = min(ok)
    ts = transition["sites"][label]
    numbers, tpos = transition["numbers"], ts["positions_A"]
    geo = structure["geometry"]
    minima = geo.get("low_minima_A") or [geo["minimum_A"]]
    e_min = priced["structure"]["minima_kJmol"]
    k_min = priced["structure"]["minimum_index"]
    dgeo = dienophile["geometry"]
    thermo_dir = base / "thermo"
    f_ts = frequencies(numbers, tpos, st, thermo_dir / f"{pair['stem']}__{label}.json")
    f_min = [frequencies(geo["numbers"], p, st, thermo_dir / f"{structure['key']}__min{k}.json")
             for k, p in enumerate(minima)]
    f_dph = frequencies(dgeo["numbers"], dgeo["minimum_A"], st, thermo_dir / f"dienophile_{dhash}.json")
    c_ts = g_corr(numbers, tpos, f_ts, T)
    c_min = [g_corr(geo["numbers"], p, f, T) for p, f in zip(minima, f_min)]
    c_dph = g_corr(dgeo["numbers"], dgeo["minimum_A"], f_dph, T)
    version = D3_VERSION.get(method.lower(), "d3bj")
    disp = (d3_dispersion_kJmol(numbers, tpos, method, version)
            - d3_dispersion_kJmol(geo["numbers"], minima[k_min], method, version)
            - d3_dispersion_kJmol(dgeo["numbers"], dgeo["minimum_A"], method, version))
    RT = rt_kjmol(T)
    # the diene as a Boltzmann ensemble of its priced minima: G = -RT ln sum exp(-G_i / RT)
    g_i = np.array([e + c["G"] for e, c in zip(e_min, c_min)])
    g_ens = float(g_i.min() - RT * np.log(np.sum(np.exp(-(g_i - g_i.min()) / RT))))
    g_low = e_min[k_min] + c_min[k_min]["G"]
    e_ref = e_min[k_min]
    dg = c_ts["G"] - c_min[k_min]["G"] - c_dph["G"]
    dg_ens = dg + (g_low - g_ens)
    dh = c_ts["H"] - c_min[k_min]["H"] - c_dph["H"]
    return {"E": e_bar, "E+D3": e_bar + disp, "E+dG": e_bar + dg, "E+dG(ens)": e_bar + dg_ens,
            "E+D3+dG(ens)": e_bar + disp + dg_ens, "dH": e_bar + dh, "dH+D3": e_bar + disp + dh,
            "site": label, "dispersion": disp, "dG_corr": dg, "ensemble": g_low - g_ens, "e_min_ref": e_ref}


# --------------------------------------------------------------- evaluation

def reference_figures(names, x, y, T_ref) -> dict:
    X = np.asarray(x, dtype=float)[:, None]
    y = np.asarray(y, dtype=float)
    feats = ["barrier_kJmol"]
    fit, comparison, y_cv = mdl.select(X, y, feats, T_ref)
    nested = mdl.nested_cv({feats[0]: X[:, 0]}, y, feats, [], T_ref, 0)
    ols = mdl.fit(X, y, feats, "ols", T_ref)
    tst = -1.0 / (rt_kjmol(T_ref) * math.log(10.0))
    return {"variant": fit.variant, **comparison[fit.variant], "nested_rmse": nested["cv_rmse_log10k"],
            "nested_spearman": nested["cv_spearman"], "ols_slope_over_tst": ols.coef_per_unit[0] / tst,
            "residuals": {n: float(a - b) for n, a, b in zip(names, y, y_cv)}}


def markdown(reports: dict) -> str:
    """The level comparison as the tables of docs/validation.md, from --json outputs."""
    lines = ["| level | barrier | LOO RMSE | LOO Spearman | pairwise | nested LOO RMSE | slope / TST | known orders right |",
             "|---|---|---|---|---|---|---|---|"]
    for text, out in reports.items():
        for var, f in out["variants"].items():
            wrong = [k.replace(" faster than ", " > ") for k, v in f["orders"].items() if not v]
            lines.append(f"| {text} | {var} | {f['cv_rmse_log10k']:.2f} | {f['cv_spearman']:.2f} | "
                         f"{f['cv_pairwise_accuracy']:.2f} | {f['nested_rmse']:.2f} | {f['ols_slope_over_tst']:.2f} | "
                         f"{f['n_orders_right']}/{f['n_orders']}" + (f" (wrong: {'; '.join(wrong)})" if wrong else "")
                         + " |")
    gas = [(t, o["gas_phase"]) for t, o in reports.items() if "gas_phase" in o]
    fast = next((o["gas_phase_gfn2"] for o in reports.values() if "gas_phase_gfn2" in o), None)
    if gas:
        lines += ["", "| level | computed vs measured | MSE | MAE | Spearman | pairs >= 8 kJ/mol apart in order |",
                  "|---|---|---|---|---|---|"]
        for text, g in ([("GFN2-xTB (located saddle)", fast)] if fast else []) + gas:
            for k, v in g.items():
                if k != "rows":
                    lines.append(f"| {text} | {k} | {v['MSE']:+.1f} | {v['MAE']:.1f} | {v['spearman']:.2f} | "
                                 f"{v['pairs_right']}/{v['pairs']} |")
        fast_e = {(r["reaction"], tuple(r["records"])): r["E"] for r in (fast or {"rows": []})["rows"]}
        lines += ["", "| reaction | records | T (K) | dH exp | dG exp | " + ("E (GFN2-xTB) | " if fast else "")
                  + " | ".join(f"E, dH, dG ({t})" for t, _ in gas) + " |",
                  "|---|---|---|---|---|" + ("---|" if fast else "") + "---|" * len(gas)]
        for k, row in enumerate(gas[0][1]["rows"]):
            cells = ([f"{fast_e.get((row['reaction'], tuple(row['records'])), float('nan')):.1f}"] if fast else []) + [
                f"{g['rows'][k]['E']:.1f}, {g['rows'][k]['dH']:.1f}, {g['rows'][k]['dG']:.1f}" for _, g in gas]
            lines.append(f"| {row['reaction']}{' (weak)' if row['weak'] else ''} | {', '.join(row['records'])} | "
                         f"{row['T']:.0f} | {row['dH_exp']:.1f} | {row['dG_exp']:.1f} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", default="results", help="results/ of a finished demo run (default: results)")
    ap.add_argument("--level", action="append", default=[], help="method/basis[/grid=N][/conv=1e-8]")
    ap.add_argument("--markdown", nargs="+", metavar="JSON", help="print the tables of earlier --json files and stop")
    ap.add_argument("--reference-only", action="store_true", help="only the reference dienes (no extra orders)")
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--gas-phase", action="store_true", help="also the measured gas-phase kinetics")
    ap.add_argument("--json", help="write every figure to this file")
    args = ap.parse_args()
    if args.markdown:
        reports = {}
        for path in args.markdown:
            reports |= json.loads(Path(path).read_text())
        print(markdown(reports))
        return
    results = Path(args.results)
    config = cfg.load(CONFIG)
    st = config.structure_settings()
    manifest = read_json(results / "manifest.json")
    pairs = demo_pairs(results, manifest)
    if args.reference_only:
        pairs = {n: p for n, p in pairs.items() if p[2]["id"].startswith("ref-")}
    measurements = read_measurements(GAS_PHASE) if args.gas_phase else []
    gas = gas_phase_pairs(results, config, measurements) if measurements else {}
    report = {}
    for text in args.level:
        lvl = parse_level(text)
        print(f"level {text}", flush=True)
        walls, bars = [], {}
        for name, (key, stem, rec) in pairs.items():
            dhash = rec["dienophile"]["dhash"]
            t0 = time.perf_counter()
            p = price(results, results, lvl, key, stem, dhash, args.threads)
            ts_sp = [s["wall_s"] for s in p["pair"].get("single_points", [])]
            walls += ts_sp
            T = float(rec["extra"].get("temperature_K") or config["temperature_K"])
            v = barrier_variants(p, read_json(results / "structures" / f"{key}.json"),
                                 read_json(results / "dienophiles" / f"{dhash}.json"), dhash,
                                 read_json(results / "transition" / f"{stem}.json"), st, results, T, lvl["method"])
            if v is None:
                print(f"  {name}: {p['pair'].get('status')} {p['pair'].get('message')}")
                continue
            bars[name] = v | {"log10_k": float(rec["extra"].get("log10_k") or "nan"), "T": T,
                              "reference": rec["id"].startswith("ref-")}
            print(f"  {name:<36} E {v['E']:7.1f}  E+D3 {v['E+D3']:7.1f}  E+dG(ens) {v['E+dG(ens)']:7.1f} "
                  f"(disp {v['dispersion']:6.1f}, dGcorr {v['dG_corr']:5.1f}, ens {v['ensemble']:4.1f}; "
                  f"{time.perf_counter() - t0:4.0f} s)", flush=True)
        ref = {n: b for n, b in bars.items() if b["reference"] and math.isfinite(b["log10_k"])}
        names = sorted(ref)
        T_ref = statistics.median(ref[n]["T"] for n in names)
        out = {"label": text, "median_ts_singlepoint_s": statistics.median(walls) if walls else None,
               "variants": {}, "barriers": bars}
        for var in VARIANTS:
            figs = reference_figures(names, [ref[n][var] for n in names], [ref[n]["log10_k"] for n in names], T_ref)
            orders = {f"{a} faster than {b}": bool(bars[a][var] < bars[b][var])
                      for a, b in FASTER_THAN if a in bars and b in bars}
            out["variants"][var] = figs | {"orders": orders, "n_orders_right": sum(orders.values()),
                                           "n_orders": len(orders)}
        if measurements:
            gp = []
            for m in measurements:
                key, stem, dhash = gas[(m.diene_smiles, m.dienophile_smiles)]
                p = price(results, results / "gas_phase", lvl, key, stem, dhash, args.threads)
                base = results / "gas_phase"
                v = barrier_variants(p, read_json(base / "structures" / f"{key}.json"),
                                     read_json(base / "dienophiles" / f"{dhash}.json"), dhash,
                                     read_json(base / "transition" / f"{stem}.json"), st, results,
                                     m.temperature_K, lvl["method"])
                if v is None:
                    continue
                gp.append({"reaction": f"{m.diene} + {m.dienophile}", "records": m.record_ids,
                           "T": m.temperature_K, "dH_exp": m.dh_kJmol, "dG_exp": m.dg_kJmol,
                           "E": v["E"], "dH": v["dH"], "dH+D3": v["dH+D3"], "dG": v["E+dG(ens)"],
                           "dG+D3": v["E+D3+dG(ens)"], "weak": "weak" in m.note})
            out["gas_phase"] = gas_summary(gp)
            out["gas_phase_gfn2"] = gfn2_gas_phase(results, gas, measurements)
        report[text] = out
        print_level(text, out)
    if args.json:
        Path(args.json).write_text(json.dumps(report, indent=1, default=float))


def gfn2_gas_phase(results: Path, gas: dict, measurements) -> dict:
    """The fast level on the same measurements: the located saddle's own GFN2-xTB barrier
    (electronic, from the diene's global minimum), against the measured activation enthalpy."""
    rows = []
    for m in measurements:
        _, stem, _ = gas[(m.diene_smiles, m.dienophile_smiles)]
        ts = read_json(results / "gas_phase" / "transition" / f"{stem}.json")
        ok = [s["barrier_kJmol"] for s in ts.get("sites", {}).values() if s.get("status") == "ok"]
        if ok:
            rows.append({"reaction": f"{m.diene} + {m.dienophile}", "records": m.record_ids, "T": m.temperature_K,
                         "dH_exp": m.dh_kJmol, "E": min(ok), "weak": "weak" in m.note})
    use = [r for r in rows if not r["weak"]]
    err = [r["E"] - r["dH_exp"] for r in use]
    good, total = pair_order_fraction([r["dH_exp"] for r in use], [r["E"] for r in use], 8.0)
    return {"rows": rows, "E vs dH_exp": {
        "MSE": float(np.mean(err)), "MAE": float(np.mean(np.abs(err))),
        "spearman": float(stats.spearmanr([r["dH_exp"] for r in use], [r["E"] for r in use]).statistic),
        "pairs_right": good, "pairs": total}}


def gas_summary(rows: list[dict]) -> dict:
    out = {"rows": rows}
    for comp, exp in (("E", "dH_exp"), ("dH", "dH_exp"), ("dH+D3", "dH_exp"), ("dG", "dG_exp"), ("dG+D3", "dG_exp")):
        use = [r for r in rows if not r["weak"]]
        err = [r[comp] - r[exp] for r in use]
        good, total = pair_order_fraction([r[exp] for r in use], [r[comp] for r in use], 8.0)
        out[f"{comp} vs {exp}"] = {"MSE": float(np.mean(err)), "MAE": float(np.mean(np.abs(err))),
                                  "spearman": float(stats.spearmanr([r[exp] for r in use], [r[comp] for r in use]).statistic),
                                  "pairs_right": good, "pairs": total}
    return out


def print_level(text: str, out: dict) -> None:
    print(f"\n{text}: median TS single point {out['median_ts_singlepoint_s'] or 0:.0f} s")
    print("variant | LOO RMSE | Spearman | pairwise | nested RMSE | slope/TST | orders right")
    for var, f in out["variants"].items():
        print(f"{var} | {f['cv_rmse_log10k']:.2f} | {f['cv_spearman']:.2f} | {f['cv_pairwise_accuracy']:.2f} | "
              f"{f['nested_rmse']:.2f} | {f['ols_slope_over_tst']:.2f} | {f['n_orders_right']}/{f['n_orders']}")
        wrong = [k for k, v in f["orders"].items() if not v]
        if wrong:
            print("   wrong: " + "; ".join(wrong))
    for k, g in out.get("gas_phase", {}).items():
        if k != "rows":
            print(f"gas phase {k}: MSE {g['MSE']:+.1f}, MAE {g['MAE']:.1f} kJ/mol, Spearman {g['spearman']:.2f}, "
                  f"pairs >= 8 kJ/mol apart in order {g['pairs_right']}/{g['pairs']}")
    print(flush=True)


if __name__ == "__main__":
    main()
