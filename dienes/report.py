"""results/report.html: one self-contained page a chemist reads.

Everything is inline (SVG depictions from RDKit, SVG plots from matplotlib,
one small stylesheet); the page makes no network request. Every string that
came from the user (ids, SMILES, messages, extra columns) is HTML-escaped.
"""

from __future__ import annotations

import datetime as _dt
import html
import io
import math
from pathlib import Path

import numpy as np
import pandas as pd
from rdkit import Chem
from rdkit.Chem.Draw import rdMolDraw2D

CAUTIONS = [
    "Predictions are estimates for prioritising experiments. They are not hazard data, and they "
    "are only as good as the reference kinetics the model was fitted on.",
    "Many dienes are flammable, peroxide-forming or toxic; 1,3-butadiene is a carcinogen. "
    "Cyclopentadiene dimerises exothermically on standing.",
    "Diels–Alder cycloadditions can be strongly exothermic; scale-up needs a thermal hazard assessment.",
    "The safety data sheet, local regulations and your institution's safety practice come first.",
]

STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:24px;color:#1d2430;max-width:1400px}
h1{font-size:1.5em;margin-bottom:0}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #d5dae3}
.sub{color:#5b6578;margin-top:4px}
.caution{background:#fff6e5;border-left:4px solid #d18a00;padding:8px 14px;margin:14px 0}
table{border-collapse:collapse;font-size:0.86em}th,td{padding:4px 8px;border-bottom:1px solid #e3e7ee;vertical-align:middle;text-align:left}
th{background:#f1f4f8;position:sticky;top:0}
td.num{text-align:right;font-variant-numeric:tabular-nums}
tr.notok td{background:#fbf3f3}
.status-ok{color:#17663a;font-weight:600}.status-bad{color:#a12a2a;font-weight:600}
.grid{display:flex;flex-wrap:wrap;gap:18px}.card{border:1px solid #e3e7ee;padding:8px}
.kv td:first-child{color:#5b6578}
.small{font-size:0.8em;color:#5b6578}
"""


def esc(value) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return html.escape(str(value), quote=True)


def _num(value, fmt="{:.2f}") -> str:
    try:
        x = float(value)
    except (TypeError, ValueError):
        return ""
    return "" if math.isnan(x) else fmt.format(x)


def depict(smiles: str, highlight=(), width: int = 190, height: int = 130) -> str:
    """Inline SVG of a structure, the diene atoms highlighted; '' if unparsable."""
    mol = Chem.MolFromSmiles(smiles) if smiles else None
    if mol is None:
        return ""
    drawer = rdMolDraw2D.MolDraw2DSVG(width, height)
    opts = drawer.drawOptions()
    opts.clearBackground = False
    hl = [i for i in highlight if i < mol.GetNumAtoms()]
    bonds = [b.GetIdx() for b in mol.GetBonds()
             if b.GetBeginAtomIdx() in hl and b.GetEndAtomIdx() in hl]
    rdMolDraw2D.PrepareAndDrawMolecule(drawer, mol, highlightAtoms=hl, highlightBonds=bonds)
    drawer.FinishDrawing()
    svg = drawer.GetDrawingText()
    return svg[svg.find("<svg"):]


def _figure_svg(fig) -> str:
    import matplotlib.pyplot as plt
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight")
    plt.close(fig)
    svg = buf.getvalue()
    return svg[svg.find("<svg"):]


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    plt.rcParams.update({"svg.fonttype": "path", "font.size": 9, "svg.hashsalt": "dienes"})
    return plt


def plot_reference(ref: pd.DataFrame) -> str:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(4.2, 4.0))
    used = ref[ref.get("in_training_set", False) == True]  # noqa: E712
    if len(used):
        lo = float(min(used["log10_k"].min(), used["log10_k_cv"].min())) - 0.5
        hi = float(max(used["log10_k"].max(), used["log10_k_cv"].max())) + 0.5
        ax.plot([lo, hi], [lo, hi], color="#9aa3b2", lw=1)
        ax.scatter(used["log10_k"], used["log10_k_cv"], s=22, color="#2b6cb0", label="leave-one-out")
        ax.scatter(used["log10_k"], used["log10_k_fit"], s=12, marker="x", color="#d18a00", label="fitted")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.legend(frameon=False, loc="upper left")
    ax.set_xlabel("reference log10 k (relative)")
    ax.set_ylabel("predicted log10 k")
    ax.set_title("Reference set")
    return _figure_svg(fig)


def plot_map(table: pd.DataFrame) -> str:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(5.0, 4.0))
    ok = table[table["rank"].notna()]
    if len(ok):
        sc = ax.scatter(ok["scis_penalty_kJmol"].astype(float), ok["homo_eV"].astype(float),
                        c=ok["log10_k_pred"].astype(float), cmap="viridis", s=28, edgecolor="k", lw=0.3)
        fig.colorbar(sc, ax=ax, label="predicted log10 k")
    ax.set_xlabel("s-cis penalty (kJ/mol)")
    ax.set_ylabel("site HOMO (eV, GFN2-xTB)")
    ax.set_title("Penalty against HOMO")
    return _figure_svg(fig)


def plot_profiles(profiles: list[tuple[str, np.ndarray, np.ndarray]]) -> str:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(5.6, 4.0))
    for label, a, e in profiles:
        ax.plot(a, e, marker="o", ms=3, label=label)
    ax.set_xlabel("diene dihedral C1-C2-C3-C4 (deg; 0 = s-cis)")
    ax.set_ylabel("relative energy (kJ/mol)")
    ax.set_xlim(0, 180)
    ax.set_title("Relaxed torsion profiles")
    if profiles:
        ax.legend(frameon=False, fontsize=7)
    return _figure_svg(fig)


def _domain(value) -> str:
    if str(value) in ("True", "true", "1", "1.0"):
        return "yes"
    if str(value) in ("False", "false", "0", "0.0"):
        return "<span class='status-bad'>no: extrapolation</span>"
    return ""


def _kv(rows) -> str:
    return "<table class='kv'>" + "".join(
        f"<tr><td>{esc(k)}</td><td>{esc(v)}</td></tr>" for k, v in rows) + "</table>"


def _table(table: pd.DataFrame, sites_atoms: dict) -> str:
    cols = ["rank", "structure", "id", "status", "log10 k (90% interval)", "in domain",
            "barrier kJ/mol", "s-cis penalty kJ/mol", "HOMO eV", "LUMO eV", "regio hint",
            "site", "message"]
    head = "<tr>" + "".join(f"<th>{c}</th>" for c in cols) + "</tr>"
    order = table.assign(_r=table["rank"].astype(float).fillna(1e9)).sort_values(["_r", "row"])
    body = []
    for _, r in order.iterrows():
        ok = r["status"] == "ok"
        smiles = r["isomer_smiles"] if isinstance(r.get("isomer_smiles"), str) else r["smiles"]
        atoms = sites_atoms.get((int(r["row"]), str(r.get("structure_key")), str(r.get("best_site"))), ())
        pred = (f"{_num(r['log10_k_pred'])} ({_num(r['log10_k_low'])} – {_num(r['log10_k_high'])})"
                if ok and _num(r["log10_k_pred"]) else "")
        cells = [
            f"<td class='num'>{'' if pd.isna(r['rank']) else int(r['rank'])}</td>",
            f"<td>{depict(smiles, atoms) if isinstance(smiles, str) else ''}</td>",
            f"<td>{esc(r['id'])}<div class='small'>{esc(r['smiles'])}</div></td>",
            f"<td class='{'status-ok' if ok else 'status-bad'}'>{esc(r['status'])}</td>",
            f"<td class='num'>{pred}</td>",
            f"<td>{_domain(r['in_domain']) if ok else ''}</td>",
            f"<td class='num'>{_num(r['barrier_kJmol'], '{:.1f}')}</td>",
            f"<td class='num'>{_num(r['scis_penalty_kJmol'], '{:.1f}')}</td>",
            f"<td class='num'>{_num(r['homo_eV'])}</td>",
            f"<td class='num'>{_num(r['lumo_eV'])}</td>",
            f"<td>{esc(r['regio_hint'])}</td>",
            f"<td>{esc(r['site_kind'])}<div class='small'>{esc(r['best_site'])}</div></td>",
            f"<td>{esc(r['message'])}</td>",
        ]
        body.append(f"<tr class='{'ok' if ok else 'notok'}' data-row='{int(r['row'])}'>" + "".join(cells) + "</tr>")
    return f"<table id='ranking'>{head}{''.join(body)}</table>"


def build(table: pd.DataFrame, sites: pd.DataFrame, model: dict, reference: pd.DataFrame,
          settings: dict, versions: dict, profiles, config: dict) -> str:
    dienophile_smiles = config["dienophile"]
    counts = table["status"].value_counts().to_dict()
    sites_atoms = {}
    for _, s in sites.iterrows() if len(sites) else []:
        sites_atoms[(int(s["row"]), str(s["key"]), str(s["site"]))] = tuple(
            int(x) - 1 for x in str(s["site"]).split("-"))
    coef = model.get("coefficients", {})
    se = model.get("coefficient_se", {})
    coef_rows = [(k, f"{v:+.4f} ± {(se.get(k) or 0):.4f}") for k, v in coef.items()]
    coef_rows.append(("intercept", f"{model.get('intercept', float('nan')):+.3f}"))
    model_rows = [
        ("variant chosen (lowest LOO RMSE)", model.get("variant")),
        ("reference dienes", model.get("n_reference")),
        ("LOO RMSE (log10 units)", _num(model.get("cv_rmse_log10k"))),
        ("LOO Spearman rho", _num(model.get("cv_spearman"))),
        ("LOO pairwise order accuracy", _num(model.get("cv_pairwise_accuracy"))),
        ("transition-state-theory slope -1/(RT ln 10)", _num(model.get("physical_slope_per_kJmol"), "{:+.4f}")),
        ("reference file sha256", str(model.get("reference_sha256", ""))[:16]),
    ] + coef_rows
    if model.get("note"):
        model_rows.append(("note", model["note"]))
    comp = "".join(f"<tr><td>{esc(v)}</td><td class='num'>{_num(m['cv_rmse_log10k'])}</td>"
                   f"<td class='num'>{_num(m['cv_spearman'])}</td>"
                   f"<td class='num'>{_num(m['cv_pairwise_accuracy'])}</td></tr>"
                   for v, m in model.get("comparison", {}).items())
    setting_rows = [("dienophile", dienophile_smiles)] + [
        (k, v) for k, v in settings.items() if k not in ("conformers", "optimisation")]
    setting_rows += [(f"conformers.{k}", v) for k, v in settings.get("conformers", {}).items()]
    setting_rows += [(f"optimisation.{k}", v) for k, v in settings.get("optimisation", {}).items()]
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        "<meta http-equiv='Content-Security-Policy' content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">",
        f"<title>Diene reactivity ranking</title><style>{STYLE}</style></head><body>",
        "<h1>Diene reactivity ranking</h1>",
        f"<p class='sub'>{esc(len(table))} input rows · "
        + " · ".join(f"{esc(n)} {esc(s)}" for s, n in sorted(counts.items()))
        + f" · generated {esc(_dt.datetime.now().strftime('%Y-%m-%d %H:%M'))}</p>",
        "<div class='caution'><b>Cautions</b><ul>" + "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS) + "</ul></div>",
        "<h2>Ranking</h2><p class='small'>log10 k is relative to 1,3-butadiene on the reference set's scale; "
        "rows that were not ranked are listed after the ranked ones with their reason.</p>",
        _table(table, sites_atoms),
        "<h2>Plots</h2><div class='grid'>",
        f"<div class='card'>{plot_reference(reference)}</div>",
        f"<div class='card'>{plot_map(table)}</div>",
        f"<div class='card'>{plot_profiles(profiles)}</div></div>",
        "<h2>Model</h2><div class='grid'><div>", _kv(model_rows), "</div><div>",
        "<table><tr><th>variant</th><th>LOO RMSE</th><th>Spearman</th><th>pairwise</th></tr>", comp, "</table></div></div>",
        "<h2>Run settings and software</h2><div class='grid'><div>", _kv(setting_rows), "</div><div>",
        _kv(sorted(versions.items())), "</div></div>",
        f"<p class='small'>Dienophile:</p>{depict(dienophile_smiles)}",
        "</body></html>",
    ]
    return "\n".join(parts)


def write(path, text: str) -> None:
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
