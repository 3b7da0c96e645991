"""The steps of a run, each one call for a workflow rule:

prepare (read the library once, list the work) -> structures (a batch of
conformer searches) -> dienophile -> transition states (a batch) ->
[shortlist -> refinement] -> rank -> report.

Per-structure results are files named by what they depend on and reused by
every later run; a batch job computes only the members whose file is absent.
Heavy libraries are imported inside the step that needs them, so a job pays
only for what it uses.
"""

from __future__ import annotations

import hashlib
import logging
import math
import os
import time
from pathlib import Path

from . import settings as cfg

log = logging.getLogger("dienes")

THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "GOTO_NUM_THREADS",
                    "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")
AUTO_JOBS = 16           # structures_per_job 'auto': new work is cut into about this many jobs
AUTO_MAX_PER_JOB = 25    # ... of at most this many structures


def pin_threads(n: int) -> None:
    """Hold every OpenMP/BLAS pool of this process to `n` threads (call before heavy imports)."""
    for var in THREAD_VARIABLES:
        os.environ[var] = str(int(n))


def _sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _json():
    from . import pipeline
    return pipeline.write_json, pipeline.read_json


# ---------------------------------------------------------------- file names

def structure_path(results, key: str) -> Path:
    return Path(results) / "structures" / f"{key}.json"


def dienophile_path(results, dhash: str) -> Path:
    return Path(results) / "dienophiles" / f"{dhash}.json"


def transition_path(results, stem: str) -> Path:
    return Path(results) / "transition" / f"{stem}.json"


def batch_path(results, stage: str, bid: str) -> Path:
    return Path(results) / "batches" / stage / f"{bid}.json"


def refined_path(results, stem: str, rhash: str) -> Path:
    """A (structure, dienophile) pair priced at the refined level `rhash`."""
    return Path(results) / "refined" / rhash / f"{stem}.json"


def refined_structure_path(results, key: str, rhash: str) -> Path:
    """A structure's minima priced at the refined level (shared by every dienophile)."""
    return Path(results) / "refined" / rhash / "structures" / f"{key}.json"


def refined_dienophile_path(results, dhash: str, rhash: str) -> Path:
    return Path(results) / "refined" / rhash / "dienophiles" / f"{dhash}.json"


# ------------------------------------------------------------------ prepare

def _record_dict(rec, config: dict, dienophile_smiles: str) -> dict:
    st = cfg.structure_settings(config)
    return {"row": rec.row, "id": rec.id, "smiles": rec.smiles, "extra": rec.extra,
            "status": rec.status, "message": rec.message, "std_smiles": rec.std_smiles,
            "dienophile": {"smiles": dienophile_smiles,
                           "dhash": cfg.dienophile_hash(config, dienophile_smiles),
                           "thash": cfg.transition_hash(config, dienophile_smiles)},
            "isomers": [{"smiles": i.smiles, "inchikey": i.inchikey,
                         "key": cfg.structure_key(i.inchikey, st)} for i in rec.isomers]}


def _batches(missing: list[str], per_job, stage: str) -> dict:
    """Cut missing work into jobs: {batch id: members}; the id names the members."""
    if not missing:
        return {}
    size = (max(1, min(AUTO_MAX_PER_JOB, math.ceil(len(missing) / AUTO_JOBS)))
            if per_job == "auto" else int(per_job))
    out = {}
    for k in range(0, len(missing), size):
        members = missing[k:k + size]
        bid = hashlib.sha256("\n".join([stage] + members).encode()).hexdigest()[:12]
        out[bid] = members
    return out


def _reference_dienophile(rec, config: dict) -> tuple[str, str]:
    """A reference row's dienophile, or the run's (with a note) when it has none or a bad one."""
    from .library import check_dienophile
    given = (rec.extra.get("dienophile_smiles") or "").strip()
    if not given:
        return config["dienophile"], "no dienophile_smiles: the run's dienophile is used"
    problem = check_dienophile(given)
    if problem:
        return "", f"dienophile_smiles: {problem}"
    return given, ""


def prepare(config: dict, manifest_path, results="results") -> dict:
    """Read and standardise the library and the reference set once; write the manifest
    that lists every record, every result file the run needs and, for what is not
    computed yet, the batches that will compute it."""
    from . import backends, library
    write_json, _ = _json()
    config = cfg.validate(config)
    backends.require(config["backend"])
    problem = library.check_dienophile(config["dienophile"])
    if problem:
        raise library.LibraryError(f"dienophile {config['dienophile']!r}: {problem}")
    limits = library.Limits(**config["limits"])
    records = [_record_dict(r, config, config["dienophile"])
               for r in library.read_library(config["library"], limits)]
    reference = []
    for r in library.read_library(config["reference"], limits, what="reference"):
        smiles, note = _reference_dienophile(r, config)
        if not smiles:
            r.fail("invalid_dienophile", note)
        elif note:
            r.message = "; ".join(filter(None, [r.message, note]))
        reference.append(_record_dict(r, config, smiles or config["dienophile"]))
    structures, dienophiles, transitions = {}, {}, {}
    for rec in records + reference:
        if rec["status"] != "ok":
            continue
        d = rec["dienophile"]
        dienophiles[d["dhash"]] = d["smiles"]
        for iso in rec["isomers"]:
            structures[iso["key"]] = iso["smiles"]
            transitions[f"{iso['key']}__{d['thash']}"] = {"key": iso["key"], "dhash": d["dhash"]}
    per_job = config["jobs"]["structures_per_job"]
    missing_s = [k for k in sorted(structures) if not structure_path(results, k).is_file()]
    s_batches = _batches(missing_s, per_job, "structures")
    producer = {k: bid for bid, members in s_batches.items() for k in members}
    missing_t = [t for t in sorted(transitions) if not transition_path(results, t).is_file()]
    t_batches = {bid: {"members": members,
                       "needs": sorted({producer[transitions[t]["key"]] for t in members
                                        if transitions[t]["key"] in producer}),
                       "dienophiles": sorted({transitions[t]["dhash"] for t in members})}
                 for bid, members in _batches(missing_t, per_job, "transition").items()}
    manifest = {"library": str(config["library"]), "library_sha256": _sha256(config["library"]),
                "reference": str(config["reference"]), "reference_sha256": _sha256(config["reference"]),
                "settings": cfg.structure_settings(config), "seed": config["seed"],
                "run_dienophile": {"smiles": config["dienophile"],
                                   "dhash": cfg.dienophile_hash(config, config["dienophile"]),
                                   "thash": cfg.transition_hash(config, config["dienophile"])},
                "records": records, "reference_records": reference,
                "structures": dict(sorted(structures.items())), "dienophiles": dienophiles,
                "transitions": dict(sorted(transitions.items())),
                "batches": {"structures": s_batches, "transition": t_batches}}
    rows = config["refine"]["rows"]
    if rows == "all":
        manifest["batches"]["refine"] = refine_batches(manifest, config, refined_pairs(manifest, config), results)
    manifest["refine"] = {"rows": rows, "rhash": cfg.refine_hash(config) if rows != "none" else None}
    write_json(manifest, manifest_path)
    return manifest


def stale_manifest(manifest_path, results="results") -> str:
    """Why an existing manifest no longer describes the files ('' when it does): a result
    file it counts as done has gone (deleted, or moved aside as unreadable)."""
    import json
    try:
        manifest = json.loads(Path(manifest_path).read_text())
    except (OSError, ValueError):
        return ""
    pending = {s for stage in manifest.get("batches", {}).values() for bid, b in stage.items()
               for s in (b["members"] if isinstance(b, dict) else b)}
    for key in manifest.get("structures", {}):
        if key not in pending and not structure_path(results, key).is_file():
            return f"result {key} is missing"
    for stem in manifest.get("transitions", {}):
        if stem not in pending and not transition_path(results, stem).is_file():
            return f"transition result {stem} is missing"
    return ""


def drop_stale_batches(results="results") -> list[Path]:
    """Remove batch summaries that claim a member whose result file is gone (deleted, or
    moved aside as unreadable): the batch then runs again and recomputes just that member."""
    import json
    dropped = []
    for stage, where in (("structures", structure_path), ("transition", transition_path),
                         ("refine", refined_path)):
        for flag in sorted((Path(results) / "batches" / stage).glob("*.json")):
            try:
                summary = json.loads(flag.read_text())
                names = [m.get("key") or m.get("stem") for m in summary["members"]]
                extra = (summary["rhash"],) if stage == "refine" else ()
            except (OSError, ValueError, KeyError, AttributeError):
                names, extra = [None], ()
            if any(n is None or not where(results, n, *extra).is_file() for n in names):
                flag.unlink(missing_ok=True)
                dropped.append(flag)
    return dropped


# ------------------------------------------------------------ per structure

def _batch_summary(stage: str, bid: str, done: list[dict], t0: float) -> dict:
    return {"stage": stage, "batch": bid, "pid": os.getpid(),
            "threads": os.environ.get("OMP_NUM_THREADS", ""), "members": done,
            "n_computed": sum(1 for d in done if d["computed"]),
            "wall_time_s": round(time.perf_counter() - t0, 3)}


def compute_structures(config: dict, manifest_path, bid: str, out_path, results="results") -> dict:
    """Conformer search and s-cis analysis of one batch of structures."""
    from .pipeline import compute_structure
    write_json, read_json = _json()
    t0 = time.perf_counter()
    config = cfg.validate(config)
    st = cfg.structure_settings(config)
    manifest = read_json(manifest_path)
    done = []
    for key in manifest["batches"]["structures"][bid]:
        path = structure_path(results, key)
        if path.is_file():
            done.append({"key": key, "computed": False})
            continue
        r = compute_structure(manifest["structures"][key], st, key=key)
        write_json(r, path)
        done.append({"key": key, "computed": True, "status": r["status"],
                     "wall_time_s": r.get("wall_time_s"), "n_gradients": r.get("n_gradients")})
        log.info("structure %s %s: %s in %.1f s, %s gradient calls", key, r["smiles"], r["status"],
                 r.get("wall_time_s", 0.0), r.get("n_gradients", 0))
    summary = _batch_summary("structures", bid, done, t0)
    write_json(summary, out_path)
    return summary


def dienophile(config: dict, smiles: str, out_path) -> dict:
    from .pipeline import compute_dienophile
    write_json, _ = _json()
    config = cfg.validate(config)
    result = compute_dienophile(smiles, cfg.structure_settings(config))
    write_json(result, out_path)
    return result


def compute_transitions(config: dict, manifest_path, bid: str, out_path, results="results") -> dict:
    """Transition structures of one batch of (structure, dienophile) pairs."""
    from .pipeline import backend_settings
    from .transition import transition_states_for_structure
    write_json, read_json = _json()
    t0 = time.perf_counter()
    config = cfg.validate(config)
    bs = backend_settings(cfg.structure_settings(config))
    manifest = read_json(manifest_path)
    dph_cache = {}
    done = []
    for stem in manifest["batches"]["transition"][bid]["members"]:
        path = transition_path(results, stem)
        if path.is_file():
            done.append({"stem": stem, "computed": False})
            continue
        task = manifest["transitions"][stem]
        if task["dhash"] not in dph_cache:
            dph_cache[task["dhash"]] = read_json(dienophile_path(results, task["dhash"]))
        structure = read_json(structure_path(results, task["key"]))
        r = transition_states_for_structure(structure, dph_cache[task["dhash"]], bs,
                                            config["transition_state"])
        r["key"] = task["key"]
        write_json(r, path)
        states = {label: s.get("status") for label, s in r["sites"].items()}
        done.append({"stem": stem, "computed": True, "status": r["status"], "sites": states,
                     "wall_time_s": r.get("wall_time_s"), "n_gradients": r.get("n_gradients")})
        log.info("transition %s: %s in %.1f s (%s)", stem, r["status"], r.get("wall_time_s", 0.0),
                 ", ".join(f"{k} {v}" for k, v in states.items()) or "no site")
    summary = _batch_summary("transition", bid, done, t0)
    write_json(summary, out_path)
    return summary


# -------------------------------------------------------------- refinement

AUTO_REFINE_JOBS = 24    # refined pricing (about a minute a pair) is cut into about this many jobs


def refined_pairs(manifest: dict, config: dict, ranking=None) -> list[str]:
    """The (structure, dienophile) pairs priced at the refined level, by `refine.rows`:
    'all' every pair of the run (library and reference); 'none' none; an integer N the
    N best library rows by the GFN2-xTB ranking (needs `ranking`) and every reference pair,
    so that the refined model can be fitted."""
    rows = config["refine"]["rows"]
    if rows == "none":
        return []
    if rows == "all":
        return list(manifest["transitions"])
    top = ranking[(ranking["status"].isin(("ok", "ts_unverified"))) & ranking["rank"].notna()]
    stems = list(top.sort_values("rank").head(int(rows))["transition_key"].astype(str))
    for rec in manifest["reference_records"]:
        if rec["status"] == "ok":
            stems += [f"{i['key']}__{rec['dienophile']['thash']}" for i in rec["isomers"]]
    return list(dict.fromkeys(s for s in stems if s in manifest["transitions"]))


def refine_batches(manifest: dict, config: dict, stems: list[str], results="results") -> dict:
    """Jobs for the pairs whose refined result is absent: {batch id: {members, needs (the
    transition batches of this run that compute them), dienophiles, rhash}}."""
    rhash = cfg.refine_hash(config)
    missing = [s for s in stems if not refined_path(results, s, rhash).is_file()]
    producer = {stem: bid for bid, b in manifest["batches"]["transition"].items() for stem in b["members"]}
    size = max(1, math.ceil(len(missing) / AUTO_REFINE_JOBS))
    out = {}
    for bid, members in _batches(missing, size, f"refine {rhash}").items():
        out[bid] = {"members": members, "rhash": rhash,
                    "needs": sorted({producer[m] for m in members if m in producer}),
                    "dienophiles": sorted({manifest["transitions"][m]["dhash"] for m in members})}
    return out


def shortlist(config: dict, manifest_path, out_path, results="results") -> dict:
    """`refine.rows: N`: the pairs to price (the N best GFN2-xTB-ranked rows and the
    reference) and the jobs for those not priced yet."""
    write_json, read_json = _json()
    config = cfg.validate(config)
    manifest = read_json(manifest_path)
    table = rank_tables(manifest, load_computed(manifest, results), config)[0]
    stems = refined_pairs(manifest, config, table)
    out = {"rhash": cfg.refine_hash(config), "rows": config["refine"]["rows"], "pairs": stems,
           "batches": refine_batches(manifest | {"batches": {"transition": {}}}, config, stems, results)}
    write_json(out, out_path)
    return out


def thermal_source(config: dict):
    """Where the pricing's thermal corrections come from: GFN2-xTB with the run's settings."""
    from .pipeline import backend_settings
    from .refine import Thermal
    return Thermal(backend_settings(cfg.structure_settings(config)), float(config["temperature_K"]))


def refine_dienophile(config: dict, dienophile_file, out_path, threads: int = 1) -> dict:
    """A dienophile priced at the refined level (once per dienophile and level)."""
    from .refine import level_from_config, price_dienophile
    write_json, read_json = _json()
    config = cfg.validate(config)
    r = price_dienophile(read_json(dienophile_file), level_from_config(config["refine"], threads),
                         thermal_source(config))
    write_json(r, out_path)
    return r


def refine_pair(config: dict, manifest: dict, stem: str, level, results="results") -> dict:
    """Refined barriers of one (structure, dienophile) pair, written to its result file. The
    structure's minima are priced once per level and kept for every other dienophile."""
    from .refine import price_pair, price_structure, sites_to_price
    write_json, read_json = _json()
    rhash = cfg.refine_hash(config)
    task = manifest["transitions"][stem]
    transition = read_json(transition_path(results, stem))
    spath = refined_structure_path(results, task["key"], rhash)
    priced = {}
    if sites_to_price(transition):      # a diene that cannot react costs no single point
        try:
            priced = read_json(spath)
        except (FileNotFoundError, ValueError):
            priced = price_structure(read_json(structure_path(results, task["key"])), level,
                                     thermal_source(config))
            write_json(priced, spath)
    dph = read_json(refined_dienophile_path(results, task["dhash"], rhash))
    r = price_pair(priced, transition, dph, level, thermal_source(config)) | {"stem": stem}
    write_json(r, refined_path(results, stem, rhash))
    return r


def refine_pairs(config: dict, manifest_path, plan_path, bid: str, out_path, results="results",
                 threads: int = 1) -> dict:
    """One refine batch (listed in the manifest, or in the shortlist for refine.rows: N)."""
    from .refine import level_from_config
    write_json, read_json = _json()
    t0 = time.perf_counter()
    config = cfg.validate(config)
    manifest = read_json(manifest_path)
    plan = read_json(plan_path)
    batch = (plan["batches"]["refine"] if "records" in plan else plan["batches"])[bid]
    level = level_from_config(config["refine"], threads)
    done = []
    for stem in batch["members"]:
        if refined_path(results, stem, batch["rhash"]).is_file():
            done.append({"stem": stem, "computed": False})
            continue
        r = refine_pair(config, manifest, stem, level, results)
        done.append({"stem": stem, "computed": True, "status": r["status"], "wall_time_s": r.get("wall_time_s")})
        log.info("refined %s at %s: %s %s (%.1f s)", stem, r["level"], r["status"], r.get("message", ""),
                 r.get("wall_time_s", 0.0))
    summary = _batch_summary("refine", bid, done, t0) | {"rhash": batch["rhash"]}
    write_json(summary, out_path)
    return summary


def load_refined(manifest: dict, config: dict, results="results", shortlist_path=None) -> dict:
    """Refined pair results of the run, by transition stem (a missing or unreadable file is
    simply not there; its rows keep their GFN2-xTB values)."""
    _, read_json = _json()
    rows = config["refine"]["rows"]
    if rows == "none":
        return {}
    stems = (refined_pairs(manifest, config) if rows == "all"
             else read_json(shortlist_path)["pairs"] if shortlist_path and Path(shortlist_path).is_file() else [])
    rhash = cfg.refine_hash(config)
    out = {}
    for stem in stems:
        try:
            out[stem] = read_json(refined_path(results, stem, rhash))
        except (FileNotFoundError, ValueError):
            continue
    return out


# ----------------------------------------------------------------- ranking

def load_computed(manifest: dict, results="results"):
    """Every result file the manifest names; a missing or unreadable one becomes a status."""
    from .ranking import Computed
    _, read_json = _json()

    def load(path, what):
        try:
            return read_json(path)
        except FileNotFoundError:
            return {"status": "missing", "message": f"no {what} file {Path(path).name}", "sites": {}}
        except ValueError as exc:
            return {"status": "corrupt_result", "message": f"{Path(path).name} unreadable: {exc}",
                    "sites": {}}

    structures = {k: load(structure_path(results, k), "result") for k in manifest["structures"]}
    transitions = {s: load(transition_path(results, s), "transition-structure")
                   for s in manifest["transitions"]}
    dienophiles = {}
    for dhash in manifest["dienophiles"]:
        d = load(dienophile_path(results, dhash), "dienophile")
        if "lumo_eV" in d:
            dienophiles[dhash] = d
    return Computed(structures, transitions, dienophiles)


def rank_tables(manifest: dict, computed, config: dict):
    """Fit on the reference records, predict every site, pick each row's best:
    (ranking table, sites table, model summary, reference table).

    The GFN2-xTB model is always fitted (it ranks when the refinement is off, and a row
    whose refinement failed); with refined results present, a model of the same form is
    fitted on the refined reference barriers and ranks every site it can price. The
    summary is the ranking model's, with the GFN2-xTB one under 'fast' beside it."""
    from . import ranking
    computed.barrier = config["refine"]["barrier"]
    fit, summary, ref_table = ranking.fit_reference(manifest["reference_records"], computed, config,
                                                    config["dienophile"])
    sites = ranking.site_table(manifest["records"], computed)
    if len(sites):
        sites = ranking.predict_sites(sites, fit, config, summary, "xtb")
    refined_label = None
    if any(r.get("status") == "ok" for r in computed.refined.values()):
        try:
            rfit, rsummary, rref = ranking.fit_reference(
                manifest["reference_records"], computed, config, config["dienophile"], suffix="_refined")
        except ValueError as exc:
            summary = summary | {"refined_error": str(exc)}
        else:
            keep = [c for c in ("used", "reason", "log10_k_cv", "log10_k_fit", "log10_k_nested_cv")
                    if c in rref]
            ref_table = ref_table.join(rref[keep].add_suffix("_refined"))
            if len(sites):
                sites = ranking.predict_sites(sites, rfit, config, rsummary, "refined")
            refined_label = rsummary["level"]
            summary = rsummary | {"fast": summary, "barrier_kind": config["refine"]["barrier"]}
    if len(sites):
        rows = config["refine"]["rows"]
        sites = ranking.choose_level(sites, refined_label, "" if rows in ("all", "none") else (
            f"ranked at GFN2-xTB: not among the {rows} best GFN2-xTB rows that refine.rows prices"))
    summary |= {"ranking_level": refined_label or ranking.FAST_LEVEL, "refine_rows": config["refine"]["rows"]}
    table = ranking.rank_table(manifest["records"], computed, sites)
    table, bench = ranking.bench_view(table, summary, ref_table, config.get("anchor"))
    return table, sites, summary | bench, ref_table


def rank(config: dict, manifest_path, out_dir, results="results", shortlist_path=None) -> list[str]:
    from . import outputs
    _, read_json = _json()
    config = cfg.validate(config)
    manifest = read_json(manifest_path)
    computed = load_computed(manifest, results)
    computed.refined = load_refined(manifest, config, results, shortlist_path)
    table, sites, summary, ref_table = rank_tables(manifest, computed, config)
    out_dir = Path(out_dir)
    outputs.write_table(table, out_dir / "ranking.csv")
    outputs.write_table(sites, out_dir / "sites.csv")
    outputs.write_table(ref_table, out_dir / "reference_fit.csv")
    run_dph = computed.dienophiles.get(manifest["run_dienophile"]["dhash"], {})
    summary |= {"reference_file": manifest["reference"], "reference_sha256": manifest["reference_sha256"],
                "library_file": manifest["library"], "library_sha256": manifest["library_sha256"],
                "seed": manifest["seed"], "settings": manifest["settings"],
                "temperature_K": config["temperature_K"], "solvent": config["solvent"],
                "transition_state": config["transition_state"],
                "dienophile": {k: run_dph.get(k) for k in ("smiles", "homo_eV", "lumo_eV", "reactive_bond")},
                "config": config}     # the run's whole config: `dienes look` predicts with the same
    outputs.write_model(summary, out_dir / "model.json")
    return outputs.summary_lines(table, out_dir, summary)


def rank_in_process(config: dict, cache_dir=None, reference_ids=None, manifest_path=None):
    """Rank config['library'] without Snakemake, one structure after another.

    Result files are read from / written to `cache_dir` when given (the same
    layout as the workflow's results/). `reference_ids`, when given, keeps only
    those reference rows in the fit (for leave-out checks); `manifest_path` keeps the
    manifest elsewhere (so that a workflow's own results/manifest.json is left alone).
    Returns (ranking DataFrame, sites DataFrame, model summary dict).
    """
    import tempfile
    config = cfg.validate(config)
    tmp = tempfile.TemporaryDirectory()
    cache = Path(cache_dir) if cache_dir else Path(tmp.name)
    manifest_path = Path(manifest_path) if manifest_path else cache / "manifest.json"
    manifest = prepare(config, manifest_path, results=cache)
    if reference_ids is not None:
        manifest["reference_records"] = [r for r in manifest["reference_records"]
                                         if r["id"] in set(reference_ids)]
    for bid in manifest["batches"]["structures"]:
        compute_structures(config, manifest_path, bid, batch_path(cache, "structures", bid), cache)
    for dhash, smiles in manifest["dienophiles"].items():
        if not dienophile_path(cache, dhash).is_file():
            dienophile(config, smiles, dienophile_path(cache, dhash))
    for bid in manifest["batches"]["transition"]:
        compute_transitions(config, manifest_path, bid, batch_path(cache, "transition", bid), cache)
    computed = load_computed(manifest, cache)
    if config["refine"]["rows"] != "none":
        from .refine import level_from_config
        _, read_json = _json()
        rows = config["refine"]["rows"]
        stems = refined_pairs(manifest, config, None if rows == "all" else rank_tables(manifest, computed, config)[0])
        rhash = cfg.refine_hash(config)
        level = level_from_config(config["refine"])
        for stem in stems:
            dhash = manifest["transitions"][stem]["dhash"]
            if not refined_dienophile_path(cache, dhash, rhash).is_file():
                refine_dienophile(config, dienophile_path(cache, dhash), refined_dienophile_path(cache, dhash, rhash))
            if not refined_path(cache, stem, rhash).is_file():
                refine_pair(config, manifest, stem, level, cache)
        computed.refined = {s: read_json(refined_path(cache, s, rhash)) for s in stems}
    table, sites, summary, _ = rank_tables(manifest, computed, config)
    tmp.cleanup()
    return table, sites, summary


# ------------------------------------------------------------------ report

def profiles_for_report(table, results: dict, config: dict, cache_dir, n: int = 3) -> list:
    """Relaxed torsion profiles (15 deg steps) of the top and bottom ranked dienes
    whose best site rotates freely (acyclic): ring-bound sites have no profile."""
    import numpy as np
    from .backends import Molecule
    from .pipeline import backend_settings
    from .torsion import torsion_profile
    write_json, read_json = _json()
    st = cfg.structure_settings(config)
    ranked = table[table["rank"].notna() & (table["site_kind"] == "acyclic")].sort_values("rank")
    picks = list(ranked.head(n).itertuples()) + [r for r in ranked.tail(n).itertuples()
                                                 if r.rank not in set(ranked.head(n)["rank"])]
    out = []
    for r in picks:
        res = results[r.structure_key]
        path = Path(cache_dir) / f"{r.structure_key}__{r.best_site}.json"
        if path.is_file():
            prof = read_json(path)
        else:
            atoms = [int(x) - 1 for x in str(r.best_site).split("-")]
            geo = res["geometry"]
            start = geo["planar_s_cis_A"].get(r.best_site, geo["minimum_A"])
            a, e = torsion_profile(geo["numbers"], np.asarray(start),
                                   Molecule(geo["numbers"], backend_settings(st)), atoms, step_deg=15.0)
            prof = {"dihedral_deg": a.tolist(), "energy_kJmol": np.round(e, 3).tolist()}
            write_json(prof, path)
        out.append((f"#{int(r.rank)} {r.id}", np.array(prof["dihedral_deg"]), np.array(prof["energy_kJmol"])))
    return out


def report(config: dict, manifest_path, out_dir, results="results") -> dict:
    """report.html and dienes.sdf from a finished ranking."""
    import pandas as pd
    from . import outputs
    from . import report as rpt
    _, read_json = _json()
    config = cfg.validate(config)
    out_dir = Path(out_dir)
    manifest = read_json(manifest_path)
    computed = load_computed(manifest, results)
    table = outputs.read_table(out_dir / "ranking.csv")
    sites = pd.read_csv(out_dir / "sites.csv") if (out_dir / "sites.csv").stat().st_size > 1 else pd.DataFrame()
    reference = pd.read_csv(out_dir / "reference_fit.csv")
    model = read_json(out_dir / "model.json")
    profiles = profiles_for_report(table, computed.structures, config, out_dir / "profiles")
    versions = next((r.get("versions") for r in computed.structures.values() if r.get("versions")), {})
    text = rpt.build(table, sites, model, reference, manifest["settings"] | {"seed": manifest["seed"]},
                     versions, profiles, config)
    rpt.write(out_dir / "report.html", text)
    n_sdf = outputs.write_sdf(table, computed, out_dir / "dienes.sdf")
    return {"report": str(out_dir / "report.html"), "sdf": str(out_dir / "dienes.sdf"), "sdf_records": n_sdf}
