"""The steps of a run, each one call for a workflow rule, in the order of the plan:

prepare (read the library once, record the settings, list the work) -> structures
(batches of conformer searches) -> dienophiles -> transition structures (batches)
-> [rounds of the first level] -> single points at each priced level (dienophiles, batches of pairs)
-> rank -> torsion profiles -> report.

The settings are validated once, at the edge (Snakefile, command line, Python API),
and recorded in the manifest; every later step reads them from there, so a job on
another machine computes with exactly the settings its result files are named by.
Per-structure results are files named by what they depend on and reused by every
later run; a batch job computes only the members whose file is absent. Heavy
libraries are imported inside the step that needs them.
"""

from __future__ import annotations

import hashlib
import logging
import math
import os
import time
from pathlib import Path

from . import settings as cfg
from .layout import Layout, read_json, transition_stem, write_json

log = logging.getLogger("dienes")

THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "GOTO_NUM_THREADS",
                    "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")
AUTO_JOBS = 16           # structures_per_job 'auto': new work is cut into about this many jobs
AUTO_MAX_PER_JOB = 25    # ... of at most this many structures
AUTO_LEVEL_JOBS = 24     # single points (two to four minutes a pair, cycloadduct included) go in about this many jobs
PROFILES_SHOWN = 3       # torsion profiles of the top and bottom ranked freely rotating dienes


def pin_threads(n: int) -> None:
    """Hold every OpenMP/BLAS pool of this process to `n` threads (call before heavy imports)."""
    for var in THREAD_VARIABLES:
        os.environ[var] = str(int(n))


def _sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def settings_of(manifest: dict, computes_structures: bool = False) -> cfg.Settings:
    """The run's settings as prepare recorded them. A step that runs GFN2-xTB stops with a
    clear message where this process cannot run the recorded backend."""
    settings = cfg.resolve(manifest["run_settings"], fallback=False)
    if computes_structures:
        settings.require_backend()
    return settings


# ------------------------------------------------------------------ prepare

def _record_dict(rec, settings: cfg.Settings, dienophile_smiles: str) -> dict:
    return {"row": rec.row, "id": rec.id, "smiles": rec.smiles, "extra": rec.extra,
            "status": rec.status, "message": rec.message, "std_smiles": rec.std_smiles,
            "dienophile": {"smiles": dienophile_smiles,
                           "dhash": settings.dienophile_hash(dienophile_smiles),
                           "thash": settings.transition_hash(dienophile_smiles)},
            "isomers": [{"smiles": i.smiles, "inchikey": i.inchikey, "key": settings.structure_key(i.inchikey)}
                        for i in rec.isomers]}


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


def _reference_dienophile(rec, settings: cfg.Settings) -> tuple[str, str]:
    """A reference row's dienophile, or the run's (with a note) when it has none or a bad one."""
    from .library import check_dienophile
    given = (rec.extra.get("dienophile_smiles") or "").strip()
    if not given:
        return settings["dienophile"], "no dienophile_smiles: the run's dienophile is used"
    problem = check_dienophile(given)
    if problem:
        return "", f"dienophile_smiles: {problem}"
    return given, ""


def prepare(settings, manifest_path, results="results") -> dict:
    """Read and standardise the library and the reference set once; write the manifest
    that records the settings and lists every record, every result file the run needs
    and, for what is not computed yet, the batches that will compute it."""
    from . import backends, library
    settings = cfg.resolve(settings)
    layout = Layout(results)
    backends.require(settings.backend)
    problem = library.check_dienophile(settings["dienophile"])
    if problem:
        raise library.LibraryError(f"dienophile {settings['dienophile']!r}: {problem}")
    limits = library.Limits(**settings["limits"])
    records = [_record_dict(r, settings, settings["dienophile"])
               for r in library.read_library(settings["library"], limits)]
    reference = []
    for r in library.read_library(settings["reference"], limits, what="reference"):
        smiles, note = _reference_dienophile(r, settings)
        if not smiles:
            r.fail("invalid_dienophile", note)
        elif note:
            r.message = "; ".join(filter(None, [r.message, note]))
        reference.append(_record_dict(r, settings, smiles or settings["dienophile"]))
    structures, dienophiles, transitions = {}, {}, {}
    for rec in records + reference:
        if rec["status"] != "ok":
            continue
        d = rec["dienophile"]
        dienophiles[d["dhash"]] = d["smiles"]
        for iso in rec["isomers"]:
            structures[iso["key"]] = iso["smiles"]
            transitions[transition_stem(iso["key"], d["thash"])] = {"key": iso["key"], "dhash": d["dhash"]}
    per_job = settings["jobs"]["structures_per_job"]
    missing_s = [k for k in sorted(structures) if not layout.structure(k).is_file()]
    s_batches = _batches(missing_s, per_job, "structures")
    producer = {k: bid for bid, members in s_batches.items() for k in members}
    missing_t = [t for t in sorted(transitions) if not layout.transition(t).is_file()]
    t_batches = {bid: {"members": members,
                       "needs": sorted({producer[transitions[t]["key"]] for t in members
                                        if transitions[t]["key"] in producer}),
                       "dienophiles": sorted({transitions[t]["dhash"] for t in members})}
                 for bid, members in _batches(missing_t, per_job, "transition").items()}
    run_dph = settings["dienophile"]
    manifest = {"library": str(settings["library"]), "library_sha256": _sha256(settings["library"]),
                "reference": str(settings["reference"]), "reference_sha256": _sha256(settings["reference"]),
                "run_settings": settings.as_config(), "backend_note": settings.backend_note,
                "settings": settings.structure_settings(), "seed": settings["seed"],
                "run_dienophile": {"smiles": run_dph, "dhash": settings.dienophile_hash(run_dph),
                                   "thash": settings.transition_hash(run_dph)},
                "records": records, "reference_records": reference,
                "structures": dict(sorted(structures.items())), "dienophiles": dienophiles,
                "transitions": dict(sorted(transitions.items())),
                "levels": {lv.name: {"key": lv.key(), "label": lv.label(), "rows": _rows_mode(settings, lv, records)}
                           for lv in settings.priced_levels},
                "batches": {"structures": s_batches, "transition": t_batches, "level": {}}}
    for level in settings.priced_levels:
        if manifest["levels"][level.name]["rows"] == "all":
            manifest["batches"]["level"] |= level_batches(manifest, level, list(transitions), layout)
    write_json(manifest, manifest_path)
    return manifest


def _rows_mode(settings: cfg.Settings, level: cfg.Level, records: list[dict]):
    """What `level` computes: 'all', 'contenders' or N (ranking.rows auto decided by the library's size)."""
    if settings.rows_for(level) == "all":
        return "all"
    return settings.rows_mode(len(records))


def _pending(manifest: dict) -> set[str]:
    return {s for stage in manifest.get("batches", {}).values() for b in stage.values()
            for s in (b["members"] if isinstance(b, dict) else b)}


def stale_manifest(manifest_path, results="results") -> str:
    """Why an existing manifest no longer describes the files ('' when it does): a result
    file it counts as done has gone (deleted, or moved aside as unreadable)."""
    layout = Layout(results)
    try:
        manifest = read_json(manifest_path)
    except (OSError, ValueError):
        return ""
    pending = _pending(manifest)
    for key in manifest.get("structures", {}):
        if key not in pending and not layout.structure(key).is_file():
            return f"result {key} is missing"
    for stem in manifest.get("transitions", {}):
        if stem not in pending and not layout.transition(stem).is_file():
            return f"transition result {stem} is missing"
    return ""


def drop_stale_batches(results="results") -> list[Path]:
    """Remove batch summaries that claim a member whose result file is gone (deleted, or
    moved aside as unreadable): the batch then runs again and recomputes just that member."""
    layout = Layout(results)
    where = {"structures": lambda s, n: layout.structure(n), "transition": lambda s, n: layout.transition(n),
             "level": lambda s, n: layout.level_pair(s["lkey"], n)}
    dropped = []
    for stage, path_of in where.items():
        for flag in sorted((layout.root / "batches" / stage).glob("*.json")):
            try:
                summary = read_json(flag)
                paths = [path_of(summary, m.get("key") or m.get("stem")) for m in summary["members"]]
            except (OSError, ValueError, KeyError, AttributeError, TypeError):
                paths = [None]
            if any(p is None or not p.is_file() for p in paths):
                flag.unlink(missing_ok=True)
                dropped.append(flag)
    return dropped


# ------------------------------------------------------------ per structure

def _batch_summary(stage: str, bid: str, done: list[dict], t0: float) -> dict:
    return {"stage": stage, "batch": bid, "pid": os.getpid(),
            "threads": os.environ.get("OMP_NUM_THREADS", ""), "members": done,
            "n_computed": sum(1 for d in done if d["computed"]),
            "wall_time_s": round(time.perf_counter() - t0, 3)}


def compute_structures(manifest_path, bid: str, out_path, results="results") -> dict:
    """Conformer search and s-cis analysis of one batch of structures."""
    from .pipeline import compute_structure
    t0 = time.perf_counter()
    layout = Layout(results)
    manifest = read_json(manifest_path)
    st = settings_of(manifest, computes_structures=True).structure_settings()
    done = []
    for key in manifest["batches"]["structures"][bid]:
        path = layout.structure(key)
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


def compute_dienophile(manifest_path, dhash: str, out_path) -> dict:
    """The dienophile's GFN2-xTB minimum and frontier orbitals."""
    from .pipeline import compute_dienophile as compute
    manifest = read_json(manifest_path)
    settings = settings_of(manifest, computes_structures=True)
    result = compute(manifest["dienophiles"][dhash], settings.structure_settings())
    write_json(result, out_path)
    return result


def compute_transitions(manifest_path, bid: str, out_path, results="results") -> dict:
    """Transition structures of one batch of (structure, dienophile) pairs."""
    from .transition import transition_states_for_structure
    t0 = time.perf_counter()
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest, computes_structures=True)
    bs = settings.backend_settings()
    dph_cache = {}
    done = []
    for stem in manifest["batches"]["transition"][bid]["members"]:
        path = layout.transition(stem)
        if path.is_file():
            done.append({"stem": stem, "computed": False})
            continue
        task = manifest["transitions"][stem]
        if task["dhash"] not in dph_cache:
            dph_cache[task["dhash"]] = read_json(layout.dienophile(task["dhash"]))
        structure = read_json(layout.structure(task["key"]))
        r = transition_states_for_structure(structure, dph_cache[task["dhash"]], bs, settings["transition_state"])
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


# ------------------------------------------------- single points at a level

def level_pairs(manifest: dict, settings: cfg.Settings, level: cfg.Level, ranking=None) -> list[str]:
    """The (structure, dienophile) pairs computed at `level`: every pair of the run (library
    and reference), or, where ranking.rows is N for this level, the N best library rows of
    `ranking` (the table ranked at the next levels) and every reference pair, so that the
    level's model can be fitted."""
    rows = settings.rows_for(level)
    if rows == "all":
        return list(manifest["transitions"])
    top = ranking[ranking["status"].isin(("ok", "ts_unverified")) & ranking["rank"].notna()]
    stems = list(top.sort_values("rank").head(int(rows))["transition_key"].astype(str))
    stems += _reference_stems(manifest)
    return list(dict.fromkeys(s for s in stems if s in manifest["transitions"]))


def level_batches(manifest: dict, level: cfg.Level, stems: list[str], layout: Layout) -> dict:
    """Jobs for the pairs whose result at `level` is absent: {batch id: {members, level, lkey,
    needs (the transition batches of this run that compute them), dienophiles}}."""
    lkey = level.key()
    missing = [s for s in stems if not _level_pair_done(layout, lkey, s)]
    producer = {stem: bid for bid, b in manifest["batches"]["transition"].items() for stem in b["members"]}
    size = max(1, math.ceil(len(missing) / AUTO_LEVEL_JOBS))
    out = {}
    for bid, members in _batches(missing, size, f"level {lkey}").items():
        out[bid] = {"members": members, "level": level.name, "lkey": lkey,
                    "needs": sorted({producer[m] for m in members if m in producer}),
                    "dienophiles": sorted({manifest["transitions"][m]["dhash"] for m in members})}
    return out


def first_level_rows(manifest: dict, settings: cfg.Settings):
    """What the first ranking level computes in this run, as prepare decided it: 'all',
    'contenders' or N."""
    first = settings.ranking_levels[0]
    return manifest.get("levels", {}).get(first.name, {}).get("rows", settings.rows_for(first))


def round_chain(layout: Layout) -> list[dict]:
    """The rounds of the first level written so far, in order, up to the one that ended them."""
    out = []
    while layout.level_round(len(out)).is_file():
        out.append(read_json(layout.level_round(len(out))))
        if out[-1].get("done"):
            break
    return out


def level_round(manifest_path, r: int, out_path, results="results") -> dict:
    """Round r of the first ranking level where it does not compute every row (dienes.contenders):
    the pairs it adds (round 0: the reference set and, for N, the N best rows at the next levels,
    for contenders a first sample spanning the library; later rounds: the contenders), the jobs
    for those not computed yet, and whether the rounds end here."""
    from . import contenders as ct
    from .ranking import col as ranking_col
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest)
    first = settings.ranking_levels[0]
    mode = first_level_rows(manifest, settings)
    opts = settings["ranking"]["contenders"]
    earlier = [read_json(layout.level_round(i)) for i in range(r)]
    computed_so_far = list(dict.fromkeys(s for e in earlier for s in e["pairs"]))
    done_before, reference = set(computed_so_far), set(_reference_stems(manifest))
    library = [s for s in manifest["transitions"] if s not in reference]
    info: dict = {}
    if r == 0:
        rest = [lv.name for lv in settings.ranking_levels[1:] if not lv.corrects]
        screen = settings.replace(ranking=dict(settings["ranking"]) | {"levels": rest, "rows": "all"})
        table, sites = rank_tables(manifest, load_computed(manifest, screen, layout, pairs=[]), screen)[:2]
        if mode == "contenders":
            pairs = ct.pair_table(sites, ranking_col(settings.placing, "barrier_kJmol"))
            pairs = pairs[pairs["transition_key"].isin(library)].reset_index(drop=True)
            n = ct.first_count(len(pairs), opts["first_share"], opts["min_first"])
            stems = _reference_stems(manifest) + ct.first_sample(pairs, n, ranking_col(settings.placing,
                                                                                      "barrier_kJmol"))
            info = {"first_sample": n, "library_pairs": len(pairs)}
        else:
            stems = level_pairs(manifest, settings, first, table)
        done = mode != "contenders"
    else:
        corrected = next(lv for lv in settings.ranking_levels if lv.corrects and lv.target.name == first.name)
        table, sites, summary, _ = rank_tables(manifest, load_computed(manifest, settings, layout,
                                                                      pairs=computed_so_far), settings)
        model = summary["levels"].get(corrected.name, {})
        if "error" in model:
            # nothing can say which rows cannot reach the top: compute every one
            stems, done = library, True
            info = {"note": f"the corrected level could not be fitted ({model['error']}): every row computed"}
        else:
            c = model["correction"]
            stems, info = ct.contenders(sites, table, done_before, corrected, settings.placing,
                                        c["bound_log10"], int(opts["top"]),
                                        summary.get("bench", {}).get("tier_width_log10"))
            info["correction"] = {k: c[k] for k in ("base", "terms", "n_sites", "loo_mae_kJmol", "loo_spearman",
                                                    "half_width_kJmol", "bound_kJmol")}
            done = not stems or r + 1 >= int(opts["max_rounds"])
    new = [s for s in dict.fromkeys(stems) if s in manifest["transitions"] and s not in done_before]
    out = {"round": r, "level": first.name, "lkey": first.key(), "rows": mode, "pairs": new,
           "computed_before": len(computed_so_far), "done": done, **info,
           "batches": level_batches(manifest | {"batches": {"transition": {}}}, first, new, layout)}
    write_json(out, out_path)
    return out


def _reference_stems(manifest: dict) -> list[str]:
    return [transition_stem(i["key"], rec["dienophile"]["thash"]) for rec in manifest["reference_records"]
            if rec["status"] == "ok" for i in rec["isomers"]]


def thermal_source(settings: cfg.Settings):
    """Where the thermal corrections come from: GFN2-xTB with the run's settings."""
    from .singlepoints import Thermal
    return Thermal(settings.backend_settings(), float(settings["temperature_K"]))


def level_dienophile(manifest_path, lkey: str, dhash: str, out_path, results="results", threads: int = 1) -> dict:
    """A dienophile's minimum at a level (once per dienophile and level)."""
    from .singlepoints import price_dienophile
    manifest = read_json(manifest_path)
    settings = settings_of(manifest, computes_structures=True)
    level = _level_by_key(settings, lkey)
    r = price_dienophile(read_json(Layout(results).dienophile(dhash)), level.energy_backend(threads),
                         thermal_source(settings))
    write_json(r, out_path)
    return r


def _level_by_key(settings: cfg.Settings, lkey: str) -> cfg.Level:
    for level in settings.priced_levels:
        if level.key() == lkey:
            return level
    raise ValueError(f"no level of this run's ranking has the results folder {lkey}")


def _level_pair_done(layout: Layout, lkey: str, stem: str) -> bool:
    return layout.level_pair(lkey, stem).is_file() and layout.level_adduct(lkey, stem).is_file()


def level_pair(settings: cfg.Settings, manifest: dict, stem: str, level: cfg.Level, energies,
               layout: Layout) -> dict:
    """Barriers of one (structure, dienophile) pair at `level`, then the cycloadduct of its best
    site, each written to its result file (a pair computed before the cycloadduct was part of the
    job keeps its barriers). The structure's minima are computed once per level and kept for
    every other dienophile."""
    from .singlepoints import price_adduct, price_pair, price_structure, sites_to_price
    lkey = level.key()
    task = manifest["transitions"][stem]
    transition = read_json(layout.transition(stem))
    spath = layout.level_structure(lkey, task["key"])
    priced = {}
    if sites_to_price(transition):      # a diene that cannot react costs no single point
        try:
            priced = read_json(spath)
        except (FileNotFoundError, ValueError):
            priced = price_structure(read_json(layout.structure(task["key"])), energies, thermal_source(settings))
            write_json(priced, spath)
    dph = read_json(layout.level_dienophile(lkey, task["dhash"]))
    spent = 0.0
    try:
        r = read_json(layout.level_pair(lkey, stem))
    except (FileNotFoundError, ValueError):
        r = price_pair(priced, transition, dph, energies, thermal_source(settings)) | {"stem": stem}
        write_json(r, layout.level_pair(lkey, stem))
        spent += r.get("wall_time_s", 0.0)
    adduct = price_adduct(read_json(layout.structure(task["key"])) if priced else {}, priced, transition,
                          read_json(layout.dienophile(task["dhash"])), dph, r, energies,
                          thermal_source(settings), level.barrier) | {"stem": stem}
    write_json(adduct, layout.level_adduct(lkey, stem))
    return r | {"wall_time_s": round(spent + adduct.get("wall_time_s", 0.0), 2)}


def compute_level_pairs(manifest_path, plan_path, bid: str, out_path, results="results", threads: int = 1) -> dict:
    """One batch of pairs at a level (listed in the manifest, or in a round of the first level)."""
    t0 = time.perf_counter()
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest, computes_structures=True)
    plan = read_json(plan_path)
    batch = plan["batches"]["level"][bid] if "records" in plan else plan["batches"][bid]
    level = _level_by_key(settings, batch["lkey"])
    energies = level.energy_backend(threads)
    done = []
    for stem in batch["members"]:
        if _level_pair_done(layout, batch["lkey"], stem):
            done.append({"stem": stem, "computed": False})
            continue
        r = level_pair(settings, manifest, stem, level, energies, layout)
        done.append({"stem": stem, "computed": True, "status": r["status"], "wall_time_s": r.get("wall_time_s")})
        log.info("%s %s at %s: %s %s (%.1f s)", level.name, stem, r["level"], r["status"], r.get("message", ""),
                 r.get("wall_time_s", 0.0))
    summary = _batch_summary("level", bid, done, t0) | {"level": level.name, "lkey": batch["lkey"]}
    write_json(summary, out_path)
    return summary


# ----------------------------------------------------------------- ranking

def _load(path, what: str) -> dict:
    """A result file, or a status saying why it cannot be read."""
    try:
        return read_json(path)
    except FileNotFoundError:
        return {"status": "missing", "message": f"no {what} file {Path(path).name}", "sites": {}}
    except ValueError as exc:
        return {"status": "corrupt_result", "message": f"{Path(path).name} unreadable: {exc}", "sites": {}}


def load_computed(manifest: dict, settings: cfg.Settings, layout: Layout, pairs=None):
    """Every result file the run needs: structures, transition structures, dienophiles, and
    each priced level's pair results (a pair that level does not compute is left out; one
    that is missing or unreadable carries its status). `pairs`: the first level's pairs where it
    does not compute every row (default: those of its rounds so far)."""
    from .ranking import Computed
    structures = {k: _load(layout.structure(k), "result") for k in manifest["structures"]}
    transitions = {s: _load(layout.transition(s), "transition-structure") for s in manifest["transitions"]}
    dienophiles = {}
    for dhash in manifest["dienophiles"]:
        d = _load(layout.dienophile(dhash), "dienophile")
        if "lumo_eV" in d:
            dienophiles[dhash] = d
    levels, adducts = {}, {}
    for level in settings.priced_levels:
        if level.name != settings.ranking_levels[0].name or first_level_rows(manifest, settings) == "all":
            stems = list(manifest["transitions"])
        elif pairs is not None:
            stems = list(pairs)
        else:
            stems = list(dict.fromkeys(s for r in round_chain(layout) for s in r["pairs"]))
        levels[level.name] = {s: _load(layout.level_pair(level.key(), s), f"{level.name} result") for s in stems}
        adducts[level.name] = {s: _load(layout.level_adduct(level.key(), s), f"{level.name} cycloadduct")
                               for s in stems}
    return Computed(structures, transitions, dienophiles, levels, adducts)


def rank_tables(manifest: dict, computed, settings: cfg.Settings):
    """Fit each ranking level's model on the reference records, predict every site at every
    level, rank each row at the first level with a prediction for it:
    (ranking table, sites table, model summary, reference table)."""
    from . import ranking
    sites = ranking.site_table(manifest["records"], computed, settings)
    ref_table = ranking.reference_rows(manifest["reference_records"], computed, settings)
    models, fits = {}, {}
    for level in settings.ranking_levels:
        if level.corrects:
            # the target level's model on the estimated barrier: one scale for both kinds of row
            sites, ref_table, info = ranking.corrected_level(sites, ref_table, level, settings)
            target = models.get(level.target.name, {})
            if "error" in info or "error" in target:
                models[level.name] = {"level": level.label(), "name": level.name,
                                      "error": info.get("error") or f"{level.target.name}: {target['error']}"}
                continue
            slope = abs(float(target["coefficients"].get("barrier_kJmol", 0.0)))
            info["half_width_log10"] = round(slope * info["half_width_kJmol"], 3)
            info["bound_log10"] = round(slope * info["bound_kJmol"], 3)
            fit, summary = fits[level.target.name], target | {"name": level.name, "level": level.label(),
                                                              "correction": info}
        else:
            try:
                fit, summary, ref_level = ranking.fit_reference(ref_table, settings, level)
            except ValueError as exc:
                models[level.name] = {"level": level.label(), "name": level.name, "error": str(exc)}
                continue
            ref_table = ref_table.join(ref_level)
        models[level.name], fits[level.name] = summary, fit
        if len(sites):
            sites = ranking.predict_sites(sites, fit, settings, summary, level)
    fitted = [lv.name for lv in settings.ranking_levels if "error" not in models[lv.name]]
    summary = {"ranking_levels": [lv.name for lv in settings.ranking_levels],
               "ranking_level": fitted[0] if fitted else None, "rows": settings.rows, "levels": models,
               "run_dienophile": settings["dienophile"], "interval": settings["model"]["interval"]}
    if len(sites):
        sites = ranking.choose_level(sites, settings, models)
    table = ranking.rank_table(manifest["records"], computed, sites, settings)
    table, bench = ranking.bench_view(table, summary, ref_table, settings["anchor"])
    return table, sites, summary | bench, ref_table


def rank(manifest_path, out_dir, results="results") -> list[str]:
    from . import outputs
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest)
    computed = load_computed(manifest, settings, layout)
    table, sites, summary, ref_table = rank_tables(manifest, computed, settings)
    out = Layout(out_dir)
    outputs.write_table(table, out.output("ranking.csv"))
    outputs.write_table(sites, out.output("sites.csv"))
    outputs.write_table(ref_table, out.output("reference_fit.csv"))
    run_dph = computed.dienophiles.get(manifest["run_dienophile"]["dhash"], {})
    summary |= {"reference_file": manifest["reference"], "reference_sha256": manifest["reference_sha256"],
                "library_file": manifest["library"], "library_sha256": manifest["library_sha256"],
                "seed": manifest["seed"], "settings": manifest["settings"],
                "temperature_K": settings["temperature_K"], "solvent": settings["solvent"],
                "backend_note": manifest.get("backend_note", ""),
                "dienophile": {k: run_dph.get(k) for k in ("smiles", "homo_eV", "lumo_eV", "reactive_bond")},
                "config": settings.as_config()}     # the run's whole config: `dienes look` predicts with the same
    summary["computed_rows"] = computed_rows(manifest, settings, layout, table)
    outputs.write_model(summary, out.output("model.json"))
    return outputs.summary_lines(table, out.root, summary)


def computed_rows(manifest: dict, settings: cfg.Settings, layout: Layout, table) -> dict:
    """What the first ranking level computed and what that risked: rows ranked there and on each
    other level, and, where it computed its rows in rounds, each round's additions, the
    correction's error and the rows nearest the last cut."""
    first = settings.ranking_levels[0]
    ranked = table[table["rank"].notna()]
    out = {"level": first.name, "rows": first_level_rows(manifest, settings),
           "ranked_by_level": {str(k): int(v) for k, v in ranked["level"].value_counts().items()}}
    if out["rows"] == "all":
        return out
    chain = round_chain(layout)
    last = next((r for r in reversed(chain) if "cut_log10_k" in r), {})
    out |= {"rounds": len(chain), "pairs_per_round": [len(r["pairs"]) for r in chain],
            "pairs_computed": sum(len(r["pairs"]) for r in chain), "pairs_in_run": len(manifest["transitions"]),
            "ended": "no contender left" if chain and chain[-1].get("done") and not chain[-1]["pairs"]
            else ("limit of rounds" if len(chain) >= int(settings["ranking"]["contenders"]["max_rounds"])
                  else "one round (ranking.rows N)" if isinstance(out["rows"], int) else "every row computed"),
            "cut_log10_k": last.get("cut_log10_k"), "cut_place": last.get("cut_place"),
            "reach_log10": last.get("reach_log10"), "nearest_cut": last.get("nearest_cut", []),
            "note": next((r["note"] for r in chain if r.get("note")), "")}
    return out


def plan_steps(manifest_path, results="results"):
    """The run's steps in the workflow's order, as (name, call) pairs: what the rules run, for
    a run without Snakemake. Read lazily: a step's list depends on the steps before it."""
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest)
    for bid in manifest["batches"]["structures"]:
        yield "structures", lambda bid=bid: compute_structures(manifest_path, bid, layout.batch("structures", bid),
                                                               results)
    for dhash in manifest["dienophiles"]:
        if not layout.dienophile(dhash).is_file():
            yield "dienophile", lambda dhash=dhash: compute_dienophile(manifest_path, dhash, layout.dienophile(dhash))
    for bid in manifest["batches"]["transition"]:
        yield "transition", lambda bid=bid: compute_transitions(manifest_path, bid, layout.batch("transition", bid),
                                                                results)
    plans = [(manifest_path, manifest["batches"]["level"])]
    if first_level_rows(manifest, settings) != "all":
        plans += [(layout.level_round(r), None) for r in range(int(settings["ranking"]["contenders"]["max_rounds"]))]
    for plan_path, batches in plans:
        if batches is None:
            r = int(Path(plan_path).stem.removeprefix("round"))
            if r and read_json(layout.level_round(r - 1)).get("done"):
                break
            yield "level round", lambda r=r, p=plan_path: level_round(manifest_path, r, p, results)
            batches = read_json(plan_path)["batches"]
        for bid, batch in batches.items():
            for dhash in batch["dienophiles"]:
                path = layout.level_dienophile(batch["lkey"], dhash)
                if not path.is_file():
                    yield "level dienophile", lambda b=batch, d=dhash, p=path: level_dienophile(
                        manifest_path, b["lkey"], d, p, results)
            yield "level", lambda bid=bid, p=plan_path: compute_level_pairs(manifest_path, p, bid,
                                                                            layout.batch("level", bid), results)


def rank_in_process(settings, cache_dir=None, reference_ids=None, manifest_path=None):
    """Rank settings['library'] without Snakemake: the same plan as the workflow, one step
    after another.

    Result files are read from / written to `cache_dir` when given (the same layout as the
    workflow's results/). `reference_ids`, when given, keeps only those reference rows in the
    fit (for leave-out checks); `manifest_path` keeps the manifest elsewhere (so that a
    workflow's own results/manifest.json is left alone).
    Returns (ranking DataFrame, sites DataFrame, model summary dict).
    """
    import tempfile
    settings = cfg.resolve(settings)
    with tempfile.TemporaryDirectory() as tmp:
        cache = Path(cache_dir) if cache_dir else Path(tmp)
        manifest_path = Path(manifest_path) if manifest_path else cache / "manifest.json"
        manifest = prepare(settings, manifest_path, results=cache)
        if reference_ids is not None:
            manifest["reference_records"] = [r for r in manifest["reference_records"]
                                             if r["id"] in set(reference_ids)]
            write_json(manifest, manifest_path)
        for _, step in plan_steps(manifest_path, cache):
            step()
        computed = load_computed(manifest, settings, Layout(cache))
        table, sites, summary, _ = rank_tables(manifest, computed, settings)
    return table, sites, summary


# ------------------------------------------------------------------ report

def torsion_profiles(manifest_path, ranking_path, out_path, results="results", n: int = PROFILES_SHOWN) -> dict:
    """Relaxed torsion profiles (15 deg steps) of the top and bottom ranked dienes whose best
    site rotates freely (acyclic): ring-bound sites have no profile. Each profile is kept per
    structure and site, so a rerun computes only new ones."""
    import numpy as np
    from . import outputs
    from .backends import Molecule
    from .torsion import torsion_profile
    layout = Layout(results)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest, computes_structures=True)
    table = outputs.read_table(ranking_path)
    ranked = table[table["rank"].notna() & (table["site_kind"] == "acyclic")].sort_values("rank")
    picks = list(ranked.head(n).itertuples()) + [r for r in ranked.tail(n).itertuples()
                                                 if r.rank not in set(ranked.head(n)["rank"])]
    out = []
    for r in picks:
        path = layout.profile(r.structure_key, r.best_site)
        if path.is_file():
            prof = read_json(path)
        else:
            geo = read_json(layout.structure(r.structure_key))["geometry"]
            atoms = [int(x) - 1 for x in str(r.best_site).split("-")]
            start = geo["planar_s_cis_A"].get(r.best_site, geo["minimum_A"])
            a, e = torsion_profile(geo["numbers"], np.asarray(start),
                                   Molecule(geo["numbers"], settings.backend_settings()), atoms, step_deg=15.0)
            prof = {"dihedral_deg": a.tolist(), "energy_kJmol": np.round(e, 3).tolist()}
            write_json(prof, path)
        out.append({"label": f"#{int(r.rank)} {r.id}"} | prof)
    summary = {"profiles": out}
    write_json(summary, out_path)
    return summary


def report(manifest_path, out_dir, profiles_path, results="results") -> dict:
    """report.html and dienes.sdf from a finished ranking."""
    import pandas as pd
    from . import outputs
    from . import report as rpt
    layout, out = Layout(results), Layout(out_dir)
    manifest = read_json(manifest_path)
    settings = settings_of(manifest)
    computed = load_computed(manifest, settings, layout)
    table = outputs.read_table(out.output("ranking.csv"))
    sites_path = out.output("sites.csv")
    sites = pd.read_csv(sites_path) if sites_path.stat().st_size > 1 else pd.DataFrame()
    reference = pd.read_csv(out.output("reference_fit.csv"))
    model = read_json(out.output("model.json"))
    profiles = read_json(profiles_path)["profiles"]
    versions = next((r.get("versions") for r in computed.structures.values() if r.get("versions")), {})
    text = rpt.build(table, sites, model, reference, manifest["settings"] | {"seed": manifest["seed"]},
                     versions, profiles, settings)
    rpt.write(out.output("report.html"), text)
    n_sdf = outputs.write_sdf(table, computed, settings, out.output("dienes.sdf"))
    return {"report": str(out.output("report.html")), "sdf": str(out.output("dienes.sdf")), "sdf_records": n_sdf}
