"""A corrected fast level: the ranking level's barrier predicted from GFN2-xTB terms of the same
located transition structure, fitted on the rows a run has recomputed at the ranking level.

GFN2-xTB's barrier errors are systematic (its dispersion over-rewards alkyl groups and flat
acenes; its barriers run far too low), so a linear model of the ranking level's barrier on
GFN2-xTB terms takes much of them out. Terms are chosen by forward selection on the
leave-one-out mean absolute error (ridge on standardised terms, the GFN2-xTB barrier always in);
the leave-one-out residuals give the correction's own error, which a prediction interval built
on a corrected barrier must add.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import stats

BASE_TERM = "gfn2_barrier_kJmol"
# GFN2-xTB terms of a site's located transition structure and of the diene (sites.csv names)
CANDIDATE_TERMS = ("contact_dispersion_kJmol", "distortion_kJmol", "dienophile_distortion_kJmol",
                   "interaction_kJmol", "homo_eV", "lumo_eV", "scis_penalty_kJmol", "reaction_energy_kJmol",
                   "aromatic", "ring")
# the terms known for every row before any single point (the contact dispersion is measured when
# a pair is recomputed, so a corrected level cannot use it for the rows it stands in for)
ROW_TERMS = tuple(t for t in CANDIDATE_TERMS if t != "contact_dispersion_kJmol")
MIN_ROWS = 10              # a corrected level is fitted on at least this many recomputed sites
RIDGE_ALPHA = 1.0
MIN_GAIN = 0.03            # a term joins only if it lowers the leave-one-out MAE by 3 % or more


@dataclass
class Correction:
    """terms: GFN2-xTB columns used; coef: per raw unit of each term; intercept (kJ/mol);
    loo_residuals: target minus leave-one-out prediction (kJ/mol); trail: the selection."""

    terms: list[str]
    coef: list[float]
    intercept: float
    loo_residuals: list[float]
    n: int
    targets: list[float] = field(default_factory=list)
    trail: list[dict] = field(default_factory=list)

    @property
    def loo_spearman(self) -> float:
        """Spearman rho of the leave-one-out corrected barriers against the targets."""
        y = np.asarray(self.targets)
        return float(stats.spearmanr(y, y - np.asarray(self.loo_residuals)).statistic)

    @property
    def loo_mae_kJmol(self) -> float:
        return float(np.mean(np.abs(self.loo_residuals)))

    def half_width_kJmol(self, coverage: float = 0.9) -> float:
        """The correction's error at `coverage`: the ceil((n + 1) c)-th smallest |LOO residual|
        (the largest where n is too small for that rank)."""
        r = np.sort(np.abs(np.asarray(self.loo_residuals)))
        k = min(int(np.ceil((len(r) + 1) * coverage)), len(r))
        return float(r[k - 1])

    def predict(self, table) -> np.ndarray:
        X = design(table, self.terms)
        return X @ np.asarray(self.coef) + self.intercept


def design(table, terms) -> np.ndarray:
    """The raw term matrix of a sites table ('ring' = the site sits in a ring, 'aromatic' 0/1)."""
    cols = []
    for t in terms:
        if t == "ring":
            cols.append(np.asarray([str(k).startswith("ring") for k in table["site_kind"]], dtype=float))
        elif t == "aromatic":
            cols.append(np.asarray(table["aromatic"], dtype=float))
        else:
            cols.append(np.asarray(table[t], dtype=float))
    return np.column_stack(cols)


def _fit(X, y):
    """Ridge (alpha RIDGE_ALPHA on standardised terms, intercept unpenalised), closed form."""
    mean, scale = X.mean(axis=0), X.std(axis=0)
    scale[scale == 0] = 1.0
    Z = (X - mean) / scale
    yc = y - y.mean()
    beta = np.linalg.solve(Z.T @ Z + RIDGE_ALPHA * np.eye(Z.shape[1]), Z.T @ yc)
    coef = beta / scale
    return coef, float(y.mean() - np.sum(coef * mean))


def _loo(X, y) -> np.ndarray:
    out = np.empty(len(y))
    for i in range(len(y)):
        m = np.arange(len(y)) != i
        coef, b = _fit(X[m], y[m])
        out[i] = X[i] @ coef + b
    return y - out


def usable_rows(table, target: str, candidates=CANDIDATE_TERMS, base: str = BASE_TERM):
    """The rows where the target, the GFN2-xTB barrier and every candidate term are known."""
    numeric = [c for c in candidates if c not in ("ring", "aromatic") and c in table]
    return table[table[target].notna() & table[base].notna() & table[numeric].notna().all(axis=1)]


def predictable(table, terms) -> np.ndarray:
    """Rows of a sites table where every term of a correction is known."""
    numeric = [t for t in terms if t not in ("ring", "aromatic")]
    ok = np.ones(len(table), dtype=bool)
    for t in numeric:
        ok &= table[t].notna().to_numpy() if t in table else False
    return ok


def fit_correction(table, target: str, candidates=CANDIDATE_TERMS, max_terms: int = 4,
                   base: str = BASE_TERM) -> Correction:
    """Forward selection of GFN2-xTB terms for `target` (e.g. 'dft_barrier_kJmol') over the rows
    where the target and every candidate are known; `base` (the GFN2-xTB barrier) is always in."""
    usable = [c for c in candidates if c in ("ring", "aromatic") or c in table]
    rows = usable_rows(table, target, usable, base)
    y = rows[target].to_numpy(float)
    chosen = [base]
    best = float(np.mean(np.abs(_loo(design(rows, chosen), y))))
    trail = [{"terms": list(chosen), "loo_mae_kJmol": best}]
    while len(chosen) < max_terms + 1:
        trials = []
        for c in usable:
            if c in chosen:
                continue
            mae = float(np.mean(np.abs(_loo(design(rows, chosen + [c]), y))))
            trials.append((mae, c))
            trail.append({"terms": chosen + [c], "loo_mae_kJmol": mae})
        if not trials:
            break
        mae, c = min(trials)
        if mae > (1.0 - MIN_GAIN) * best:
            break
        chosen.append(c)
        best = mae
    X = design(rows, chosen)
    coef, b = _fit(X, y)
    return Correction(chosen, coef.tolist(), b, _loo(X, y).tolist(), len(y), y.tolist(), trail)
