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
from .chemistry import chemistry_note
from .kinetics import reversal
from .orbitals import regio_hint

TS_COLUMNS = ("intrinsic_barrier_kJmol", "distortion_kJmol", "dienophile_distortion_kJmol", "interaction_kJmol",
              "reaction_energy_kJmol", "model_barrier_kJmol", "ts_imag_cm1", "face_gap_kJmol",
              "orientation_gap_kJmol")
RANKED_STATUSES = ("ok", "ts_unverified")
# a level's prediction for a site, as <level>_<name>
PREDICTION_COLUMNS = ("log10_k_pred", "log10_k_low", "log10_k_high", "leverage", "in_domain", "domain_note")
# what ranks a row, unprefixed: the values of the level named in its `level` column
# (the reaction free energy only where the row's level computed it: a level that places the atoms
# or estimates a barrier computes none)
ROW_LEVEL_COLUMNS = PREDICTION_COLUMNS + ("barrier_kJmol", "electronic_barrier_kJmol", "reaction_free_energy_kJmol")
# each ranking level's view of a row, as <level>_<name> in ranking.csv
LEVEL_VIEW_COLUMNS = ("rank", "log10_k_pred", "log10_k_low", "log10_k_high", "in_domain", "barrier_kJmol",
                      "electronic_barrier_kJmol", "status", "message")
BARRIER_KEYS = {"free_energy": "free_energy_barrier_kJmol", "electronic": "electronic_barrier_kJmol"}


def col(level, name: str) -> str:
    """A level's column: col(dft, 'barrier_kJmol') -> 'dft_barrier_kJmol'."""
    return f"{getattr(level, 'name', level)}_{name}"


@dataclass
class Computed:
    """Everything computed for a run, by file stem: structures by key, transition
    structures by '<key>__<transition hash>', dienophiles by their hash, and each priced
    level's pair results and cycloadducts by level name and stem."""

    structures: dict
    transitions: dict = field(default_factory=dict)
    dienophiles: dict = field(default_factory=dict)
    levels: dict = field(default_factory=dict)
    adducts: dict = field(default_factory=dict)     # level name -> stem -> its best site's cycloadduct

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


def level_features(level, result: dict | None, label: str) -> dict:
    """A site's barrier (kJ/mol) at one level, with its status and why where there is none.
    `result` is the pair's transition-structure result for the level that places the atoms,
    its single-point result for any other level, None where that level did not compute the pair.
    Returns {<level>_barrier_kJmol, <level>_electronic_barrier_kJmol, <level>_status,
    <level>_message} and, where the level measured it, contact_dispersion_kJmol."""
    out = {col(level, "barrier_kJmol"): float("nan"), col(level, "electronic_barrier_kJmol"): float("nan"),
           col(level, "status"): "", col(level, "message"): ""}

    def say(status, message):
        out.update({col(level, "status"): status, col(level, "message"): message})
        return out

    if result is None:
        return say("not_computed", "not computed at this level")
    site = result.get("sites", {}).get(label)
    if level.places_atoms:
        site = site or {"status": result.get("status", "missing"), "message": result.get("message", "")}
        value = site.get("barrier_kJmol")
        if isinstance(value, (int, float)) and math.isfinite(value):
            out[col(level, "barrier_kJmol")] = out[col(level, "electronic_barrier_kJmol")] = float(value)
        return say(site.get("status", "missing"), site.get("message", ""))
    if site is None:
        if result.get("status") != "ok":
            return say(result.get("status", "missing"), result.get("message", ""))
        return say("not_recomputed", "site not computed: its GFN2-xTB barrier lies well above the best site's")
    if site.get("status") != "ok":
        return say(site.get("status", ""), site.get("message", ""))
    if BARRIER_KEYS[level.barrier] not in site:
        return say("no_thermal", "no thermal correction was computed for this site")
    out[col(level, "barrier_kJmol")] = float(site[BARRIER_KEYS[level.barrier]])
    out[col(level, "electronic_barrier_kJmol")] = float(site["electronic_barrier_kJmol"])
    if site.get("contact_dispersion_kJmol") is not None:
        out["contact_dispersion_kJmol"] = float(site["contact_dispersion_kJmol"])
    return say("ok", "")


def _levels_computed(settings) -> list:
    """The ranking levels that compute (a corrected level is added later, see `corrected_level`),
    and the one that places the atoms (its barrier picks a reference diene's site) where
    ranking.levels leaves it out."""
    levels = [lv for lv in settings.ranking_levels if not lv.corrects]
    return levels + ([settings.placing] if not any(lv.places_atoms for lv in levels) else [])


def corrected_level(sites: pd.DataFrame, ref_table: pd.DataFrame, level, settings):
    """A corrected level's barriers: its target level's barrier estimated from GFN2-xTB terms
    (dienes.correction), starting from its base level's barrier where it names one (the GFN2-xTB
    barrier is then a candidate term), fitted on every site the target computed (library rows and
    reference dienes, each site once). Adds <level>_barrier_kJmol, _status, _message to both
    tables. Returns (sites, ref_table, correction summary or {'error': why})."""
    from . import correction as cr
    start = level.base or settings.placing
    target, base = col(level.target, "barrier_kJmol"), col(start, "barrier_kJmol")
    terms = cr.ROW_TERMS + ((col(settings.placing, "barrier_kJmol"),) if level.base else ())
    frames = [t[t.get("site_status", pd.Series(dtype=object)) == "ok"] for t in (sites, ref_table)
              if len(t) and target in t and "transition_key" in t]
    train = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    if len(train):
        train = train[train[target].notna() & train[base].notna()].drop_duplicates(["transition_key", "site"])
    n = len(cr.usable_rows(train, target, terms, base)) if len(train) and base in train else 0
    out = []
    if n < int(level.option("min_sites", cr.MIN_ROWS)):
        info = {"error": f"{n} sites computed at {level.target.name} with every term; the correction "
                         f"needs at least {level.option('min_sites', cr.MIN_ROWS)}"}
        corr = None
    else:
        corr = cr.fit_correction(train, target, terms, base=base)
        hw = corr.half_width_kJmol(float(settings["model"]["interval"]))
        info = {"target": level.target.name, "base": start.name, "terms": corr.terms,
                "coefficients": dict(zip(corr.terms, corr.coef)),
                "intercept": corr.intercept, "n_sites": corr.n, "loo_mae_kJmol": round(corr.loo_mae_kJmol, 2),
                "loo_spearman": round(corr.loo_spearman, 3), "half_width_kJmol": round(hw, 2),
                "bound_kJmol": round(corr.half_width_kJmol(float(settings["ranking"]["contenders"]["coverage"])), 2),
                "selection": corr.trail}
    for table in (sites, ref_table):
        t = table.copy()
        for c in ("barrier_kJmol", "electronic_barrier_kJmol"):
            t[col(level, c)] = np.nan
        t[col(level, "status")], t[col(level, "message")] = "not_fitted", info.get("error", "")
        if corr is not None and len(t):
            ok = (t.get("site_status", pd.Series("", index=t.index)) == "ok").to_numpy() \
                & (t[base].notna().to_numpy() if base in t else False) & cr.predictable(t, corr.terms)
            t.loc[ok, col(level, "barrier_kJmol")] = corr.predict(t.loc[ok])
            t.loc[ok, col(level, "status")] = "ok"
            t.loc[ok, col(level, "message")] = ""
            t.loc[~ok, col(level, "status")] = "no_terms"
            t.loc[~ok, col(level, "message")] = "a term of the correction is missing"
        out.append(t)
    return out[0], out[1], info


def record_sites(rec: dict, computed: Computed, settings) -> list[dict]:
    """Feature rows of every computed site of every isomer of one record, with each
    ranking level's barrier."""
    dph = computed.dienophiles.get(rec["dienophile"]["dhash"])
    levels = _levels_computed(settings)
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
                for level in levels:
                    result = (ts if level.places_atoms
                              else computed.levels.get(level.name, {}).get(row["transition_key"]))
                    feats = level_features(level, result, site["label"])
                    if "contact_dispersion_kJmol" in row:
                        feats.pop("contact_dispersion_kJmol", None)
                    row.update(feats)
                    adduct = computed.adducts.get(level.name, {}).get(row["transition_key"], {})
                    if adduct.get("site") == site["label"] and "reaction_free_energy_kJmol" in adduct:
                        row[col(level, "reaction_free_energy_kJmol")] = float(adduct["reaction_free_energy_kJmol"])
            else:
                row.update({"scis_penalty_kJmol": np.nan, "homo_eV": site["homo_eV"],
                            "lumo_eV": site["lumo_eV"], "ts_status": "not_computed"})
            rows.append(row)
    return rows


def site_table(records: list[dict], computed: Computed, settings) -> pd.DataFrame:
    """One row per (input row, isomer, site) that was computed."""
    rows = []
    for rec in records:
        if rec["status"] == "ok":
            rows += record_sites(rec, computed, settings)
    return pd.DataFrame(rows)


def site_class(kind: str, aromatic) -> str:
    """The categorical part of the applicability domain: site kind and aromaticity."""
    return f"{kind}{' aromatic' if bool(aromatic) else ''}"


def _fit_site(sites: list[dict], placing) -> dict | None:
    """The site a reference diene is fitted with, at every level: the lowest verified
    barrier of the level that places the atoms."""
    barrier = col(placing, "barrier_kJmol")
    ok = [s for s in sites if s.get("site_status") == "ok" and s.get("ts_verified")
          and np.isfinite(s.get(barrier, np.nan))]
    return min(ok, key=lambda s: s[barrier]) if ok else None


def reference_rows(reference: list[dict], computed: Computed, settings) -> pd.DataFrame:
    """One row per reference record with its fitted site's features at every ranking level
    (or why it cannot be used)."""
    rows = []
    seen: dict[tuple, str] = {}      # (structure key, dienophile) -> id of the row that measured it
    for rec in reference:
        row = {"id": rec["id"], "name": rec["extra"].get("name", ""), "smiles": rec["smiles"], "usable": False,
               "reason": ""}
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
            site = _fit_site(record_sites(rec, computed, settings), settings.placing)
            if site is None:
                res = computed.structures.get(rec["isomers"][0]["key"], {})
                row["reason"] = (f"structure {res.get('status', 'missing')}: {res.get('message', '')}"
                                 if res.get("status") != "ok" else "no verified transition structure")
            else:
                row.update({k: v for k, v in site.items() if k not in ("row", "id")})
                row["usable"] = True
                seen[pair] = rec["id"]
        rows.append(row)
    return pd.DataFrame(rows)


def at_level(table: pd.DataFrame, level) -> pd.DataFrame:
    """A sites or reference table as one level's model sees it: barrier_kJmol and
    electronic_barrier_kJmol are that level's; every other descriptor is as computed."""
    out = table.copy()
    for name in ("barrier_kJmol", "electronic_barrier_kJmol"):
        out[name] = out[col(level, name)] if col(level, name) in out else np.nan
    return out


def fit_reference(ref_table: pd.DataFrame, settings, level):
    """Fit the model at `level` on the reference table (see reference_rows): its barrier and
    every other candidate descriptor. Returns (fit, summary dict, the level's reference
    columns: <level>_used, <level>_reason, <level>_log10_k_cv, <level>_log10_k_fit, ...)."""
    table = at_level(ref_table, level)
    table["used"], table["level_reason"] = table["usable"], table["reason"]
    model = settings["model"]
    base = list(model["features"])
    candidates = list(model.get("candidates", []))
    for f in base + candidates:
        if f not in table:
            table[f] = np.nan
    usable = table["used"] & table[base].notna().all(axis=1)
    missing = table["used"] & ~usable
    table.loc[missing, "level_reason"] = [
        f"no {level.name} value for a model feature" + (f" ({st}: {msg})" if st else "")
        for st, msg in zip(table.loc[missing].get(col(level, "status"), ""),
                           table.loc[missing].get(col(level, "message"), ""))]
    table["used"] = usable
    used = table[table["used"]].copy()
    if len(used) < len(base) + 3:
        raise ValueError(f"only {len(used)} usable reference dienes at {level.name}; the model needs at least "
                         f"{len(base) + 3} (see results/reference_fit.csv for the reasons)")
    run_dienophile = settings["dienophile"]
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
    max_added = int(model.get("max_added", 0))
    features, trail = mdl.choose_features(columns, y, base + term_names, cands, T_ref, max_added)
    X = np.column_stack([columns[f] for f in features])
    fit, comparison, y_cv = mdl.select(X, y, features, T_ref)
    fit = mdl.with_loo_residuals(fit, y, y_cv)
    coverage, bounds = mdl.loo_coverage(fit, y, y_cv, float(model["interval"]))
    honest = mdl.nested_cv(columns, y, base + term_names, cands, T_ref, max_added) if cands and max_added \
        else None
    table.loc[used.index, "log10_k_cv"] = y_cv
    table.loc[used.index, "log10_k_fit"] = mdl.predict(fit, X)[0]
    table.loc[used.index, "log10_k_cv_low"] = [b[0] for b in bounds]
    table.loc[used.index, "log10_k_cv_high"] = [b[1] for b in bounds]
    table.loc[used.index, "inside_interval"] = [lo <= v <= hi for (lo, hi), v in zip(bounds, y)]
    classes = [site_class(k, a) for k, a in zip(used["site_kind"], used["aromatic"])]
    outside = [{"id": i, "name": nm, "smiles": sm, "class": c, "log10_k": round(float(v), 3),
                "log10_k_cv": round(float(p), 3), "low": round(lo, 3), "high": round(hi, 3)}
               for i, nm, sm, c, v, p, (lo, hi) in zip(used["id"], used.get("name", used["id"]), used["smiles"],
                                                      classes, y, y_cv, bounds)
               if not lo <= v <= hi]
    ols = mdl.fit(X, y, features, "ols", T_ref)
    physical = -mdl.log10_units_per_kjmol(T_ref)
    summary = {"name": level.name, "level": level.label(), "barrier_kind": level.barrier,
               "n_reference": int(len(used)),
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
               "interval": model["interval"], "note": note,
               "interval_method": "leave-one-out residuals (scaled by leverage, conformal rank rule)",
               "interval_coverage_loo": round(coverage, 3), "outside_interval": outside,
               "feature_means": dict(zip(features, fit.mean)),
               "training_classes": sorted({site_class(k, a) for k, a in
                                           zip(used["site_kind"], used["aromatic"])})}
    if honest is not None:
        summary["nested_cv"] = {k: v for k, v in honest.items() if k != "predictions"}
        table.loc[used.index, "log10_k_nested_cv"] = honest["predictions"]
    keep = ["used", "level_reason", "log10_k_cv", "log10_k_cv_low", "log10_k_cv_high", "inside_interval",
            "log10_k_fit", "log10_k_nested_cv"]
    view = table[[c for c in keep if c in table]].rename(columns={"level_reason": "reason"})
    return fit, summary, view.add_prefix(f"{level.name}_")


def predict_sites(site_rows: pd.DataFrame, fit, settings, summary: dict, level) -> pd.DataFrame:
    """Predictions per site at `level` for the run's dienophile, with the applicability domain:
    every model descriptor within the reference set's span and leverage, the site's class
    (kind, aromatic or not) in the reference set, and a verified saddle. Adds the level's
    columns <level>_log10_k_pred, <level>_log10_k_low, ..., <level>_in_domain, <level>_domain_note."""
    view = at_level(site_rows, level)
    out = site_rows.copy()
    run = canonical(summary["run_dienophile"])
    for name, smiles in summary["dienophile_terms"].items():
        view[name] = 1.0 if canonical(smiles) == run else 0.0
    c_pred, c_lo, c_hi, c_lev, c_dom, c_note = (col(level, c) for c in PREDICTION_COLUMNS)
    # a corrected level's barrier carries the correction's own error: both halves add in quadrature
    extra = float(summary.get("correction", {}).get("half_width_log10", 0.0))
    for c in (c_pred, c_lo, c_hi, c_lev):
        out[c] = np.nan
    out[c_dom] = pd.Series([None] * len(out), dtype=object, index=out.index)
    out[c_note] = ""
    if not len(out):
        return out
    for f in fit.features:
        if f not in view:
            view[f] = np.nan
    ok = (view["site_status"] == "ok") & view[fit.features].notna().all(axis=1)
    if ok.any():
        X = view.loc[ok, fit.features].to_numpy(float)
        pred, lo, hi = mdl.predict(fit, X, settings["model"]["interval"])
        if extra:
            half = np.sqrt(((hi - lo) / 2.0) ** 2 + extra ** 2)
            lo, hi = pred - half, pred + half
        lev, _, reasons = mdl.domain(fit, X)
        out.loc[ok, c_pred] = pred
        out.loc[ok, c_lo] = lo
        out.loc[ok, c_hi] = hi
        out.loc[ok, c_lev] = lev
        classes = [site_class(k, a) for k, a in zip(view.loc[ok, "site_kind"], view.loc[ok, "aromatic"])]
        verified = view.loc[ok, "ts_verified"].fillna(False).astype(bool).tolist()
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


def _why_not(site: pd.Series, level, models: dict, settings) -> str:
    """Why `level` gave a site no prediction, in a chemist's words."""
    model = models.get(level.name, {})
    if "error" in model:
        return f"the {level.name} model could not be fitted: {model['error']}"
    status, message = site.get(col(level, "status"), ""), site.get(col(level, "message"), "")
    if status == "not_computed":
        levels = settings.ranking_levels
        nxt = levels[levels.index(level) + 1].name if level in levels[:-1] else "the next level"
        if isinstance(settings.rows, int):
            return f"not computed at {level.name}: not among the {settings.rows} best rows at {nxt} (ranking.rows)"
        return (f"not computed at {level.name}: its estimate could not reach the top "
                f"{settings['ranking']['contenders']['top']} or tier 1 (ranking.rows {settings.rows})")
    if isinstance(status, str) and status and status != "ok":
        return f"{level.name} gave no barrier ({status}: {message})"
    return f"{level.name} gave no prediction (a model descriptor is missing)"


def choose_level(sites: pd.DataFrame, settings, models: dict) -> pd.DataFrame:
    """One level per site: the first ranking level with a prediction for it, named in
    `level` (`level_method` says how that level computes its barrier) and, where an earlier
    level gave none, why in `level_note`. The chosen level's values go to the unprefixed
    columns log10_k_pred, log10_k_low, ..., barrier_kJmol, electronic_barrier_kJmol,
    reaction_free_energy_kJmol."""
    out = sites.copy()
    levels = settings.ranking_levels
    chosen = pd.Series("", index=out.index, dtype=object)
    for level in levels:
        if col(level, "log10_k_pred") in out:       # a level whose model could not be fitted has none
            chosen[(chosen == "") & out[col(level, "log10_k_pred")].notna()] = level.name
    for name in ROW_LEVEL_COLUMNS:
        values = pd.Series(np.nan, index=out.index, dtype=object)
        for level in levels:
            mask = chosen == level.name
            if mask.any() and col(level, name) in out:
                values[mask] = out.loc[mask, col(level, name)]
        out[name] = values.infer_objects() if name in ("in_domain", "domain_note") else values.astype(float)
    by_name = {lv.name: lv for lv in levels}
    out["level"] = chosen.where(chosen != "", None)
    out["barrier_kind"] = [by_name[c].barrier if c else None for c in chosen]
    out["level_method"] = [f"{by_name[c].label()}, {by_name[c].barrier.replace('_', ' ')} barrier"
                           + (" on GFN2-xTB structures" if by_name[c].program == "pyscf" else "") if c else None
                           for c in chosen]
    notes = []
    for idx, c in chosen.items():
        skipped = levels[:[lv.name for lv in levels].index(c)] if c else []
        notes.append("; ".join(f"ranked at {c}: " + _why_not(out.loc[idx], lv, models, settings) for lv in skipped))
    out["level_note"] = notes
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


RANKING_COLUMNS = ["rank", "id", "name", "level", "in_domain", "smiles", "status", "message", "domain_note",
                   "log10_k_pred", "log10_k_low", "log10_k_high", "barrier_kJmol", "barrier_kind",
                   "electronic_barrier_kJmol", "level_method",
                   "scis_penalty_kJmol", "reactive_fraction", "homo_eV", "lumo_eV", "gap_normal_eV",
                   "gap_inverse_eV", "demand", "regio_hint", "regio_ts", "orientation_gap_kJmol",
                   "face_preference", "face_gap_kJmol", "intrinsic_barrier_kJmol", "distortion_kJmol",
                   "dienophile_distortion_kJmol", "interaction_kJmol", "reaction_energy_kJmol",
                   "reaction_free_energy_kJmol", "may_revert", "reversal_note",
                   "model_barrier_kJmol", "contact_dispersion_kJmol", "ts_imag_cm1", "ts_verified", "best_site",
                   "site_kind", "aromatic", "n_sites", "dihedral_min_deg", "isomer_smiles", "n_isomers",
                   "structure_key", "transition_key", "n_gradients", "converged", "dienophile", "row"]
ROW_COLUMNS = ("rank", "id", "name", "smiles", "status", "message", "best_site", "n_sites", "n_isomers",
               "structure_key", "n_gradients", "converged", "row", "may_revert", "reversal_note")
BEST_SITE_COLUMNS = [c for c in RANKING_COLUMNS if c not in ROW_COLUMNS]


def ranking_columns(settings) -> list[str]:
    """ranking.csv's columns: what ranks each row, then each ranking level's view of it."""
    return RANKING_COLUMNS + [col(lv, c) for lv in settings.ranking_levels for c in LEVEL_VIEW_COLUMNS]


def _order(table: pd.DataFrame, column: str, eligible: pd.Series) -> pd.Series:
    """Ranks 1..n by `column`, highest first (input order breaks ties), where `eligible`."""
    order = table.loc[eligible].sort_values([column, "row"], ascending=[False, True]).index
    out = pd.Series(pd.NA, index=table.index, dtype="Int64")
    out.loc[order] = np.arange(1, len(order) + 1)
    return out


def _level_view(ok: pd.DataFrame, level) -> dict:
    """A row's view at one level: its best site there (highest prediction at that level)."""
    pred = col(level, "log10_k_pred")
    if pred not in ok or not ok[pred].notna().any():
        first = ok.iloc[0] if len(ok) else {}
        return {col(level, c): first.get(col(level, c), np.nan) for c in ("status", "message")}
    best = ok.loc[ok[pred].idxmax()]
    # a computing level's cycloadduct too (a level that estimates or places the atoms has none)
    extra = [c for c in ("reaction_free_energy_kJmol",) if col(level, c) in best.index]
    return {col(level, c): best.get(col(level, c), np.nan) for c in LEVEL_VIEW_COLUMNS + tuple(extra) if c != "rank"}


def rank_table(records: list[dict], computed: Computed, sites: pd.DataFrame, settings) -> pd.DataFrame:
    """One row per input record, in input order, best isomer and site of each at the row's
    level (see choose_level); <level>_rank ranks the same rows at each ranking level alone."""
    columns = ranking_columns(settings)
    rows = []
    for rec in records:
        row = {"row": rec["row"], "id": rec["id"], "smiles": rec["smiles"], "status": rec["status"],
               "message": rec["message"], "n_isomers": len(rec["isomers"])}
        for k, v in rec.get("extra", {}).items():
            row[k if k not in columns or k == "name" else f"input_{k}"] = v
        if rec["status"] == "ok":
            mine = sites[sites["row"] == rec["row"]] if len(sites) else sites
            ok = mine[mine["site_status"] == "ok"] if len(mine) else mine
            if len(ok) and ok["log10_k_pred"].notna().any():
                best = ok.loc[ok["log10_k_pred"].idxmax()]
                res = computed.structures[best["key"]]
                row.update({c: best[c] for c in BEST_SITE_COLUMNS if c in best})
                row.update({"best_site": best["site"], "n_sites": int((mine["key"] == best["key"]).sum()),
                            "structure_key": best["key"], "n_gradients": res.get("n_gradients"),
                            "converged": res.get("converged")})
                for level in settings.ranking_levels:
                    row.update(_level_view(ok, level))
                notes = [row["message"], res.get("message", ""), best.get("level_note", "")]
                if best["ts_status"] != "ok":
                    row["status"] = best["ts_status"]
                    notes.append(f"transition structure: {best.get('ts_message', '')}")
                row["message"] = "; ".join(filter(None, notes))
            else:
                row.update(_unranked(rec, computed, ok))
        rows.append(row)
    table = pd.DataFrame(rows)
    for c in columns:
        if c not in table:
            table[c] = np.nan
    labels = {lv.name: lv.label() for lv in settings.ranking_levels}
    flags = [reversal(dg, float(settings["temperature_K"]), labels.get(lv, "")) if isinstance(lv, str)
             else (None, "") for dg, lv in zip(table["reaction_free_energy_kJmol"], table["level"])]
    table["may_revert"] = pd.Series([f for f, _ in flags], index=table.index, dtype=object)
    table["reversal_note"] = [n for _, n in flags]
    ranked = table["status"].isin(RANKED_STATUSES) & table["log10_k_pred"].notna()
    table["rank"] = _order(table, "log10_k_pred", ranked)
    for level in settings.ranking_levels:
        pred = table[col(level, "log10_k_pred")]
        table[col(level, "rank")] = _order(table, col(level, "log10_k_pred"), ranked & pred.notna())
    return table[columns + [c for c in table.columns if c not in columns]]


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


def ranking_model(summary: dict) -> dict:
    """The model of the level that ranks (model.json's levels[ranking_level]); {} when none fitted."""
    return summary.get("levels", {}).get(summary.get("ranking_level") or "", {})


def yardstick(table: pd.DataFrame, ref_table: pd.DataFrame, summary: dict,
              smiles: str = YARDSTICK_SMILES) -> tuple[dict, str]:
    """One diene's log10 k on the reference scale with the run's dienophile, per ranking level
    ({level name: log10 k}), and where it came from: its measured value where the reference
    set has it with the run's dienophile (the same at every level), else the model's value for
    a library row that is that diene, else for its reference row. ({}, why) when none."""
    bd = _canonical_or_none(smiles)
    levels = summary.get("ranking_levels", [])
    run_dph = canonical(summary.get("run_dienophile", ""))
    ref = ref_table[(ref_table["smiles"].map(_canonical_or_none) == bd)
                    & (ref_table["dienophile_smiles"].map(_canonical_or_none) == run_dph)] if len(ref_table) else []
    if len(ref) and np.isfinite(ref.iloc[0]["log10_k"]):
        return {lv: float(ref.iloc[0]["log10_k"]) for lv in levels}, f"measured, reference row {ref.iloc[0]['id']}"
    lib = table[table["rank"].notna() & (table["smiles"].map(_canonical_or_none) == bd)]
    if len(lib):
        r = lib.iloc[0]
        out = {lv: float(r[col(lv, "log10_k_pred")]) for lv in levels if pd.notna(r.get(col(lv, "log10_k_pred")))}
        return out, f"predicted, library row {r['id']}"
    return {}, f"{smiles} was not computed with this dienophile: add it to the library to get half-lives"


def _term_name(feature: str) -> str:
    """'barrier_kJmol' -> 'term_barrier_log10k'; every dienophile indicator -> 'term_dienophile_log10k'."""
    if feature.startswith("dienophile["):
        return "term_dienophile_log10k"
    for unit in ("_kJmol", "_eV", "_A", "_deg", "_cm1"):
        if feature.endswith(unit):
            feature = feature[: -len(unit)]
    return f"term_{feature}_log10k"


def model_terms(table: pd.DataFrame, summary: dict) -> pd.DataFrame:
    """Each model term's share of a ranked row's log10_k_pred, at the row's level:
    baseline_log10k (the prediction for the average reference diene) plus one term_<x>_log10k
    per descriptor, coefficient x (value - reference mean), which add up to log10_k_pred;
    model_terms says the same in words."""
    out = pd.DataFrame(index=table.index)
    out["baseline_log10k"] = np.nan
    texts = pd.Series("", index=table.index, dtype=object)
    words = {}                          # term column -> the descriptor in words
    for name, model in summary.get("levels", {}).items():
        if "coefficients" not in model:
            continue
        mask = (table["level"] == name) & table["log10_k_pred"].notna()
        if not mask.any():
            continue
        coef, means = model["coefficients"], model.get("feature_means", {})
        run = canonical(model.get("run_dienophile", ""))
        base = model["intercept"] + sum(coef[f] * means[f] for f in coef)
        out.loc[mask, "baseline_log10k"] = base
        for f, c in coef.items():
            if f.startswith("dienophile["):
                x = pd.Series(1.0 if canonical(model["dienophile_terms"][f]) == run else 0.0, index=table.index)
            else:
                x = table[f].astype(float)
            term = _term_name(f)
            words[term] = "dienophile" if f.startswith("dienophile[") else mdl.describe(f)
            if term not in out:
                out[term] = np.nan
            out.loc[mask, term] = out.loc[mask, term].fillna(0.0) + c * (x[mask] - means[f])
    terms = [c for c in out.columns if c.startswith("term_")]
    for idx in out.index[out["baseline_log10k"].notna()]:
        parts = [f"{words[t]} {out.at[idx, t]:+.2f}" for t in terms if pd.notna(out.at[idx, t])]
        texts[idx] = ", ".join(parts) + f" (log10 units against the average reference diene, {out.at[idx, 'baseline_log10k']:+.2f})"
    out["model_terms"] = texts
    return out


def calibration_notes(table: pd.DataFrame, summary: dict, ref_table: pd.DataFrame) -> pd.DataFrame:
    """reference_log10_k: a row's measured value on the scale where the reference set has the
    diene with the run's dienophile; calibration_note: whether that value lies inside the row's
    interval, and, for every row whose class holds a reference diene that lies outside its own
    leave-one-out interval, which one and in which direction."""
    out = pd.DataFrame({"reference_log10_k": np.nan, "calibration_note": ""}, index=table.index)
    run = canonical(summary.get("run_dienophile", ""))
    measured = {}
    if len(ref_table):
        for _, r in ref_table.iterrows():
            if _canonical_or_none(r["dienophile_smiles"]) == run and np.isfinite(r["log10_k"]):
                measured.setdefault(_canonical_or_none(r["smiles"]), (float(r["log10_k"]), r["id"]))
    levels = summary.get("levels", {})
    for idx, r in table[table["log10_k_pred"].notna()].iterrows():
        notes = []
        hit = measured.get(_canonical_or_none(r["smiles"]))
        if hit:
            v, rid = hit
            out.at[idx, "reference_log10_k"] = v
            inside = r["log10_k_low"] <= v <= r["log10_k_high"]
            notes.append(f"measured {v:.2f} ({rid}) {'inside' if inside else 'outside'} this interval"
                         + ("" if inside else (": the model puts it too low" if v > r["log10_k_high"]
                                               else ": the model puts it too high")))
            own = [m for m in levels.get(str(r["level"]), {}).get("outside_interval", []) if m["id"] == rid]
            if own:
                notes.append(f"left out of the fit, the model misses it: leave-one-out interval {own[0]['low']:.2f} "
                             f"to {own[0]['high']:.2f}")
        cls = site_class(r["site_kind"], r.get("aromatic")) if isinstance(r.get("site_kind"), str) else None
        for miss in levels.get(str(r["level"]), {}).get("outside_interval", []):
            if miss["class"] == cls and not (hit and _canonical_or_none(miss["smiles"]) == _canonical_or_none(r["smiles"])):
                way = "above" if miss["log10_k"] > miss["high"] else "below"
                notes.append(f"{miss['name'] or miss['id']}, a reference diene of this class ({cls}), lies {way} its "
                             f"own interval (measured {miss['log10_k']:.2f}, interval {miss['low']:.2f} to "
                             f"{miss['high']:.2f}): this class may be predicted too {'low' if way == 'above' else 'high'}")
        out.at[idx, "calibration_note"] = "; ".join(notes)
    return out


def bench_view(table: pd.DataFrame, summary: dict, ref_table: pd.DataFrame,
               anchor: dict | None = None) -> tuple[pd.DataFrame, dict]:
    """What a chemist reads first, added to the ranking table:

    - times_faster_than_butadiene: 10^log10_k_pred. log10_k_pred is on the reference set's
      scale (log10 of k relative to butadiene's measured k with the same dienophile), so the two
      say the same thing; butadiene's own row shows its prediction, not 1;
    - the model's terms per row (see `model_terms`) and calibration notes (`calibration_notes`);
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
    out["times_faster_than_butadiene"] = 10.0 ** out["log10_k_pred"].astype(float)
    out = pd.concat([out, model_terms(out, summary), calibration_notes(out, summary, ref_table)], axis=1)
    out["chemistry_note"] = out["smiles"].map(chemistry_note)
    model = ranking_model(summary)
    rmse = float(model.get("cv_rmse_log10k", np.nan))
    width = math.sqrt(2.0) * rmse
    out["tier"] = pd.Series(pd.NA, index=out.index, dtype="Int64")
    ranked = out[out["rank"].notna()].sort_values("rank")
    tier, top = 0, None
    for idx, value in ranked["log10_k_pred"].items():
        if top is None or not np.isfinite(width) or value < top - width:
            tier, top = tier + 1, value
        out.loc[idx, "tier"] = tier
    run_dph = canonical(summary.get("run_dienophile", ""))
    fitted = {canonical(d) for d in [model.get("base_dienophile", "")]
              + list(model.get("dienophile_terms", {}).values()) if d}
    in_ref = run_dph in fitted
    out["dienophile_in_reference"] = in_ref
    if not in_ref:
        transfer = (f"dienophile not in the reference set: log10 k and interval transferred from "
                    f"{model.get('base_dienophile', 'the reference dienophile')} (order more trustworthy "
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
                ("times_faster_than_butadiene", "log10_k_high"), ("reference_log10_k", "times_faster_than_butadiene"),
                ("model_terms", "reference_log10_k"), ("calibration_note", "domain_note"),
                ("chemistry_note", "message"),
                ("baseline_log10k", "level_method")]
    after = "baseline_log10k"
    for term in [c for c in out.columns if c.startswith("term_")]:
        new_cols.append((term, after))
        after = term
    if half_life["given"]:
        new_cols.append(("half_life_h", "times_faster_than_butadiene"))
    cols = list(out.columns)
    for new, after in new_cols:
        cols.remove(new)
        cols.insert(cols.index(after) + 1 if after in cols else len(cols), new)
    out = out[cols]
    pairwise = float(model.get("cv_pairwise_accuracy", np.nan))
    extra = {"bench": {
        "yardstick": {"smiles": YARDSTICK_SMILES, "log10_k": yard, "source": source},
        "tier_width_log10": round(width, 3) if np.isfinite(width) else None,
        "tiers": int(out["tier"].max()) if out["tier"].notna().any() else 0,
        "pairs_right_of_10": round(10 * pairwise) if np.isfinite(pairwise) else None,
        "typical_factor": round(10 ** rmse, 1) if np.isfinite(rmse) else None,
        "interval": model.get("interval"), "interval_coverage_loo": model.get("interval_coverage_loo"),
        "dienophile_in_reference": in_ref, "half_life": half_life}}
    return out, extra
