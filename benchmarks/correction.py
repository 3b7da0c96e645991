"""How well GFN2-xTB terms of the located transition structure predict the ranking level's
barrier (the corrected fast level, dienes.correction), on a finished run's rows recomputed at
both levels.

    python benchmarks/correction.py --results results [--level dft]

Prints, for the level's free-energy and electronic barriers: the terms forward selection keeps,
the leave-one-out MAE and Spearman of the corrected barrier, the same for the GFN2-xTB barrier
alone (one slope and an intercept), and the nested figure (the selection repeated inside every
fold: the honest error of the procedure). Reads results/sites.csv; computes nothing.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats

from dienes import correction as cr


def nested(table: pd.DataFrame, target: str) -> tuple[float, float]:
    """(MAE, Spearman) of predictions for each row by a correction chosen and fitted without it."""
    rows = cr.usable_rows(table, target).reset_index(drop=True)
    pred = np.empty(len(rows))
    for i in range(len(rows)):
        c = cr.fit_correction(rows.drop(index=i), target)
        pred[i] = c.predict(rows.iloc[[i]])[0]
    y = rows[target].to_numpy(float)
    return float(np.mean(np.abs(y - pred))), float(stats.spearmanr(y, pred).statistic)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--results", default="results")
    ap.add_argument("--level", default="dft")
    args = ap.parse_args()
    sites = pd.read_csv(Path(args.results) / "sites.csv")
    sites = sites[(sites[f"{args.level}_status"] == "ok") & sites["gfn2_barrier_kJmol"].notna()]
    for kind in ("barrier_kJmol", "electronic_barrier_kJmol"):
        target = f"{args.level}_{kind}"
        c = cr.fit_correction(sites, target)
        base = cr.fit_correction(sites, target, candidates=())
        n_mae, n_rho = nested(sites, target)
        print(f"{target}: {c.n} sites; terms {', '.join(c.terms)}")
        print(f"  corrected: LOO MAE {c.loo_mae_kJmol:.1f} kJ/mol, Spearman {c.loo_spearman:.2f}; "
              f"nested MAE {n_mae:.1f}, Spearman {n_rho:.2f}; 90 % half-width {c.half_width_kJmol():.1f}")
        print(f"  GFN2-xTB barrier alone: LOO MAE {base.loo_mae_kJmol:.1f} kJ/mol, "
              f"Spearman {base.loo_spearman:.2f}")


if __name__ == "__main__":
    main()
