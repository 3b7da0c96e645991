"""Which rows the ranking level computes when it does not compute them all (dienes.contenders)."""
import math

import numpy as np
import pandas as pd
import pytest

from dienes import contenders as ct


def _pairs(n=40, seed=5):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"transition_key": [f"k{i:02d}" for i in range(n)],
                         "gfn2_barrier_kJmol": rng.uniform(0, 60, n), "interaction_kJmol": rng.normal(-150, 20, n),
                         "homo_eV": rng.normal(-9.5, 0.4, n), "heavy_atoms": rng.integers(4, 20, n),
                         "site_class": ["acyclic"] * (n - 3) + ["ring aromatic"] * 3})


def test_the_first_sample_spans_the_library_and_starts_at_the_best_screen_row():
    pairs = _pairs()
    picked = ct.first_sample(pairs, 8, "gfn2_barrier_kJmol")
    assert len(set(picked)) == 8 and picked == ct.first_sample(pairs, 8, "gfn2_barrier_kJmol")   # deterministic
    assert picked[0] == pairs.loc[pairs["gfn2_barrier_kJmol"].idxmin(), "transition_key"]
    chosen = pairs[pairs["transition_key"].isin(picked)]
    # a rare class is reached, and the sample covers most of the barrier range (a random 8 of 40
    # would often miss both; farthest-point sampling reaches the ends by construction of the metric)
    assert (chosen["site_class"] == "ring aromatic").any()
    span = np.ptp(chosen["gfn2_barrier_kJmol"]) / np.ptp(pairs["gfn2_barrier_kJmol"])
    assert span > 0.8
    assert ct.first_count(40, 0.2, 12) == 12 and ct.first_count(1000, 0.2, 12) == 200 and ct.first_count(5, 0.2, 12) == 5


def _table(values, tiers):
    return pd.DataFrame({"rank": range(1, len(values) + 1), "log10_k_pred": values, "tier": tiers})


def test_the_cut_is_the_top_or_tier_one_whichever_reaches_further():
    # tier 1 holds every row within the tier width of the first (dienes.ranking.bench_view): a
    # row not yet computed could join it by reaching the first row's prediction less the width,
    # which may lie below the last row tier 1 holds now
    assert ct.cut_value(_table([3, 2, 1, 0, -1], [1, 1, 2, 3, 3]), 2) == (2.0, 2)
    assert ct.cut_value(_table([3, 2, 1, 0, -1], [1, 2, 3, 4, 5]), 2, 0.5) == (2.0, 2)    # the top reaches further
    assert ct.cut_value(_table([3, 2.8, 2.6, 0, -1], [1, 1, 1, 2, 3]), 2, 0.5) == (2.5, 3)
    assert ct.cut_value(_table([3, 2.9, 0, -1], [1, 1, 2, 3]), 1, 0.5) == (2.5, 2)        # 2.6 would join tier 1
    assert ct.cut_value(_table([3, 2], [1, 2]), 2)[0] == -math.inf          # too few rows: every row matters


def test_a_row_is_a_contender_when_its_optimistic_estimate_reaches_the_cut(config):
    corrected, placing = config.levels["corrected"], config.levels["gfn2"]
    sites = pd.DataFrame({"transition_key": ["a", "b", "c", "d", "e"], "id": list("ABCDE"),
                          "site_status": ["ok"] * 5,
                          "corrected_log10_k_pred": [1.5, 0.2, -0.5, np.nan, np.nan],
                          "gfn2_log10_k_pred": [0.0, 0.0, 0.0, 2.0, np.nan]})
    table = _table([2.0, 1.0, 0.5, 0.0], [1, 2, 2, 3])
    picked, info = ct.contenders(sites, table, {"x"}, corrected, placing, reach_log10=0.5, top=2)
    # cut = the second place, 1.0: a (1.5 + 0.5) and d (no corrected estimate: nothing rules it out)
    # are in; b (0.2 + 0.5 = 0.7) and c are out; e has no prediction at all
    assert picked == ["d", "a"] and info["cut_log10_k"] == 1.0 and info["contenders"] == 2
    near = {n["id"]: n for n in info["nearest_cut"]}
    assert near["B"]["optimistic_log10_k"] == pytest.approx(0.7) and not near["B"]["contender"]
    # computed pairs are never asked for again
    assert ct.contenders(sites, table, {"a", "d"}, corrected, placing, 0.5, 2)[0] == []


def test_what_was_computed_and_what_it_risked_is_said():
    from dienes.outputs import computed_text
    assert computed_text({"computed_rows": {"level": "dft", "rows": "all", "ranked_by_level": {"dft": 46}}}) == ""
    summary = {"interval": 0.9, "levels": {"dft": {}, "corrected": {"correction": {
        "loo_mae_kJmol": 5.12, "half_width_kJmol": 11.8}}},
        "computed_rows": {"level": "dft", "rows": "contenders", "ranked_by_level": {"dft": 40, "corrected": 6},
                          "rounds": 4, "pairs_computed": 39, "pairs_in_run": 46, "ended": "no contender left",
                          "cut_log10_k": 0.475, "cut_place": 20,
                          "nearest_cut": [{"id": "DEMO-08", "contender": False}, {"id": "DEMO-09", "contender": True}]}}
    text = computed_text(summary)
    for part in ("dft computed 39 of 46", "4 round(s) (no contender left)", "on corrected: 6",
                 "mean 5.1 kJ/mol", "within 12 kJ/mol", "log10 k +0.47 (place 20)", "not computed: DEMO-08"):
        assert part in text, (part, text)
    assert "DEMO-09" not in text


def test_a_row_on_the_corrected_level_carries_the_corrections_error_in_its_interval(config):
    # the model's half-width and the correction's (both in log10 units) add in quadrature
    # (independent errors, common practice); the prediction itself is the target level's model
    from dienes import model as mdl
    from dienes.ranking import predict_sites
    rng = np.random.default_rng(2)
    x = rng.uniform(90, 140, 12)
    y = -0.06 * (x - 115) + rng.normal(0, 0.3, 12)
    fit = mdl.fit(x[:, None], y, ["barrier_kJmol"], "ols", 303.15)
    sites = pd.DataFrame({"site_status": ["ok"] * 3, "corrected_barrier_kJmol": [100.0, 115.0, 130.0],
                          "site_kind": ["acyclic"] * 3, "aromatic": [False] * 3, "ts_verified": [True] * 3})
    summary = {"run_dienophile": "C=C", "dienophile_terms": {}, "training_classes": ["acyclic"]}
    plain = predict_sites(sites, fit, config, summary, "corrected")
    wide = predict_sites(sites, fit, config, summary | {"correction": {"half_width_log10": 0.8}}, "corrected")
    assert np.allclose(plain["corrected_log10_k_pred"], wide["corrected_log10_k_pred"])
    half0 = (plain["corrected_log10_k_high"] - plain["corrected_log10_k_low"]) / 2
    half1 = (wide["corrected_log10_k_high"] - wide["corrected_log10_k_low"]) / 2
    assert np.allclose(half1, np.sqrt(half0 ** 2 + 0.8 ** 2))


@pytest.mark.parametrize("base,says", [("gfn2", "estimated from GFN2-xTB terms (gfn2_barrier_kJmol"),
                                       ("quick", "estimated from the B3LYP/STO-3G barrier and GFN2-xTB terms "
                                                 "(quick_barrier_kJmol")])
def test_the_report_says_what_a_corrected_row_was_estimated_from(base, says):
    from dienes.report import level_line
    table = pd.DataFrame({"rank": [1, 2, 3], "level": ["dft", "dft", "corrected"]})
    model = {"ranking_level": "dft",
             "levels": {"dft": {"level": "B3LYP/def2-SVP", "barrier_kind": "free_energy"},
                        "quick": {"level": "B3LYP/STO-3G"}, "gfn2": {"level": "GFN2-xTB"},
                        "corrected": {"correction": {"base": base, "terms": [f"{base}_barrier_kJmol", "homo_eV"],
                                                     "n_sites": 30, "loo_mae_kJmol": 5.1}}}}
    text = level_line(table, model)
    assert says in text and "1 ranked at corrected" in text and "mean 5.1 kJ/mol" in text
