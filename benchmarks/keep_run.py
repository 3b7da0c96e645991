"""Keep a long benchmark run between machines: start it with a frozen copy of the package, pack
what it has computed into an archive that can live in the repository, and unpack that archive on
another machine so the run goes on where it stopped.

    python benchmarks/keep_run.py start  RUN LIBRARY.csv CONFIG.yaml [--cores 2]
    python benchmarks/keep_run.py pack   RUN ARCHIVE.tar.xz
    python benchmarks/keep_run.py unpack ARCHIVE.tar.xz RUN
    python benchmarks/keep_run.py resume RUN [--cores 2]

`start` copies the library and config into RUN (with the reference kinetics the config names),
checks the package out at the current commit into RUN/code (a git worktree, so the run keeps one
version of the science while the repository moves on) and launches `dienes rank` with that copy in
the background (RUN/run.log). `pack` stores the inputs, the results (JSON; tar keeps the
modification times Snakemake compares) and the commit; `unpack` restores them and the worktree at
that commit; `resume` launches the run again: Snakemake computes only what is missing. The
finished results feed `benchmarks/contenders.py --results RUN/results`.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tarfile
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parents[1]
KEPT = ("library.csv", "config", "results", "commit.txt")
SKIPPED = ("report.html", "dienes.sdf")    # rewritten at the end of every run


def _git(*args: str) -> str:
    return subprocess.run(["git", "-C", str(REPO), *args], check=True, capture_output=True,
                          text=True).stdout.strip()


def _worktree(run: Path, commit: str) -> None:
    code = run / "code"
    if not code.exists():
        subprocess.run(["git", "-C", str(REPO), "worktree", "prune"], check=True)
        _git("worktree", "add", "--detach", str(code), commit)


def resume(run: Path, cores: int) -> None:
    env = dict(os.environ, PYTHONPATH=str(run / "code"))
    dienes = Path(sys.executable).with_name("dienes")
    with open(run / "run.log", "a") as log:
        proc = subprocess.Popen([str(dienes), "rank", str(run / "library.csv"), "--workdir", str(run),
                                 "--cores", str(cores), "--top", "30"], env=env, stdout=log,
                                stderr=subprocess.STDOUT, start_new_session=True)
    (run / "run.pid").write_text(f"{proc.pid}\n")
    print(f"started: process group {proc.pid}, log {run / 'run.log'}")


def start(run: Path, library: Path, config: Path, cores: int) -> None:
    (run / "config").mkdir(parents=True, exist_ok=True)
    shutil.copy(library, run / "library.csv")
    shutil.copy(config, run / "config" / "config.yaml")
    reference = yaml.safe_load(config.read_text()).get("reference")
    if reference and not Path(reference).is_absolute():
        (run / reference).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(REPO / reference, run / reference)
    commit = _git("rev-parse", "HEAD")
    (run / "commit.txt").write_text(commit + "\n")
    _worktree(run, commit)
    resume(run, cores)


def pack(run: Path, archive: Path) -> None:
    def keep(info: tarfile.TarInfo):
        return None if Path(info.name).name in SKIPPED else info
    archive.parent.mkdir(parents=True, exist_ok=True)
    with tarfile.open(archive, "w:xz") as tar:
        for name in KEPT:
            if (run / name).exists():
                tar.add(run / name, arcname=name, filter=keep)
    pairs = {p.parent.name: len(list(p.glob("*.json"))) for p in (run / "results" / "levels").glob("*/pairs")}
    print(f"{archive}: {archive.stat().st_size / 1e6:.1f} MB; pairs computed per level: {pairs}")


def unpack(archive: Path, run: Path) -> None:
    run.mkdir(parents=True, exist_ok=True)
    with tarfile.open(archive) as tar:
        tar.extractall(run, filter="tar")
    _worktree(run, (run / "commit.txt").read_text().strip())
    print(f"{run}: restored at commit {(run / 'commit.txt').read_text().strip()[:10]}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = ap.add_subparsers(dest="cmd", required=True)
    s = sub.add_parser("start")
    s.add_argument("run", type=Path)
    s.add_argument("library", type=Path)
    s.add_argument("config", type=Path)
    s.add_argument("--cores", type=int, default=2)
    p = sub.add_parser("pack")
    p.add_argument("run", type=Path)
    p.add_argument("archive", type=Path)
    u = sub.add_parser("unpack")
    u.add_argument("archive", type=Path)
    u.add_argument("run", type=Path)
    r = sub.add_parser("resume")
    r.add_argument("run", type=Path)
    r.add_argument("--cores", type=int, default=2)
    a = ap.parse_args(argv)
    if a.cmd == "start":
        start(a.run.resolve(), a.library, a.config, a.cores)
    elif a.cmd == "pack":
        pack(a.run.resolve(), a.archive)
    elif a.cmd == "unpack":
        unpack(a.archive, a.run.resolve())
    else:
        resume(a.run.resolve(), a.cores)
    return 0


if __name__ == "__main__":
    sys.exit(main())
