import numpy as np
import pytest

from dienes import model as mdl
from dienes.units import log10_units_per_kjmol

FEATURES = ["scis_penalty_kJmol", "homo_eV"]


def synthetic(n=40, noise=0.05, seed=1):
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.uniform(0, 20, n), rng.uniform(-11, -9, n)])
    y = -0.175 * X[:, 0] + 1.2 * X[:, 1] + 12.0 + rng.normal(0, noise, n)
    return X, y


@pytest.mark.parametrize("variant", ["ols", "physics"])
def test_recovers_known_coefficients(variant):
    X, y = synthetic()
    f = mdl.fit(X, y, FEATURES, variant, 298.15)
    assert f.coef_per_unit[0] == pytest.approx(-0.175, abs=0.005)
    assert f.coef_per_unit[1] == pytest.approx(1.2, abs=0.05)
    assert f.intercept == pytest.approx(12.0, abs=0.5)
    assert f.resid_sd == pytest.approx(0.05, rel=0.4)


def test_physics_variant_fixes_the_penalty_slope():
    X, y = synthetic()
    f = mdl.fit(X, y, FEATURES, "physics", 303.15)
    assert f.coef_per_unit[0] == pytest.approx(-log10_units_per_kjmol(303.15), rel=1e-12)
    assert f.coef_se[0] == 0.0


def test_interval_covers_and_domain_flags_extrapolation():
    X, y = synthetic(noise=0.3, n=60, seed=3)
    f = mdl.fit(X, y, FEATURES, "ols", 298.15)
    Xt, yt = synthetic(noise=0.3, n=400, seed=4)
    pred, lo, hi, lev, dom = mdl.predict(f, Xt, 0.9)
    coverage = np.mean((yt >= lo) & (yt <= hi))
    assert 0.85 <= coverage <= 0.95
    assert dom.all()
    far = mdl.predict(f, np.array([[80.0, -6.0]]), 0.9)
    assert not far[4][0]
    assert far[2][0] - far[1][0] > hi[0] - lo[0]


def test_loo_selection_and_metrics():
    X, y = synthetic(noise=0.2)
    f, comparison, y_cv = mdl.select(X, y, FEATURES, 298.15)
    assert set(comparison) == {"ols", "ridge", "physics"}
    assert f.variant in comparison
    assert comparison[f.variant]["cv_spearman"] > 0.9
    assert len(y_cv) == len(y)


def test_pairwise_accuracy():
    assert mdl.pairwise_accuracy([1, 2, 3], [1, 2, 3]) == 1.0
    assert mdl.pairwise_accuracy([1, 2, 3], [3, 2, 1]) == 0.0
    assert mdl.pairwise_accuracy([1, 2, 3], [1, 3, 2]) == pytest.approx(2 / 3)
