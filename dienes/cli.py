"""The `dienes` console command.

    dienes rank LIBRARY [--dienophile SMILES] [--cores N] [--quick | --rows all|N] [--workdir DIR] [--set KEY=VALUE ...]
    dienes look SMILES [--dienophile SMILES] [--backend NAME] [--no-ts] [--no-profile]

`rank` runs the Snakemake workflow for the everyday case and prints the top
of the ranking; `look` analyses one SMILES on the spot (sites, penalty,
frontier orbitals, transition structure, a text torsion profile) without a
workflow run.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
from pathlib import Path

from . import __version__
from .paths import workflow_root

REPO = workflow_root()
BAR_WIDTH = 40

RANK_EXAMPLES = """examples:
  dienes rank my_dienes.csv
  dienes rank my_dienes.csv --dienophile 'C=CC(=O)OC' --cores 8
  dienes rank catalogue.sdf --quick --workdir runs/quick-screen
  dienes rank my_dienes.smi --temperature 313.15 --solvent toluene

Library: CSV with columns id and smiles (.csv/.tsv), .smi (SMILES then id) or .sdf.
Results go to WORKDIR/results (ranking.csv, report.html, dienes.sdf, model.json);
a rerun in the same WORKDIR computes only what is new."""

LOOK_EXAMPLES = """examples:
  dienes look 'C=CC(C)=C'
  dienes look 'C1=CCC=C1' --dienophile 'N#CC(C#N)=C(C#N)C#N'
  dienes look 'CO/C=C/C=C' --no-ts"""


def _fail(message: str, code: int = 2) -> int:
    print(f"dienes: {message}", file=sys.stderr)
    return code


def failed_logs(workdir: Path) -> list[str]:
    """The job logs Snakemake named for the failed jobs of its latest run."""
    logs = sorted((workdir / ".snakemake" / "log").glob("*.snakemake.log"), key=lambda p: p.stat().st_mtime)
    if not logs:
        return []
    text = "\n" + logs[-1].read_text(errors="replace")
    out = []
    for block in re.split(r"\n(?=Error in rule )", text)[1:]:
        m = re.search(r"^\s+log: (\S+)", block, re.M)
        rule = block.split(":", 1)[0].replace("Error in rule ", "")
        if m:
            out.append(f"{rule}: {workdir / m.group(1)}")
    return out


def _rank(args) -> int:
    from .library import EXTENSIONS, check_dienophile
    library = Path(args.library).resolve()
    if not library.is_file():
        return _fail(f"{args.library}: no such file")
    if library.suffix.lower() not in EXTENSIONS:
        return _fail(f"{args.library}: unknown file type {library.suffix or '(no extension)'!r}; "
                     "name it .csv (columns id, smiles), .smi or .sdf")
    if args.dienophile:
        from .dienophiles import smiles_of
        args.dienophile = smiles_of(args.dienophile)
        problem = check_dienophile(args.dienophile)
        if problem:
            return _fail(f"dienophile {args.dienophile!r}: {problem} (give a SMILES, or a common name: "
                         "dienes rank --help lists them)")
    workdir = Path(args.workdir).resolve()
    workdir.mkdir(parents=True, exist_ok=True)
    local_config = workdir / "config" / "config.yaml"
    configfile = local_config if local_config.is_file() else REPO / "config" / "config.yaml"
    overrides = [f"library={library}"]
    if local_config.is_file():
        print(f"dienes: using {local_config} (the working directory's own config) instead of the shipped "
              "config/config.yaml", file=sys.stderr)
        import yaml
        local = yaml.safe_load(local_config.read_text())     # a parse error: main's one line
        reference = local.get("reference") if isinstance(local, dict) else None
        if isinstance(reference, str) and not (workdir / reference).is_file() and not any(
                s.startswith("reference=") for s in args.set or []):
            return _fail(f"{local_config}: reference {reference!r} is not a file (a relative path is read from "
                         f"{workdir}); copy {REPO / 'config' / 'reference_rates.csv'} there or give a full path")
    else:
        overrides.append(f"reference={REPO / 'config' / 'reference_rates.csv'}")
    if args.dienophile:
        overrides.append(f"dienophile={args.dienophile}")
    from . import settings as cfg
    shipped = cfg.load(configfile, fallback=False)          # the config the run starts from
    if args.quick or args.rows is not None:
        levels = [shipped.placing.name] if args.quick else list(shipped["ranking"]["levels"])
        overrides.append(f"ranking={{levels: [{', '.join(levels)}], rows: {'all' if args.quick else args.rows}}}")
    if args.backend:
        overrides.append(f"levels={{{shipped.placing.name}: {{program: xtb, backend: {args.backend}}}}}")
    overrides += condition_overrides(args) + (args.set or [])
    rows = "all"
    if not args.quick:
        ranked = shipped if args.rows is None else shipped | {"ranking": dict(shipped["ranking"]) | {
            "rows": int(args.rows) if args.rows.isdigit() else args.rows}}
        rows = ranked.rows_mode
    given = {"dienophile": shipped["dienophile"], "reference": shipped["reference"]} | dict(
        o.split("=", 1) for o in overrides if "=" in o)              # the last of a key wins, as in Snakemake
    print(run_estimate(library, workdir, args.cores, quick=args.quick, rows=rows, dienophile=given["dienophile"],
                       reference=workdir / given["reference"], limits=shipped["limits"],
                       level_key=shipped.priced_levels[0].key() if shipped.priced_levels else "*"), file=sys.stderr)
    # arguments go to Snakemake as a list: no shell ever sees a user string
    cmd = [sys.executable, "-m", "snakemake", "--snakefile", str(REPO / "Snakefile"),
           "--directory", str(workdir), "--cores", str(args.cores), "--configfile", str(configfile),
           "--config", *overrides]
    if args.quiet:
        cmd += ["--quiet", "all"]
    env = dict(os.environ, OMP_NUM_THREADS=os.environ.get("OMP_NUM_THREADS", "1"))
    rc = subprocess.run(cmd, env=env).returncode
    if rc != 0:
        logs = failed_logs(workdir)
        where = ("; see " + "; ".join(logs)) if logs else f"; see the Snakemake output above and {workdir / 'logs'}"
        return _fail(f"the workflow stopped (exit {rc}){where}", rc)
    ranking = workdir / "results" / "ranking.csv"
    if ranking.is_file():
        import json

        from .outputs import read_table, summary_lines
        summary = json.loads((workdir / "results" / "model.json").read_text())
        print()
        for line in summary_lines(read_table(ranking), workdir / "results", summary, top=args.top):
            print(line)
    return 0


def run_estimate(library: Path, workdir: Path, cores: int, quick: bool, rows="all",
                 dienophile: str = "O=C1OC(=O)C=C1", reference: Path | None = None, level_key: str = "*",
                 limits: dict | None = None) -> str:
    """One line before the run: rows to compute and the expected wall time (dienes.estimate), each row
    charged by the size of its pair with `dienophile` (a SMILES or a common name), a row the
    `reference` kinetics file computes anyway (same diene and dienophile) inside the reference set's cost;
    `level_key`: the results folder of the first ranking level (estimate.rows_to_compute); `limits`:
    the config's caps on a diene (a row above them is refused, so it costs nothing).
    `rows`: what ranking.rows means ('all', 'contenders', N), or a function of the library's size
    that says it (Settings.rows_mode)."""
    from . import estimate
    from .dienophiles import smiles_of
    from .library import Limits, read_rows
    try:
        smiles = [s for _, s, _ in read_rows(library)]
    except (OSError, ValueError) as exc:
        return f"dienes: no time estimate ({exc})"
    dienophile = smiles_of(dienophile)
    fast, slow, ref_done = estimate.rows_to_compute(smiles, workdir, dienophile, level_key)
    share, how = estimate.dft_share(rows(len(smiles)) if callable(rows) else rows, len(smiles))
    ref_done = ref_done if not quick else (ref_done[0], True)
    shared = set(estimate.shared_with_reference(smiles, reference, dienophile))   # in the reference set's cost
    fast, slow = [s for s in fast if s not in shared], [s for s in slow if s not in shared]
    caps = Limits(**limits) if limits else None
    first = estimate.size_factors(fast, dienophile, caps)      # each row is read once where both lists agree
    work = (first[0], (first if slow == fast else estimate.size_factors(slow, dienophile, caps))[1])
    wall = estimate.wall_time_s(work, cores, quick, ref_done, share)
    new = len(fast) if quick else len(slow)       # a row still to compute at GFN2-xTB is at the next level too
    return (f"dienes: {len(smiles)} rows, {new} to compute{'' if all(ref_done) else ' plus the reference set (once)'}"
            f"{'' if quick else how}; expected {estimate.say(wall)} on {cores} core(s)"
            f"{' (quick screen)' if quick else ''}, from the sizes of the dienes and the dienophile "
            "(a guide within a factor of two)")


def condition_overrides(args) -> list[str]:
    """--temperature and --solvent as config values (validated by the workflow before anything runs)."""
    out = []
    if args.temperature is not None:
        out.append(f"temperature_K={args.temperature:g}")
    if args.solvent is not None:
        out.append(f"solvent={args.solvent}")
    return out


def _rows(text: str) -> str:
    if text in ("all", "contenders", "auto") or (text.isdigit() and int(text) > 0):
        return text
    raise argparse.ArgumentTypeError("give all, contenders, auto or a positive number of rows")


def text_profile(angles, energies) -> list[str]:
    """One line per dihedral: angle, energy and a bar."""
    top = max(float(max(energies)), 1e-9)
    return [f"  {a:5.0f} deg {e:7.2f} kJ/mol |{'#' * int(round(BAR_WIDTH * e / top))}"
            for a, e in zip(angles, energies)]


def _look(args) -> int:
    import numpy as np

    from . import settings as cfg
    from .backends import Molecule
    from .library import Limits, check_dienophile, prepare_record
    from .orbitals import demand
    from .pipeline import compute_dienophile, compute_structure
    from .torsion import torsion_profile
    settings = cfg.load(REPO / "config" / "config.yaml")
    if args.backend:
        placing = settings.placing.name
        settings = settings.replace(levels=settings.as_config()["levels"] | {
            placing: {"program": "xtb", "backend": args.backend}})
    config = settings
    st = settings.structure_settings()
    from .dienophiles import smiles_of
    args.dienophile = smiles_of(args.dienophile) if args.dienophile else None
    # one dienophile throughout: the one asked for, else that of the finished run in --workdir
    # (whose model gives the prediction), else the shipped config's
    dph_smiles = args.dienophile or _finished_run_dienophile(Path(args.workdir)) or config["dienophile"]
    args.dienophile = dph_smiles
    problem = check_dienophile(dph_smiles)
    if problem:
        return _fail(f"dienophile {dph_smiles!r}: {problem}")
    rec = prepare_record(1, "look", args.smiles, {}, Limits(**config["limits"]))
    if rec.status != "ok":
        return _fail(f"{args.smiles}: {rec.status}: {rec.message}", 1)
    if rec.message:
        print(f"note: {rec.message}")
    dph = compute_dienophile(dph_smiles, st)
    print(f"dienophile {dph['smiles']}: HOMO {dph['homo_eV']:.2f} eV, LUMO {dph['lumo_eV']:.2f} eV "
          "(GFN2-xTB orbital energies: model features, not ionisation energies)")
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
            if s["status"] == "ok" and s["kind"] == "acyclic" and best is None:
                best = s
        if res["status"] == "ok" and not args.no_ts:
            from .transition import transition_states_for_structure
            ts = transition_states_for_structure(res, dph, settings.backend_settings(), config["transition_state"])
            print(f"  transition structures with {dph['smiles']} ({ts.get('wall_time_s', 0):.0f} s; "
                  "GFN2-xTB barriers are far too low in value and serve for ordering):")
            for label, t in ts["sites"].items():
                if t.get("status") == "ok":
                    print(f"    site {label:<12} barrier {t['barrier_kJmol']:7.1f} kJ/mol from the diene's "
                          f"minimum ({t['approach']}; imaginary mode {t['ts_imag_cm1']:.0f} cm-1; "
                          f"reaction energy {t['reaction_energy_kJmol']:.0f} kJ/mol, tens of kJ/mol too low)")
                else:
                    print(f"    site {label:<12} {t.get('status')}: {t.get('message', '')}")
        if best is None:
            if res["status"] == "ok" and not args.no_profile:
                print("  no torsion profile: every site is held by a ring")
        elif not args.no_profile:
            geo = res["geometry"]
            a, e = torsion_profile(geo["numbers"], np.asarray(geo["planar_s_cis_A"][best["label"]]),
                                   Molecule(geo["numbers"], settings.backend_settings()), best["atoms"],
                                   step_deg=15.0)
            print(f"  relaxed torsion profile of site {best['label']} (0 deg = s-cis):")
            print("\n".join(text_profile(a, e)))
    if args.no_ts:
        print("\nno predicted log10 k: --no-ts skips the transition structure the prediction needs")
    else:
        _look_as_rank(args, dph_smiles)
    return 0


def _finished_run_dienophile(workdir: Path) -> str | None:
    """The dienophile of the finished `dienes rank` in `workdir` (its model.json), or None."""
    import json
    try:
        return json.loads((workdir / "results" / "model.json").read_text())["config"]["dienophile"]
    except (OSError, ValueError, KeyError, TypeError):
        return None


def _look_as_rank(args, dph_smiles: str) -> None:
    """The answer `dienes rank` gives for this one diene, from the model of a finished run
    in --workdir: the same code path (rank_in_process) on a one-row library, reusing that
    run's results (the reference set, and this diene if it was there) and adding its own."""
    import json
    import tempfile

    import pandas as pd

    from . import settings as cfg
    from .outputs import is_true, times_text
    from .run import rank_in_process
    workdir = Path(args.workdir).resolve()
    results = workdir / "results"
    if not (results / "model.json").is_file():
        print(f"\nno predicted log10 k: `look` predicts with the model of a finished `dienes rank` in "
              f"--workdir ({workdir}), and there is none. Run `dienes rank` there once (it computes the "
              "reference set), then look again for the same answer as rank.")
        return
    model = json.loads((results / "model.json").read_text())
    if "config" not in model:
        print(f"\nno predicted log10 k: {results / 'model.json'} was written by an older version; rank again")
        return
    # the run's settings; its dienophile unless another was asked for
    dph_smiles = args.dienophile or model["config"]["dienophile"]
    config = model["config"] | {"dienophile": dph_smiles}
    if not Path(config["reference"]).is_absolute():
        config["reference"] = str(workdir / config["reference"])
    print("\ncomputing it as `dienes rank` would, with that run's settings and results (a diene it has not "
          "seen takes two to four minutes at the density-functional level) ...", flush=True)
    with tempfile.TemporaryDirectory() as tmp:
        lib = Path(tmp) / "look.csv"
        pd.DataFrame({"id": ["look"], "smiles": [args.smiles]}).to_csv(lib, index=False)
        config["library"] = str(lib)
        table, _, _ = rank_in_process(cfg.resolve(config, fallback=False), cache_dir=results,
                                      manifest_path=Path(tmp) / "manifest.json")
    r = table.iloc[0]
    print(f"\nas `dienes rank` answers (model of {results / 'model.json'}, dienophile {dph_smiles}):")
    if pd.isna(r["rank"]):
        print(f"  not ranked: {r['status']}: {r['message']}")
        return
    domain = "yes" if is_true(r["in_domain"]) else f"no, extrapolation ({r['domain_note']})"
    if is_true(r["in_domain"]) and not is_true(r.get("dienophile_in_reference", True)):
        domain = f"dienophile transfer ({r['domain_note']})"
    times = times_text(r.get("times_faster_than_butadiene"))
    print(f"  log10 k {r['log10_k_pred']:+.2f} [{r['log10_k_low']:+.2f}, {r['log10_k_high']:+.2f}]"
          + (f", x{times} butadiene" if times else "") + f"; level {r['level']}; in domain: {domain}")
    try:
        run = pd.read_csv(results / "ranking.csv")
        # rows ahead of it by more than the printed precision (a tie, or the diene itself, is level)
        above = int((run["log10_k_pred"] > r["log10_k_pred"] + 0.005).sum())
        print(f"  {above} of that run's {int(run['rank'].notna().sum())} ranked rows are ahead of it")
    except (OSError, KeyError, ValueError):
        pass
    if pd.notna(r.get("reaction_free_energy_kJmol")):
        print(f"  reaction free energy {r['reaction_free_energy_kJmol']:+.0f} kJ/mol at level {r['level']}"
              + (f": {r['reversal_note']}" if is_true(r.get("may_revert")) else ": the adduct should not revert"))
    if r.get("message"):
        print(f"  note: {r['message']}")


def main(argv=None) -> int:
    args = parser().parse_args(argv)
    try:
        return args.func(args)
    except KeyboardInterrupt:
        return _fail("interrupted", 130)
    except Exception as exc:  # noqa: BLE001 - the console prints one line, not a traceback
        return _fail(f"{type(exc).__name__}: {exc}", 1)


def parser() -> argparse.ArgumentParser:
    """The `dienes` command's arguments."""
    ap = argparse.ArgumentParser(prog="dienes",
                                 description="Rank conjugated dienes by predicted Diels-Alder reactivity.")
    ap.add_argument("--version", action="version", version=f"dienes {__version__}")
    sub = ap.add_subparsers(dest="command", required=True)

    class RankFormatter(argparse.RawDescriptionHelpFormatter):
        """Examples kept as written; every option's help states its default itself."""

    r = sub.add_parser("rank", formatter_class=RankFormatter, epilog=RANK_EXAMPLES,
                       help="rank a library with the workflow (CSV id,smiles; .smi; .sdf)",
                       description="Rank a diene library with the Snakemake workflow and print the top.")
    r.add_argument("library", help="the diene library file")
    from .dienophiles import COMMON
    names = ", ".join(COMMON)
    r.add_argument("--dienophile", metavar="SMILES|NAME",
                   help=f"dienophile SMILES (C=C or C#C) or one of: {names} (default: the config's, maleic anhydride)")
    cores = os.cpu_count() or 1
    r.add_argument("--cores", type=int, default=cores, help=f"CPU cores to use (default: all, {cores} here)")
    how = r.add_mutually_exclusive_group()
    how.add_argument("--quick", action="store_true",
                     help="a quick GFN2-xTB screen: rank without the density-functional single points (about a "
                          "sixth of the time; GFN2-xTB misorders the top, the output says so) (default: off)")
    how.add_argument("--rows", type=_rows, metavar="all|contenders|auto|N",
                     help="which dienes are recomputed at the density-functional level (two to four minutes "
                          "per diene on one core): all; contenders (a sample spanning the library, then every "
                          "diene whose corrected GFN2-xTB estimate could reach the top; the rest ranked on that estimate, "
                          "with its error in their intervals); auto (all up to 150 dienes, contenders above); or "
                          "the N best by GFN2-xTB (risky: GFN2-xTB misorders the top) (default: the config's "
                          "ranking.rows, auto)")
    r.add_argument("--temperature", type=float, metavar="K",
                   help="reaction temperature in kelvin: conformer weights and the free-energy barriers "
                        "(default: the config's temperature_K, 298.15)")
    r.add_argument("--solvent", metavar="NAME",
                   help="implicit solvent around every GFN2-xTB structure, e.g. toluene (default: the config's "
                        "solvent, none); the scale stays the reference kinetics'")
    r.add_argument("--backend", choices=["xtb-python", "tblite"],
                   help="GFN2-xTB implementation (the same Hamiltonian; tblite where xtb-python has no wheel, "
                        "Python 3.12+) (default: the config's, xtb-python, or tblite where it is missing)")
    r.add_argument("--workdir", default=".", help="where results/ and logs/ go (default: the current directory)")
    r.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="any other config value, e.g. temperature_K=313.15 (repeatable; default: none)")
    r.add_argument("--top", type=int, default=15, help="how many ranked rows to print (default: 15)")
    r.add_argument("--quiet", action="store_true", help="less Snakemake output (default: off)")
    r.set_defaults(func=_rank)
    lk = sub.add_parser("look", formatter_class=RankFormatter, epilog=LOOK_EXAMPLES,
                        help="analyse one SMILES now, without a workflow run",
                        description="Sites, s-cis penalty, frontier orbitals, transition structure and "
                                    "torsion profile of one diene, computed on the spot.")
    lk.add_argument("smiles", help="the diene SMILES")
    lk.add_argument("--dienophile", metavar="SMILES|NAME",
                    help="dienophile SMILES or a common name as for rank (default: the config's, maleic anhydride)")
    lk.add_argument("--backend", choices=["xtb-python", "tblite"], help="GFN2-xTB backend (default: the config's)")
    lk.add_argument("--no-ts", action="store_true", help="skip the transition-structure search (default: search)")
    lk.add_argument("--no-profile", action="store_true", help="skip the torsion profile (default: scan)")
    lk.add_argument("--workdir", default=".",
                    help="a directory with a finished `dienes rank`: its model gives the predicted log10 k, "
                         "interval, domain and level, as rank would (default: the current directory)")
    lk.set_defaults(func=_look)
    return ap


if __name__ == "__main__":
    sys.exit(main())
