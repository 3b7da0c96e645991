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


def summary_lines(ranking: pd.DataFrame, out_dir, top: int = 10) -> list[str]:
    counts = Counter(ranking["status"])
    n_ok = counts.pop("ok", 0)
    lines = [f"{len(ranking)} input rows: {n_ok} ranked ok"
             + (", " + ", ".join(f"{n} {s}" for s, n in sorted(counts.items())) if counts else "")]
    ranked = ranking[ranking["rank"].notna()].sort_values("rank").head(top)
    if len(ranked):
        lines.append(f"top {len(ranked)} (log10 k predicted, 90% interval):")
        for _, r in ranked.iterrows():
            lines.append(f"  {int(r['rank']):>3}  {str(r['id'])[:24]:<24} {r['log10_k_pred']:+6.2f} "
                         f"[{r['log10_k_low']:+.2f}, {r['log10_k_high']:+.2f}]  "
                         f"penalty {r['scis_penalty_kJmol']:5.1f} kJ/mol  HOMO {r['homo_eV']:.2f} eV")
    out = Path(out_dir)
    lines.append(f"outputs: {out / 'ranking.csv'} (table), {out / 'report.html'} (report), "
                 f"{out / 'dienes.sdf'} (3D structures), {out / 'sites.csv'}, {out / 'model.json'}")
    return lines


def _sdf_text(value) -> str:
    return " ".join(str(value).split())  # one line: SDF fields and titles cannot hold newlines


def write_sdf(table: pd.DataFrame, results: dict, path) -> int:
    """3D structures of every ranked diene: its planar s-cis conformer (best site) and
    its global minimum, with properties. Returns the number of records written."""
    from rdkit import Chem
    from rdkit.Geometry import Point3D
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
        for label, coords in (("planar s-cis", geo["planar_s_cis_A"].get(r["best_site"])),
                              ("global minimum", geo["minimum_A"])):
            if coords is None:
                continue
            m = Chem.Mol(mol)
            conf = Chem.Conformer(m.GetNumAtoms())
            for i, (x, y, z) in enumerate(coords):
                conf.SetAtomPosition(i, Point3D(x, y, z))
            m.RemoveAllConformers()
            m.AddConformer(conf, assignId=True)
            m.SetProp("_Name", _sdf_text(f"{r['id']} {label}"))
            props = {"id": r["id"], "row": int(r["row"]), "conformer": label, "status": r["status"],
                     "rank": int(r["rank"]), "smiles": r["smiles"], "isomer_smiles": r["isomer_smiles"],
                     "diene_site": r["best_site"], "scis_penalty_kJmol": r["scis_penalty_kJmol"],
                     "homo_eV": r["homo_eV"], "lumo_eV": r["lumo_eV"], "log10_k_pred": r["log10_k_pred"],
                     "distortion_kJmol": r["distortion_kJmol"], "seed": res.get("seed", "")}
            for k, v in props.items():
                m.SetProp(k, _sdf_text(v))
            writer.write(m)
            n += 1
    writer.close()
    tmp.replace(path)
    return n
