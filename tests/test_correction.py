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


def _with_base(config, base="quick", order=("dft", "corrected", "quick", "gfn2")):
    c = config.as_config()
    c["levels"]["quick"] = {"program": "pyscf", "method": "b3lyp", "basis": "sto-3g", "grid_level": 0}
    c["levels"]["corrected"] = dict(c["levels"]["corrected"], base=base)
    return c | {"ranking": c["ranking"] | {"levels": list(order)}}


def test_a_correction_can_start_from_a_cheaper_single_point_level(config):
    # the base level's barrier carries most of the target's (a small basis on the same structures);
    # GFN2-xTB's barrier stays a candidate term; a row without the base barrier is not estimated
    from dienes import settings as cfg
    from dienes.ranking import corrected_level
    settings = cfg.resolve(_with_base(config))
    level = settings.levels["corrected"]
    assert level.label() == "B3LYP/def2-SVP estimated from B3LYP/STO-3G and GFN2-xTB"
    t = _sites(noise=6.0)
    rng = np.random.default_rng(7)
    t["quick_barrier_kJmol"] = t["dft_barrier_kJmol"] - 20 + rng.normal(0, 1.0, len(t))
    t["site_status"], t["transition_key"], t["site"] = "ok", [f"k{i}" for i in range(len(t))], "1-2-3-4"
    t.loc[len(t) - 1, "quick_barrier_kJmol"] = np.nan
    train, rest = t.iloc[:40], t.iloc[40:].drop(columns="dft_barrier_kJmol")
    sites, _, info = corrected_level(pd.concat([train, rest], ignore_index=True), train.iloc[:0], level, settings)
    assert info["base"] == "quick" and info["terms"][0] == "quick_barrier_kJmol"
    # LOO error near the base's noise, sd 1: mean |e| = sqrt(2/pi) = 0.8 (common practice), within sampling
    assert info["loo_mae_kJmol"] == pytest.approx(0.8, abs=0.4)
    est = sites.iloc[40:]
    ok = est["corrected_status"] == "ok"
    assert list(est["corrected_status"])[-1] == "no_terms" and ok.sum() == len(est) - 1
    truth = t.iloc[40:]["dft_barrier_kJmol"][ok.to_numpy()]
    assert np.mean(np.abs(est.loc[ok, "corrected_barrier_kJmol"].to_numpy() - truth.to_numpy())) < 1.5
    # from GFN2-xTB alone the same rows carry the level's own noise (sd 6)
    _, _, info0 = corrected_level(pd.concat([train, rest], ignore_index=True), train.iloc[:0],
                                  config.levels["corrected"], config)
    assert info0["base"] == "gfn2" and info0["loo_mae_kJmol"] > 3 * info["loo_mae_kJmol"]


@pytest.mark.parametrize("base,order", [("gfn2", ("dft", "corrected", "quick", "gfn2")),
                                        ("dft", ("dft", "corrected", "quick", "gfn2")),
                                        ("quick", ("dft", "corrected", "gfn2")),
                                        ("quick", ("quick", "dft", "corrected", "gfn2")),
                                        ("nosuch", ("dft", "gfn2"))])
def test_a_correction_base_must_be_another_single_point_level_every_row_computes(config, base, order):
    # refused with a line naming the option, also where the corrected level does not rank
    from dienes import settings as cfg
    c = _with_base(config, base, order)
    if "corrected" not in order:
        c["ranking"]["rows"] = "all"
    with pytest.raises(ValueError, match="levels/corrected/base"):
        cfg.resolve(c)
