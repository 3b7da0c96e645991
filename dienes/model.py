"""Reactivity model: log10 k against diene descriptors, fitted on reference kinetics.

The main descriptor is the computed barrier (kJ/mol); the reference kinetics set
its slope and offset. Features are standardised; three variants are compared by
leave-one-out cross-validation and the one with the lowest LOO RMSE is used:

- ``ols``: ordinary least squares on all features;
- ``ridge``: ridge regression (alpha 1 on standardised features);
- ``physics``: the slope of the first energy feature (barrier or s-cis penalty)
  fixed at the transition-state-theory value -1/(RT ln 10) per kJ/mol
  (-0.175 at 298 K), the other features fitted.

Extra descriptors (``candidates``) join the base features one at a time, only
when they lower the LOO RMSE by at least MIN_GAIN; the honest error of that
choice is measured by repeating it inside every leave-one-out fold.

Prediction intervals come from the model's own leave-one-out residuals (heavy tails
included): each residual is put on one scale, |y_i - y_cv_i| sqrt(1 - h_i) (a leave-one-out
residual of a point with leverage h_i has variance sigma^2 / (1 - h_i)), and the half-width at a
new point is q sqrt(1 + h0), q the ceil((n + 1) c)-th smallest scaled residual for coverage c
(the split-conformal rank rule; the largest residual widened by the t-quantile ratio where n is
too small for that rank). Without leave-one-out residuals the least-squares t interval is used.
The applicability domain looks at every
descriptor of the model, fixed-slope ones included: the leverage
h = x0' (X'X)^-1 x0 against the usual 3 p / n cut-off (common practice) and
each descriptor's reference range widened by RANGE_MARGIN of its span.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, asdict

import numpy as np
from scipy import stats

from .units import log10_units_per_kjmol

PENALTY = "scis_penalty_kJmol"
# energy descriptors whose slope transition-state theory fixes at -1/(RT ln 10)
PHYSICAL_SLOPE_FEATURES = ("barrier_kJmol", "scis_penalty_kJmol")
VARIANTS = ("ols", "ridge", "physics")
RIDGE_ALPHA = 1.0
MIN_GAIN = 0.05          # a candidate joins only if it lowers the LOO RMSE by 5 % or more
RANGE_MARGIN = 0.10      # a descriptor may exceed the reference range by 10 % of its span


@dataclass
class Fit:
    """A fitted variant. coef_per_unit: coefficient per unit of each raw feature
    (log10 k per kJ/mol, per eV, ...); coef_se: their standard errors (None for a
    fixed coefficient); fixed: index of the fixed-slope feature, or None."""

    variant: str
    features: list[str]
    mean: list[float]
    scale: list[float]
    coef_per_unit: list[float]
    coef_se: list[float | None]
    intercept: float
    resid_sd: float
    dof: int
    n: int
    fixed: int | None = None
    xtx_inv: list = field(default_factory=list)
    x_train: list = field(default_factory=list)
    loo_scaled_residuals: list = field(default_factory=list)

    @property
    def fixed_feature(self) -> str | None:
        return None if self.fixed is None else self.features[self.fixed]

    def as_dict(self) -> dict:
        d = asdict(self)
        d.pop("xtx_inv")
        d.pop("x_train")
        d.pop("loo_scaled_residuals")
        return d


def fixed_slope_index(features: list[str]) -> int | None:
    """The feature whose slope the physics variant fixes: the first energy feature."""
    return next((k for k, f in enumerate(features) if f in PHYSICAL_SLOPE_FEATURES), None)


def _design(X: np.ndarray, mean, scale) -> np.ndarray:
    return (X - mean) / scale


def fit(X: np.ndarray, y: np.ndarray, features: list[str], variant: str,
        temperature_K: float) -> Fit:
    """Fit one variant on raw features X (n, p) and log10 k values y (n)."""
    from sklearn.linear_model import LinearRegression, Ridge
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, p = X.shape
    mean = X.mean(axis=0)
    scale = X.std(axis=0)
    scale[scale == 0] = 1.0
    Z = _design(X, mean, scale)
    fixed_k = None
    free = list(range(p))
    y_fit = y
    fixed_value = None
    if variant == "physics":
        fixed_k = fixed_slope_index(features)
        if fixed_k is None:
            raise ValueError("the physics variant needs an energy feature (barrier or s-cis penalty)")
        fixed_value = -log10_units_per_kjmol(temperature_K)
        y_fit = y - fixed_value * X[:, fixed_k]
        free = [k for k in range(p) if k != fixed_k]
    Zf = Z[:, free]
    beta_std = np.zeros(p)
    if not free:                       # only the fixed term: intercept alone
        b0 = float(np.mean(y_fit))
    else:
        reg = (Ridge(alpha=RIDGE_ALPHA) if variant == "ridge" else LinearRegression()).fit(Zf, y_fit)
        beta_std[free] = reg.coef_
        b0 = float(reg.intercept_)
    coef = beta_std / scale
    intercept = float(b0 - np.sum(beta_std * mean / scale))
    if fixed_k is not None:
        coef[fixed_k] = fixed_value
    resid = y - (X @ coef + intercept)
    dof = max(n - len(free) - 1, 1)
    resid_sd = float(np.sqrt(np.sum(resid ** 2) / dof))
    A = np.column_stack([np.ones(n), Zf])
    xtx_inv = np.linalg.pinv(A.T @ A)
    se_std = resid_sd * np.sqrt(np.diag(xtx_inv))[1:]
    se: list[float | None] = [None] * p
    for k, s in zip(free, se_std):
        se[k] = float(s / scale[k])
    return Fit(variant, list(features), mean.tolist(), scale.tolist(), coef.tolist(), se,
               intercept, resid_sd, dof, n, fixed_k, xtx_inv.tolist(), X.tolist())


def leverage(model: Fit, X: np.ndarray) -> np.ndarray:
    """Leverage of raw feature rows X (m, p) in the model's fit (its free features and intercept)."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    Z = _design(X, np.asarray(model.mean), np.asarray(model.scale))
    free = [k for k in range(len(model.features)) if k != model.fixed]
    A = np.column_stack([np.ones(len(X)), Z[:, free]])
    return np.einsum("ij,jk,ik->i", A, np.asarray(model.xtx_inv), A)


def conformal_scale(scaled_residuals, interval: float, dof: int) -> float:
    """q of the module text: the ceil((n + 1) c)-th smallest scaled residual."""
    r = np.sort(np.abs(np.asarray(scaled_residuals, dtype=float)))
    n = len(r)
    rank = math.ceil((n + 1) * interval)
    if rank <= n:
        return float(r[rank - 1])
    # too few residuals for that rank: widen the largest by how much further the t tail reaches
    t_at_max = stats.t.ppf(1.0 - 0.5 / (n + 1), dof)
    return float(r[-1] * stats.t.ppf(0.5 + interval / 2.0, dof) / t_at_max) if r[-1] > 0 else 0.0


def with_loo_residuals(model: Fit, y, y_cv) -> Fit:
    """The fit with its leave-one-out residuals attached (intervals then come from them)."""
    h = np.clip(leverage(model, np.asarray(model.x_train)), 0.0, 0.99)
    model.loo_scaled_residuals = (np.abs(np.asarray(y) - np.asarray(y_cv)) * np.sqrt(1.0 - h)).tolist()
    return model


def half_width(model: Fit, lev, interval: float) -> np.ndarray:
    """Half-width of the prediction interval at leverage(s) `lev`."""
    lev = np.asarray(lev, dtype=float)
    if model.loo_scaled_residuals:
        return conformal_scale(model.loo_scaled_residuals, interval, model.dof) * np.sqrt(1.0 + lev)
    return stats.t.ppf(0.5 + interval / 2.0, model.dof) * model.resid_sd * np.sqrt(1.0 + lev)


def predict(model: Fit, X: np.ndarray, interval: float = 0.9):
    """Predictions for raw features X (m, p): (log10_k, low, high) with the `interval`
    prediction interval (see the module text)."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    pred = X @ np.asarray(model.coef_per_unit) + model.intercept
    half = half_width(model, leverage(model, X), interval)
    return pred, pred - half, pred + half


def loo_coverage(model: Fit, y, y_cv, interval: float) -> tuple[float, list[tuple[float, float]]]:
    """How often a reference value lies inside the interval built without it: for each i, the
    interval around its leave-one-out prediction from the other residuals' scale. Returns
    (fraction inside, [(low, high)] per reference row)."""
    s = np.asarray(model.loo_scaled_residuals, dtype=float)
    h = np.clip(leverage(model, np.asarray(model.x_train)), 0.0, 0.99)
    bounds, inside = [], []
    for i in range(len(s)):
        q = conformal_scale(np.delete(s, i), interval, model.dof)
        # the leave-one-out prediction's own leverage in the fold without it: h / (1 - h)
        half = q * math.sqrt(1.0 + h[i] / (1.0 - h[i]))
        bounds.append((float(y_cv[i] - half), float(y_cv[i] + half)))
        inside.append(bounds[-1][0] <= y[i] <= bounds[-1][1])
    return float(np.mean(inside)), bounds


def domain(model: Fit, X: np.ndarray) -> tuple[np.ndarray, np.ndarray, list[list[str]]]:
    """Applicability domain over every descriptor of the model (fixed-slope ones too).

    Returns (leverage over all descriptors, in-domain flags, reasons per row): a row
    is outside when its leverage exceeds 3 p / n (p = descriptors + 1) or any
    descriptor leaves the reference range by more than RANGE_MARGIN of its span."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    T = np.asarray(model.x_train, dtype=float)
    mean, scale = T.mean(axis=0), T.std(axis=0)
    scale[scale == 0] = 1.0
    At = np.column_stack([np.ones(len(T)), (T - mean) / scale])
    inv = np.linalg.pinv(At.T @ At)
    A = np.column_stack([np.ones(len(X)), (X - mean) / scale])
    lev = np.einsum("ij,jk,ik->i", A, inv, A)
    cut = 3.0 * At.shape[1] / len(T)
    lo, hi = T.min(axis=0), T.max(axis=0)
    span = np.where(hi > lo, hi - lo, np.abs(hi) + 1.0)
    reasons = []
    for row, h in zip(X, lev):
        why = [f"{describe(f, v)}, {'below' if v < a else 'above'} every reference diene's ({a:.3g} to {b:.3g})"
               for f, v, a, b, s in zip(model.features, row, lo, hi, span)
               if v < a - RANGE_MARGIN * s or v > b + RANGE_MARGIN * s]
        if h > cut:
            names = " and ".join(describe(f) for f in model.features if not f.startswith("dienophile["))
            why.append(f"{names} combined unlike any reference diene (leverage {h:.2f} > {cut:.2f})")
        reasons.append(why)
    return lev, np.array([not r for r in reasons]), reasons


DESCRIPTOR_WORDS = {"barrier_kJmol": ("barrier", "kJ/mol"), "homo_eV": ("HOMO", "eV"), "lumo_eV": ("LUMO", "eV"),
                    "scis_penalty_kJmol": ("s-cis penalty", "kJ/mol"), "distortion_kJmol": ("distortion", "kJ/mol"),
                    "interaction_kJmol": ("interaction", "kJ/mol"),
                    "reaction_energy_kJmol": ("reaction energy", "kJ/mol")}


def describe(feature: str, value: float | None = None) -> str:
    """A descriptor in a chemist's words: 'barrier 102 kJ/mol', 'HOMO'."""
    word, unit = DESCRIPTOR_WORDS.get(feature, (feature, ""))
    return word if value is None else f"{word} {value:.3g}{' ' + unit if unit else ''}"


def pairwise_accuracy(y_true, y_pred) -> float:
    """Fraction of pairs with different true values whose order the prediction gets right."""
    y_true, y_pred = np.asarray(y_true), np.asarray(y_pred)
    good = total = 0
    for i in range(len(y_true)):
        for j in range(i + 1, len(y_true)):
            if y_true[i] == y_true[j]:
                continue
            total += 1
            good += (y_true[i] - y_true[j]) * (y_pred[i] - y_pred[j]) > 0
    return good / total if total else float("nan")


def loo(X, y, features, variant, temperature_K) -> np.ndarray:
    """Leave-one-out predictions."""
    X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
    out = np.empty(len(y))
    for i in range(len(y)):
        mask = np.arange(len(y)) != i
        m = fit(X[mask], y[mask], features, variant, temperature_K)
        out[i] = predict(m, X[i:i + 1])[0][0]
    return out


def cv_metrics(y, y_cv) -> dict:
    y, y_cv = np.asarray(y), np.asarray(y_cv)
    rho = stats.spearmanr(y, y_cv).statistic if len(y) > 2 else float("nan")
    return {"cv_rmse_log10k": float(np.sqrt(np.mean((y - y_cv) ** 2))),
            "cv_spearman": float(rho),
            "cv_pairwise_accuracy": float(pairwise_accuracy(y, y_cv))}


def _variants(features) -> list[str]:
    return [v for v in VARIANTS if v != "physics" or fixed_slope_index(features) is not None]


def select(X, y, features, temperature_K, variants=VARIANTS) -> tuple[Fit, dict, np.ndarray]:
    """Fit every applicable variant, compare by LOO CV; returns (chosen fit,
    comparison {variant: metrics}, the chosen variant's LOO predictions)."""
    comparison, cv_preds = {}, {}
    for v in variants:
        if v not in _variants(features):
            continue
        cv_preds[v] = loo(X, y, features, v, temperature_K)
        comparison[v] = cv_metrics(y, cv_preds[v])
    chosen = min(comparison, key=lambda v: comparison[v]["cv_rmse_log10k"])
    return fit(X, y, features, chosen, temperature_K), comparison, cv_preds[chosen]


def _best_rmse(X, y, features, temperature_K) -> float:
    return min(float(np.sqrt(np.mean((y - loo(X, y, features, v, temperature_K)) ** 2)))
               for v in _variants(features))


def choose_features(table: dict[str, np.ndarray], y, base: list[str], candidates: list[str],
                    temperature_K: float, max_added: int = 1) -> tuple[list[str], list[dict]]:
    """Forward selection: add the candidate that lowers the best LOO RMSE most, while
    it lowers it by at least MIN_GAIN and fewer than `max_added` were added.
    table: feature name -> values (n). Returns (features, trail of what was tried)."""
    y = np.asarray(y, dtype=float)
    chosen = list(base)
    X = np.column_stack([table[f] for f in chosen])
    current = _best_rmse(X, y, chosen, temperature_K)
    trail = [{"features": list(chosen), "cv_rmse_log10k": current, "added": None}]
    n = len(y)
    for _ in range(max_added):
        best = None
        for cand in candidates:
            if cand in chosen or n < 4 * (len(chosen) + 2):
                continue
            feats = chosen + [cand]
            r = _best_rmse(np.column_stack([table[f] for f in feats]), y, feats, temperature_K)
            trail.append({"features": feats, "cv_rmse_log10k": r, "added": None})
            if best is None or r < best[1]:
                best = (cand, r)
        if best is None or best[1] > (1.0 - MIN_GAIN) * current:
            break
        chosen.append(best[0])
        current = best[1]
        trail.append({"features": list(chosen), "cv_rmse_log10k": current, "added": best[0]})
    return chosen, trail


def nested_cv(table: dict[str, np.ndarray], y, base, candidates, temperature_K: float,
              max_added: int = 1) -> dict:
    """Leave-one-out of the whole procedure (feature choice and variant choice inside
    each fold): the honest error of the model as built."""
    y = np.asarray(y, dtype=float)
    n = len(y)
    preds = np.empty(n)
    for i in range(n):
        mask = np.arange(n) != i
        sub = {f: np.asarray(v)[mask] for f, v in table.items()}
        feats, _ = choose_features(sub, y[mask], base, candidates, temperature_K, max_added)
        Xs = np.column_stack([sub[f] for f in feats])
        m, _, _ = select(Xs, y[mask], feats, temperature_K)
        preds[i] = predict(m, np.array([[table[f][i] for f in feats]]))[0][0]
    return cv_metrics(y, preds) | {"predictions": preds.tolist()}
