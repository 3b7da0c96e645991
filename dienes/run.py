"""The steps of a run, each one call for a workflow rule:
prepare (read the library once) -> compute (one structure) -> dienophile ->
rank (model, ranking, outputs)."""

from __future__ import annotations

import hashlib
import logging
from pathlib import Path

from . import backends, library, outputs, pipeline, ranking
from . import settings as cfg

log = logging.getLogger("dienes")


def _sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _record_dict(rec: library.Record, structure_settings: dict) -> dict:
    return {"row": rec.row, "id": rec.id, "smiles": rec.smiles, "extra": rec.extra,
            "status": rec.status, "message": rec.message, "std_smiles": rec.std_smiles,
            "isomers": [{"smiles": i.smiles, "inchikey": i.inchikey,
                         "key": cfg.structure_key(i.inchikey, structure_settings)}
                        for i in rec.isomers]}


def prepare(config: dict, manifest_path) -> dict:
    """Read and standardise the library and the reference set; write the manifest
    that lists every record and every structure to compute."""
    config = cfg.validate(config)
    backends.require(config["backend"])
    st = cfg.structure_settings(config)
    limits = library.Limits(**config["limits"])
    records = [_record_dict(r, st) for r in library.read_library(config["library"], limits)]
    reference = [_record_dict(r, st) for r in library.read_library(config["reference"], limits)]
    structures = {}
    for rec in records + reference:
        for iso in rec["isomers"]:
            structures[iso["key"]] = iso["smiles"]
    manifest = {"library": str(config["library"]), "library_sha256": _sha256(config["library"]),
                "reference": str(config["reference"]), "reference_sha256": _sha256(config["reference"]),
                "settings": st, "seed": config["seed"], "records": records, "reference_records": reference,
                "structures": dict(sorted(structures.items()))}
    pipeline.write_json(manifest, manifest_path)
    return manifest


def compute(smiles: str, key: str, config: dict, out_path) -> dict:
    st = cfg.structure_settings(cfg.validate(config))
    result = pipeline.compute_structure(smiles, st, key=key)
    pipeline.write_json(result, out_path)
    return result


def dienophile(config: dict, smiles: str, out_path) -> dict:
    config = cfg.validate(config)
    result = pipeline.compute_dienophile(smiles, cfg.structure_settings(config))
    pipeline.write_json(result, out_path)
    return result


def strain(config: dict, structure_path, dienophile_path, out_path) -> dict:
    from .strain import strain_for_structure
    config = cfg.validate(config)
    st = cfg.structure_settings(config)
    result = strain_for_structure(pipeline.read_json(structure_path), pipeline.read_json(dienophile_path),
                                  pipeline.backend_settings(st), config["strain"]["forming_bond_A"])
    pipeline.write_json(result, out_path)
    return result


def load_strain(manifest: dict, strain_dir, shash: str) -> dict:
    out = {}
    for key in manifest["structures"]:
        path = Path(strain_dir) / f"{key}__{shash}.json"
        try:
            out[key] = pipeline.read_json(path)
        except (FileNotFoundError, ValueError):
            out[key] = {"status": "missing", "sites": {}}
    return out


def load_results(manifest: dict, result_dir) -> dict:
    """Per-structure results by key; a missing or unreadable file becomes a status."""
    out = {}
    for key in manifest["structures"]:
        path = Path(result_dir) / f"{key}.json"
        try:
            out[key] = pipeline.read_json(path)
        except FileNotFoundError:
            out[key] = {"status": "missing", "message": f"no result file {path.name}"}
        except ValueError as exc:
            out[key] = {"status": "corrupt_result", "message": f"{path.name} unreadable: {exc}"}
    return out


def _rank_tables(manifest: dict, results: dict, dph: dict, config: dict, st_res):
    """Fit on the reference records, predict every site, pick each row's best:
    (ranking table, sites table, model summary, reference table)."""
    fit, summary, ref_table = ranking.fit_reference(manifest["reference_records"], results, dph, config,
                                                    st_res)
    sites = ranking.site_table(manifest["records"], results, dph, st_res)
    if len(sites):
        sites = ranking.predict_sites(sites, fit, config, summary["training_classes"])
    table = ranking.rank_table(manifest["records"], results, sites)
    return table, sites, summary, ref_table


def rank(config: dict, manifest_path, result_dir, dienophile_path, out_dir, strain_dir=None) -> list[str]:
    config = cfg.validate(config)
    manifest = pipeline.read_json(manifest_path)
    results = load_results(manifest, result_dir)
    dph = pipeline.read_json(dienophile_path)
    st_res = (load_strain(manifest, strain_dir, cfg.strain_hash(config))
              if config["strain"]["enabled"] and strain_dir else None)
    table, sites, summary, ref_table = _rank_tables(manifest, results, dph, config, st_res)
    out_dir = Path(out_dir)
    outputs.write_table(table, out_dir / "ranking.csv")
    outputs.write_table(sites, out_dir / "sites.csv")
    outputs.write_table(ref_table, out_dir / "reference_fit.csv")
    summary |= {"reference_file": manifest["reference"], "reference_sha256": manifest["reference_sha256"],
                "library_file": manifest["library"], "library_sha256": manifest["library_sha256"],
                "seed": manifest["seed"], "settings": manifest["settings"],
                "dienophile": {k: dph[k] for k in ("smiles", "homo_eV", "lumo_eV")}}
    outputs.write_model(summary, out_dir / "model.json")
    return outputs.summary_lines(table, out_dir)


def rank_in_process(config: dict, cache_dir=None, reference_ids=None):
    """Rank config['library'] without Snakemake, one structure after another.

    Per-structure results are read from / written to `cache_dir` when given
    (same file names as the workflow). `reference_ids`, when given, keeps only
    those reference rows in the fit (for leave-out checks). Returns
    (ranking DataFrame, sites DataFrame, model summary dict).
    """
    import tempfile
    config = cfg.validate(config)
    tmp = tempfile.TemporaryDirectory()
    cache = Path(cache_dir) if cache_dir else Path(tmp.name)
    manifest = prepare(config, cache / "manifest.json")
    if reference_ids is not None:
        manifest["reference_records"] = [r for r in manifest["reference_records"]
                                         if r["id"] in set(reference_ids)]
    st = cfg.structure_settings(config)
    for key, smiles in manifest["structures"].items():
        path = cache / "structures" / f"{key}.json"
        if not path.is_file():
            pipeline.write_json(pipeline.compute_structure(smiles, st, key=key), path)
    dph_paths = {}
    for smiles in {config["dienophile"], cfg.strain_dienophile(config)}:
        dph_paths[smiles] = cache / f"dienophile_{cfg.dienophile_hash(config, smiles)}.json"
        if not dph_paths[smiles].is_file():
            dienophile(config, smiles, dph_paths[smiles])
    st_res = None
    if config["strain"]["enabled"]:
        shash = cfg.strain_hash(config)
        for key in manifest["structures"]:
            path = cache / "strain" / f"{key}__{shash}.json"
            if not path.is_file():
                strain(config, cache / "structures" / f"{key}.json",
                       dph_paths[cfg.strain_dienophile(config)], path)
        st_res = load_strain(manifest, cache / "strain", shash)
    results = load_results(manifest, cache / "structures")
    dph = pipeline.read_json(dph_paths[config["dienophile"]])
    table, sites, summary, _ = _rank_tables(manifest, results, dph, config, st_res)
    tmp.cleanup()
    return table, sites, summary


def profiles_for_report(table, results: dict, config: dict, cache_dir, n: int = 3) -> list:
    """Relaxed torsion profiles (15 deg steps) of the top and bottom ranked dienes
    whose best site can rotate; cached per structure and site."""
    import numpy as np
    from .backends import Molecule
    from .torsion import torsion_profile
    st = cfg.structure_settings(config)
    ranked = table[table["rank"].notna() & table["site_kind"].isin(["acyclic", "ring_other"])]
    ranked = ranked.sort_values("rank")
    picks = list(ranked.head(n).itertuples()) + [r for r in ranked.tail(n).itertuples()
                                                 if r.rank not in set(ranked.head(n)["rank"])]
    out = []
    for r in picks:
        res = results[r.structure_key]
        path = Path(cache_dir) / f"{r.structure_key}__{r.best_site}.json"
        if path.is_file():
            prof = pipeline.read_json(path)
        else:
            atoms = [int(x) - 1 for x in str(r.best_site).split("-")]
            geo = res["geometry"]
            start = geo["planar_s_cis_A"].get(r.best_site, geo["minimum_A"])
            a, e = torsion_profile(geo["numbers"], np.asarray(start),
                                   Molecule(geo["numbers"], pipeline.backend_settings(st)), atoms,
                                   step_deg=15.0)
            prof = {"dihedral_deg": a.tolist(), "energy_kJmol": np.round(e, 3).tolist()}
            pipeline.write_json(prof, path)
        out.append((f"#{int(r.rank)} {r.id}", np.array(prof["dihedral_deg"]), np.array(prof["energy_kJmol"])))
    return out


def report(config: dict, manifest_path, out_dir) -> dict:
    """report.html and dienes.sdf from a finished ranking."""
    import pandas as pd
    from . import report as rpt
    config = cfg.validate(config)
    out_dir = Path(out_dir)
    manifest = pipeline.read_json(manifest_path)
    results = load_results(manifest, out_dir / "structures")
    table = pd.read_csv(out_dir / "ranking.csv", dtype={"id": str, "smiles": str, "message": str},
                        keep_default_na=False, na_values=[""])
    table["id"] = table["id"].fillna("").map(lambda s: s[1:] if s.startswith("'") else s)
    table["smiles"] = table["smiles"].fillna("")
    table["message"] = table["message"].fillna("")
    sites = pd.read_csv(out_dir / "sites.csv") if (out_dir / "sites.csv").stat().st_size > 1 else pd.DataFrame()
    reference = pd.read_csv(out_dir / "reference_fit.csv")
    model = pipeline.read_json(out_dir / "model.json")
    profiles = profiles_for_report(table, results, config, out_dir / "profiles")
    versions = next((r.get("versions") for r in results.values() if r.get("versions")), {})
    text = rpt.build(table, sites, model, reference, manifest["settings"] | {"seed": manifest["seed"]},
                     versions, profiles, config["dienophile"])
    rpt.write(out_dir / "report.html", text)
    n_sdf = outputs.write_sdf(table, results, out_dir / "dienes.sdf")
    return {"report": str(out_dir / "report.html"), "sdf": str(out_dir / "dienes.sdf"), "sdf_records": n_sdf}
