"""Two dienes with two dienophiles at the shipped ranking level, on stored GFN2-xTB results:
does the dienophile reorder them (docs/validation.md, "A dienophile that should reorder two dienes")?

    python benchmarks/known_orders_data.py --dienophile 'N#CC(C#N)=C(C#N)C#N' \\
        --dienes cyclopentadiene 9,10-dimethylanthracene --out tcne.json
    python benchmarks/dienophile_swap.py tests/data/known_orders.json tcne.json \\
        --dienes cyclopentadiene 9,10-dimethylanthracene

Prints each pair's free-energy and electronic barrier at the shipped level (kJ/mol; best priced
site) and the D3(BJ) dispersion the saddle gains over the separated partners with the level's
functional (a geometry-only term the ranking level does not add to barriers).
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from dienes import settings as cfg
from dienes.backends import d3_dispersion_kJmol
from dienes.singlepoints import Thermal, best_site, price_dienophile, price_pair, price_structure

REPO = Path(__file__).resolve().parents[1]


def saddle_dispersion_kJmol(diene: dict, site: dict, dienophile: dict, functional: str) -> float:
    """D3(BJ) of the saddle minus that of the diene's lowest minimum and the dienophile."""
    d, p = diene["structure"]["geometry"], dienophile["geometry"]
    return (d3_dispersion_kJmol(list(d["numbers"]) + list(p["numbers"]), site["positions_A"], functional)
            - d3_dispersion_kJmol(d["numbers"], d["minimum_A"], functional)
            - d3_dispersion_kJmol(p["numbers"], p["minimum_A"], functional))


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("data", nargs="+", help="files written by benchmarks/known_orders_data.py")
    ap.add_argument("--dienes", nargs="+", required=True)
    args = ap.parse_args()
    settings = cfg.load(REPO / "config" / "config.yaml")
    level = settings.ranking_levels[0]
    energies = level.energy_backend(threads=1)
    thermal = Thermal(settings.backend_settings(), float(settings["temperature_K"]))
    functional = str(energies.as_dict().get("method"))
    print(f"level {level.label()}, {settings['temperature_K']} K")
    print("| dienophile | diene | site | free-energy barrier | electronic barrier | D3(BJ) at the saddle |")
    print("|---|---|---|---|---|---|")
    for path in args.data:
        data = json.loads(Path(path).read_text())
        dienophile = price_dienophile(data["dienophile"], energies, thermal)
        for name in args.dienes:
            diene = data["dienes"][name]
            pair = price_pair(price_structure(diene["structure"], energies, thermal), diene["transition"],
                              dienophile, energies, thermal)
            label = best_site(pair, "free_energy")
            site = pair["sites"][label]
            d3 = saddle_dispersion_kJmol(diene, diene["transition"]["sites"][label], data["dienophile"], functional)
            print(f"| {data['dienophile']['smiles']} | {name} | {label} | {site['free_energy_barrier_kJmol']:.1f} | "
                  f"{site['electronic_barrier_kJmol']:.1f} | {d3:.1f} |", flush=True)


if __name__ == "__main__":
    main()
