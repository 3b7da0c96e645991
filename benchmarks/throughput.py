"""Workflow throughput: wall time of the demo with batched jobs against one job per
structure, run one right after the other in fresh directories of this machine.

    python benchmarks/throughput.py [--cores 2] [--library config/demo_library.csv]
        [--baseline-checkout DIR]   # also time another checkout's Snakefile (e.g. an older commit)
        [--keep DIR]                # keep the run directories

Prints each run's wall time, jobs started, per-structure compute summed from the
batch summaries, the ratio of the runs, and the throughput in dienes per core-hour.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parent.parent


def run(snakefile: Path, workdir: Path, cores: int, config_extra: list[str]) -> dict:
    env = dict(os.environ, OMP_NUM_THREADS="1")
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(snakefile), "--directory", str(workdir),
           "--cores", str(cores)] + (["--config", *config_extra] if config_extra else [])
    t0 = time.perf_counter()
    out = subprocess.run(cmd, capture_output=True, text=True, env=env)
    wall = time.perf_counter() - t0
    if out.returncode != 0:
        raise RuntimeError(f"run in {workdir} failed:\n{out.stderr[-3000:]}")
    jobs = re.findall(r"^(?:localrule|rule|localcheckpoint|checkpoint) (\w+):$", out.stderr, re.M)
    compute = 0.0
    for p in (workdir / "results" / "batches").glob("*/*.json"):
        compute += sum(m.get("wall_time_s") or 0.0 for m in json.loads(p.read_text())["members"])
    return {"wall_s": wall, "jobs": len(jobs) - jobs.count("all"), "compute_s": compute}


def setup(workdir: Path, source: Path, library: Path):
    (workdir / "config").mkdir(parents=True)
    for name in ("config.yaml", "reference_rates.csv"):
        shutil.copy(source / "config" / name, workdir / "config" / name)
    shutil.copy(library, workdir / "config" / "library.csv")
    cfg = yaml.safe_load((workdir / "config" / "config.yaml").read_text())
    cfg["library"] = "config/library.csv"
    cfg["reference"] = "config/reference_rates.csv"
    (workdir / "config" / "config.yaml").write_text(yaml.safe_dump(cfg))


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--cores", type=int, default=2)
    ap.add_argument("--library", default=str(REPO / "config" / "demo_library.csv"))
    ap.add_argument("--baseline-checkout", default=None, help="another checkout to time first")
    ap.add_argument("--keep", default=None, metavar="DIR",
                    help="keep the run directories under DIR (e.g. to refine the batched run afterwards)")
    args = ap.parse_args()
    library = Path(args.library).resolve()
    n_rows = sum(1 for _ in open(library)) - 1
    root = Path(args.keep).resolve() if args.keep else Path(tempfile.mkdtemp(prefix="dienes-throughput-"))
    root.mkdir(parents=True, exist_ok=True)
    results = {}
    if args.baseline_checkout:
        base = Path(args.baseline_checkout).resolve()
        setup(root / "baseline", base, library)
        results["baseline checkout"] = run(base / "Snakefile", root / "baseline", args.cores, [])
        print(f"baseline checkout: {results['baseline checkout']}", flush=True)
    for label, extra in (("one structure per job", ["jobs={structures_per_job: 1}"]),
                         ("batched (auto)", [])):
        d = root / label.split()[0]
        setup(d, REPO, library)
        results[label] = run(REPO / "Snakefile", d, args.cores, extra)
        print(f"{label}: {results[label]}", flush=True)
    print(f"\n{'run':<24}{'wall_s':>8}{'jobs':>6}{'compute_s':>11}{'overhead_s':>11}")
    for label, r in results.items():
        print(f"{label:<24}{r['wall_s']:8.0f}{r['jobs']:6d}{r['compute_s']:11.0f}"
              f"{r['wall_s'] * args.cores - r['compute_s']:11.0f}")
    one, batched = results["one structure per job"], results["batched (auto)"]
    print(f"ratio one-per-job / batched = {one['wall_s'] / batched['wall_s']:.2f}")
    if "baseline checkout" in results:
        print(f"ratio baseline checkout / batched = {results['baseline checkout']['wall_s'] / batched['wall_s']:.2f}")
    print(f"throughput: {n_rows / (batched['wall_s'] * args.cores / 3600):.0f} library rows per core-hour "
          f"(wall time x cores; {library.name}, {n_rows} rows, reference set included in the work)")
    if not args.keep:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
