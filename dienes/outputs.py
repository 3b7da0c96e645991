"""Write what the chemist reads: results/ranking.csv, results/sites.csv,
results/model.json, and a short summary on the console."""

from __future__ import annotations

import csv
import json
import math
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd

FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(value):
    """A text cell a spreadsheet would run as a formula gets a leading apostrophe."""
    if isinstance(value, str) and value.startswith(FORMULA_PREFIXES):
        return "'" + value
    return value


def write_table(df: pd.DataFrame, path) -> None:
    """CSV with text cells neutralised and numbers as numbers."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    safe = df.copy()
    for col in safe.columns:
        if not (pd.api.types.is_numeric_dtype(safe[col]) or pd.api.types.is_bool_dtype(safe[col])):
            safe[col] = safe[col].astype(object).map(neutralise_cell)
    safe.columns = [neutralise_cell(str(c)) for c in safe.columns]
    tmp = path.with_name(f".{path.name}.tmp")
    safe.to_csv(tmp, index=False, quoting=csv.QUOTE_MINIMAL, float_format="%.6g")
    tmp.replace(path)


def _clean(obj):
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return None if not math.isfinite(float(obj)) else float(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def write_model(summary: dict, path) -> None:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(_clean(summary), indent=1) + "\n")


def read_table(path) -> pd.DataFrame:
    """ranking.csv back as written: text cells unneutralised, empty cells as ''."""
    table = pd.read_csv(path, dtype={"id": str, "smiles": str, "message": str, "domain_note": str},
                        keep_default_na=False, na_values=[""])
    for col in ("id", "smiles", "message", "domain_note"):
        if col in table:
            table[col] = table[col].fillna("").map(lambda s: s[1:] if s.startswith("'") else s)
    return table


def interval_label(interval: float) -> str:
    """'90 %' for 0.9: the configured prediction-interval coverage in words."""
    return f"{100 * float(interval):g} %"


def is_true(value) -> bool:
    return str(value) in ("True", "true", "1", "1.0")


FAST_LEVEL = "GFN2-xTB"


def level_barrier(row) -> float:
    """A ranking row's barrier (kJ/mol) at the level its rank comes from."""
    refined = str(row.get("level", FAST_LEVEL)) not in ("", FAST_LEVEL, "nan")
    return row["barrier_refined_kJmol"] if refined else row["barrier_kJmol"]


def scale_text(summary: dict) -> str:
    """On which reference scale the numbers sit."""
    run = summary.get("run_dienophile", "")
    same = summary.get("note", "") == ""
    return (f"log10 k relative to 1,3-butadiene, scale set by the reference kinetics with "
            f"{summary.get('base_dienophile', '')}" + ("" if same else f" (the run's dienophile {run} is not among them)"))


def level_text(summary: dict) -> str:
    """At which level the barriers the ranking rests on were priced."""
    level = summary.get("ranking_level", summary.get("level", FAST_LEVEL))
    if level == FAST_LEVEL:
        return ("barriers at the GFN2-xTB level only: a quick screen (GFN2-xTB over-rewards alkyl groups "
                "and large flat dienes; rank with refine.rows: all before trusting the top)")
    kind = ("free-energy barriers (GFN2-xTB thermal corrections)" if summary.get("barrier_kind") == "free_energy"
            else "electronic barriers")
    return f"{kind} priced at {level} on GFN2-xTB structures (rows marked * fell back to GFN2-xTB)"


def scale_line(summary: dict) -> str:
    """For which dienophile the ranking is, at which level, and on which reference scale."""
    return f"ranking for dienophile {summary.get('run_dienophile', '')}; {level_text(summary)}; {scale_text(summary)}"


def times_text(value) -> str:
    """A multiple of butadiene's rate constant, as a chemist reads it."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return ""
    if not np.isfinite(v):
        return ""
    return f"{v:.2g}" if v < 10 else f"{v:,.0f}" if v < 1e5 else f"{v:.1e}"


def hours_text(value) -> str:
    """A half-life in hours, in the unit a chemist would say it in."""
    try:
        h = float(value)
    except (TypeError, ValueError):
        return ""
    if not np.isfinite(h):
        return ""
    if h < 1.0 / 60:
        return f"{h * 3600:.2g} s"
    if h < 1:
        return f"{h * 60:.2g} min"
    if h < 48:
        return f"{h:.2g} h"
    return f"{h / 24:.2g} days" if h < 24 * 365 else f"{h / 24 / 365:.2g} years"


def time_text(model: dict) -> str:
    """What the numbers say about reaction time: half-lives from an anchor, or plainly nothing."""
    hl = model.get("bench", {}).get("half_life", {})
    if not hl.get("given"):
        return ("These are relative rates: no reaction time can be derived from them without one measured "
                "rate constant under your conditions (config anchor.k_L_per_mol_s).")
    return (f"Half-lives for both partners starting at {hl['concentration_M']:g} mol/L, scaled from the "
            f"measured k = {hl['k_L_per_mol_s']:g} L/(mol s) of {hl['smiles']} ({hl['source']}); they carry the "
            "model's factor of uncertainty.")


def accuracy_text(model: dict) -> str:
    """The model's leave-one-out accuracy in bench terms."""
    bench = model.get("bench", {})
    if bench.get("pairs_right_of_10") is None:
        return ""
    return (f"On the reference set (leave-one-out) about {bench['pairs_right_of_10']} of 10 pairs of dienes "
            f"come out in the measured order; a predicted rate constant is typically off by a factor of "
            f"{bench['typical_factor']:g}.")


def summary_lines(ranking: pd.DataFrame, out_dir, summary: dict | None = None, top: int = 10) -> list[str]:
    summary = summary or {}
    counts = Counter(ranking["status"])
    n_ok = counts.pop("ok", 0)
    lines = [f"{len(ranking)} input rows: {n_ok} ok"
             + (", " + ", ".join(f"{n} {s}" for s, n in sorted(counts.items())) if counts else "")]
    if summary:
        lines.append(scale_line(summary))
    if "tier" in ranking and ranking["tier"].notna().any():
        first = ranking[ranking["tier"] == 1].sort_values("rank")
        names = [f"{r['id']}{' ' + r['name'] if isinstance(r.get('name'), str) and r['name'] else ''} "
                 f"(x{times_text(r['times_faster_than_butadiene']) or '?'} butadiene"
                 + (f", half-life {hours_text(r['half_life_h'])}" if hours_text(r.get("half_life_h")) else "") + ")"
                 for _, r in first.head(8).iterrows()]
        more = f" and {len(first) - 8} more" if len(first) > 8 else ""
        lines.append(f"try first (tier 1, {len(first)} diene(s) the model cannot order among themselves): "
                     + ", ".join(names) + more)
        if summary and accuracy_text(summary):
            lines.append(accuracy_text(summary))
        if summary:
            lines.append(time_text(summary))
        if summary and not summary.get("bench", {}).get("dienophile_in_reference", True):
            lines.append("the dienophile is not in the reference set: rates are transferred from "
                         f"{summary.get('base_dienophile', 'the reference dienophile')} (see domain_note)")
    ranked = ranking[ranking["rank"].notna()].sort_values("rank").head(top)
    main_level = summary.get("ranking_level", FAST_LEVEL)
    if len(ranked):
        label = interval_label(summary.get("interval", 0.9))
        lines.append(f"top {len(ranked)} (predicted log10 k [{label} interval]; barrier at {main_level}; "
                     "s-cis penalty at GFN2-xTB; ! = extrapolation, not backed by the reference set):")
        for _, r in ranked.iterrows():
            flag = " " if is_true(r["in_domain"]) else "!"
            fell_back = "*" if main_level != FAST_LEVEL and str(r.get("level")) == FAST_LEVEL else " "
            lines.append(f" {flag}{int(r['rank']):>3}{fell_back} {str(r['id'])[:24]:<24} {r['log10_k_pred']:+6.2f} "
                         f"[{r['log10_k_low']:+.2f}, {r['log10_k_high']:+.2f}]  "
                         f"barrier {level_barrier(r):6.1f} kJ/mol  penalty {r['scis_penalty_kJmol']:5.1f} kJ/mol")
        n_out = int((~ranking.loc[ranking["rank"].notna(), "in_domain"].map(is_true)).sum())
        if n_out:
            lines.append(f"{n_out} ranked row(s) are extrapolations: see in_domain and domain_note in ranking.csv")
        if main_level != FAST_LEVEL:
            n_fast = int((ranking.loc[ranking["rank"].notna(), "level"] == FAST_LEVEL).sum())
            if n_fast:
                lines.append(f"{n_fast} ranked row(s) are ranked at GFN2-xTB (their refinement failed or was "
                             "not asked for): see level and message in ranking.csv")
    out = Path(out_dir)
    lines.append(f"outputs: {out / 'ranking.csv'} (table), {out / 'report.html'} (report), "
                 f"{out / 'dienes.sdf'} (3D structures), {out / 'sites.csv'}, {out / 'model.json'}")
    return lines


def _sdf_text(value) -> str:
    return " ".join(str(value).split())  # one line: SDF fields and titles cannot hold newlines


def _ts_geometry(computed, row):
    """(positions, atomic numbers) of the transition structure of a row's best site, or None."""
    ts = getattr(computed, "transitions", {}).get(str(row.get("transition_key")), {})
    site = ts.get("sites", {}).get(row["best_site"], {})
    return (site["positions_A"], ts.get("numbers")) if site.get("positions_A") else None


def write_sdf(table: pd.DataFrame, computed, path) -> int:
    """3D structures of every ranked diene: its planar s-cis conformer (best site), its
    global minimum and its transition structure with the dienophile, with properties.
    Returns the number of records written."""
    from rdkit import Chem
    from rdkit.Geometry import Point3D
    results = computed.structures if hasattr(computed, "structures") else computed
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    writer = Chem.SDWriter(str(tmp))
    n = 0
    for _, r in table[table["rank"].notna()].sort_values("rank").iterrows():
        res = results.get(r["structure_key"], {})
        geo = res.get("geometry")
        mol = Chem.MolFromSmiles(str(r["isomer_smiles"]))
        if not geo or mol is None:
            continue
        mol = Chem.AddHs(mol)
        if [a.GetAtomicNum() for a in mol.GetAtoms()] != geo["numbers"]:
            continue
        entries = [("planar s-cis", mol, geo["planar_s_cis_A"].get(r["best_site"])),
                   ("global minimum", mol, geo["minimum_A"])]
        ts = _ts_geometry(computed, r)
        dph = Chem.MolFromSmiles(str(r.get("dienophile", "")))
        if ts is not None and dph is not None:
            pair = Chem.CombineMols(mol, Chem.AddHs(dph))
            if [a.GetAtomicNum() for a in pair.GetAtoms()] == list(ts[1] or []):
                entries.append(("transition structure", pair, ts[0]))
        domain = "yes" if is_true(r["in_domain"]) else "no (extrapolation)"
        for label, base, coords in entries:
            if coords is None:
                continue
            m = Chem.Mol(base)
            conf = Chem.Conformer(m.GetNumAtoms())
            for i, (x, y, z) in enumerate(coords):
                conf.SetAtomPosition(i, Point3D(x, y, z))
            m.RemoveAllConformers()
            m.AddConformer(conf, assignId=True)
            tag = "" if is_true(r["in_domain"]) else " [extrapolation]"
            m.SetProp("_Name", _sdf_text(f"{r['id']} {label} (GFN2-xTB geometry; ranked at {r['level']}){tag}"))
            props = {"id": r["id"], "row": int(r["row"]), "conformer": label, "status": r["status"],
                     "rank": int(r["rank"]), "in_domain": domain, "domain_note": r.get("domain_note", ""),
                     "smiles": r["smiles"], "isomer_smiles": r["isomer_smiles"],
                     "diene_site": r["best_site"], "dienophile": r.get("dienophile", ""),
                     "level": r["level"], "barrier_at_level_kJmol": level_barrier(r),
                     "barrier_gfn2_xtb_kJmol": r["barrier_kJmol"],
                     "scis_penalty_gfn2_xtb_kJmol": r["scis_penalty_kJmol"],
                     "homo_gfn2_xtb_eV": r["homo_eV"], "lumo_gfn2_xtb_eV": r["lumo_eV"],
                     "log10_k_pred": r["log10_k_pred"],
                     "seed": res.get("seed", "")}
            for k, v in props.items():
                m.SetProp(k, _sdf_text(v))
            writer.write(m)
            n += 1
    writer.close()
    tmp.replace(path)
    return n
