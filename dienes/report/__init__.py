"""results/report.html: one self-contained page a chemist reads.

The page is a Jinja2 template (page.html.j2) with its style sheet (page.css) and
script (page.js) beside it and its words in text.yaml; this module prepares
plain data for it (rows of strings, RDKit and matplotlib SVG) and renders it.
Everything is inlined at render time, so the page makes no network request;
every string that came from the user is escaped by the template engine.
"""

from __future__ import annotations

import datetime as _dt
import io
import math
from functools import lru_cache
from importlib import resources

import numpy as np
import pandas as pd
from markupsafe import Markup
from rdkit import Chem
from rdkit.Chem.Draw import rdMolDraw2D

from ..dienophiles import name_of
from ..outputs import (accuracy_text, computed_text, hours_text, interval_label, is_true, level_text, scale_text, time_text,
                       times_text)
from ..ranking import col, ranking_model

COLOUR_CLIP = (5, 95)       # percentiles that bound the colour scale of the map
PROFILE_CAP_KJMOL = 60.0    # torsion profiles are drawn up to this energy
LEVEL_ROWS_SHOWN = 10       # rows of a level comparison: the largest rank changes
TIER_NAMES_SHOWN = 12       # dienes named per tier in the try-first box


@lru_cache(maxsize=1)
def text() -> dict:
    """The report's words: cautions, glossary, scope (text.yaml)."""
    import yaml
    return yaml.safe_load(resources.files(__package__).joinpath("text.yaml").read_text(encoding="utf-8"))


def _asset(name: str) -> str:
    return resources.files(__package__).joinpath(name).read_text(encoding="utf-8")


def _num(value, fmt="{:.2f}") -> str:
    try:
        x = float(value)
    except (TypeError, ValueError):
        return ""
    return "" if math.isnan(x) else fmt.format(x)


def _text(value) -> str:
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)


# ------------------------------------------------------------------ pictures

def depict(smiles: str, highlight=(), numbered=(), width: int = 200, height: int = 140) -> Markup:
    """Inline SVG of a structure: `highlight` atoms coloured, `numbered` atoms labelled
    with their 1-based atom numbers (the numbers site labels and hints refer to)."""
    mol = Chem.MolFromSmiles(smiles) if smiles else None
    if mol is None:
        return Markup("")
    for i in numbered:
        if i < mol.GetNumAtoms():
            mol.GetAtomWithIdx(int(i)).SetProp("atomNote", str(int(i) + 1))
    drawer = rdMolDraw2D.MolDraw2DSVG(width, height)
    opts = drawer.drawOptions()
    opts.clearBackground = False
    opts.annotationFontScale = 0.7
    opts.maxFontSize = 16
    opts.fixedBondLength = 22
    hl = [i for i in highlight if i < mol.GetNumAtoms()]
    bonds = [b.GetIdx() for b in mol.GetBonds() if b.GetBeginAtomIdx() in hl and b.GetEndAtomIdx() in hl]
    rdMolDraw2D.PrepareAndDrawMolecule(drawer, mol, highlightAtoms=hl, highlightBonds=bonds)
    drawer.FinishDrawing()
    svg = drawer.GetDrawingText()
    return Markup(svg[svg.find("<svg"):])   # noqa: S704 - drawn by RDKit from element symbols and numbers


def _figure_svg(fig) -> Markup:
    import matplotlib.pyplot as plt
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight")
    plt.close(fig)
    svg = buf.getvalue()
    return Markup(svg[svg.find("<svg"):])   # noqa: S704 - drawn by matplotlib, text as paths


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    plt.rcParams.update({"svg.fonttype": "path", "font.size": 9, "svg.hashsalt": "dienes"})
    return plt


def plot_reference(ref: pd.DataFrame, level: str, title: str) -> Markup:
    """Measured against leave-one-out and fitted log10 k of the reference set at one level."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(4.2, 4.0))
    used_col, cv_col, fit_col = col(level, "used"), col(level, "log10_k_cv"), col(level, "log10_k_fit")
    used = ref[ref[used_col].map(is_true)] if used_col in ref else ref[:0]
    if len(used):
        lo = float(min(used["log10_k"].min(), used[cv_col].min())) - 0.5
        hi = float(max(used["log10_k"].max(), used[cv_col].max())) + 0.5
        ax.plot([lo, hi], [lo, hi], color="#9aa3b2", lw=1)
        ax.scatter(used["log10_k"], used[cv_col], s=22, color="#2b6cb0", label="leave-one-out")
        ax.scatter(used["log10_k"], used[fit_col], s=12, marker="x", color="#d18a00", label="fitted")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.legend(frameon=False, loc="upper left")
    ax.set_xlabel("reference log10 k (relative to butadiene)")
    ax.set_ylabel("predicted log10 k")
    ax.set_title(title)
    return _figure_svg(fig)


def plot_map(table: pd.DataFrame) -> tuple[Markup, str]:
    """The barrier each row is ranked by against its s-cis penalty, coloured by predicted
    log10 k (colour scale clipped to the 5th-95th percentile so that one outlier does not
    wash it out). Returns (svg, a sentence on the clipping)."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(5.0, 4.0))
    ok = table[table["rank"].notna()]
    note = ""
    if len(ok):
        c = ok["log10_k_pred"].astype(float)
        lo, hi = np.percentile(c, COLOUR_CLIP) if len(c) > 4 else (c.min(), c.max())
        n_out = int(((c < lo) | (c > hi)).sum())
        sc = ax.scatter(ok["scis_penalty_kJmol"].astype(float), ok["barrier_kJmol"].astype(float),
                        c=c.clip(lo, hi), cmap="viridis", vmin=lo, vmax=hi, s=28, edgecolor="k", lw=0.3)
        fig.colorbar(sc, ax=ax, label="predicted log10 k (clipped)")
        note = (f"Colour scale clipped to {lo:+.1f} … {hi:+.1f} (the {COLOUR_CLIP[0]}th–{COLOUR_CLIP[1]}th "
                f"percentile); {n_out} point(s) beyond it take the end colour. The barrier is each row's at its "
                "level (column level); the s-cis penalty is GFN2-xTB's.")
    levels = sorted(ok["level"].dropna().astype(str).unique()) if len(ok) else []
    ax.set_xlabel("s-cis penalty (kJ/mol, GFN2-xTB)")
    ax.set_ylabel(f"barrier (kJ/mol, {', '.join(levels) or 'row level'})")
    ax.set_title("Barrier against s-cis penalty")
    return _figure_svg(fig), note


def plot_profiles(profiles: list[dict]) -> Markup:
    """Relaxed torsion profiles, each {label, dihedral_deg, energy_kJmol}."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(5.6, 4.0))
    top = 10.0
    for p in profiles:
        ax.plot(p["dihedral_deg"], p["energy_kJmol"], marker="o", ms=3, label=p["label"])
        top = max(top, float(np.max(p["energy_kJmol"])))
    ax.set_xlabel("diene dihedral C1-C2-C3-C4 (deg; 0 = s-cis)")
    ax.set_ylabel("relative energy (kJ/mol)")
    ax.set_xlim(0, 180)
    ax.set_ylim(0, min(top * 1.05, PROFILE_CAP_KJMOL))
    ax.set_title("Relaxed torsion profiles (freely rotating dienes)")
    if profiles:
        ax.legend(frameon=False, fontsize=7)
    return _figure_svg(fig)


# --------------------------------------------------------------- table rows

def _site_atoms(label) -> list[int]:
    try:
        return [int(x) - 1 for x in str(label).split("-")]
    except ValueError:
        return []


def _domain(row) -> tuple[str, str]:
    """(key, note): 'in', 'transfer', 'out' or '' for an unranked row."""
    if row["status"] not in ("ok", "ts_unverified") or pd.isna(row["rank"]):
        return "", ""
    note = _text(row.get("domain_note"))
    if is_true(row["in_domain"]):
        return ("in", note) if is_true(row.get("dienophile_in_reference", True)) else ("transfer", note)
    return "out", note


def coverage_text(model: dict) -> str:
    """How often the intervals held on the reference set, left out one at a time."""
    cov = model.get("interval_coverage_loo")
    if cov is None:
        return ""
    return (f"from the reference set's leave-one-out residuals; they held for {round(100 * cov)} % of the "
            f"{model.get('n_reference', '?')} reference dienes, each left out of the fit in turn")


def columns(others: list[str]) -> list[dict]:
    """The ranking table's columns: header, sortable, secondary (hidden in the compact view), help."""
    spec = [("rank", True, False), ("tier", True, False), ("structure", False, False), ("id", True, False),
            ("status", True, False), ("in domain", True, False), ("log10 k (interval)", True, False),
            ("x butadiene", True, False), ("level", True, False), ("barrier kJ/mol", True, False)]
    spec += [(f"barrier {name} kJ/mol", True, True) for name in others]
    spec += [("s-cis penalty kJ/mol (GFN2-xTB)", True, False), ("HOMO eV", True, True), ("LUMO eV", True, True),
             ("regio (orbitals)", False, True), ("regio (saddle), GFN2-xTB", False, True),
             ("endo/exo, GFN2-xTB", False, True), ("reaction free energy kJ/mol", True, True), ("site", True, False), ("message", False, False)]
    glossary = text()["columns"]

    def help_for(header):
        key = max((k for k in glossary if header.startswith(k.split(" /")[0])), key=len, default="")
        return glossary.get(key, "")
    return [{"header": h, "sortable": s, "secondary": sec, "help": help_for(h)} for h, s, sec in spec]


def table_rows(table: pd.DataFrame, others: list[str]) -> list[dict]:
    """Each input row as the strings its table row shows, ranked rows first."""
    order = table.assign(_r=table["rank"].astype(float).fillna(1e9)).sort_values(["_r", "row"])
    out = []
    for _, r in order.iterrows():
        ranked = not pd.isna(r["rank"])
        smiles = _text(r.get("isomer_smiles"))
        atoms = _site_atoms(r.get("best_site")) if ranked else []
        domain_key, domain_note = _domain(r)
        regio_ts = _text(r.get("regio_ts"))
        if regio_ts and regio_ts != "symmetric" and _num(r.get("orientation_gap_kJmol")):
            regio_ts += f"; other orientation +{_num(r['orientation_gap_kJmol'], '{:.1f}')} kJ/mol"
        face = _text(r.get("face_preference"))
        if face and _num(r.get("face_gap_kJmol")):
            gap = float(r["face_gap_kJmol"])
            face = "endo ≈ exo (within 1 kJ/mol)" if gap < 1.0 else f"{face} by {gap:.1f} kJ/mol"
        kind = _text(r.get("site_kind"))
        out.append({
            "row": int(r["row"]), "rank": str(int(r["rank"])) if ranked else "",
            "tier": "" if pd.isna(r.get("tier", np.nan)) else str(int(r["tier"])),
            "depiction": depict(smiles, atoms, atoms, width=130, height=95) if smiles else "",
            "id": _text(r["id"]), "name": _text(r.get("name")), "smiles": _text(r["smiles"]),
            "status": _text(r["status"]), "status_help": text()["status"].get(r["status"], ""),
            "domain_key": domain_key, "domain_note": domain_note,
            "pred": (f"{_num(r['log10_k_pred'])} ({_num(r['log10_k_low'])} – {_num(r['log10_k_high'])})"
                     if ranked else ""),
            "pred_sort": _num(r["log10_k_pred"], "{:.4f}"),
            "times": times_text(r.get("times_faster_than_butadiene")) if ranked else "",
            "terms": _text(r.get("model_terms")).split(" (log10")[0] if ranked else "",
            "calibration": _text(r.get("calibration_note")) if ranked else "",
            "chemistry": _text(r.get("chemistry_note")),
            "times_sort": _num(r.get("times_faster_than_butadiene"), "{:.6g}"),
            "level": _text(r.get("level")) if ranked else "",
            "barrier": _num(r["barrier_kJmol"], "{:.1f}") if ranked else "",
            "other_barriers": [_num(r.get(col(name, "barrier_kJmol")), "{:.1f}") for name in others],
            "penalty": _num(r["scis_penalty_kJmol"], "{:.1f}"),
            "homo": _num(r["homo_eV"]), "lumo": _num(r["lumo_eV"]),
            "regio_hint": _text(r.get("regio_hint")), "regio_ts": regio_ts, "face": face,
            "reaction_energy": _num(r.get("reaction_free_energy_kJmol"), "{:.0f}") if ranked else "",
            "reversal": _text(r.get("reversal_note")) if ranked else "",
            "kind": kind, "site": _text(r.get("best_site")), "message": _text(r["message"]),
            "klass": kind + (" aromatic" if "aromatic" in domain_note else ""),
            "css": ("ok" if ranked else "notok") + (" extrap" if domain_key == "out" else ""),
        })
    return out


# ------------------------------------------------------ levels side by side

def _alkyl_carbons(smiles: str, site_label) -> int:
    """sp3 carbons bonded to the diene unit's four carbons."""
    mol = Chem.MolFromSmiles(smiles) if smiles else None
    atoms = _site_atoms(site_label)
    if mol is None or not atoms or max(atoms) >= mol.GetNumAtoms():
        return 0
    return len({n.GetIdx() for i in atoms for n in mol.GetAtomWithIdx(i).GetNeighbors()
                if n.GetAtomicNum() == 6 and n.GetHybridization() == Chem.HybridizationType.SP3
                and n.GetIdx() not in atoms})


def level_reason(row, other: str, median_dispersion: float, other_is_gfn2: bool = True) -> str:
    """The likely reason another level places a row differently from the ranking level. Against
    GFN2-xTB, from what sets it apart: aromaticity it undercharges, dispersion and alkyl groups
    it over-rewards."""
    up = int(row[col(other, "rank")]) > int(row["rank"])        # the ranking level ranks it higher
    if not other_is_gfn2:
        return "the two levels weigh the substituents' electronic effects differently"
    disp = float(row.get("contact_dispersion_kJmol", float("nan")))
    n_alkyl = _alkyl_carbons(_text(row.get("isomer_smiles")), row.get("best_site"))
    why = []
    if is_true(row.get("aromatic")):
        why.append("aromatic diene unit: the ranking level charges the lost aromaticity that GFN2-xTB "
                   "undercounts" if not up else "aromatic diene unit")
    if not math.isnan(disp) and abs(disp - median_dispersion) >= 5.0:
        more = disp < median_dispersion
        if more != up:
            why.append(f"dispersion: {'more' if more else 'less'} contact dispersion than the median row "
                       f"({disp:.0f} against {median_dispersion:.0f} kJ/mol, D3), which GFN2-xTB "
                       f"{'rewards' if more else 'misses'} and the ranking level does not count")
    if n_alkyl >= 2 and not up:
        why.append(f"alkyl groups: {n_alkyl} sp3 carbons on the diene unit, which GFN2-xTB over-rewards")
    if not why:
        why.append("electronic: the two levels weigh the substituents' donor/acceptor effect differently")
    return "; ".join(why)


def comparison(table: pd.DataFrame, model: dict, other: str, labels: dict, gfn2: str) -> dict | None:
    """The ranking level's ranks beside another ranking level's, for the rows it moves most."""
    ranking = model.get("ranking_level")
    rank_col = col(other, "rank")
    if not ranking or other == ranking or rank_col not in table:
        return None
    both = table[table["rank"].notna() & table[rank_col].notna() & (table["level"] == ranking)]
    if not len(both):
        return None
    both = both.assign(_shift=both[rank_col].astype(int) - both["rank"].astype(int))
    moved = both[both["_shift"] != 0]
    picked = moved.reindex(moved["_shift"].abs().sort_values(ascending=False).index).head(LEVEL_ROWS_SHOWN)
    disp = both.get("contact_dispersion_kJmol", pd.Series(np.nan, index=both.index)).astype(float)
    median_disp = float(disp.median()) if disp.notna().any() else float("nan")
    rows = [{"id": _text(r["id"]), "smiles": _text(r["smiles"]), "rank": int(r["rank"]),
             "other_rank": int(r[rank_col]), "shift": f"{'+' if r['_shift'] > 0 else ''}{int(r['_shift'])}",
             "barrier": _num(r["barrier_kJmol"], "{:.1f}"), "other_barrier": _num(r.get(col(other, "barrier_kJmol")),
                                                                                   "{:.1f}"),
             "dispersion": _num(r.get("contact_dispersion_kJmol"), "{:.0f}"),
             "reason": level_reason(r, other, median_disp, other == gfn2)} for _, r in picked.iterrows()]
    rho = both[["rank", rank_col]].astype(float).corr(method="spearman").iloc[0, 1]
    return {"ranking": ranking, "other": other, "ranking_label": labels.get(ranking, ""),
            "other_label": labels.get(other, ""), "n": len(both), "rows": rows, "rho": _num(rho),
            "median_dispersion": _num(median_disp, "{:.0f}")}


# ---------------------------------------------------------------- the model

def _coefficient_rows(m: dict) -> list:
    coef, se = m.get("coefficients", {}), m.get("coefficient_se", {})
    rows = []
    for k, v in coef.items():
        if k == m.get("fixed_feature"):
            rows.append((k, f"{v:+.4f} (fixed: transition-state theory, -1/(RT ln 10))"))
        else:
            rows.append((k, f"{v:+.4f} ± {se.get(k) or 0:.4f}"))
    rows.append(("intercept", f"{m.get('intercept', float('nan')):+.3f}"))
    return rows


def model_view(name: str, m: dict, ranks: bool) -> dict:
    """One level's model as the page shows it."""
    out = {"name": name, "label": m.get("level", ""), "ranks": ranks, "error": m.get("error", "")}
    if out["error"]:
        return out
    b, tst = m.get("coefficients", {}).get("barrier_kJmol"), m.get("physical_slope_per_kJmol")
    rows = [("features", ", ".join(m.get("features", []))),
            ("barrier kind", _text(m.get("barrier_kind")).replace("_", " ")),
            ("variant chosen (lowest LOO RMSE)", m.get("variant")),
            ("reference dienes used", m.get("n_reference")),
            ("LOO RMSE (log10 units)", _num(m.get("cv_rmse_log10k"))),
            ("LOO Spearman rho", _num(m.get("cv_spearman"))),
            ("LOO pairwise order accuracy", _num(m.get("cv_pairwise_accuracy")))]
    if m.get("nested_cv"):
        n = m["nested_cv"]
        rows.append(("LOO of the whole procedure (feature choice inside each fold)",
                     f"RMSE {_num(n['cv_rmse_log10k'])}, Spearman {_num(n['cv_spearman'])}"))
    if b is not None and tst:
        rows.append(("barrier slope against transition-state theory",
                     f"{b:+.4f} per kJ/mol = {b / tst:.2f} × {tst:+.4f} (-1/(RT ln 10))"))
    rows += _coefficient_rows(m)
    rows.append(("prediction interval", f"{interval_label(m.get('interval', 0.9))} (config model.interval)"))
    if m.get("note"):
        rows.append(("note", m["note"]))
    out["rows"] = rows
    out["variants"] = [{"name": v, "rmse": _num(s["cv_rmse_log10k"]), "spearman": _num(s["cv_spearman"]),
                        "pairwise": _num(s["cv_pairwise_accuracy"])} for v, s in m.get("comparison", {}).items()]
    out["tried"] = [{"features": " + ".join(t["features"]), "rmse": _num(t["cv_rmse_log10k"]), "added": t.get("added")}
                    for t in m.get("selection", [])]
    return out


def reference_view(reference: pd.DataFrame, levels: list[str]) -> dict:
    rows = []
    for _, r in reference.iterrows():
        used = []
        for name in levels:
            if col(name, "used") not in reference:
                used.append("")
            else:
                used.append("yes" if is_true(r.get(col(name, "used"))) else _text(r.get(col(name, "reason"))))
        rows.append({"id": _text(r["id"]), "smiles": _text(r["smiles"]), "log10_k": _num(r.get("log10_k")),
                     "provenance": _text(r.get("provenance")), "used": used})
    return {"levels": levels, "rows": rows}


def reference_caution(reference: pd.DataFrame) -> str:
    """What the reference kinetics are and how sure they are, from their provenance column."""
    prov = reference.get("provenance", pd.Series(dtype=str)).fillna("").astype(str)
    n = len(reference)
    recalled = int(prov.str.contains("memory|recalled", case=False).sum())
    out = f"The {n} reference rate constants set the scale of every prediction. "
    if recalled:
        out += (f"{recalled} of them were entered from memory, not read from the source (their provenance "
                "column says how sure each is): treat the absolute numbers as rough and the order as the "
                "message. Replace them with your own kinetics (--config reference=PATH, same columns) "
                "when you have them.")
    else:
        out += "Their provenance column names the source of each."
    return out


# ---------------------------------------------------------------- first box

def tier_lines(table: pd.DataFrame, model: dict, tiers: int = 2) -> list[tuple[int, list[dict]]]:
    """[(tier, [{id, name, times, flags, depiction}, ...]), ...] for the first `tiers` tiers; the
    first tier's entries carry a small drawing."""
    out = []
    if "tier" not in table:
        return out
    ranked = table[table["rank"].notna() & table["tier"].notna()].sort_values("rank")
    for t in sorted(ranked["tier"].unique())[:tiers]:
        rows = ranked[ranked["tier"] == t]
        entries = []
        for _, r in rows.head(TIER_NAMES_SHOWN).iterrows():
            times = times_text(r.get("times_faster_than_butadiene"))
            flags = [] if is_true(r["in_domain"]) else ["extrapolation"]
            if str(r.get("level")) != model.get("ranking_level"):
                lv = model.get("levels", {}).get(str(r.get("level")), {})
                flags.append("estimated, not recomputed" if lv.get("correction") else f"at {r.get('level')}")
            if r.get("status") == "ts_unverified":
                flags.append("saddle not verified")
            if is_true(r.get("may_revert")):
                flags.append("adduct may revert")
            hl = hours_text(r.get("half_life_h"))
            smiles = _text(r.get("isomer_smiles")) or _text(r.get("smiles"))
            entries.append({"id": _text(r["id"]), "name": _text(r.get("name")),
                            "times": f"x{times} butadiene" if times else "",
                            "half_life": f"half-life {hl}" if hl else "", "flags": flags,
                            "depiction": depict(smiles, width=110, height=80) if int(t) == 1 and smiles else ""})
        more = len(rows) - TIER_NAMES_SHOWN
        out.append((int(t), entries, max(more, 0)))
    return out


def try_first(table: pd.DataFrame, model: dict) -> dict:
    bench = model.get("bench", {})
    width = bench.get("tier_width_log10")
    base = ranking_model(model).get("base_dienophile", "the reference dienophile")
    computed = computed_text(model)
    return {"tiers": [{"number": t, "entries": entries, "more": more}
                      for t, entries, more in tier_lines(table, model)],
            "dienophile": model.get("run_dienophile", ""),
            "level": f"{model.get('ranking_level')} ({ranking_model(model).get('level', '')})" if ranking_model(model) else "",
            "accuracy": accuracy_text(model), "time": time_text(model),
            "computed": (computed[:1].upper() + computed[1:] + ".") if computed else "",
            "how": (f"Tiers: walking down the ranking, a new tier starts where a diene lies more than {width:.2f} "
                    "log units (sqrt(2) x the leave-one-out error) below the first diene of its tier; within a "
                    "tier the model cannot tell the dienes apart, so try them in any order." if width else ""),
            "transfer": (" The dienophile is the reference set's own: the rates are calibrated for it."
                         if bench.get("dienophile_in_reference", True) else
                         f" Your dienophile is not in the reference set: the order is computed with it, but every "
                         f"rate is transferred from {base}; add two or three of your own measured pairs to the "
                         "reference file to recalibrate.")}


def level_line(table: pd.DataFrame, model: dict) -> str:
    """Which level ranks how many rows."""
    ranked = table[table["rank"].notna()]
    name = model.get("ranking_level")
    m = ranking_model(model)
    if not m or m.get("level") == "GFN2-xTB":
        return level_text(model)
    n_first = int((ranked["level"] == name).sum())
    kind = (" (free-energy barriers: GFN2-xTB thermal corrections, conformer ensemble)"
            if m.get("barrier_kind") == "free_energy" else " (electronic barriers)")
    others = ranked.loc[ranked["level"] != name, "level"].value_counts()

    def why(lv: str, n: int) -> str:
        corr = model.get("levels", {}).get(lv, {}).get("correction")
        if corr:
            base = model.get("levels", {}).get(corr.get("base"), {}).get("level", "GFN2-xTB")
            source = "GFN2-xTB terms" if base == "GFN2-xTB" else f"the {base} barrier and GFN2-xTB terms"
            return (f"; {n} ranked at {lv}: {name}'s barrier estimated from {source} ({', '.join(corr['terms'])}), "
                    f"fitted on the {corr['n_sites']} sites {name} computed in this run, its error (mean "
                    f"{corr['loo_mae_kJmol']:.1f} kJ/mol) added to their intervals")
        return f"; {n} ranked at {lv} (their {name} value failed or was not computed; see their message)"
    return (f"{name}: {m.get('level')} single points on GFN2-xTB structures{kind} for {n_first} of {len(ranked)} "
            "ranked rows" + "".join(why(lv, n) for lv, n in others.items()))


# ------------------------------------------------------------------ the page

def build(table: pd.DataFrame, sites: pd.DataFrame, model: dict, reference: pd.DataFrame,
          structure_settings: dict, versions: dict, profiles: list[dict], settings) -> str:
    """The whole page as text."""
    from jinja2 import Environment, FunctionLoader, select_autoescape
    env = Environment(loader=FunctionLoader(_asset), autoescape=select_autoescape(default=True, default_for_string=True),
                      trim_blocks=True, lstrip_blocks=True)
    levels = list(model.get("ranking_levels", []))
    ranking = model.get("ranking_level")
    others = [name for name in levels if name != ranking]
    labels = {name: m.get("level", "") for name, m in model.get("levels", {}).items()}
    gfn2 = settings.placing.name
    dph = settings["dienophile"]
    dph_named = f"{name_of(dph)} ({dph})" if name_of(dph) else dph
    reactive = list((model.get("dienophile") or {}).get("reactive_bond") or [])
    counts = sorted(table["status"].value_counts().to_dict().items())
    ranked = table[table["rank"].notna()]
    n_gfn2 = int((ranked["level"] == gfn2).sum()) if len(ranked) and ranking != gfn2 else 0
    map_svg, map_note = plot_map(table)
    ring_ranked = int((table["rank"].notna() & (table["site_kind"] != "acyclic")).sum())
    plots = [{"svg": plot_reference(reference, name, f"Reference set at {name}"), "note": ""}
             for name in levels if "error" not in model.get("levels", {}).get(name, {"error": 1})]
    plots += [{"svg": map_svg, "note": map_note},
              {"svg": plot_profiles(profiles),
               "note": f"Only freely rotating (acyclic) dienes have a torsion profile: a ring-bound diene unit "
                       f"({ring_ranked} ranked here) cannot turn about its C2–C3 bond without breaking the ring, "
                       "so its s-cis geometry is set by the ring."}]
    setting_rows = [(k, v) for k, v in structure_settings.items() if not isinstance(v, dict)]
    for section in ("conformers", "optimisation"):
        setting_rows += [(f"{section}.{k}", v) for k, v in structure_settings.get(section, {}).items()]
    setting_rows += [(f"transition_state.{k}", v) for k, v in settings["transition_state"].items()]
    for lv in settings.ranking_levels:
        setting_rows += [(f"levels.{lv.name}", f"{lv.label()}; " + ", ".join(f"{k} {v}" for k, v in lv.options))]
    setting_rows += [("ranking.levels", ", ".join(levels)), ("ranking.rows", settings.rows)]
    page = env.get_template("page.html.j2").render(
        css=Markup(_asset("page.css")), js=Markup(_asset("page.js")), text=text(),   # noqa: S704 - our own files
        n_rows=len(table), counts=counts, generated=_dt.datetime.now().strftime("%Y-%m-%d %H:%M"),
        try_first=try_first(table, model) | {"dienophile": dph_named},
        conditions={"depiction": depict(dph, reactive, reactive, 160, 110), "dienophile": dph_named,
                    "temperature_K": settings["temperature_K"], "solvent": settings["solvent"],
                    "level": level_line(table, model), "scale": scale_text(model),
                    "interval": interval_label(model.get("interval", settings["model"]["interval"])),
                    "coverage": coverage_text(ranking_model(model))},
        fast_limits={"n": n_gfn2, "ranked": len(ranked)} if n_gfn2 else None,
        reference_caution=reference_caution(reference),
        filters={"statuses": sorted(table["status"].dropna().unique()),
                 "classes": sorted({_text(k) for k in table["site_kind"] if _text(k)})},
        table_label=(f"log10 k relative to 1,3-butadiene ({interval_label(model.get('interval', 0.9))} prediction "
                     "interval). Rows marked extrapolation are not backed by the reference set; rows that were not "
                     "ranked follow the ranked ones with their reason."),
        columns=columns(others), rows=table_rows(table, others),
        comparisons=[c for c in (comparison(table, model, o, labels, gfn2) for o in others) if c],
        plots=plots,
        models=[model_view(name, model.get("levels", {}).get(name, {}), name == ranking) for name in levels],
        reference=reference_view(reference, levels),
        settings_rows=setting_rows, versions=sorted(versions.items()))
    return page


def write(path, page: str) -> None:
    from ..layout import write_text
    write_text(path, page)
