"""Computing only the contenders against computing every row, on a finished run's results.

    python benchmarks/contenders.py --results RUN/results [--config RUN/config/config.yaml]
                                    [--library LIB.csv] [--top 20] [--first-share 0.1] [--coverage 0.95]
                                    [--cores 2] [--out table.json]
    python benchmarks/contenders.py --markdown "label one" one.json "label two" two.json ...

The run must have computed every row at the first ranking level (ranking.rows all). The rounds
(dienes.contenders) are replayed in a scratch folder that sees the run's GFN2-xTB results, the
other levels' single points and, at the first level, only what the rounds ask for: each pair a
round asks for is copied from the run instead of computed, and charged its recorded single-point
time (the diene's minima the first time that diene is asked for, the pair's transition structures
and cycloadduct, the dienophile once). A level the rounds compute for every row (the base of a
correction) is charged in full to the rounds; the baseline computes the first level alone. The
full ranking is the same code with every pair. Prints the cost ratio (single-point core-seconds),
an estimated wall time on --cores cores, tier-1 membership, top-10 overlap, Spearman over all
ranked rows, the largest rank change inside the top 20, the rounds, and how often a row ranked on
the corrected level has its full-ranking prediction inside its interval. Computes nothing new.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
from pathlib import Path

import numpy as np
from scipy import stats

from dienes import run
from dienes import settings as cfg
from dienes.layout import Layout, read_json, write_json


def _cost(path: Path) -> float:
    try:
        return float(read_json(path).get("wall_time_s") or 0.0)
    except (FileNotFoundError, ValueError):
        return 0.0


def level_jobs(src: Layout, lkey: str, manifest: dict) -> list[float]:
    """Recorded seconds of each pair at one level, a job each: the pair's single points and its
    cycloadduct's (where the run computed one), plus its diene's minima the first time that diene
    comes."""
    seen, jobs = set(), []
    for s, task in manifest["transitions"].items():
        key = task["key"]
        job = _cost(src.level_pair(lkey, s)) + _cost(src.level_adduct(lkey, s))
        if key not in seen:
            seen.add(key)
            job += _cost(src.level_structure(lkey, key))
        jobs.append(job)
    return jobs


def makespan(seconds: list[float], cores: int) -> float:
    """Wall time of independent jobs on `cores` cores, longest first, each to the least loaded core."""
    load = [0.0] * max(1, cores)
    for t in sorted(seconds, reverse=True):
        load[load.index(min(load))] += t
    return max(load)


class Replay:
    """Stands in for the single points: copies a result from the finished run and charges its time
    (by round: `jobs[r]` lists the seconds of each pair round r asked for, its diene's minima included)."""

    def __init__(self, source: Layout, scratch: Layout):
        self.source, self.scratch, self.seconds, self.pairs = source, scratch, 0.0, 0
        self.jobs: dict[int, list[float]] = {}
        self.serial = 0.0                 # the dienophile, before any pair

    def pair(self, settings, manifest, stem, level, energies, layout):
        lkey = level.key()
        task = manifest["transitions"][stem]
        s_src, s_dst = self.source.level_structure(lkey, task["key"]), layout.level_structure(lkey, task["key"])
        job = 0.0
        if s_src.is_file() and not s_dst.is_file():
            s_dst.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy(s_src, s_dst)
            job += _cost(s_src)
        src = self.source.level_pair(lkey, stem)
        r = read_json(src)
        write_json(r, layout.level_pair(lkey, stem))
        job += _cost(src) + _cost(self.source.level_adduct(lkey, stem))
        self.seconds += job
        self.jobs.setdefault(len(list(Path(layout.root, "rounds").glob("round*.json"))) - 1, []).append(job)
        self.pairs += 1
        return r

    def dienophile(self, manifest_path, lkey, dhash, out_path, results="results", threads=1):
        src = self.source.level_dienophile(lkey, dhash)
        write_json(read_json(src), out_path)
        self.seconds += _cost(src)
        self.serial += _cost(src)
        return read_json(src)


def _scratch(source: Path, root: Path, first_lkey: str) -> Layout:
    """A results folder that shares the run's GFN2-xTB results and the other levels' single points
    (a level computed for every row, e.g. the base of a correction), and has none at the first
    ranking level."""
    root.mkdir(parents=True)
    for part in ("structures", "transition", "dienophiles"):
        (root / part).symlink_to((source / part).resolve())
    (root / "levels").mkdir()
    for folder in (source / "levels").glob("*"):
        if folder.name != first_lkey:
            (root / "levels" / folder.name).symlink_to(folder.resolve())
    return Layout(root)


def ranked(table):
    t = table[table["rank"].notna()].sort_values("rank")
    return t.set_index("id")


def compare(full, part) -> dict:
    f, p = ranked(full), ranked(part)
    common = f.index.intersection(p.index)
    top20 = f.index[:20]
    shift = [abs(int(f.loc[i, "rank"]) - int(p.loc[i, "rank"])) for i in top20 if i in p.index]
    unpriced = p[p["level"] != f["level"].reindex(p.index)]
    inside = [(lo <= v <= hi) for lo, hi, v in zip(unpriced["log10_k_low"], unpriced["log10_k_high"],
                                                   f["log10_k_pred"].reindex(unpriced.index))]
    return {"ranked": len(common),
            "tier1_full": sorted(f.index[f["tier"] == 1]), "tier1_rounds": sorted(p.index[p["tier"] == 1]),
            "tier1_identical": set(f.index[f["tier"] == 1]) == set(p.index[p["tier"] == 1]),
            "top10_overlap": len(set(f.index[:10]) & set(p.index[:10])),
            "spearman_all": round(float(stats.spearmanr(f.loc[common, "log10_k_pred"],
                                                        p.loc[common, "log10_k_pred"]).statistic), 3),
            "largest_change_top20": max(shift) if shift else 0,
            "rows_on_corrected": int((p["level"] != f["level"].reindex(p.index)).sum()),
            "corrected_interval_covers_full": (round(float(np.mean(inside)), 3) if inside else None)}


def markdown(labelled: list[str]) -> str:
    """The docs/validation.md table from saved --out files, one line per (label, file); the settings
    each replay used are read from its file."""
    lines = ["| library | correction start | top | first share | coverage | pairs (rounds) | core-s ratio | wall ratio | tier 1 "
             "| top 10 | Spearman | largest change in top 20 | rows on corrected, covered "
             "| correction: terms; LOO MAE, bound (kJ/mol) |", "|---" * 14 + "|"]
    for label, path in zip(labelled[::2], labelled[1::2]):
        t = json.loads(Path(path).read_text())
        c = t.get("correction_last") or {}
        covered = t["corrected_interval_covers_full"]
        n_corr = t["rows_on_corrected"]
        given = t.get("settings") or {}
        lines.append(
            f"| {label} | {' | '.join(str(given.get(k, '?')) for k in ('start', 'top', 'first_share', 'coverage'))} "
            f"| {t['pairs_computed_rounds']} of {t['pairs']} ({', '.join(map(str, t['pairs_per_round']))}) "
            f"| {t['cost_ratio']} | {t['single_point_wall_s_all'] / t['single_point_wall_s_rounds']:.2f} "
            f"| {'identical' if t['tier1_identical'] else 'differs'} | {t['top10_overlap']}/10 | {t['spearman_all']} "
            f"| {t['largest_change_top20']} | {n_corr}, {round(covered * n_corr) if covered is not None else 0} of {n_corr} "
            f"| {', '.join(c.get('terms', []))}; {c.get('loo_mae_kJmol', float('nan')):.1f}, "
            f"{c.get('bound_kJmol', float('nan')):.1f} |")
    return "\n".join(lines)


def main():
    if "--markdown" in sys.argv[1:2]:
        print(markdown(sys.argv[2:]))
        return
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", required=True, help="a finished run's results folder (every row computed)")
    ap.add_argument("--config", help="its config (default: the settings its manifest recorded)")
    ap.add_argument("--library", help="rank this library instead (its rows must be in the run)")
    ap.add_argument("--top", type=int, help="ranking.contenders.top")
    ap.add_argument("--first-share", type=float, help="ranking.contenders.first_share")
    ap.add_argument("--coverage", type=float, help="ranking.contenders.coverage")
    ap.add_argument("--cores", type=int, default=2, help="cores for the wall-time estimate (default 2)")
    ap.add_argument("--out", help="write the figures as JSON here")
    args = ap.parse_args()
    source = Path(args.results)
    recorded = read_json(source / "manifest.json")["run_settings"]
    conf = cfg.load(args.config).as_config() if args.config else recorded
    conf = conf | {"library": args.library or recorded["library"], "reference": recorded["reference"]}
    full_settings = cfg.resolve(conf | {"ranking": conf["ranking"] | {"rows": "all"}})
    given = {"top": args.top, "first_share": args.first_share, "coverage": args.coverage}
    contenders = dict(conf["ranking"].get("contenders", {})) | {k: v for k, v in given.items() if v is not None}
    part_settings = cfg.resolve(conf | {"ranking": conf["ranking"] | {"rows": "contenders",
                                                                      "contenders": contenders}})
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        manifest = run.prepare(full_settings, tmp / "full.json", results=source)
        full = run.rank_tables(manifest, run.load_computed(manifest, full_settings, Layout(source)), full_settings)
        first, src = full_settings.priced_levels[0], Layout(source)
        all_jobs = level_jobs(src, first.key(), manifest)
        all_serial = sum(_cost(src.level_dienophile(first.key(), d)) for d in manifest["dienophiles"])
        all_cost = sum(all_jobs) + all_serial
        # the rounds' other single-point levels (a correction's base) compute every row, before round 0
        base_jobs = [j for lv in part_settings.priced_levels[1:] for j in level_jobs(src, lv.key(), manifest)]
        base_serial = sum(_cost(src.level_dienophile(lv.key(), d)) for lv in part_settings.priced_levels[1:]
                          for d in manifest["dienophiles"])
        base_cost = sum(base_jobs) + base_serial
        scratch = _scratch(source, tmp / "results", first.key())
        replay = Replay(Layout(source), scratch)
        run.level_pair, run.level_dienophile = replay.pair, replay.dienophile
        mpath = tmp / "results" / "manifest.json"
        run.prepare(part_settings, mpath, results=scratch.root)
        for _, step in run.plan_steps(mpath, scratch.root):
            step()
        manifest = read_json(mpath)
        part = run.rank_tables(manifest, run.load_computed(manifest, part_settings, scratch), part_settings)
        chain = run.round_chain(scratch)
    corrected = next((lv for lv in part_settings.ranking_levels if lv.program == "correction"), None)
    out = {"settings": {"start": corrected.base.label() if corrected and corrected.base else "GFN2-xTB",
                        **{k: contenders.get(k) for k in ("top", "first_share", "coverage")}},
           "library_rows": len(manifest["records"]), "pairs": len(manifest["transitions"]),
           "pairs_computed_rounds": replay.pairs, "rounds": len(chain),
           "pairs_per_round": [len(r["pairs"]) for r in chain],
           "cut_per_round": [r.get("cut_log10_k") for r in chain],
           "correction_last": chain[-1].get("correction") if len(chain) > 1 else None,
           "single_point_core_s_all": round(all_cost, 1),
           "single_point_core_s_rounds": round(replay.seconds + base_cost, 1),
           "of_which_base_level_core_s": round(base_cost, 1),
           "cost_ratio": round(all_cost / (replay.seconds + base_cost), 2) if replay.seconds else None,
           # estimated wall time of the single points on --cores cores: the dienophiles first, then the
           # pairs longest first; the base level's pairs, then the rounds one after another
           "single_point_wall_s_all": round(all_serial + makespan(all_jobs, args.cores), 1),
           "single_point_wall_s_rounds": round(replay.serial + base_serial + makespan(base_jobs, args.cores)
                                               + sum(makespan(j, args.cores) for j in replay.jobs.values()), 1),
           "pairs_per_round_charged": {r: len(j) for r, j in sorted(replay.jobs.items())},
           **compare(full[0], part[0])}
    print(json.dumps(out, indent=1))
    if args.out:
        Path(args.out).write_text(json.dumps(out, indent=1))


if __name__ == "__main__":
    main()
