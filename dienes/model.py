"""Reactivity model: log10 k against diene descriptors, fitted on reference kinetics.

Features are standardised; three variants are compared by leave-one-out
cross-validation and the one with the lowest LOO RMSE is used:

- ``ols``: ordinary least squares on all features;
- ``ridge``: ridge regression (alpha 1 on standardised features);
- ``physics``: the s-cis penalty coefficient fixed at the pre-equilibrium value
  -1/(RT ln 10) per kJ/mol (-0.175 at 298 K), the other features fitted.

Prediction intervals come from the least-squares formula with the fitted
residual spread (t distribution); the applicability domain is the leverage
h = x0' (X'X)^-1 x0 against the usual 3 p / n cut-off (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass, field, asdict

import numpy as np
from scipy import stats
from sklearn.linear_model import LinearRegression, Ridge

from .units import log10_units_per_kjmol

PENALTY = "scis_penalty_kJmol"
VARIANTS = ("ols", "ridge", "physics")
RIDGE_ALPHA = 1.0


@dataclass
class Fit:
    """A fitted variant. coef_per_unit: coefficient per unit of each raw feature
    (log10 k per kJ/mol, per eV, ...); coef_se: their standard errors."""

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
    fixed_penalty_coef: float | None = None
    xtx_inv: list = field(default_factory=list)

    def as_dict(self) -> dict:
        d = asdict(self)
        d.pop("xtx_inv")
        return d


def _design(X: np.ndarray, mean, scale) -> np.ndarray:
    return (X - mean) / scale


def fit(X: np.ndarray, y: np.ndarray, features: list[str], variant: str,
        temperature_K: float) -> Fit:
    """Fit one variant on raw features X (n, p) and log10 k values y (n)."""
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, p = X.shape
    mean = X.mean(axis=0)
    scale = X.std(axis=0)
    scale[scale == 0] = 1.0
    Z = _design(X, mean, scale)
    fixed = None
    free = list(range(p))
    y_fit = y
    if variant == "physics":
        if PENALTY not in features:
            raise ValueError("the physics variant needs the s-cis penalty feature")
        j = features.index(PENALTY)
        fixed = -log10_units_per_kjmol(temperature_K)
        y_fit = y - fixed * X[:, j]
        free = [k for k in range(p) if k != j]
    Zf = Z[:, free]
    beta_std = np.zeros(p)
    if not free:                       # only the fixed penalty term: intercept alone
        b0 = float(np.mean(y_fit))
    else:
        reg = (Ridge(alpha=RIDGE_ALPHA) if variant == "ridge" else LinearRegression()).fit(Zf, y_fit)
        beta_std[free] = reg.coef_
        b0 = float(reg.intercept_)
    coef = beta_std / scale
    intercept = float(b0 - np.sum(beta_std * mean / scale))
    if fixed is not None:
        coef[features.index(PENALTY)] = fixed
    resid = y - (X @ coef + intercept)
    dof = max(n - len(free) - 1, 1)
    resid_sd = float(np.sqrt(np.sum(resid ** 2) / dof))
    A = np.column_stack([np.ones(n), Zf])
    xtx_inv = np.linalg.pinv(A.T @ A)
    se_std = resid_sd * np.sqrt(np.diag(xtx_inv))[1:]
    se = [None] * p
    for k, s in zip(free, se_std):
        se[k] = float(s / scale[k])
    if fixed is not None:
        se[features.index(PENALTY)] = 0.0
    return Fit(variant, list(features), mean.tolist(), scale.tolist(), coef.tolist(), se,
               intercept, resid_sd, dof, n, fixed, xtx_inv.tolist())


def predict(model: Fit, X: np.ndarray, interval: float = 0.9):
    """Predictions for raw features X (m, p): (log10_k, low, high, leverage, in_domain)."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    pred = X @ np.asarray(model.coef_per_unit) + model.intercept
    Z = _design(X, np.asarray(model.mean), np.asarray(model.scale))
    free = [k for k, f in enumerate(model.features)
            if not (model.fixed_penalty_coef is not None and f == PENALTY)]
    A = np.column_stack([np.ones(len(X)), Z[:, free]])
    inv = np.asarray(model.xtx_inv)
    leverage = np.einsum("ij,jk,ik->i", A, inv, A)
    t = stats.t.ppf(0.5 + interval / 2.0, model.dof)
    half = t * model.resid_sd * np.sqrt(1.0 + leverage)
    p_eff = len(free) + 1
    in_domain = leverage <= 3.0 * p_eff / model.n
    return pred, pred - half, pred + half, leverage, in_domain


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
    return {"cv_rmse_log10k": float(np.sqrt(np.mean((y - y_cv) ** 2))),
            "cv_spearman": float(stats.spearmanr(y, y_cv).statistic),
            "cv_pairwise_accuracy": float(pairwise_accuracy(y, y_cv))}


def select(X, y, features, temperature_K, variants=VARIANTS) -> tuple[Fit, dict, np.ndarray]:
    """Fit every applicable variant, compare by LOO CV; returns (chosen fit,
    comparison {variant: metrics}, the chosen variant's LOO predictions)."""
    comparison, cv_preds = {}, {}
    for v in variants:
        if v == "physics" and PENALTY not in features:
            continue
        cv_preds[v] = loo(X, y, features, v, temperature_K)
        comparison[v] = cv_metrics(y, cv_preds[v])
    chosen = min(comparison, key=lambda v: comparison[v]["cv_rmse_log10k"])
    return fit(X, y, features, chosen, temperature_K), comparison, cv_preds[chosen]
