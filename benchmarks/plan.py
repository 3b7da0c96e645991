"""Run-time planning table from a finished run: hours by library rows and cores, at each level.

    python benchmarks/plan.py [--results results] [--wall-s 2700 --cores-used 2]

Reads the per-structure wall times every result file records (GFN2-xTB structure and
transition-structure searches; refined single points and cycloadducts) of a finished run, splits them into
the library rows' cost and the one-off cost of the reference set (computed once, then reused
by every later run in the same directory), and prints a markdown table of the expected wall
time: (one-off + rows x cost per row) / cores / efficiency. The efficiency is measured from
the same run when its wall time is given (sum of per-structure core-seconds / (wall x cores));
otherwise 0.85 is assumed. Rows are the run's own library rows, so the figures hold for
catalogues like it (size, flexibility); a catalogue of larger dienes costs more per row.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

ROWS = (10, 50, 200, 1000)
CORES = (2, 8, 32)


def costs(results: Path) -> dict:
    manifest = json.loads((results / "manifest.json").read_text())
    lib_keys = {i["key"] for r in manifest["records"] if r["status"] == "ok" for i in r["isomers"]}
    # the reference set is a one-off for a new working directory even where this run's library
    # repeats some of its dienes
    ref_keys = {i["key"] for r in manifest["reference_records"] if r["status"] == "ok" for i in r["isomers"]}

    def wall(path: Path) -> float:
        try:
            return float(json.loads(path.read_text()).get("wall_time_s", 0.0))
        except (OSError, ValueError):
            return 0.0

    fast = {"lib": 0.0, "ref": 0.0, "all": 0.0}
    refined = {"lib": 0.0, "ref": 0.0, "all": 0.0}
    for k in lib_keys | ref_keys:
        w_fast = wall(results / "structures" / f"{k}.json") + sum(
            wall(p) for p in (results / "transition").glob(f"{k}__*.json"))
        w_ref = sum(wall(p) for part in ("pairs", "adducts")
                    for p in (results / "levels").glob(f"*/{part}/{k}__*.json")) + sum(
            wall(p) for p in (results / "levels").glob(f"*/structures/{k}.json"))
        for side in ("lib",) * (k in lib_keys) + ("ref",) * (k in ref_keys) + ("all",):
            fast[side] += w_fast
            refined[side] += w_ref
    n_rows = sum(1 for r in manifest["records"] if r["status"] == "ok")
    return {"rows": n_rows, "fast_per_row_s": fast["lib"] / n_rows, "fast_once_s": fast["ref"],
            "refined_per_row_s": refined["lib"] / n_rows, "refined_once_s": refined["ref"],
            "core_s": fast["all"] + refined["all"]}


def table(c: dict, efficiency: float) -> str:
    lines = ["| rows | cores | quick screen (GFN2-xTB) | default (density-functional level) |", "|---|---|---|---|"]
    for n in ROWS:
        for cores in CORES:
            fast = (c["fast_once_s"] + n * c["fast_per_row_s"]) / cores / efficiency / 3600
            full = fast + (c["refined_once_s"] + n * c["refined_per_row_s"]) / cores / efficiency / 3600
            lines.append(f"| {n} | {cores} | {_h(fast)} | {_h(full)} |")
    return "\n".join(lines)


def _h(hours: float) -> str:
    if hours < 1 / 60:
        return "< 1 min"
    return f"{hours * 60:.0f} min" if hours < 1 else f"{hours:.1f} h"


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", default="results")
    ap.add_argument("--wall-s", type=float, default=None, help="the run's wall time (s), for the efficiency")
    ap.add_argument("--cores-used", type=int, default=2)
    args = ap.parse_args()
    c = costs(Path(args.results))
    eff = min(1.0, c["core_s"] / (args.wall_s * args.cores_used)) if args.wall_s else 0.85
    print(f"library rows {c['rows']}: per row {c['fast_per_row_s']:.0f} core-s at GFN2-xTB and "
          f"{c['refined_per_row_s']:.0f} at the refined level; reference set once {c['fast_once_s']:.0f} + "
          f"{c['refined_once_s']:.0f} core-s; parallel efficiency {eff:.2f}\n")
    print(table(c, eff))


if __name__ == "__main__":
    main()
