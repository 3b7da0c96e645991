"""The `dienes` console command.

    dienes rank LIBRARY [--dienophile SMILES] [--cores N] [--workdir DIR] [--set KEY=VALUE ...]
    dienes look SMILES [--dienophile SMILES] [--backend NAME]

`rank` runs the Snakemake workflow for the everyday case and prints the top
of the ranking; `look` analyses one SMILES on the spot (sites, penalty,
frontier orbitals, a text torsion profile) without a workflow run.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
BAR_WIDTH = 40


def _rank(args) -> int:
    import pandas as pd
    from .outputs import summary_lines
    library = Path(args.library).resolve()
    if not library.is_file():
        print(f"dienes: {args.library}: no such file", file=sys.stderr)
        return 2
    workdir = Path(args.workdir).resolve()
    workdir.mkdir(parents=True, exist_ok=True)
    local_config = workdir / "config" / "config.yaml"
    configfile = local_config if local_config.is_file() else REPO / "config" / "config.yaml"
    overrides = [f"library={library}"]
    if not local_config.is_file():
        overrides.append(f"reference={REPO / 'config' / 'reference_rates.csv'}")
    if args.dienophile:
        overrides.append(f"dienophile={args.dienophile}")
    overrides += args.set or []
    # arguments go to Snakemake as a list: no shell ever sees a user string
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(REPO / "Snakefile"),
           "--directory", str(workdir), "--cores", str(args.cores), "--configfile", str(configfile),
           "--config", *overrides]
    if args.quiet:
        cmd += ["--quiet", "all"]
    env = dict(os.environ, OMP_NUM_THREADS=os.environ.get("OMP_NUM_THREADS", "1"))
    rc = subprocess.run(cmd, env=env).returncode
    ranking = workdir / "results" / "ranking.csv"
    if rc == 0 and ranking.is_file():
        table = pd.read_csv(ranking, dtype={"id": str}, keep_default_na=False, na_values=[""])
        print()
        for line in summary_lines(table, workdir / "results", top=args.top):
            print(line)
        print(f"report: {workdir / 'results' / 'report.html'}")
    return rc


def text_profile(angles, energies) -> list[str]:
    """One line per dihedral: angle, energy and a bar."""
    top = max(float(max(energies)), 1e-9)
    return [f"  {a:5.0f} deg {e:7.2f} kJ/mol |{'#' * int(round(BAR_WIDTH * e / top))}"
            for a, e in zip(angles, energies)]


def _look(args) -> int:
    import numpy as np
    from . import settings as cfg
    from .backends import Molecule
    from .library import Limits, prepare_record
    from .orbitals import demand
    from .pipeline import backend_settings, compute_dienophile, compute_structure
    from .torsion import torsion_profile
    config = cfg.load(REPO / "config" / "config.yaml")
    if args.backend:
        config["backend"] = args.backend
    st = cfg.structure_settings(config)
    rec = prepare_record(1, "look", args.smiles, {}, Limits(**config["limits"]))
    if rec.status != "ok":
        print(f"{args.smiles}: {rec.status}: {rec.message}")
        return 1
    if rec.message:
        print(f"note: {rec.message}")
    dph = compute_dienophile(args.dienophile or config["dienophile"], st)
    print(f"dienophile {dph['smiles']}: HOMO {dph['homo_eV']:.2f} eV, LUMO {dph['lumo_eV']:.2f} eV")
    for iso in rec.isomers:
        res = compute_structure(iso.smiles, st)
        print(f"\n{iso.smiles}  ({res['status']}{': ' + res['message'] if res['message'] else ''})")
        if res["status"] not in ("ok", "locked_s_trans"):
            continue
        print(f"  {len(res['sites'])} diene site(s); {res['n_gradients']} GFN2-xTB gradient calls, "
              f"{res['wall_time_s']:.1f} s")
        best = None
        for s in res["sites"]:
            kind, normal, inverse = demand(s["homo_eV"], s["lumo_eV"], dph["homo_eV"], dph["lumo_eV"])
            pen = "locked s-trans" if s["scis_penalty_kJmol"] is None else f"{s['scis_penalty_kJmol']:.1f} kJ/mol"
            print(f"  site {s['label']:<12} {s['kind']:<11} s-cis penalty {pen:<16} "
                  f"reactive fraction {s['reactive_fraction']:.3f}  HOMO {s['homo_eV']:.2f} eV  "
                  f"LUMO {s['lumo_eV']:.2f} eV  {kind} demand (gap {min(normal, inverse):.2f} eV)")
            if s["status"] == "ok" and s["kind"] != "ring_s_cis" and best is None:
                best = s
        if best is not None and not args.no_profile:
            geo = res["geometry"]
            a, e = torsion_profile(geo["numbers"], np.asarray(geo["planar_s_cis_A"][best["label"]]),
                                   Molecule(geo["numbers"], backend_settings(st)), best["atoms"],
                                   step_deg=15.0)
            print(f"  relaxed torsion profile of site {best['label']} (0 deg = s-cis):")
            print("\n".join(text_profile(a, e)))
    return 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="dienes", description="Rank dienes by predicted Diels-Alder reactivity.")
    sub = ap.add_subparsers(dest="command", required=True)
    r = sub.add_parser("rank", help="rank a library (CSV with id,smiles; .smi; .sdf) with the workflow")
    r.add_argument("library")
    r.add_argument("--dienophile", help="dienophile SMILES (default: the config's, maleic anhydride)")
    r.add_argument("--cores", type=int, default=os.cpu_count() or 1)
    r.add_argument("--workdir", default=".", help="where results/ and logs/ go (default: here)")
    r.add_argument("--set", action="append", metavar="KEY=VALUE", help="any other config value")
    r.add_argument("--top", type=int, default=15, help="how many ranked rows to print")
    r.add_argument("--quiet", action="store_true", help="less Snakemake output")
    r.set_defaults(func=_rank)
    lk = sub.add_parser("look", help="analyse one SMILES now, without a workflow run")
    lk.add_argument("smiles")
    lk.add_argument("--dienophile")
    lk.add_argument("--backend", choices=["xtb-python", "tblite"])
    lk.add_argument("--no-profile", action="store_true", help="skip the torsion profile")
    lk.set_defaults(func=_look)
    args = ap.parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
