"""From per-structure results to the ranked table: features per site, the
reactivity model on the reference set, predictions, best site and isomer,
rank. Pure data in, data out; files are written by :mod:`dienes.outputs`."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from rdkit import Chem

from . import model as mdl
from .orbitals import regio_hint



STRAIN_COLUMNS = ("distortion_kJmol", "dienophile_distortion_kJmol", "interaction_kJmol",
                  "model_barrier_kJmol")


def site_features(site: dict, dienophile: dict, strain: dict | None = None) -> dict:
    """Model features of one computed site (units in the names); `strain` is the
    site's entry of a strain result, when the step ran."""
    normal = dienophile["lumo_eV"] - site["homo_eV"]
    inverse = site["lumo_eV"] - dienophile["homo_eV"]
    rf = max(site["reactive_fraction"], 1e-9)
    out = {"scis_penalty_kJmol": site["scis_penalty_kJmol"], "homo_eV": site["homo_eV"],
           "lumo_eV": site["lumo_eV"], "gap_normal_eV": normal, "gap_inverse_eV": inverse,
           "demand": "normal" if normal <= inverse else "inverse",
           "reactive_log10_fraction": math.log10(rf)}
    for col in STRAIN_COLUMNS:
        out[col] = strain[col] if strain else float("nan")
    out["ts_approach"] = strain["approach"] if strain else ""
    return out


def _strain_of(strain: dict | None, key: str, label: str) -> dict | None:
    if not strain:
        return None
    return strain.get(key, {}).get("sites", {}).get(label)


def _usable_sites(result: dict) -> list[dict]:
    return [s for s in result.get("sites", []) if s["status"] == "ok"]


def reference_site(result: dict) -> dict | None:
    """The site a reference diene is fitted with: lowest penalty, then highest HOMO."""
    sites = _usable_sites(result)
    if not sites:
        return None
    return min(sites, key=lambda s: (round(s["scis_penalty_kJmol"], 3), -s["homo_eV"]))


def canonical(smiles: str) -> str:
    m = Chem.MolFromSmiles(smiles)
    return Chem.MolToSmiles(m) if m is not None else smiles


def fit_reference(reference: list[dict], results: dict, dienophile: dict, config: dict,
                  strain: dict | None = None):
    """Fit the model on the reference records.

    reference: manifest records of the reference file (with extra columns
    log10_k, dienophile_smiles, temperature_K). Returns (fit, summary dict,
    reference table DataFrame).
    """
    features = [f for f in config["model"]["features"]
                if config["strain"]["enabled"] or f not in STRAIN_COLUMNS]
    run_dienophile = canonical(config["dienophile"])
    rows = []
    for rec in reference:
        row = {"id": rec["id"], "smiles": rec["smiles"], "used": False, "reason": ""}
        try:
            row["log10_k"] = float(rec["extra"].get("log10_k", "nan"))
        except ValueError:
            row["log10_k"] = float("nan")
        row["dienophile_smiles"] = rec["extra"].get("dienophile_smiles", "")
        row["temperature_K"] = float(rec["extra"].get("temperature_K") or config["temperature_K"])
        row["provenance"] = rec["extra"].get("provenance", "")
        if rec["status"] != "ok" or not rec["isomers"]:
            row["reason"] = f"{rec['status']}: {rec['message']}"
        elif not np.isfinite(row["log10_k"]):
            row["reason"] = "log10_k missing or not a number"
        else:
            key = rec["isomers"][0]["key"]
            res = results.get(key, {})
            site = reference_site(res) if res.get("status") == "ok" else None
            if site is None:
                row["reason"] = f"structure {res.get('status', 'missing')}: {res.get('message', '')}"
            else:
                row.update(site_features(site, dienophile, _strain_of(strain, key, site["label"])))
                row["site_kind"], row["aromatic"] = site["kind"], bool(site["aromatic"])
                missing = [f for f in features if not np.isfinite(row[f])]
                row["used"] = not missing
                row["reason"] = f"no value for {missing}" if missing else ""
        rows.append(row)
    table = pd.DataFrame(rows)
    used = table[table["used"]].copy()
    if len(used) < len(features) + 3:
        raise ValueError(f"only {len(used)} usable reference dienes; the model needs at least "
                         f"{len(features) + 3} (see results/reference_fit.csv for the reasons)")
    used["dienophile_canonical"] = used["dienophile_smiles"].map(canonical)
    counts = used["dienophile_canonical"].value_counts()
    base = run_dienophile if run_dienophile in counts.index else counts.index[0]
    note = "" if base == run_dienophile else (
        f"the run's dienophile is not in the reference set: predictions are on the scale of {base}")
    terms = [d for d in counts.index if d != base]
    term_names = [f"dienophile[{d}]" for d in terms]
    for d, name in zip(terms, term_names):
        used[name] = (used["dienophile_canonical"] == d).astype(float)
    all_features = features + term_names
    T_ref = float(used.loc[used["dienophile_canonical"] == base, "temperature_K"].median())
    X, y = used[all_features].to_numpy(float), used["log10_k"].to_numpy(float)
    fit, comparison, y_cv = mdl.select(X, y, all_features, T_ref)
    table["in_training_set"] = table["used"]
    table.loc[used.index, "log10_k_cv"] = y_cv
    table.loc[used.index, "log10_k_fit"] = mdl.predict(fit, X)[0]
    ols = mdl.fit(X, y, all_features, "ols", T_ref)
    summary = {"n_reference": int(len(used)), "features": all_features,
               "dienophile_terms": dict(zip(term_names, terms)), "base_dienophile": base,
               "variant": fit.variant, "comparison": comparison,
               **comparison[fit.variant],
               "coefficients": dict(zip(all_features, fit.coef_per_unit)),
               "coefficient_se": dict(zip(all_features, fit.coef_se)),
               "intercept": fit.intercept, "residual_sd_log10k": fit.resid_sd,
               "reference_temperature_K": T_ref,
               "physical_penalty_coefficient": -mdl.log10_units_per_kjmol(T_ref),
               "interval": config["model"]["interval"], "note": note,
               "training_classes": sorted({site_class(k, a) for k, a in
                                           zip(used["site_kind"], used["aromatic"])})}
    if mdl.PENALTY in all_features:
        j = all_features.index(mdl.PENALTY)
        summary["ols_penalty_coefficient"] = ols.coef_per_unit[j]
        summary["ols_penalty_coefficient_se"] = ols.coef_se[j]
    return fit, summary, table


def site_class(kind: str, aromatic) -> str:
    """The categorical part of the applicability domain: site kind and aromaticity."""
    return f"{kind}{' aromatic' if bool(aromatic) else ''}"


def predict_sites(site_rows: pd.DataFrame, fit, config: dict,
                  training_classes: list[str] | None = None) -> pd.DataFrame:
    """Predictions per site. A site is in the domain when its leverage is within
    3p/n and its class (kind, aromatic or not) occurs in the reference set."""
    out = site_rows.copy()
    for name in fit.features:
        if name.startswith("dienophile["):
            out[name] = 0.0  # predictions for the base dienophile
    ok = (out["site_status"] == "ok") & out[fit.features].notna().all(axis=1)
    for col in ("log10_k_pred", "log10_k_low", "log10_k_high", "leverage"):
        out[col] = np.nan
    out["in_domain"] = pd.Series([None] * len(out), dtype=object)
    if ok.any():
        X = out.loc[ok, fit.features].to_numpy(float)
        pred, lo, hi, lev, dom = mdl.predict(fit, X, config["model"]["interval"])
        out.loc[ok, "log10_k_pred"] = pred
        out.loc[ok, "log10_k_low"] = lo
        out.loc[ok, "log10_k_high"] = hi
        out.loc[ok, "leverage"] = lev
        out["domain_note"] = ""
        classes = [site_class(k, a) for k, a in zip(out.loc[ok, "site_kind"], out.loc[ok, "aromatic"])]
        notes = []
        for d, c in zip(dom, classes):
            why = []
            if not d:
                why.append("descriptors beyond the reference set's range")
            if training_classes is not None and c not in training_classes:
                why.append(f"no reference diene of this class ({c})")
            notes.append("; ".join(why))
        out.loc[ok, "in_domain"] = [not n for n in notes]
        out.loc[ok, "domain_note"] = notes
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


def site_table(records: list[dict], results: dict, dienophile: dict,
               strain: dict | None = None) -> pd.DataFrame:
    """One row per (input row, isomer, site) that was computed."""
    rows = []
    for rec in records:
        if rec["status"] != "ok":
            continue
        for iso in rec["isomers"]:
            res = results.get(iso["key"], {"status": "missing", "message": "no result file"})
            for site in res.get("sites", []):
                row = {"row": rec["row"], "id": rec["id"], "isomer_smiles": iso["smiles"],
                       "key": iso["key"], "structure_status": res["status"],
                       "site": site["label"], "site_kind": site["kind"], "aromatic": site["aromatic"],
                       "site_status": site["status"], "reactive_fraction": site["reactive_fraction"],
                       "dihedral_min_deg": site["dihedral_min_deg"],
                       "homo_share": site["homo_share"]}
                if site["status"] == "ok":
                    row.update(site_features(site, dienophile,
                                             _strain_of(strain, iso["key"], site["label"])))
                    row["regio_hint"] = site_regio_hint(site, dienophile, row["demand"])
                else:
                    row.update({"scis_penalty_kJmol": np.nan, "homo_eV": site["homo_eV"],
                                "lumo_eV": site["lumo_eV"]})
                rows.append(row)
    return pd.DataFrame(rows)


RANKING_COLUMNS = ["rank", "id", "smiles", "status", "message", "log10_k_pred", "log10_k_low",
                   "log10_k_high", "in_domain", "scis_penalty_kJmol", "reactive_fraction",
                   "homo_eV", "lumo_eV", "gap_normal_eV", "gap_inverse_eV", "demand", "regio_hint",
                   "distortion_kJmol", "interaction_kJmol", "model_barrier_kJmol",
                   "best_site", "site_kind", "n_sites", "dihedral_min_deg", "isomer_smiles",
                   "n_isomers", "structure_key", "n_gradients", "converged", "row"]


def rank_table(records: list[dict], results: dict, sites: pd.DataFrame) -> pd.DataFrame:
    """One row per input record, in input order, best isomer and site of each."""
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
                res = results[best["key"]]
                row.update({c: best[c] for c in
                            ("log10_k_pred", "log10_k_low", "log10_k_high", "in_domain",
                             "scis_penalty_kJmol", "reactive_fraction", "homo_eV", "lumo_eV",
                             "gap_normal_eV", "gap_inverse_eV", "demand", "regio_hint",
                             "distortion_kJmol", "interaction_kJmol", "model_barrier_kJmol",
                             "site_kind", "dihedral_min_deg", "isomer_smiles")})
                row.update({"best_site": best["site"], "n_sites": int((mine["key"] == best["key"]).sum()),
                            "structure_key": best["key"], "n_gradients": res.get("n_gradients"),
                            "converged": res.get("converged")})
                extra = res.get("message", "")
                domain = best.get("domain_note", "")
                domain = f"extrapolation: {domain}" if isinstance(domain, str) and domain else ""
                row["message"] = "; ".join(filter(None, [row["message"], extra, domain]))
            else:
                statuses = [results.get(i["key"], {}).get("status", "missing") for i in rec["isomers"]]
                msgs = [results.get(i["key"], {}).get("message", "no result file") for i in rec["isomers"]]
                if "ok" in statuses and len(ok):
                    row["status"] = "not_predicted"
                    msgs = ["a model descriptor could not be computed for any site "
                            "(see results/sites.csv)"]
                else:
                    row["status"] = statuses[0] if statuses else "missing"
                row["message"] = "; ".join(filter(None, [row["message"]] + sorted(set(msgs))))
                if rec["isomers"]:
                    row["structure_key"] = rec["isomers"][0]["key"]
        rows.append(row)
    table = pd.DataFrame(rows)
    for col in RANKING_COLUMNS:
        if col not in table:
            table[col] = np.nan
    ranked = table["status"].eq("ok") & table["log10_k_pred"].notna()
    order = table.loc[ranked].sort_values(["log10_k_pred", "row"], ascending=[False, True]).index
    table["rank"] = pd.Series(dtype="Int64")
    table.loc[order, "rank"] = np.arange(1, len(order) + 1)
    table["rank"] = table["rank"].astype("Int64")
    return table[RANKING_COLUMNS + [c for c in table.columns if c not in RANKING_COLUMNS]]
