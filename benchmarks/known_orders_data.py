"""Write the GFN2-xTB results the known-order tests price at the shipped level
(tests/data/known_orders.json): the structure and transition-structure results of the dienes of
docs/validation.md's known orders with maleic anhydride, and the dienophile's result.

    python benchmarks/known_orders_data.py [--cache DIR] [--out tests/data/known_orders.json]
                                           [--dienophile SMILES --dienes NAME ...]
    python benchmarks/known_orders_data.py --gas-phase [--cache DIR]   (tests/data/gas_phase_pairs.json)

Computes them with the shipped config's GFN2-xTB settings (in-process, the workflow's own steps),
reusing any result already in --cache (a results folder of a run with the same settings, e.g. the
demo's). The tests then recompute every single point at the shipped density-functional level:
only the GFN2-xTB stage is stored. Rerun this after any change to the GFN2-xTB settings (the tests
compare the stored settings with the shipped ones and say so).
"""

from __future__ import annotations

import argparse
import csv
import json
import tempfile
from pathlib import Path

from dienes import run
from dienes import settings as cfg
from dienes.layout import Layout, read_json, transition_stem

REPO = Path(__file__).resolve().parents[1]
DIENES = {
    "butadiene": "C=CC=C", "cyclopentadiene": "C1=CCC=C1", "2,3-dimethylbutadiene": "C=C(C)C(C)=C",
    "2-tert-butylbutadiene": "C=CC(=C)C(C)(C)C", "2-phenylbutadiene": "C=CC(=C)c1ccccc1",
    "(E)-piperylene": "C/C=C/C=C", "(Z)-piperylene": "C/C=C\\C=C", "4-methyl-1,3-pentadiene": "CC(C)=CC=C",
    "furan": "c1ccoc1", "thiophene": "c1ccsc1", "anthracene": "c1ccc2cc3ccccc3cc2c1",
    "9,10-dimethylanthracene": "Cc1c2ccccc2c(C)c2ccccc12",
}
DIENOPHILE = "O=C1OC(=O)C=C1"     # maleic anhydride


# the gas-phase pairs of tests/test_gas_kinetics.py (measured in tests/data/gas_phase_kinetics.csv):
# diene name, SMILES, dienophile SMILES
GAS_PHASE = [("butadiene", "C=CC=C", "C=CC=C"), ("butadiene", "C=CC=C", "C=CC=O"),
             ("1,3-cyclohexadiene", "C1=CCCC=C1", "C=C"), ("1,3-cyclohexadiene", "C1=CCCC=C1", "C=CC=O")]


def compute(dienes: dict, dienophile: str, cache: Path, tmp: Path) -> dict:
    """The GFN2-xTB stage of each diene with the dienophile at the shipped settings (the workflow's
    own steps, in-process; results already in `cache` reused)."""
    lib, ref = tmp / "known.csv", tmp / "reference.csv"
    with open(lib, "w", newline="") as fh:
        csv.writer(fh).writerows([("id", "smiles")] + list(dienes.items()))
    with open(ref, "w", newline="") as fh:       # prepare wants a reference file: one row, not fitted here
        csv.writer(fh).writerows([("id", "smiles", "log10_k"), ("bd", "C=CC=C", "0")])
    shipped = cfg.load(REPO / "config" / "config.yaml")
    settings = shipped | {"library": str(lib), "reference": str(ref), "dienophile": dienophile,
                          "ranking": {"levels": [shipped.placing.name]}}
    manifest_path = tmp / "manifest.json"
    manifest = run.prepare(settings, manifest_path, results=cache)
    for _, step in run.plan_steps(manifest_path, cache):
        step()
    layout = Layout(cache)
    out = {"structure_settings": settings.structure_settings(),
           "transition_state": dict(settings["transition_state"]),
           "dienophile": read_json(layout.dienophile(manifest["run_dienophile"]["dhash"])), "dienes": {}}
    for rec in manifest["records"]:
        if rec["status"] != "ok" or len(rec["isomers"]) != 1:
            raise SystemExit(f"{rec['id']}: {rec['status']} {rec['message']} ({len(rec['isomers'])} isomers)")
        key = rec["isomers"][0]["key"]
        transition = read_json(layout.transition(transition_stem(key, rec["dienophile"]["thash"])))
        if not all(s.get("ts_verified") for s in transition["sites"].values() if s.get("status") == "ok"):
            print(f"note: {rec['id']} has a site whose saddle is not verified")
        out["dienes"][rec["id"]] = {"smiles": rec["smiles"], "structure": read_json(layout.structure(key)),
                                    "transition": transition}
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--cache", help="a results folder to reuse and fill (default: a temporary one)")
    ap.add_argument("--out", help="default: tests/data/known_orders.json (tests/data/gas_phase_pairs.json "
                                  "with --gas-phase)")
    ap.add_argument("--dienophile", default=DIENOPHILE, help="another dienophile (benchmarks/dienophile_swap.py)")
    ap.add_argument("--dienes", nargs="+", help="names of DIENES to compute (default: all)")
    ap.add_argument("--gas-phase", action="store_true",
                    help="the gas-phase pairs of tests/test_gas_kinetics.py instead (each with its own dienophile)")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        cache = Path(args.cache) if args.cache else tmp / "results"
        if args.gas_phase:
            out = {"about": "GFN2-xTB results for tests/test_gas_kinetics.py; written by "
                            "benchmarks/known_orders_data.py --gas-phase, never by hand", "pairs": []}
            for name, smiles, dienophile in GAS_PHASE:
                one = compute({name: smiles}, dienophile, cache, tmp)
                out |= {k: one[k] for k in ("structure_settings", "transition_state")}
                out["pairs"].append({"diene": name, "dienophile_smiles": dienophile, "dienophile": one["dienophile"]}
                                    | one["dienes"][name])
            default_out = REPO / "tests" / "data" / "gas_phase_pairs.json"
        else:
            dienes = {n: DIENES[n] for n in args.dienes} if args.dienes else DIENES
            out = {"about": "GFN2-xTB results for tests/test_known_orders*.py; written by "
                            "benchmarks/known_orders_data.py, never by hand"} | compute(dienes, args.dienophile, cache, tmp)
            default_out = REPO / "tests" / "data" / "known_orders.json"
    path = Path(args.out or default_out)
    path.write_text(json.dumps(out, separators=(",", ":")))
    print(f"written to {path} ({path.stat().st_size / 1024:.0f} KB)")


if __name__ == "__main__":
    main()
