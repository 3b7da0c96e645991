"""Write what the chemist reads: results/ranking.csv, results/sites.csv,
results/model.json, and a short summary on the console."""

from __future__ import annotations

import csv
from collections.abc import Mapping
import json
import math
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd

from .layout import write_atomic, write_text
from .ranking import ranking_model

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
    write_atomic(path, lambda tmp: safe.to_csv(tmp, index=False, quoting=csv.QUOTE_MINIMAL, float_format="%.6g"))


def _clean(obj):
    if isinstance(obj, Mapping):
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
    write_text(path, json.dumps(_clean(summary), indent=1) + "\n")


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


def scale_text(summary: dict) -> str:
    """On which reference scale the numbers sit."""
    model = ranking_model(summary)
    run = summary.get("run_dienophile", "")
    same = model.get("note", "") == ""
    return (f"log10 k relative to the measured rate of 1,3-butadiene with the same dienophile (0 = butadiene; "
            f"x butadiene = 10^log10 k), scale set by the reference kinetics with "
            f"{model.get('base_dienophile', '')}" + ("" if same else f" (the run's dienophile {run} is not among them)"))


def level_text(summary: dict) -> str:
    """At which level the barriers the ranking rests on were computed."""
    model = ranking_model(summary)
    if not model:
        return "no level's model could be fitted (see model.json)"
    kind = ("free-energy barriers (GFN2-xTB thermal corrections)" if model.get("barrier_kind") == "free_energy"
            else "electronic barriers")
    if model.get("level") == "GFN2-xTB":
        return ("barriers at the GFN2-xTB level only: a quick screen (GFN2-xTB over-rewards alkyl groups "
                "and large flat dienes; rank at a density-functional level before trusting the top)")
    return f"{kind} at {summary['ranking_level']} ({model.get('level')}) on GFN2-xTB structures"


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
            f"{bench['typical_factor']:g}"
            + (f"; the {round(100 * bench['interval'])} % intervals held for {round(100 * bench['interval_coverage_loo'])} % "
               "of the reference dienes, each left out in turn." if bench.get("interval_coverage_loo") is not None
               and bench.get("interval") else "."))


def computed_text(summary: dict) -> str:
    """One line on which rows the ranking level computed and what that risked, or '' where it
    computed every row."""
    c = summary.get("computed_rows", {})
    if not c or c.get("rows") == "all":
        return ""
    corrected = {k: v for k, v in c.get("ranked_by_level", {}).items() if k != c["level"]}
    corr = next((m.get("correction") for m in summary.get("levels", {}).values() if m.get("correction")), None)
    text = (f"{c['level']} computed {c.get('pairs_computed', 0)} of {c.get('pairs_in_run', 0)} diene-dienophile pairs "
            f"in {c.get('rounds', 0)} round(s) ({c.get('ended', '')}); ranked there: "
            f"{c.get('ranked_by_level', {}).get(c['level'], 0)} rows"
            + "".join(f", on {k}: {v}" for k, v in corrected.items()))
    if corr:
        text += (f"; the correction's error: mean {corr['loo_mae_kJmol']:.1f} kJ/mol, "
                 f"{interval_label(summary.get('interval', 0.9))} within {corr['half_width_kJmol']:.0f} kJ/mol "
                 "(in every such row's interval)")
    if c.get("cut_log10_k") is not None:
        near = [n["id"] for n in c.get("nearest_cut", []) if not n.get("contender")][:3]
        text += (f"; a row had to be able to reach log10 k {c['cut_log10_k']:+.2f} (place {c['cut_place']})"
                 + (f"; nearest below that, not computed: {', '.join(near)}" if near else ""))
    if c.get("note"):
        text += f"; {c['note']}"
    return text


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
                         f"{ranking_model(summary).get('base_dienophile', 'the reference dienophile')} "
                         "(see domain_note)")
    ranked = ranking[ranking["rank"].notna()].sort_values("rank").head(top)
    main_level = summary.get("ranking_level") or ""
    if len(ranked):
        label = interval_label(summary.get("interval", 0.9))
        lines.append(f"top {len(ranked)} (predicted log10 k [{label} interval]; barrier at the row's level, "
                     f"{main_level} unless marked *; s-cis penalty at GFN2-xTB; ! = extrapolation, not backed "
                     "by the reference set):")
        for _, r in ranked.iterrows():
            flag = " " if is_true(r["in_domain"]) else "!"
            other = "*" if str(r.get("level")) != main_level else " "
            lines.append(f" {flag}{int(r['rank']):>3}{other} {str(r['id'])[:24]:<24} {r['log10_k_pred']:+6.2f} "
                         f"[{r['log10_k_low']:+.2f}, {r['log10_k_high']:+.2f}]  "
                         f"barrier {float(r['barrier_kJmol']):6.1f} kJ/mol  "
                         f"penalty {r['scis_penalty_kJmol']:5.1f} kJ/mol")
        n_out = int((~ranking.loc[ranking["rank"].notna(), "in_domain"].map(is_true)).sum())
        if n_out:
            lines.append(f"{n_out} ranked row(s) are extrapolations: see in_domain and domain_note in ranking.csv")
        n_other = int((ranking.loc[ranking["rank"].notna(), "level"].astype(str) != main_level).sum())
        computed = computed_text(summary) if summary else ""
        if computed:
            lines.append(computed)
        elif n_other:
            lines.append(f"{n_other} ranked row(s) are ranked at a later level of ranking.levels (their {main_level} "
                         "value failed or was not computed): see level and message in ranking.csv")
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


def _sdf_records(table: pd.DataFrame, computed, settings):
    """(name, molecule with 3D coordinates, properties) of every record dienes.sdf holds."""
    from rdkit import Chem
    from rdkit.Geometry import Point3D
    results = computed.structures if hasattr(computed, "structures") else computed
    levels = [lv.name for lv in settings.ranking_levels]
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
        tag = "" if is_true(r["in_domain"]) else " [extrapolation]"
        props = {"id": r["id"], "row": int(r["row"]), "status": r["status"],
                 "rank": int(r["rank"]), "in_domain": domain, "domain_note": r.get("domain_note", ""),
                 "smiles": r["smiles"], "isomer_smiles": r["isomer_smiles"],
                 "diene_site": r["best_site"], "dienophile": r.get("dienophile", ""),
                 "level": r["level"], "level_method": r.get("level_method", ""),
                 "barrier_kJmol": r["barrier_kJmol"], "barrier_kind": r.get("barrier_kind", ""),
                 "log10_k_pred": r["log10_k_pred"]}
        props |= {f"{lv}_barrier_kJmol": r.get(f"{lv}_barrier_kJmol", "") for lv in levels}
        props |= {"scis_penalty_kJmol": r["scis_penalty_kJmol"], "homo_eV": r["homo_eV"], "lumo_eV": r["lumo_eV"],
                  "seed": res.get("seed", "")}
        for label, base, coords in entries:
            if coords is None:
                continue
            m = Chem.Mol(base)
            conf = Chem.Conformer(m.GetNumAtoms())
            for i, (x, y, z) in enumerate(coords):
                conf.SetAtomPosition(i, Point3D(x, y, z))
            m.RemoveAllConformers()
            m.AddConformer(conf, assignId=True)
            yield (f"{r['id']} {label} (GFN2-xTB geometry; ranked at {r['level']}){tag}", m,
                   {"conformer": label} | props)


def write_sdf(table: pd.DataFrame, computed, settings, path) -> int:
    """3D structures of every ranked diene: its planar s-cis conformer (best site), its
    global minimum and its transition structure with the dienophile, with properties
    (barrier_kJmol at the row's level; HOMO, LUMO and s-cis penalty at GFN2-xTB).
    Returns the number of records written."""
    from rdkit import Chem
    written = []

    def write(tmp):
        writer = Chem.SDWriter(str(tmp))
        for name, m, props in _sdf_records(table, computed, settings):
            m.SetProp("_Name", _sdf_text(name))
            for k, v in props.items():
                m.SetProp(k, _sdf_text(v))
            writer.write(m)
            written.append(name)
        writer.close()

    write_atomic(path, write)
    return len(written)
