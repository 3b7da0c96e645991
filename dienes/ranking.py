"""From per-structure results to the ranked table: features per site, the
reactivity model on the reference set, predictions, best site and isomer,
rank. Pure data in, data out; files are written by :mod:`dienes.outputs`.

Every site's features come from its per-structure result (s-cis penalty,
frontier orbitals) and from its transition-structure result with the
dienophile of its row: the run's dienophile for the library, each reference
row's own dienophile for the reference set.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import model as mdl
from .orbitals import regio_hint

TS_COLUMNS = ("barrier_kJmol", "intrinsic_barrier_kJmol", "distortion_kJmol",
              "dienophile_distortion_kJmol", "interaction_kJmol", "reaction_energy_kJmol",
              "model_barrier_kJmol", "ts_imag_cm1", "face_gap_kJmol", "orientation_gap_kJmol")
RANKED_STATUSES = ("ok", "ts_unverified")
REFINED_COLUMNS = ("barrier_refined_kJmol", "electronic_barrier_refined_kJmol", "contact_dispersion_kJmol")
# the refined barrier the model uses, by the config's refine.barrier
BARRIER_KINDS = {"free_energy": "free_energy_barrier_kJmol", "electronic": "electronic_barrier_kJmol"}
FAST_LEVEL = "GFN2-xTB"
# the chosen level's prediction columns, each from its per-level column (see level_column)
PREDICTION_COLUMNS = ("log10_k_pred", "log10_k_low", "log10_k_high", "leverage", "in_domain", "domain_note")


def level_column(name: str, tag: str) -> str:
    """Per-level name of a prediction column: log10_k_pred -> log10_k_<tag>,
    log10_k_low -> log10_k_<tag>_low, in_domain -> in_domain_<tag>."""
    if name.startswith("log10_k"):
        return "log10_k_" + tag + name[len("log10_k"):].replace("_pred", "")
    return f"{name}_{tag}"


@dataclass
class Computed:
    """Everything computed for a run, by file stem: structures by key, transition
    structures by '<key>__<transition hash>', dienophiles by their hash."""

    structures: dict
    transitions: dict = field(default_factory=dict)
    dienophiles: dict = field(default_factory=dict)
    refined: dict = field(default_factory=dict)
    barrier: str = "free_energy"        # which refined barrier the model uses (refine.barrier)

    def transition(self, key: str, thash: str) -> dict:
        return self.transitions.get(f"{key}__{thash}", {"status": "missing", "sites": {}})


def canonical(smiles: str) -> str:
    from rdkit import Chem
    m = Chem.MolFromSmiles(smiles)
    return Chem.MolToSmiles(m) if m is not None else smiles


def _pairs_label(pairs, n_diene_atoms: int) -> str:
    (c1, a), (c4, b) = pairs
    return (f"diene C{c1 + 1} to dienophile C{a - n_diene_atoms + 1}, "
            f"C{c4 + 1} to C{b - n_diene_atoms + 1}")


def _termini_equivalent(smiles: str, atoms) -> bool:
    from rdkit import Chem
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        return False
    ranks = list(Chem.CanonicalRankAtoms(Chem.AddHs(mol), breakTies=False))
    return ranks[atoms[0]] == ranks[atoms[3]]


def site_features(site: dict, dienophile: dict, ts_site: dict | None, smiles: str = "") -> dict:
    """Model features and annotations of one computed site (units in the names)."""
    normal = dienophile["lumo_eV"] - site["homo_eV"]
    inverse = site["lumo_eV"] - dienophile["homo_eV"]
    rf = max(site["reactive_fraction"], 1e-9)
    out = {"scis_penalty_kJmol": site["scis_penalty_kJmol"], "homo_eV": site["homo_eV"],
           "lumo_eV": site["lumo_eV"], "gap_normal_eV": normal, "gap_inverse_eV": inverse,
           "demand": "normal" if normal <= inverse else "inverse",
           "reactive_log10_fraction": math.log10(rf)}
    ts_site = ts_site or {"status": "missing", "message": "no transition-structure result"}
    for col in TS_COLUMNS:
        v = ts_site.get(col)
        out[col] = float(v) if isinstance(v, (int, float)) and v is not None else float("nan")
    out["ts_status"] = ts_site.get("status", "missing")
    out["ts_message"] = ts_site.get("message", "")
    out["ts_verified"] = bool(ts_site.get("ts_verified", False))
    out["ts_approach"] = ts_site.get("approach", "")
    out["face_preference"] = ts_site.get("face_preference") or ""
    pairs = ts_site.get("preferred_pairs") or ts_site.get("pairs")
    nd = ts_site.get("n_diene_atoms", 0)
    if not pairs or ts_site.get("orientation_gap_kJmol") is None or dienophile.get("symmetric_bond") \
            or (smiles and _termini_equivalent(smiles, site["atoms"])):
        out["regio_ts"] = "symmetric" if pairs else ""
    else:
        out["regio_ts"] = _pairs_label(pairs, nd)
    return out


def refined_features(refined: dict | None, label: str, barrier: str = "free_energy") -> dict:
    """The refined-level barrier of a site (`barrier`: free_energy or electronic; NaN where
    the site was not priced), the level's name, and why not where it was not."""
    out = {c: float("nan") for c in REFINED_COLUMNS}
    out.update(refine_status="", refine_message="", refined_level="")
    if refined is None:
        return out
    out["refined_level"] = refined.get("level", "")
    site = refined.get("sites", {}).get(label)
    if site is None:
        failed = refined.get("status") != "ok"
        out["refine_status"] = refined.get("status", "missing") if failed else "not_priced"
        out["refine_message"] = (refined.get("message", "") if failed else
                                 "site not priced: its GFN2-xTB barrier lies well above the best site's")
    elif site.get("status") != "ok":
        out.update(refine_status=site.get("status", ""), refine_message=site.get("message", ""))
    elif BARRIER_KINDS[barrier] not in site:
        out.update(refine_status="no_thermal", refine_message="no thermal correction was priced for this site")
    else:
        out.update(barrier_refined_kJmol=float(site[BARRIER_KINDS[barrier]]),
                   electronic_barrier_refined_kJmol=float(site["electronic_barrier_kJmol"]),
                   contact_dispersion_kJmol=float(site["contact_dispersion_kJmol"]), refine_status="ok")
    return out


def _usable_sites(result: dict) -> list[dict]:
    return [s for s in result.get("sites", []) if s["status"] == "ok"]


def record_sites(rec: dict, computed: Computed) -> list[dict]:
    """Feature rows of every computed site of every isomer of one record."""
    dph = computed.dienophiles.get(rec["dienophile"]["dhash"])
    rows = []
    for iso in rec["isomers"]:
        res = computed.structures.get(iso["key"], {"status": "missing", "message": "no result file"})
        ts = computed.transition(iso["key"], rec["dienophile"]["thash"])
        for site in res.get("sites", []):
            row = {"row": rec["row"], "id": rec["id"], "isomer_smiles": iso["smiles"], "key": iso["key"],
                   "structure_status": res["status"], "site": site["label"], "site_kind": site["kind"],
                   "aromatic": site["aromatic"], "site_status": site["status"],
                   "reactive_fraction": site["reactive_fraction"], "dihedral_min_deg": site["dihedral_min_deg"],
                   "homo_share": site["homo_share"], "dienophile": rec["dienophile"]["smiles"],
                   "transition_key": f"{iso['key']}__{rec['dienophile']['thash']}"}
            if site["status"] == "ok" and dph is not None:
                row.update(site_features(site, dph, ts.get("sites", {}).get(site["label"]), iso["smiles"]))
                row["regio_hint"] = site_regio_hint(site, dph, row["demand"])
                row.update(refined_features(computed.refined.get(row["transition_key"]), site["label"],
                                            computed.barrier))
            else:
                row.update({"scis_penalty_kJmol": np.nan, "homo_eV": site["homo_eV"],
                            "lumo_eV": site["lumo_eV"], "ts_status": "not_computed"})
            rows.append(row)
    return rows


def site_table(records: list[dict], computed: Computed) -> pd.DataFrame:
    """One row per (input row, isomer, site) that was computed."""
    rows = []
    for rec in records:
        if rec["status"] == "ok":
            rows += record_sites(rec, computed)
    return pd.DataFrame(rows)


def site_class(kind: str, aromatic) -> str:
    """The categorical part of the applicability domain: site kind and aromaticity."""
    return f"{kind}{' aromatic' if bool(aromatic) else ''}"


def _fit_site(sites: list[dict]) -> dict | None:
    """The site a reference diene is fitted with: the lowest verified barrier."""
    ok = [s for s in sites if s.get("site_status") == "ok" and s.get("ts_verified")
          and np.isfinite(s.get("barrier_kJmol", np.nan))]
    return min(ok, key=lambda s: s["barrier_kJmol"]) if ok else None


def reference_rows(reference: list[dict], computed: Computed) -> pd.DataFrame:
    """One row per reference record with its fitted site's features (or why not)."""
    rows = []
    seen: dict[tuple, str] = {}      # (structure key, dienophile) -> id of the row that measured it
    for rec in reference:
        row = {"id": rec["id"], "smiles": rec["smiles"], "used": False, "reason": ""}
        pair = (tuple(i["key"] for i in rec["isomers"]), canonical(rec["dienophile"]["smiles"]))
        try:
            row["log10_k"] = float(rec["extra"].get("log10_k", "nan"))
        except ValueError:
            row["log10_k"] = float("nan")
        row["dienophile_smiles"] = rec["dienophile"]["smiles"]
        row["temperature_K"] = float(rec["extra"].get("temperature_K") or rec.get("temperature_K") or "nan")
        row["provenance"] = rec["extra"].get("provenance", "")
        if rec["status"] != "ok" or not rec["isomers"]:
            row["reason"] = f"{rec['status']}: {rec['message']}"
        elif not np.isfinite(row["log10_k"]):
            row["reason"] = "log10_k missing or not a number"
        elif pair in seen:
            # the same measurement twice would weigh one pair double in the fit
            row["reason"] = f"same diene and dienophile as reference row {seen[pair]}: counted once"
        else:
            site = _fit_site(record_sites(rec, computed))
            if site is None:
                res = computed.structures.get(rec["isomers"][0]["key"], {})
                row["reason"] = (f"structure {res.get('status', 'missing')}: {res.get('message', '')}"
                                 if res.get("status") != "ok" else "no verified transition structure")
            else:
                row.update({k: v for k, v in site.items() if k not in ("row", "id")})
                row["used"] = True
                seen[pair] = rec["id"]
        rows.append(row)
    return pd.DataFrame(rows)


def fit_reference(reference: list[dict], computed: Computed, config: dict, run_dienophile: str,
                  suffix: str = ""):
    """Fit the model on the reference records. `suffix` ('' or '_refined') picks the
    level of the energy features. Returns (fit, summary dict, reference table)."""
    table = reference_rows(reference, computed)
    level = lambda f: f.replace("_kJmol", f"{suffix}_kJmol") if suffix and f.endswith("_kJmol") else f  # noqa: E731
    base = [level(f) for f in config["model"]["features"]]
    candidates = [level(f) for f in config["model"].get("candidates", [])]
    for f in base + candidates:
        if f not in table:
            table[f] = np.nan
    usable = table["used"] & table[base].notna().all(axis=1)
    table.loc[table["used"] & ~usable, "reason"] = "no value for a model feature"
    table["used"] = usable
    used = table[table["used"]].copy()
    if len(used) < len(base) + 3:
        raise ValueError(f"only {len(used)} usable reference dienes; the model needs at least "
                         f"{len(base) + 3} (see results/reference_fit.csv for the reasons)")
    used["dienophile_canonical"] = used["dienophile_smiles"].map(canonical)
    counts = used["dienophile_canonical"].value_counts()
    run_canonical = canonical(run_dienophile)
    base_dph = run_canonical if run_canonical in counts.index else counts.index[0]
    note = "" if base_dph == run_canonical else (
        f"the run's dienophile is not in the reference set: barriers are computed with the run's "
        f"dienophile, the scale (intercept) is that of {base_dph}")
    terms = [d for d in counts.index if d != base_dph]
    term_names = [f"dienophile[{d}]" for d in terms]
    columns = {f: used[f].to_numpy(float) for f in base + candidates if used[f].notna().all()}
    for d, name in zip(terms, term_names):
        columns[name] = (used["dienophile_canonical"] == d).to_numpy(float)
    y = used["log10_k"].to_numpy(float)
    T_ref = float(used.loc[used["dienophile_canonical"] == base_dph, "temperature_K"].median())
    cands = [c for c in candidates if c in columns]
    max_added = int(config["model"].get("max_added", 0))
    features, trail = mdl.choose_features(columns, y, base + term_names, cands, T_ref, max_added)
    X = np.column_stack([columns[f] for f in features])
    fit, comparison, y_cv = mdl.select(X, y, features, T_ref)
    honest = mdl.nested_cv(columns, y, base + term_names, cands, T_ref, max_added) if cands and max_added \
        else None
    table["in_training_set"] = table["used"]
    table.loc[used.index, "log10_k_cv"] = y_cv
    table.loc[used.index, "log10_k_fit"] = mdl.predict(fit, X)[0]
    ols = mdl.fit(X, y, features, "ols", T_ref)
    physical = -mdl.log10_units_per_kjmol(T_ref)
    level_name = "GFN2-xTB"
    if suffix:
        names = used.get("refined_level", pd.Series(dtype=object)).dropna()
        level_name = str(names.iloc[0]) if len(names) else "refined"
    summary = {"level": level_name, "n_reference": int(len(used)),
               "features": features, "base_features": base, "candidates": cands, "selection": trail,
               "dienophile_terms": dict(zip(term_names, terms)), "base_dienophile": base_dph,
               "run_dienophile": run_dienophile,
               "variant": fit.variant, "comparison": comparison, **comparison[fit.variant],
               "coefficients": dict(zip(features, fit.coef_per_unit)),
               "coefficient_se": dict(zip(features, fit.coef_se)),
               "fixed_feature": fit.fixed_feature,
               "intercept": fit.intercept, "residual_sd_log10k": fit.resid_sd,
               "reference_temperature_K": T_ref, "physical_slope_per_kJmol": physical,
               "ols_coefficients": dict(zip(features, ols.coef_per_unit)),
               "ols_coefficient_se": dict(zip(features, ols.coef_se)),
               "interval": config["model"]["interval"], "note": note,
               "training_classes": sorted({site_class(k, a) for k, a in
                                           zip(used["site_kind"], used["aromatic"])})}
    if honest is not None:
        summary["nested_cv"] = {k: v for k, v in honest.items() if k != "predictions"}
        table.loc[used.index, "log10_k_nested_cv"] = honest["predictions"]
    return fit, summary, table


def predict_sites(site_rows: pd.DataFrame, fit, config: dict, summary: dict, tag: str) -> pd.DataFrame:
    """Predictions per site for the run's dienophile, with the applicability domain:
    every model descriptor within the reference set's span and leverage, the site's
    class (kind, aromatic or not) in the reference set, and a verified saddle.
    Columns carry the level's tag: log10_k_<tag>, log10_k_<tag>_low, in_domain_<tag>, ..."""
    out = site_rows.copy()
    run = canonical(summary["run_dienophile"])
    for name, smiles in summary["dienophile_terms"].items():
        out[name] = 1.0 if canonical(smiles) == run else 0.0
    c_pred, c_lo, c_hi, c_lev, c_dom, c_note = (level_column(c, tag) for c in PREDICTION_COLUMNS)
    for col in (c_pred, c_lo, c_hi, c_lev):
        out[col] = np.nan
    out[c_dom] = pd.Series([None] * len(out), dtype=object)
    out[c_note] = ""
    if not len(out):
        return out
    for f in fit.features:
        if f not in out:
            out[f] = np.nan
    ok = (out["site_status"] == "ok") & out[fit.features].notna().all(axis=1)
    if ok.any():
        X = out.loc[ok, fit.features].to_numpy(float)
        pred, lo, hi = mdl.predict(fit, X, config["model"]["interval"])
        lev, _, reasons = mdl.domain(fit, X)
        out.loc[ok, c_pred] = pred
        out.loc[ok, c_lo] = lo
        out.loc[ok, c_hi] = hi
        out.loc[ok, c_lev] = lev
        classes = [site_class(k, a) for k, a in zip(out.loc[ok, "site_kind"], out.loc[ok, "aromatic"])]
        verified = out.loc[ok, "ts_verified"].fillna(False).astype(bool).tolist()
        notes = []
        for why, c, v in zip(reasons, classes, verified):
            why = list(why)
            if c not in summary["training_classes"]:
                why.append(f"no reference diene of this class ({c})")
            if not v:
                why.append("saddle not verified: barrier from the fixed-bond model structure")
            notes.append("; ".join(why))
        out.loc[ok, c_dom] = [not n for n in notes]
        out.loc[ok, c_note] = notes
    return out


def choose_level(sites: pd.DataFrame, refined_label: str | None, unpriced_note: str = "") -> pd.DataFrame:
    """One level per site: the refined model's prediction where the site has one, else the
    GFN2-xTB model's, named in `level` and, where the refinement was asked for and failed,
    in `level_note`. The chosen values go to log10_k_pred, log10_k_low, ..., in_domain."""
    out = sites.copy()
    refined = (out["log10_k_refined"].notna() if "log10_k_refined" in out
               else pd.Series(False, index=out.index))
    for name in PREDICTION_COLUMNS:
        fast = out[level_column(name, "xtb")]
        out[name] = out[level_column(name, "refined")].where(refined, fast) if refined.any() else fast
    out["level"] = np.where(refined, refined_label or "", FAST_LEVEL)
    out["level_note"] = ""
    if refined_label:
        asked = out.get("refine_status", pd.Series("", index=out.index)).fillna("")
        fell_back = ~refined & out["log10_k_xtb"].notna() & (asked != "")
        out.loc[fell_back, "level_note"] = [
            f"ranked at GFN2-xTB: the {refined_label} pricing did not give a value ({st}: {msg})"
            for st, msg in zip(out.loc[fell_back, "refine_status"], out.loc[fell_back, "refine_message"])]
        if unpriced_note:
            out.loc[~refined & out["log10_k_xtb"].notna() & (asked == ""), "level_note"] = unpriced_note
    return out


def site_regio_hint(site: dict, dienophile: dict, demand_type: str) -> str:
    """Frontier-orbital regioselectivity: diene HOMO with dienophile LUMO in normal
    demand, diene LUMO with dienophile HOMO in inverse demand."""
    if demand_type == "inverse":
        d, e = site["lumo_termini"], dienophile.get("homo_termini", dienophile["lumo_termini"])
    else:
        d, e = site["homo_termini"], dienophile["lumo_termini"]
    return regio_hint(tuple(d), tuple(e), (site["atoms"][0] + 1, site["atoms"][3] + 1),
                      tuple(i + 1 for i in dienophile["reactive_bond"]))


RANKING_COLUMNS = ["rank", "id", "level", "in_domain", "smiles", "status", "message", "domain_note",
                   "log10_k_pred", "log10_k_low", "log10_k_high", "barrier_refined_kJmol", "barrier_kJmol",
                   "scis_penalty_kJmol", "reactive_fraction", "homo_eV", "lumo_eV", "gap_normal_eV",
                   "gap_inverse_eV", "demand", "regio_hint", "regio_ts", "orientation_gap_kJmol",
                   "face_preference", "face_gap_kJmol", "intrinsic_barrier_kJmol", "distortion_kJmol",
                   "dienophile_distortion_kJmol", "interaction_kJmol", "reaction_energy_kJmol",
                   "model_barrier_kJmol", "ts_imag_cm1", "ts_verified", "best_site", "site_kind",
                   "n_sites", "dihedral_min_deg", "isomer_smiles", "n_isomers", "structure_key",
                   "transition_key", "n_gradients", "converged", "dienophile", "row",
                   "rank_xtb", "log10_k_xtb", "log10_k_xtb_low", "log10_k_xtb_high", "in_domain_xtb",
                   "refined_level", "refine_status", "refine_message", "electronic_barrier_refined_kJmol",
                   "contact_dispersion_kJmol", "aromatic"]
BEST_SITE_COLUMNS = [c for c in RANKING_COLUMNS if c not in (
    "rank", "id", "smiles", "status", "message", "best_site", "n_sites", "n_isomers", "structure_key",
    "n_gradients", "converged", "row", "rank_xtb")]


def _order(table: pd.DataFrame, column: str, eligible: pd.Series) -> pd.Series:
    """Ranks 1..n by `column`, highest first (input order breaks ties), where `eligible`."""
    order = table.loc[eligible].sort_values([column, "row"], ascending=[False, True]).index
    out = pd.Series(pd.NA, index=table.index, dtype="Int64")
    out.loc[order] = np.arange(1, len(order) + 1)
    return out


def rank_table(records: list[dict], computed: Computed, sites: pd.DataFrame) -> pd.DataFrame:
    """One row per input record, in input order, best isomer and site of each at the
    row's level (see choose_level); rank_xtb ranks the same rows by the GFN2-xTB model."""
    rows = []
    for rec in records:
        row = {"row": rec["row"], "id": rec["id"], "smiles": rec["smiles"], "status": rec["status"],
               "message": rec["message"], "n_isomers": len(rec["isomers"])}
        for k, v in rec.get("extra", {}).items():
            row[k if k not in RANKING_COLUMNS else f"input_{k}"] = v
        if rec["status"] == "ok":
            mine = sites[sites["row"] == rec["row"]] if len(sites) else sites
            ok = mine[mine["site_status"] == "ok"] if len(mine) else mine
            if len(ok) and ok["log10_k_pred"].notna().any():
                best = ok.loc[ok["log10_k_pred"].idxmax()]
                res = computed.structures[best["key"]]
                row.update({c: best[c] for c in BEST_SITE_COLUMNS if c in best})
                row.update({"best_site": best["site"], "n_sites": int((mine["key"] == best["key"]).sum()),
                            "structure_key": best["key"], "n_gradients": res.get("n_gradients"),
                            "converged": res.get("converged"),
                            "log10_k_xtb": ok["log10_k_xtb"].max()})   # the row's best site at GFN2-xTB
                notes = [row["message"], res.get("message", ""), best.get("level_note", "")]
                if best["ts_status"] != "ok":
                    row["status"] = best["ts_status"]
                    notes.append(f"transition structure: {best.get('ts_message', '')}")
                row["message"] = "; ".join(filter(None, notes))
            else:
                row.update(_unranked(rec, computed, ok))
        rows.append(row)
    table = pd.DataFrame(rows)
    for col in RANKING_COLUMNS:
        if col not in table:
            table[col] = np.nan
    ranked = table["status"].isin(RANKED_STATUSES) & table["log10_k_pred"].notna()
    table["rank"] = _order(table, "log10_k_pred", ranked)
    table["rank_xtb"] = _order(table, "log10_k_xtb", ranked & table["log10_k_xtb"].notna())
    return table[RANKING_COLUMNS + [c for c in table.columns if c not in RANKING_COLUMNS]]


def _unranked(rec: dict, computed: Computed, ok: pd.DataFrame) -> dict:
    """Status and message of a record with no prediction."""
    results = [computed.structures.get(i["key"], {"status": "missing", "message": "no result file"})
               for i in rec["isomers"]]
    statuses = [r.get("status", "missing") for r in results]
    msgs = [r.get("message", "") for r in results]
    out = {"structure_key": rec["isomers"][0]["key"] if rec["isomers"] else np.nan}
    if "ok" in statuses and len(ok):
        ts_msgs = sorted({str(m) for m in ok.get("ts_message", pd.Series(dtype=str)).fillna("") if m})
        out["status"] = "not_predicted"
        msgs = ["a model descriptor could not be computed for any site (see results/sites.csv)"] + ts_msgs
    else:
        out["status"] = statuses[0] if statuses else "missing"
    out["message"] = "; ".join(filter(None, [rec["message"]] + sorted(set(msgs))))
    return out


# ------------------------------------------------------------- read at the bench

YARDSTICK_SMILES = "C=CC=C"      # rates are also given as multiples of butadiene's, same dienophile


def _canonical_or_none(smiles) -> str | None:
    """`canonical` for a table cell that may be empty or not text."""
    return canonical(smiles) if isinstance(smiles, str) and smiles else None


def yardstick(table: pd.DataFrame, ref_table: pd.DataFrame, summary: dict,
              smiles: str = YARDSTICK_SMILES) -> tuple[dict, str]:
    """The model's own log10 k for one diene (butadiene by default) with the run's dienophile,
    per level ({level: log10 k}), and where it came from: a library row that is that diene,
    else its reference row measured with the run's dienophile. ({}, why) when neither."""
    bd = _canonical_or_none(smiles)
    lib = table[table["rank"].notna() & (table["smiles"].map(_canonical_or_none) == bd)]
    if len(lib):
        r = lib.iloc[0]
        out = {FAST_LEVEL: float(r["log10_k_xtb"])}
        if r["level"] != FAST_LEVEL:
            out[str(r["level"])] = float(r["log10_k_pred"])
        return out, f"library row {r['id']}"
    run_dph = canonical(summary.get("run_dienophile", ""))
    if len(ref_table) and "log10_k_fit" in ref_table:
        ref = ref_table[(ref_table["smiles"].map(_canonical_or_none) == bd)
                        & (ref_table["dienophile_smiles"].map(_canonical_or_none) == run_dph)]
        if len(ref):
            r = ref.iloc[0]
            out = {FAST_LEVEL: float(r["log10_k_fit"])} if pd.notna(r.get("log10_k_fit")) else {}
            if pd.notna(r.get("log10_k_fit_refined")) and summary.get("ranking_level", FAST_LEVEL) != FAST_LEVEL:
                out[summary["ranking_level"]] = float(r["log10_k_fit_refined"])
            if out:
                return out, f"reference row {r['id']}"
    return {}, (f"{smiles} was not computed with this dienophile: add it to the library to get "
                + ("times_faster_than_butadiene" if smiles == YARDSTICK_SMILES else "half-lives"))


def bench_view(table: pd.DataFrame, summary: dict, ref_table: pd.DataFrame,
               anchor: dict | None = None) -> tuple[pd.DataFrame, dict]:
    """What a chemist reads first, added to the ranking table:

    - times_faster_than_butadiene: 10^(log10 k - log10 k of butadiene), both predicted by the
      row's model with the run's dienophile (see `yardstick`);
    - tier: ranked rows cut into groups the model can tell apart. Walking down the ranking, a
      new tier starts where a row lies more than sqrt(2) x the leave-one-out RMSE below the
      first row of the current tier: two predictions each off by about one RMSE differ by
      sqrt(2) RMSE by chance, so rows within a tier are not ordered by the model;
    - dienophile_in_reference: whether the run's dienophile is one the model was fitted with.
      When it is not, every log10 k, interval and rank is a transfer from the reference
      dienophile (said in domain_note; the intervals do not include that transfer error);
    - half_life_h, only with an anchor (a measured k in L/(mol s) for one diene with the run's
      dienophile under the run's conditions): k_i = k_anchor x 10^(log10 k_i - log10 k_anchor),
      both predicted by the row's model, and t1/2 = 1 / (k_i c) for both partners starting at
      c mol/L (second order, equal concentrations). Without an anchor no time is given.
    Returns (table, summary additions)."""
    out = table.copy()
    yard, source = yardstick(out, ref_table, summary)
    base = out["level"].map(lambda lv: yard.get(str(lv), np.nan)).astype(float)
    out["times_faster_than_butadiene"] = np.where(out["log10_k_pred"].notna() & base.notna(),
                                                  10.0 ** (out["log10_k_pred"].astype(float) - base), np.nan)
    rmse = float(summary.get("cv_rmse_log10k", np.nan))
    width = math.sqrt(2.0) * rmse
    out["tier"] = pd.Series(pd.NA, index=out.index, dtype="Int64")
    ranked = out[out["rank"].notna()].sort_values("rank")
    tier, top = 0, None
    for idx, value in ranked["log10_k_pred"].items():
        if top is None or not np.isfinite(width) or value < top - width:
            tier, top = tier + 1, value
        out.loc[idx, "tier"] = tier
    run_dph = canonical(summary.get("run_dienophile", ""))
    fitted = {canonical(d) for d in [summary.get("base_dienophile", "")]
              + list(summary.get("dienophile_terms", {}).values()) if d}
    in_ref = run_dph in fitted
    out["dienophile_in_reference"] = in_ref
    if not in_ref:
        transfer = (f"dienophile not in the reference set: log10 k and interval transferred from "
                    f"{summary.get('base_dienophile', 'the reference dienophile')} (order more trustworthy "
                    "than size)")
        has = out["rank"].notna()
        out.loc[has, "domain_note"] = [("; ".join(filter(None, [str(n) if isinstance(n, str) else "", transfer])))
                                       for n in out.loc[has, "domain_note"]]
    anchor = anchor or {}
    half_life = {"given": anchor.get("k_L_per_mol_s") is not None}
    if half_life["given"]:
        ref, where = yardstick(out, ref_table, summary, anchor["smiles"])
        a_base = out["level"].map(lambda lv: ref.get(str(lv), np.nan)).astype(float)
        k = float(anchor["k_L_per_mol_s"]) * 10.0 ** (out["log10_k_pred"].astype(float) - a_base)
        out["half_life_h"] = 1.0 / (k * float(anchor["concentration_M"])) / 3600.0
        half_life |= {"smiles": anchor["smiles"], "k_L_per_mol_s": float(anchor["k_L_per_mol_s"]),
                      "concentration_M": float(anchor["concentration_M"]), "source": where}
    new_cols = [("tier", "rank"), ("dienophile_in_reference", "in_domain"),
                ("times_faster_than_butadiene", "log10_k_high")]
    if half_life["given"]:
        new_cols.append(("half_life_h", "times_faster_than_butadiene"))
    cols = list(out.columns)
    for new, after in new_cols:
        cols.remove(new)
        cols.insert(cols.index(after) + 1, new)
    out = out[cols]
    pairwise = float(summary.get("cv_pairwise_accuracy", np.nan))
    extra = {"bench": {
        "yardstick": {"smiles": YARDSTICK_SMILES, "log10_k": yard, "source": source},
        "tier_width_log10": round(width, 3) if np.isfinite(width) else None,
        "tiers": int(out["tier"].max()) if out["tier"].notna().any() else 0,
        "pairs_right_of_10": round(10 * pairwise) if np.isfinite(pairwise) else None,
        "typical_factor": round(10 ** rmse, 1) if np.isfinite(rmse) else None,
        "dienophile_in_reference": in_ref, "half_life": half_life}}
    return out, extra
