"""results/report.html: one self-contained page a chemist reads.

Everything is inline (SVG depictions from RDKit, SVG plots from matplotlib, one
stylesheet and one small script for sorting and filtering the table); the page
makes no network request. Every string that came from the user (ids, SMILES,
messages, extra columns) is HTML-escaped.
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

from .outputs import (FAST_LEVEL, accuracy_text, hours_text, interval_label, is_true, level_barrier,
                      level_text, scale_text, time_text, times_text)

SAFETY = [
    "Predictions are estimates for prioritising experiments. They are not hazard data.",
    "Both partners matter: read the safety data sheet of the diene and of the dienophile before "
    "handling either. Many dienes are flammable, peroxide-forming or toxic (1,3-butadiene is a "
    "carcinogen; cyclopentadiene dimerises exothermically on standing). Common dienophiles are "
    "hazardous too: maleic anhydride is corrosive and a respiratory sensitiser, acrolein is acutely "
    "toxic and a lachrymator, tetracyanoethylene releases hydrogen cyanide with water or acid.",
    "Diels–Alder cycloadditions can be strongly exothermic. The fastest pairs of this ranking are the "
    "ones most likely to run away when mixed neat or at scale: add slowly, cool, dilute, and have a "
    "thermal hazard assessment done before scale-up.",
    "The safety data sheets, local regulations and your institution's safety practice come first.",
]

GLOSSARY_STATUS = {
    "ok": "computed and ranked; the saddle of the scoring site was located and verified",
    "ts_unverified": "ranked, but no located saddle passed the checks (one imaginary mode forming both "
                     "bonds, downhill to adduct and reactants): the barrier is the fixed-bond model "
                     "structure's energy, and the row counts as an extrapolation",
    "locked_s_trans": "every diene unit is held s-trans by a ring: no concerted [4+2] cycloaddition; not ranked",
    "no_diene": "no conjugated C=C–C=C unit (isolated or cumulated double bonds, enynes, styrenes of a "
                "single benzene ring); not ranked",
    "invalid_smiles": "the SMILES could not be read; RDKit's reason is in the message",
    "empty_smiles": "the smiles cell is empty",
    "unreadable_sdf_record": "an SDF record that RDKit could not read",
    "processing_error": "RDKit failed while standardising the structure; the message says how",
    "metal_complex": "contains a metal or metalloid (other than a lone counter-ion): not treated",
    "unsupported_element": "an element outside the GFN2-xTB setup used here",
    "radical": "open-shell structure; only closed-shell dienes are treated",
    "charged": "a net charge remains after neutralisation",
    "too_large": "more heavy atoms than the config's limits.max_heavy_atoms",
    "too_flexible": "more rotatable bonds than the config's limits.max_rotatable_bonds",
    "embed_failed": "RDKit could not build a 3D structure",
    "scf_failed": "the GFN2-xTB SCF did not converge, even at raised electronic temperature",
    "no_planar_start": "no planar s-cis structure could be started for any diene unit",
    "not_predicted": "computed, but a model descriptor is missing for every site (see sites.csv)",
    "missing": "a result file is absent (the run was interrupted); rerun the same command",
    "corrupt_result": "a result file could not be read; rerun the same command",
}
GLOSSARY_KIND = {
    "acyclic": "the C2–C3 bond is in no ring: the diene rotates and pays an s-cis penalty",
    "ring_s_cis": "all four diene carbons lie in one ring of up to six atoms (cyclopentadiene, "
                  "1,3-cyclohexadiene, furan): locked s-cis, no penalty",
    "ring_other": "the C2–C3 bond is in a ring that does not hold the whole diene (1,2-dimethylene"
                  "cycloalkanes, cyclooctadienes): the 3D search decides how far it can reach s-cis",
    "aromatic": "added to the kind when a diene carbon is aromatic (furans, pyrroles, acenes): the "
                "reaction pays for lost aromaticity",
}
GLOSSARY_COLUMNS = {
    "rank": "1 = fastest predicted among the ranked rows",
    "tier": "groups the model can tell apart: walking down the ranking, a new tier starts where a diene "
            "lies more than sqrt(2) x the leave-one-out error below the first diene of its tier; inside a "
            "tier the order is not meaningful",
    "x butadiene": "predicted rate constant as a multiple of 1,3-butadiene's with the same dienophile, "
                   "both from the same model (1 = as fast as butadiene; 0.01 = a hundred times slower)",
    "in domain": "yes: the diene's descriptors and its kind of diene unit are covered by the reference "
                 "set; extrapolation: the prediction leaves what the reference kinetics back (the reason "
                 "is given). 'Leverage' in a reason measures how unusual the combination of descriptors "
                 "is against the reference dienes; above 3p/n (p descriptors + 1, n reference dienes) the "
                 "diene is unlike any of them in that combination, even if each value alone is in range. "
                 "'dienophile transfer': the run's dienophile is not one the model was fitted with",
    "log10 k": "predicted log10 of the rate constant relative to 1,3-butadiene, with its prediction "
               "interval",
    "level": "the level of theory the row's rank, log10 k and barrier come from: the refined level "
             "(a density functional on the GFN2-xTB structures) for every row it could price, GFN2-xTB "
             "where that failed (the message says why) or where the run asked for GFN2-xTB only",
    "barrier": "transition structure minus the diene's conformers minus the dienophile, kJ/mol, at the "
               "row's level; includes the cost of reaching s-cis. At the refined level by default a free "
               "energy: the density-functional energies plus GFN2-xTB thermal corrections (quasi-RRHO, 1 M, "
               "the run's temperature; the diene as the Boltzmann ensemble of its priced conformers). The "
               "GFN2-xTB barrier (secondary column) is electronic and far too low in value; the regression "
               "sets the scale of each level's barriers",
    "s-cis penalty": "E(planar s-cis) − E(lowest conformer), GFN2-xTB, kJ/mol; 0 for ring-locked s-cis dienes",
    "HOMO / LUMO": "GFN2-xTB orbital energies of the diene unit (eV): model features, not ionisation energies",
    "regio (orbitals)": "frontier-orbital rule: the larger diene terminus coefficient bonds the larger "
                        "dienophile carbon coefficient; atom numbers as drawn",
    "regio (saddle)": "the orientation of the lowest located transition structure, and how much higher "
                      "the other orientation lies (kJ/mol)",
    "endo/exo": "the face of the lowest located transition structure and the energy gap to the other face",
    "reaction energy": "E(cycloadduct) − E(reactants), GFN2-xTB, kJ/mol; close to zero or positive means the "
                       "adduct may revert (furans, acenes)",
    "site": "the diene unit that scores the molecule: its carbons C1–C2–C3–C4, numbered in the drawing",
    "contact dispersion": "London dispersion between the partners at the transition structure (D3(BJ), "
                          "kJ/mol): large for flat π systems and bulky alkyl groups, which GFN2-xTB rewards",
}

STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:24px;color:#1d2430;max-width:1500px}
h1{font-size:1.5em;margin-bottom:0}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #d5dae3}
.sub{color:#5b6578;margin-top:4px}
.conditions{display:flex;gap:24px;align-items:center;background:#f1f4f8;padding:10px 14px;margin:12px 0}
.conditions div{font-size:0.95em}
.caution{background:#fff6e5;border-left:4px solid #d18a00;padding:8px 14px;margin:14px 0}
.refnote{background:#eef4fb;border-left:4px solid #2b6cb0;padding:8px 14px;margin:14px 0}
table{border-collapse:collapse;font-size:0.86em}th,td{padding:4px 8px;border-bottom:1px solid #e3e7ee;vertical-align:middle;text-align:left}
th{background:#f1f4f8;position:sticky;top:0}
th.sortable{cursor:pointer}th.sortable:after{content:' \\2195';color:#9aa3b2}
td.num{text-align:right;font-variant-numeric:tabular-nums}
tr.notok td{background:#fbf3f3}tr.extrap td{background:#fff9e6}
.status-ok{color:#17663a;font-weight:600}.status-bad{color:#a12a2a;font-weight:600}
.badge{display:inline-block;padding:1px 6px;border-radius:8px;font-size:0.85em;font-weight:600}
.badge.in{background:#e3f4ea;color:#17663a}.badge.out{background:#fde8c8;color:#8a4b00}
.badge.transfer{background:#e8eefc;color:#23408e}
.tryfirst{border:2px solid #17663a;border-radius:6px;padding:8px 14px;margin:10px 0;background:#f6fbf8}
.tryfirst ol{margin:4px 0 4px 18px;padding:0}.limits{border-left:4px solid #8a4b00;padding:4px 12px;margin:8px 0}
.grid{display:flex;flex-wrap:wrap;gap:18px}.card{border:1px solid #e3e7ee;padding:8px}
.kv td:first-child{color:#5b6578}
.small{font-size:0.8em;color:#5b6578}
.controls{display:flex;flex-wrap:wrap;gap:14px;align-items:center;margin:8px 0;font-size:0.9em}
body.compact .depict,body.compact .secondary{display:none}
dl.gloss dt{font-weight:600;margin-top:6px}dl.gloss dd{margin-left:18px;color:#323b4c}
"""

SCRIPT = """
(function(){
  var table=document.getElementById('ranking');
  var body=table.tBodies[0];
  function apply(){
    var st=document.getElementById('f-status').value, cl=document.getElementById('f-class').value,
        dm=document.getElementById('f-domain').value, q=document.getElementById('f-text').value.toLowerCase();
    var shown=0;
    Array.prototype.forEach.call(body.rows,function(r){
      var ok=(!st||r.dataset.status===st)&&(!cl||r.dataset.class===cl)&&(!dm||r.dataset.domain===dm)
             &&(!q||r.textContent.toLowerCase().indexOf(q)>=0);
      r.style.display=ok?'':'none'; if(ok){shown++;}
    });
    document.getElementById('f-count').textContent=shown+' of '+body.rows.length+' rows shown';
  }
  ['f-status','f-class','f-domain'].forEach(function(id){document.getElementById(id).addEventListener('change',apply);});
  document.getElementById('f-text').addEventListener('input',apply);
  document.getElementById('f-compact').addEventListener('change',function(e){
    document.body.classList.toggle('compact',e.target.checked);});
  Array.prototype.forEach.call(table.tHead.rows[0].cells,function(th,k){
    if(!th.classList.contains('sortable')){return;}
    th.addEventListener('click',function(){
      var asc=th.dataset.order!=='asc'; th.dataset.order=asc?'asc':'desc';
      var rows=Array.prototype.slice.call(body.rows);
      rows.sort(function(a,b){
        var x=a.cells[k].dataset.sort||a.cells[k].textContent, y=b.cells[k].dataset.sort||b.cells[k].textContent;
        var fx=parseFloat(x), fy=parseFloat(y);
        var nx=isNaN(fx), ny=isNaN(fy);
        if(nx&&ny){return asc?x.localeCompare(y):y.localeCompare(x);}
        if(nx){return 1;} if(ny){return -1;}
        return asc?fx-fy:fy-fx;
      });
      rows.forEach(function(r){body.appendChild(r);});
    });
  });
  apply();
})();
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


def _text(value) -> str:
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)


def depict(smiles: str, highlight=(), numbered=(), width: int = 200, height: int = 140) -> str:
    """Inline SVG of a structure: `highlight` atoms coloured, `numbered` atoms labelled
    with their 1-based atom numbers (the numbers site labels and hints refer to)."""
    mol = Chem.MolFromSmiles(smiles) if smiles else None
    if mol is None:
        return ""
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


def plot_reference(ref: pd.DataFrame, suffix: str = "", title: str = "Reference set") -> str:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(4.2, 4.0))
    used_col, cv_col, fit_col = f"used{suffix}", f"log10_k_cv{suffix}", f"log10_k_fit{suffix}"
    used = ref[ref.get(used_col, pd.Series(False, index=ref.index)).map(is_true)] if used_col in ref else ref[:0]
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


COLOUR_CLIP = (5, 95)  # percentiles that bound the colour scale of the map


def plot_map(table: pd.DataFrame) -> tuple[str, str]:
    """Barrier against s-cis penalty, coloured by predicted log10 k (colour scale
    clipped to the 5th-95th percentile so that one outlier does not wash it out).
    Returns (svg, a sentence on the clipping)."""
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
                f"percentile); {n_out} point(s) beyond it take the end colour.")
    ax.set_xlabel("s-cis penalty (kJ/mol)")
    ax.set_ylabel("barrier (kJ/mol, GFN2-xTB)")
    ax.set_title("Barrier against s-cis penalty")
    return _figure_svg(fig), note


PROFILE_CAP_KJMOL = 60.0  # torsion profiles are drawn up to this energy


def plot_profiles(profiles: list[tuple[str, np.ndarray, np.ndarray]]) -> str:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(5.6, 4.0))
    top = 10.0
    for label, a, e in profiles:
        ax.plot(a, e, marker="o", ms=3, label=label)
        top = max(top, float(np.max(e)))
    ax.set_xlabel("diene dihedral C1-C2-C3-C4 (deg; 0 = s-cis)")
    ax.set_ylabel("relative energy (kJ/mol)")
    ax.set_xlim(0, 180)
    ax.set_ylim(0, min(top * 1.05, PROFILE_CAP_KJMOL))
    ax.set_title("Relaxed torsion profiles (freely rotating dienes)")
    if profiles:
        ax.legend(frameon=False, fontsize=7)
    return _figure_svg(fig)


def _domain_cell(row) -> tuple[str, str]:
    if row["status"] not in ("ok", "ts_unverified") or pd.isna(row["rank"]):
        return "", ""
    if is_true(row["in_domain"]) and not is_true(row.get("dienophile_in_reference", True)):
        return (f"<span class='badge transfer' title='{esc(row.get('domain_note', ''))}'>dienophile "
                "transfer</span>", "in")
    if is_true(row["in_domain"]):
        return "<span class='badge in'>yes</span>", "in"
    return (f"<span class='badge out' title='{esc(row.get('domain_note', ''))}'>extrapolation</span>"
            f"<div class='small'>{esc(row.get('domain_note', ''))}</div>", "out")


def _kv(rows) -> str:
    return "<table class='kv'>" + "".join(
        f"<tr><td>{esc(k)}</td><td>{v if isinstance(v, _Html) else esc(v)}</td></tr>" for k, v in rows) + "</table>"


class _Html(str):
    """A string that is already HTML (built from escaped parts)."""


def _site_atoms(label) -> list[int]:
    try:
        return [int(x) - 1 for x in str(label).split("-")]
    except ValueError:
        return []


COLUMNS = [  # (header, sortable, secondary)
    ("rank", True, False), ("tier", True, False), ("structure", False, False), ("id", True, False),
    ("status", True, False), ("in domain", True, False), ("log10 k (interval)", True, False),
    ("x butadiene", True, False), ("level", True, False),
    ("barrier kJ/mol", True, False), ("barrier GFN2-xTB kJ/mol", True, True),
    ("s-cis penalty kJ/mol (GFN2-xTB)", True, False), ("HOMO eV", True, True), ("LUMO eV", True, True),
    ("regio (orbitals)", False, True), ("regio (saddle)", False, True), ("endo/exo", False, True),
    ("reaction energy kJ/mol", True, True), ("site", True, False), ("message", False, False)]


def _column_help(header: str) -> str:
    """The glossary entry a column header points to ('' when none)."""
    key = max((k for k in GLOSSARY_COLUMNS if header.startswith(k.split(" /")[0])), key=len, default="")
    return GLOSSARY_COLUMNS.get(key, "")


def _table(table: pd.DataFrame, label: str) -> str:
    head = "<thead><tr>" + "".join(
        f"<th class='{'sortable' if s else ''}{' secondary' if sec else ''}' title='{esc(_column_help(c))}'>"
        f"{esc(c)}</th>" for c, s, sec in COLUMNS) + "</tr></thead>"
    order = table.assign(_r=table["rank"].astype(float).fillna(1e9)).sort_values(["_r", "row"])
    body = []
    for _, r in order.iterrows():
        ranked = not pd.isna(r["rank"])
        ok = r["status"] == "ok"
        smiles = r["isomer_smiles"] if isinstance(r.get("isomer_smiles"), str) and r["isomer_smiles"] else ""
        atoms = _site_atoms(r.get("best_site")) if ranked else []
        dom_html, dom_key = _domain_cell(r)
        pred = (f"{_num(r['log10_k_pred'])} ({_num(r['log10_k_low'])} – {_num(r['log10_k_high'])})"
                if ranked else "")
        regio_ts = _text(r.get("regio_ts"))
        if regio_ts and regio_ts != "symmetric" and _num(r.get("orientation_gap_kJmol")):
            regio_ts += f"; other orientation +{_num(r['orientation_gap_kJmol'], '{:.1f}')} kJ/mol"
        face = _text(r.get("face_preference"))
        if face and _num(r.get("face_gap_kJmol")):
            gap = float(r["face_gap_kJmol"])
            face = "endo ≈ exo (within 1 kJ/mol)" if gap < 1.0 else f"{face} by {gap:.1f} kJ/mol"
        kind = _text(r.get("site_kind"))
        klass = kind + (" aromatic" if "aromatic" in _text(r.get("domain_note")) else "")
        sort_rank = "" if not ranked else str(int(r["rank"]))
        tier = "" if pd.isna(r.get("tier", np.nan)) else str(int(r["tier"]))
        cells = [
            f"<td class='num' data-sort='{sort_rank or 1e9}'>{sort_rank}</td>",
            f"<td class='num' data-sort='{tier or 1e9}'>{tier}</td>",
            f"<td class='depict'>{depict(smiles, atoms, atoms) if smiles else ''}</td>",
            f"<td>{esc(r['id'])}<div class='small'>{esc(r['smiles'])}</div></td>",
            f"<td class='{'status-ok' if ok else 'status-bad'}' title='{esc(GLOSSARY_STATUS.get(r['status'], ''))}'>"
            f"{esc(r['status'])}</td>",
            f"<td data-sort='{dom_key}'>{dom_html}</td>",
            f"<td class='num' data-sort='{_num(r['log10_k_pred'], '{:.4f}')}'>{pred}</td>",
            f"<td class='num' data-sort='{_num(r.get('times_faster_than_butadiene'), '{:.6g}')}'>"
            f"{times_text(r.get('times_faster_than_butadiene')) if ranked else ''}</td>",
            f"<td>{esc(r.get('level')) if ranked else ''}</td>",
            f"<td class='num'>{_num(level_barrier(r), '{:.1f}') if ranked else ''}</td>",
            f"<td class='num secondary'>{_num(r['barrier_kJmol'], '{:.1f}')}</td>",
            f"<td class='num'>{_num(r['scis_penalty_kJmol'], '{:.1f}')}</td>",
            f"<td class='num secondary'>{_num(r['homo_eV'])}</td>",
            f"<td class='num secondary'>{_num(r['lumo_eV'])}</td>",
            f"<td class='secondary'>{esc(r['regio_hint'])}</td>",
            f"<td class='secondary'>{esc(regio_ts)}</td>",
            f"<td class='secondary'>{esc(face)}</td>",
            f"<td class='num secondary'>{_num(r.get('reaction_energy_kJmol'), '{:.0f}')}</td>",
            f"<td>{esc(kind)}<div class='small'>{esc(r['best_site'])}</div></td>",
            f"<td>{esc(r['message'])}</td>",
        ]
        cls = "ok" if ok else "notok"
        if dom_key == "out":
            cls += " extrap"
        body.append(f"<tr class='{cls}' data-row='{int(r['row'])}' data-status='{esc(r['status'])}' "
                    f"data-class='{esc(klass)}' data-domain='{dom_key}'>" + "".join(cells) + "</tr>")
    statuses = sorted(table["status"].dropna().unique())
    classes = sorted({_text(k) for k in table["site_kind"] if _text(k)})
    controls = (
        "<div class='controls'>"
        "<label>status <select id='f-status'><option value=''>all</option>"
        + "".join(f"<option>{esc(s)}</option>" for s in statuses) + "</select></label>"
        "<label>diene class <select id='f-class'><option value=''>all</option>"
        + "".join(f"<option>{esc(c)}</option>" for c in classes) + "</select></label>"
        "<label>domain <select id='f-domain'><option value=''>all</option><option value='in'>in domain</option>"
        "<option value='out'>extrapolation</option></select></label>"
        "<label>find <input id='f-text' type='search' placeholder='id, SMILES, message'></label>"
        "<label><input id='f-compact' type='checkbox'> compact view (no drawings, fewer columns)</label>"
        "<span id='f-count' class='small'></span></div>")
    return (f"{controls}<p class='small'>{esc(label)} Click a column header to sort.</p>"
            f"<table id='ranking'>{head}<tbody>{''.join(body)}</tbody></table>")


LEVEL_ROWS_SHOWN = 10      # rows of the level comparison: the largest rank changes


def _alkyl_carbons(smiles: str, site_label) -> int:
    """sp3 carbons bonded to the diene unit's four carbons."""
    mol = Chem.MolFromSmiles(smiles) if smiles else None
    atoms = _site_atoms(site_label)
    if mol is None or not atoms or max(atoms) >= mol.GetNumAtoms():
        return 0
    return len({n.GetIdx() for i in atoms for n in mol.GetAtomWithIdx(i).GetNeighbors()
                if n.GetAtomicNum() == 6 and n.GetHybridization() == Chem.HybridizationType.SP3
                and n.GetIdx() not in atoms})


def level_reason(row, median_dispersion: float) -> str:
    """The likely reason the two levels place a row differently, from what sets GFN2-xTB apart:
    aromaticity it undercharges, dispersion and alkyl groups it over-rewards."""
    up = int(row["rank_xtb"]) > int(row["rank"])        # the refined level ranks it higher
    disp = float(row.get("contact_dispersion_kJmol", float("nan")))
    n_alkyl = _alkyl_carbons(_text(row.get("isomer_smiles")), row.get("best_site"))
    why = []
    if is_true(row.get("aromatic")):
        why.append("aromatic diene unit: the refined level charges the lost aromaticity that GFN2-xTB "
                   "undercounts" if not up else "aromatic diene unit")
    if not math.isnan(disp) and abs(disp - median_dispersion) >= 5.0:
        more = disp < median_dispersion
        if more != up:
            why.append(f"dispersion: {'more' if more else 'less'} contact dispersion than the median row "
                       f"({disp:.0f} against {median_dispersion:.0f} kJ/mol, D3), which GFN2-xTB "
                       f"{'rewards' if more else 'misses'} and the refined level does not count")
    if n_alkyl >= 2 and not up:
        why.append(f"alkyl groups: {n_alkyl} sp3 carbons on the diene unit, which GFN2-xTB over-rewards")
    if not why:
        why.append("electronic: the two levels weigh the substituents' donor/acceptor effect differently")
    return "; ".join(why)


def _level_comparison(table: pd.DataFrame) -> str:
    """Both ranks side by side for the rows where the two levels disagree most."""
    both = table[table["rank"].notna() & table["rank_xtb"].notna() & (table["level"] != FAST_LEVEL)]
    if not len(both):
        return ""
    both = both.assign(_shift=(both["rank_xtb"].astype(int) - both["rank"].astype(int)))
    moved = both[both["_shift"] != 0]
    picked = moved.reindex(moved["_shift"].abs().sort_values(ascending=False).index).head(LEVEL_ROWS_SHOWN)
    median_disp = float(both["contact_dispersion_kJmol"].astype(float).median())
    level = _text(both["level"].iloc[0])
    rows = "".join(
        f"<tr><td>{esc(r['id'])}<div class='small'>{esc(r['smiles'])}</div></td>"
        f"<td class='num'>{int(r['rank'])}</td><td class='num'>{int(r['rank_xtb'])}</td>"
        f"<td class='num'>{'+' if r['_shift'] > 0 else ''}{int(r['_shift'])}</td>"
        f"<td class='num'>{_num(r['barrier_refined_kJmol'], '{:.1f}')}</td>"
        f"<td class='num'>{_num(r['barrier_kJmol'], '{:.1f}')}</td>"
        f"<td class='num'>{_num(r['contact_dispersion_kJmol'], '{:.0f}')}</td>"
        f"<td>{esc(level_reason(r, median_disp))}</td></tr>" for _, r in picked.iterrows())
    rho = both[["rank", "rank_xtb"]].astype(float).corr(method="spearman").iloc[0, 1]
    if not len(picked):
        return (f"<h2>Where the two levels disagree</h2><p>Nowhere: GFN2-xTB alone orders the {len(both)} rows "
                f"as the {esc(level)} barriers do.</p>")
    return (f"<h2>Where the two levels disagree</h2><p>The ranking comes from {esc(level)} single points on the "
            f"GFN2-xTB structures. GFN2-xTB alone would order the same {len(both)} rows differently "
            f"(Spearman {rho:.2f} between the two rankings); these are the {len(picked)} rows it moves most, "
            "with the likely reason. Energies in kJ/mol; contact dispersion is the D3 attraction between the "
            "partners at the transition structure (median here "
            f"{median_disp:.0f}).</p><table><tr><th>id</th><th>rank ({esc(level)})</th><th>rank GFN2-xTB</th>"
            "<th>places gained</th><th>barrier refined</th><th>barrier GFN2-xTB</th><th>contact dispersion</th>"
            f"<th>likely reason</th></tr>{rows}</table>")


def _coefficient_rows(model: dict) -> list:
    coef, se = model.get("coefficients", {}), model.get("coefficient_se", {})
    rows = []
    for k, v in coef.items():
        if k == model.get("fixed_feature"):
            rows.append((k, f"{v:+.4f} (fixed: transition-state theory, -1/(RT ln 10))"))
        else:
            rows.append((k, f"{v:+.4f} ± {se.get(k) or 0:.4f}"))
    rows.append(("intercept", f"{model.get('intercept', float('nan')):+.3f}"))
    return rows


def _model_section(model: dict, reference: pd.DataFrame) -> str:
    label = interval_label(model.get("interval", 0.9))
    coefs = model.get("coefficients", {})
    b = coefs.get("barrier_refined_kJmol", coefs.get("barrier_kJmol"))
    tst = model.get("physical_slope_per_kJmol")
    rows = [
        ("features", ", ".join(model.get("features", []))),
        ("variant chosen (lowest LOO RMSE)", model.get("variant")),
        ("reference dienes used", model.get("n_reference")),
        ("LOO RMSE (log10 units)", _num(model.get("cv_rmse_log10k"))),
        ("LOO Spearman rho", _num(model.get("cv_spearman"))),
        ("LOO pairwise order accuracy", _num(model.get("cv_pairwise_accuracy"))),
    ]
    if model.get("nested_cv"):
        n = model["nested_cv"]
        rows.append(("LOO of the whole procedure (feature choice inside each fold)",
                     f"RMSE {_num(n['cv_rmse_log10k'])}, Spearman {_num(n['cv_spearman'])}"))
    if b is not None and tst:
        rows.append(("barrier slope against transition-state theory",
                     f"{b:+.4f} per kJ/mol = {b / tst:.2f} × {tst:+.4f} (-1/(RT ln 10))"))
    rows += _coefficient_rows(model)
    rows.append(("prediction interval", f"{label} (config model.interval)"))
    if model.get("note"):
        rows.append(("note", model["note"]))
    comp = "".join(f"<tr><td>{esc(v)}</td><td class='num'>{_num(m['cv_rmse_log10k'])}</td>"
                   f"<td class='num'>{_num(m['cv_spearman'])}</td>"
                   f"<td class='num'>{_num(m['cv_pairwise_accuracy'])}</td></tr>"
                   for v, m in model.get("comparison", {}).items())
    tried = "".join(f"<tr><td>{esc(' + '.join(t['features']))}</td><td class='num'>{_num(t['cv_rmse_log10k'])}</td>"
                    f"<td>{'added' if t.get('added') else ''}</td></tr>" for t in model.get("selection", []))
    prov = ""
    if "provenance" in reference:
        prov = "".join(f"<tr><td>{esc(r['id'])}</td><td>{esc(r['smiles'])}</td><td class='num'>{_num(r['log10_k'])}</td>"
                       f"<td>{esc(r.get('provenance', ''))}</td><td>{'yes' if is_true(r.get('used')) else esc(r.get('reason', ''))}</td></tr>"
                       for _, r in reference.iterrows())
    fast = model.get("fast") or {}
    extra = ""
    if fast:
        extra = ("<h3>GFN2-xTB model (ranks the rows the refined level could not price)</h3>" + _kv([
            ("features", ", ".join(fast.get("features", []))),
            ("variant", fast.get("variant")), ("reference dienes used", fast.get("n_reference")),
            ("LOO RMSE / Spearman / pairwise", f"{_num(fast.get('cv_rmse_log10k'))} / "
             f"{_num(fast.get('cv_spearman'))} / {_num(fast.get('cv_pairwise_accuracy'))}")]
            + _coefficient_rows(fast)))
    if model.get("refined_error"):
        extra += f"<p>Refined model not fitted, every row is ranked at GFN2-xTB: {esc(model['refined_error'])}</p>"
    return (f"<h2>Model ({esc(model.get('level', FAST_LEVEL))} barriers)</h2><div class='grid'><div>" + _kv(rows)
            + "</div><div>"
            "<table><tr><th>variant</th><th>LOO RMSE</th><th>Spearman</th><th>pairwise</th></tr>" + comp
            + "</table><p class='small'>Descriptors tried (leave-one-out RMSE):</p><table>" + tried
            + "</table></div></div>" + extra
            + "<h3>Reference kinetics</h3><table><tr><th>id</th><th>SMILES</th><th>log10 k</th>"
              "<th>provenance</th><th>used</th></tr>" + prov + "</table>")


def _glossary() -> str:
    def dl(d):
        return "<dl class='gloss'>" + "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in d.items()) + "</dl>"
    return ("<h2>Glossary</h2><div class='grid'><div><h3>Status</h3>" + dl(GLOSSARY_STATUS)
            + "</div><div><h3>Diene class</h3>" + dl(GLOSSARY_KIND) + "<h3>Columns</h3>" + dl(GLOSSARY_COLUMNS)
            + "</div></div>")


def reference_caution(reference: pd.DataFrame) -> str:
    """What the reference kinetics are and how sure they are, from their provenance column."""
    prov = reference.get("provenance", pd.Series(dtype=str)).fillna("").astype(str)
    n = len(reference)
    recalled = int(prov.str.contains("memory|recalled", case=False).sum())
    text = (f"The {n} reference rate constants set the scale of every prediction. ")
    if recalled:
        text += (f"{recalled} of them were entered from memory, not read from the source (their provenance "
                 "column says how sure each is): treat the absolute numbers as rough and the order as the "
                 "message. Replace them with your own kinetics (--config reference=PATH, same columns) "
                 "when you have them.")
    else:
        text += "Their provenance column names the source of each."
    return text


TIER_NAMES_SHOWN = 12      # dienes named per tier in the try-first box


def tier_lines(table: pd.DataFrame, model: dict, tiers: int = 2) -> list[tuple[int, list[str]]]:
    """[(tier, ['id (x butadiene)', ...]), ...] for the first `tiers` tiers."""
    out = []
    if "tier" not in table:
        return out
    ranked = table[table["rank"].notna() & table["tier"].notna()].sort_values("rank")
    for t in sorted(ranked["tier"].unique())[:tiers]:
        rows = ranked[ranked["tier"] == t]
        names = []
        for _, r in rows.head(TIER_NAMES_SHOWN).iterrows():
            times = times_text(r.get("times_faster_than_butadiene"))
            flag = "" if is_true(r["in_domain"]) else ", extrapolation"
            star = "" if str(r.get("level")) == model.get("ranking_level", FAST_LEVEL) else ", GFN2-xTB only"
            name = f" {r['name']}" if isinstance(r.get("name"), str) and r["name"] else ""
            hl = hours_text(r.get("half_life_h"))
            names.append(f"{r['id']}{name} ({'x' + times + ' butadiene' if times else 'no butadiene yardstick'}"
                         f"{', half-life ' + hl if hl else ''}{flag}{star})")
        if len(rows) > TIER_NAMES_SHOWN:
            names.append(f"and {len(rows) - TIER_NAMES_SHOWN} more")
        out.append((int(t), names))
    return out


def _try_first(table: pd.DataFrame, model: dict) -> str:
    bench = model.get("bench", {})
    lines = tier_lines(table, model)
    if not lines:
        return ""
    width = bench.get("tier_width_log10")
    items = "".join(f"<li><b>{'Try first' if t == 1 else f'Tier {t}'}</b>: {esc('; '.join(names))}</li>"
                    for t, names in lines)
    how = (f"Tiers: walking down the ranking, a new tier starts where a diene lies more than {width:.2f} log "
           "units (sqrt(2) x the leave-one-out error) below the first diene of its tier; within a tier the "
           "model cannot tell the dienes apart, so try them in any order." if width else "")
    transfer = (" The dienophile is the reference set's own: the rates are calibrated for it."
                if bench.get("dienophile_in_reference", True) else
                f" Your dienophile is not in the reference set: the order is computed with it, but every "
                f"rate is transferred from {model.get('base_dienophile', 'the reference dienophile')}; "
                "add two or three of your own measured pairs to the reference file to recalibrate.")
    return (f"<div class='tryfirst'><b>Which dienes first</b> (with {esc(model.get('run_dienophile', ''))}, "
            f"ranked at {esc(model.get('ranking_level', FAST_LEVEL))})<ol>{items}</ol>"
            f"<div class='small'>{esc(accuracy_text(model))} {esc(time_text(model))} {esc(how)}{esc(transfer)} "
            "<a href='#scope'>What this ranking covers and what it does not.</a></div></div>")


SCOPE_TREATED = ("all-carbon conjugated dienes (open-chain, in rings, exocyclic, in aromatic rings such as "
                 "furans, thiophenes, pyrroles and acenes) with one all-carbon C=C or C#C dienophile: one "
                 "intermolecular [4+2] step, thermal and uncatalysed, ranked by its free-energy barrier")
SCOPE_NOT = [
    "hetero-dienes (1-aza- and 1-oxadienes, tetrazines): such a row becomes no_diene",
    "hetero-dienophiles (C=O, N=N, N=O): refused before the run",
    "Lewis-acid or organocatalysis, intramolecular reactions",
    "what the flask does alongside: cyclopentadiene dimerising on standing, polymerisation, "
    "retro-Diels-Alder at the reaction temperature, hydrolysis of amino or silyloxy dienes",
    "a lot given as a mixture of E/Z isomers is scored as its fastest isomer (the message says so): "
    "a lot that is mostly the slow isomer reacts more slowly than its rank",
]


def _scope() -> str:
    return ("<h2 id='scope'>Scope</h2><p><b>Treated:</b> " + esc(SCOPE_TREATED) + ".</p><p><b>Not treated:</b></p>"
            "<ul>" + "".join(f"<li>{esc(x)}</li>" for x in SCOPE_NOT) + "</ul>")


FAST_LEVEL_LIMITS = [
    "GFN2-xTB barriers are far too low in size (66 kJ/mol below measured gas-phase activation enthalpies "
    "on average; docs/validation.md): only their order within a family is used.",
    "It over-rewards alkyl groups and large flat dienes (too much dispersion): on the demo it put "
    "cyclopentadiene 25th of 46, behind 2,3-dimethylbutadiene and two anthracenes.",
    "It places furan's HOMO below butadiene's, against the measured ionisation energies.",
]


def _fast_level_limits(table: pd.DataFrame) -> str:
    ranked = table[table["rank"].notna()]
    n_fast = int((ranked["level"] == FAST_LEVEL).sum()) if len(ranked) else 0
    if not n_fast:
        return ""
    return (f"<div class='limits'><b>{n_fast} of {len(ranked)} ranked rows rest on GFN2-xTB alone.</b> "
            "What that level cannot do:<ul>" + "".join(f"<li>{esc(x)}</li>" for x in FAST_LEVEL_LIMITS)
            + "</ul></div>")


def _level_line(table: pd.DataFrame, model: dict) -> str:
    """Which level ranks how many rows."""
    ranked = table[table["rank"].notna()]
    level = model.get("ranking_level", FAST_LEVEL)
    if level == FAST_LEVEL:
        return level_text(model)
    n_fast = int((ranked["level"] == FAST_LEVEL).sum())
    kind = (" (free-energy barriers: GFN2-xTB thermal corrections, conformer ensemble)"
            if model.get("barrier_kind") == "free_energy" else " (electronic barriers)")
    return (f"{level} single points on GFN2-xTB structures{kind} for {len(ranked) - n_fast} of {len(ranked)} "
            f"ranked rows" + (f"; {n_fast} ranked at GFN2-xTB (their refinement failed; see their message)"
                              if n_fast else ""))


def build(table: pd.DataFrame, sites: pd.DataFrame, model: dict, reference: pd.DataFrame,
          settings: dict, versions: dict, profiles, config: dict) -> str:
    counts = table["status"].value_counts().to_dict()
    dph = config["dienophile"]
    dph_mol = Chem.MolFromSmiles(dph)
    reactive = list((model.get("dienophile") or {}).get("reactive_bond") or []) if dph_mol is not None else []
    label = interval_label(model.get("interval", config["model"]["interval"]))
    map_svg, map_note = plot_map(table)
    ring_ranked = int((table["rank"].notna() & (table["site_kind"] != "acyclic")).sum())
    setting_rows = [(k, v) for k, v in settings.items() if not isinstance(v, dict)]
    for section in ("conformers", "optimisation"):
        setting_rows += [(f"{section}.{k}", v) for k, v in settings.get(section, {}).items()]
    setting_rows += [(f"transition_state.{k}", v) for k, v in config["transition_state"].items()]
    setting_rows += [(f"refine.{k}", v) for k, v in config["refine"].items()]
    conditions = (
        "<div class='conditions'><div>" + depict(dph, reactive, reactive, 160, 110) + "</div><div>"
        f"<b>Dienophile</b> {esc(dph)}<br><b>Temperature</b> {esc(config['temperature_K'])} K · "
        f"<b>Solvent (GFN2-xTB)</b> {esc(config['solvent'])}<br>"
        f"<b>Level</b> {esc(_level_line(table, model))}<br>"
        f"<b>Scale</b> {esc(scale_text(model))}<br>"
        f"<b>Intervals</b> {esc(label)} prediction intervals</div></div>")
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        "<meta http-equiv='Content-Security-Policy' content=\"default-src 'none'; style-src 'unsafe-inline'; "
        "script-src 'unsafe-inline'; img-src data:\">",
        f"<title>Diene reactivity ranking</title><style>{STYLE}</style></head><body>",
        "<h1>Diene reactivity ranking</h1>",
        f"<p class='sub'>{esc(len(table))} input rows · "
        + " · ".join(f"{esc(n)} {esc(s)}" for s, n in sorted(counts.items()))
        + f" · generated {esc(_dt.datetime.now().strftime('%Y-%m-%d %H:%M'))}</p>",
        _try_first(table, model),
        conditions,
        _fast_level_limits(table),
        "<div class='caution'><b>Cautions</b><ul>" + "".join(f"<li>{esc(c)}</li>" for c in SAFETY) + "</ul></div>",
        f"<div class='refnote'><b>Reference kinetics.</b> {esc(reference_caution(reference))}</div>",
        "<h2>Ranking</h2>",
        _table(table, f"log10 k relative to 1,3-butadiene ({label} prediction interval). Rows marked "
                      "extrapolation are not backed by the reference set; rows that were not ranked follow "
                      "the ranked ones with their reason."),
        _level_comparison(table),
        "<h2>Plots</h2><div class='grid'>",
        f"<div class='card'>{plot_reference(reference)}</div>",
    ]
    if "log10_k_cv_refined" in reference:
        parts.append(f"<div class='card'>{plot_reference(reference, '_refined', 'Reference set, refined')}</div>")
    parts += [
        f"<div class='card'>{map_svg}<p class='small'>{esc(map_note)}</p></div>",
        f"<div class='card'>{plot_profiles(profiles)}<p class='small'>Only freely rotating (acyclic) "
        f"dienes have a torsion profile: a ring-bound diene unit ({ring_ranked} ranked here) cannot turn "
        "about its C2–C3 bond without breaking the ring, so its s-cis geometry is set by the ring.</p></div></div>",
        _model_section(model, reference),
        _scope(),
        _glossary(),
        "<h2>Run settings and software</h2><div class='grid'><div>", _kv(setting_rows), "</div><div>",
        _kv(sorted(versions.items())), "</div></div>",
        f"<script>{SCRIPT}</script>",
        "</body></html>",
    ]
    return "\n".join(parts)


def write(path, text: str) -> None:
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
