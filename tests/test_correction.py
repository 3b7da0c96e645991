"""The corrected fast level: the ranking level's barrier from GFN2-xTB terms (dienes.correction)."""
import numpy as np
import pandas as pd
import pytest

from dienes import correction as cr


def _sites(n=60, seed=3, noise=2.0):
    rng = np.random.default_rng(seed)
    t = pd.DataFrame({"gfn2_barrier_kJmol": rng.uniform(10, 60, n), "contact_dispersion_kJmol": rng.uniform(-70, -30, n),
                      "homo_eV": rng.uniform(-10.5, -8.5, n), "site_kind": ["acyclic"] * n, "aromatic": [False] * n})
    for c in cr.CANDIDATE_TERMS:
        if c not in t and c not in ("ring", "aromatic"):
            t[c] = rng.normal(0, 1, n)          # terms with nothing to say
    # a level that adds back part of the dispersion GFN2-xTB over-rewards, plus noise
    t["dft_barrier_kJmol"] = 60 + 0.8 * t["gfn2_barrier_kJmol"] - 0.5 * t["contact_dispersion_kJmol"] \
        + rng.normal(0, noise, n)
    return t


def test_the_correction_finds_the_dispersion_term_and_states_its_own_error():
    c = cr.fit_correction(_sites(), "dft_barrier_kJmol")
    assert c.terms[:2] == ["gfn2_barrier_kJmol", "contact_dispersion_kJmol"]
    assert c.coef[1] == pytest.approx(-0.5, abs=0.1)
    # the leave-one-out error of a right model is the noise: mean |e| = sd sqrt(2/pi) = 1.6 and the
    # 90 % half-width 1.645 sd = 3.3 for normal errors of sd 2 (common practice), within sampling
    assert c.loo_mae_kJmol == pytest.approx(1.6, abs=0.5)
    assert c.half_width_kJmol(0.9) == pytest.approx(3.3, abs=1.2)
    alone = cr.fit_correction(_sites(), "dft_barrier_kJmol", candidates=())
    assert alone.loo_mae_kJmol > 2 * c.loo_mae_kJmol and c.loo_spearman > alone.loo_spearman
    fresh = _sites(seed=11)
    assert np.mean(np.abs(c.predict(fresh) - fresh["dft_barrier_kJmol"])) == pytest.approx(1.6, abs=0.6)
