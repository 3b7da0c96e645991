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
    lines.append(f"outputs: {Path(out_dir) / 'ranking.csv'}, {Path(out_dir) / 'sites.csv'}, "
                 f"{Path(out_dir) / 'model.json'}")
    return lines
