"""Why does a density functional put 2-tert-butyl- and 2-phenylbutadiene level with
cyclopentadiene, against a reference series that makes them 50 and 170 times slower?

For a few reference dienes with maleic anhydride (names as in config/reference_rates.csv),
on the GFN2-xTB structures of a finished run, at one level:

1. solvent: the barrier with SMD(1,4-dioxane), the reference series' solvent, against the
   gas-phase barrier (single points on the same structures);
2. geometry: how far each structure's energy drops when it is re-optimised at the level itself
   (PySCF gradients, ASE's BFGS; the transition structure with sella as a saddle): a barrier on
   GFN2-xTB structures is wrong by the difference of these relaxation energies;
3. conformers: the priced diene minima (energy, diene dihedral) and the ensemble term.

    python benchmarks/order_evidence.py --results results --name cyclopentadiene \\
        --name 2-tert-butyl-1,3-butadiene --name 1,3-butadiene [--relax-ts]

Prints one table; --json writes the numbers.
"""

from __future__ import annotations

import argparse
import json
import os
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np  # noqa: E402

from dienes import singlepoints as refine  # noqa: E402
from dienes.backends import DFTLevel, DFTSettings, dft_energy  # noqa: E402
from dienes.pipeline import read_json  # noqa: E402
from dienes.units import EV_KJMOL, HARTREE_KJMOL, BOHR_ANGSTROM  # noqa: E402

CONFIG = Path(__file__).resolve().parent.parent / "config" / "config.yaml"
SOLVENT = "1,4-dioxane"
RELAX_FMAX_EV_A = 0.03


def _dihedral(p, a, b, c, d) -> float:
    p = np.asarray(p)
    b0, b1, b2 = p[a] - p[b], p[c] - p[b], p[d] - p[c]
    b1 /= np.linalg.norm(b1)
    v, w = b0 - np.dot(b0, b1) * b1, b2 - np.dot(b2, b1) * b1
    return float(np.degrees(np.arctan2(np.dot(np.cross(b1, v), w), np.dot(v, w))))


class LevelCalculator:
    """ASE calculator on a PySCF level (energy and forces), for the relaxations."""

    def __new__(cls, settings: DFTSettings, numbers):
        from ase.calculators.calculator import Calculator, all_changes

        class _Calc(Calculator):
            implemented_properties = ["energy", "forces"]

            def calculate(self, atoms=None, properties=("energy",), system_changes=all_changes):
                super().calculate(atoms, properties, system_changes)
                from pyscf import dft
                from dienes.backends import _pyscf_mol
                mol = _pyscf_mol(numbers, atoms.get_positions(), settings.basis)
                mf = dft.RKS(mol)
                mf.xc = settings.method
                mf = mf.density_fit()
                mf.grids.level = settings.grid_level
                mf.conv_tol = 1e-8
                e = mf.kernel()
                g = mf.nuc_grad_method().kernel()
                self.results = {"energy": e * HARTREE_KJMOL / EV_KJMOL,
                                "forces": -g * HARTREE_KJMOL / EV_KJMOL / BOHR_ANGSTROM}
        return _Calc()


def relaxation_kJmol(numbers, positions, settings: DFTSettings, saddle: bool = False) -> tuple[float, int]:
    """E(at the GFN2-xTB structure) - E(re-optimised at the level), kJ/mol, and the steps taken."""
    from ase import Atoms
    atoms = Atoms(numbers=list(numbers), positions=np.asarray(positions, dtype=float))
    atoms.calc = LevelCalculator(settings, list(numbers))
    e0 = atoms.get_potential_energy()
    if saddle:
        from sella import Sella
        opt = Sella(atoms, order=1, internal=True, logfile=None)
    else:
        from ase.optimize import BFGS
        opt = BFGS(atoms, logfile=None)
    opt.run(fmax=RELAX_FMAX_EV_A, steps=60)
    return (e0 - atoms.get_potential_energy()) * EV_KJMOL, opt.nsteps


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", default="results")
    ap.add_argument("--name", action="append", required=True)
    ap.add_argument("--method", default="b3lyp")
    ap.add_argument("--basis", default="def2-svp")
    ap.add_argument("--relax-ts", action="store_true", help="also re-optimise the transition structures (slow)")
    ap.add_argument("--no-solvent", action="store_true")
    ap.add_argument("--json")
    args = ap.parse_args()
    results = Path(args.results)
    manifest = read_json(results / "manifest.json")
    gas = DFTSettings(method=args.method, basis=args.basis)
    smd = DFTSettings(method=args.method, basis=args.basis, solvent=SOLVENT)
    gas_level = DFTLevel(gas)
    out = {}
    dph_done = {}
    for rec in manifest["reference_records"]:
        name = rec["extra"].get("name", rec["id"])
        if name not in args.name:
            continue
        key, d = rec["isomers"][0]["key"], rec["dienophile"]
        structure = read_json(results / "structures" / f"{key}.json")
        ts = read_json(results / "transition" / f"{key}__{d['thash']}.json")
        dph = read_json(results / "dienophiles" / f"{d['dhash']}.json")
        site_label = refine.sites_to_price(ts)[0]
        site = ts["sites"][site_label]
        geo = structure["geometry"]
        minima = geo.get("low_minima_A") or [geo["minimum_A"]]
        atoms = next(s["atoms"] for s in structure["sites"] if s["label"] == site_label)
        row = {"site": site_label, "approach": site.get("approach"), "forming_bonds_A": site.get("forming_bonds_A")}
        t0 = time.perf_counter()
        e_min = [gas_level.energy(geo["numbers"], p).energy_kJmol for p in minima]
        k = int(np.argmin(e_min))
        row["minima"] = [{"dihedral_deg": round(_dihedral(p, *atoms), 1), "rel_kJmol": round(e - min(e_min), 2)}
                         for p, e in zip(minima, e_min)]
        e_ts = gas_level.energy(ts["numbers"], site["positions_A"]).energy_kJmol
        if d["dhash"] not in dph_done:
            dph_done[d["dhash"]] = {"gas": gas_level.energy(dph["geometry"]["numbers"], dph["geometry"]["minimum_A"]).energy_kJmol}
        row["barrier_gas_kJmol"] = e_ts - e_min[k] - dph_done[d["dhash"]]["gas"]
        if not args.no_solvent:
            if "smd" not in dph_done[d["dhash"]]:
                dph_done[d["dhash"]]["smd"] = dft_energy(dph["geometry"]["numbers"], dph["geometry"]["minimum_A"], smd).energy_kJmol
            e_min_s = [dft_energy(geo["numbers"], p, smd).energy_kJmol for p in minima]
            e_ts_s = dft_energy(ts["numbers"], site["positions_A"], smd).energy_kJmol
            row["barrier_smd_kJmol"] = e_ts_s - min(e_min_s) - dph_done[d["dhash"]]["smd"]
        r_min, n1 = relaxation_kJmol(geo["numbers"], minima[k], gas)
        row["relax_diene_kJmol"], row["relax_diene_steps"] = r_min, n1
        if "relax" not in dph_done[d["dhash"]]:
            dph_done[d["dhash"]]["relax"] = relaxation_kJmol(dph["geometry"]["numbers"], dph["geometry"]["minimum_A"], gas)[0]
        row["relax_dienophile_kJmol"] = dph_done[d["dhash"]]["relax"]
        if args.relax_ts:
            r_ts, n2 = relaxation_kJmol(ts["numbers"], site["positions_A"], gas, saddle=True)
            row["relax_ts_kJmol"], row["relax_ts_steps"] = r_ts, n2
            row["barrier_relaxed_kJmol"] = (row["barrier_gas_kJmol"] - r_ts + r_min + row["relax_dienophile_kJmol"])
        row["wall_s"] = round(time.perf_counter() - t0)
        out[name] = row
        print(name, json.dumps(row, default=float), flush=True)
    print("\nname | barrier gas | SMD(dioxane) | solvent shift | relax diene | relax TS | barrier relaxed")
    for name, r in out.items():
        print(f"{name} | {r['barrier_gas_kJmol']:.1f} | {r.get('barrier_smd_kJmol', float('nan')):.1f} | "
              f"{r.get('barrier_smd_kJmol', float('nan')) - r['barrier_gas_kJmol']:+.1f} | {r['relax_diene_kJmol']:.1f} | "
              f"{r.get('relax_ts_kJmol', float('nan')):.1f} | {r.get('barrier_relaxed_kJmol', float('nan')):.1f}")
    if args.json:
        Path(args.json).write_text(json.dumps(out, indent=1, default=float))


if __name__ == "__main__":
    main()
