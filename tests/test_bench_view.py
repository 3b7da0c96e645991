"""What the chemist reads first: tiers, multiples of butadiene's rate, the dienophile in the domain."""
import numpy as np
import pandas as pd
import pytest

from dienes import ranking


def _table(preds, smiles=None):
    n = len(preds)
    return pd.DataFrame({
        "row": range(1, n + 1), "id": [f"x{i}" for i in range(n)],
        "smiles": smiles or ["C=CC(C)=C"] * n, "rank": pd.array(range(1, n + 1), dtype="Int64"),
        "level": ["dft"] * n, "in_domain": [True] * n, "domain_note": [""] * n,
        "log10_k_pred": preds, "log10_k_low": preds, "log10_k_high": preds, "dft_log10_k_pred": preds, "gfn2_log10_k_pred": preds})


# model.json's shape: the ranking level's model under levels, keyed by level name
SUMMARY = {"ranking_level": "dft", "ranking_levels": ["dft", "gfn2"], "run_dienophile": "O=C1OC(=O)C=C1",
           "levels": {"dft": {"cv_rmse_log10k": 0.5, "cv_pairwise_accuracy": 0.83, "base_dienophile": "O=C1C=CC(=O)O1",
                              "dienophile_terms": {}}}}


def test_tiers_break_where_the_model_can_tell_rows_apart():
    # two predictions each off by one RMSE differ by sqrt(2) RMSE by chance (common practice:
    # the spread of a difference of two independent errors); 0.5 log units -> breaks beyond 0.707
    out, extra = ranking.bench_view(_table([3.0, 2.5, 1.9, 1.0, 0.9]), SUMMARY, pd.DataFrame())
    assert out["tier"].tolist() == [1, 1, 2, 3, 3]
    assert extra["bench"]["tier_width_log10"] == pytest.approx(0.707, abs=0.001)
    # 0.83 of pairs right -> "about 8 of 10"; RMSE 0.5 -> a factor of 3.2 (10^0.5)
    assert extra["bench"]["pairs_right_of_10"] == 8 and extra["bench"]["typical_factor"] == 3.2


def test_times_faster_than_butadiene_is_the_reference_scale():
    # the reference set's log10 k is relative to butadiene's measured rate with the same
    # dienophile (config/reference_rates.csv, ref-01 = 0): one scale, so the multiple is 10^log10 k
    # and butadiene's own row shows its prediction, not 1
    t = _table([2.2, 0.2, -1.8], smiles=["C1=CCC=C1", "C=CC=C", "c1ccoc1"])
    out, extra = ranking.bench_view(t, SUMMARY, pd.DataFrame())
    assert out["times_faster_than_butadiene"].tolist() == pytest.approx([158.49, 1.585, 0.01585], rel=1e-3)
    without, _ = ranking.bench_view(_table([1.0, 0.5]), SUMMARY, pd.DataFrame())
    assert without["times_faster_than_butadiene"].tolist() == pytest.approx([10.0, 3.162], rel=1e-3)


def test_the_terms_add_up_to_the_prediction_and_name_what_moved_the_row():
    # two rows, one with the lower barrier, one with the higher HOMO: the terms say which term ranks them
    model = {"coefficients": {"barrier_kJmol": -0.1, "homo_eV": 1.2}, "feature_means": {"barrier_kJmol": 110.0,
             "homo_eV": -9.0}, "intercept": 21.0, "dienophile_terms": {}, "run_dienophile": "O=C1OC(=O)C=C1"}
    base = 21.0 - 11.0 - 10.8
    t = _table([base + 0.5 + 0.0, base - 0.5 + 1.2])
    t["barrier_kJmol"], t["homo_eV"] = [105.0, 115.0], [-9.0, -8.0]
    out = ranking.model_terms(t, SUMMARY | {"levels": {"dft": model}})
    assert out["term_barrier_log10k"].tolist() == pytest.approx([0.5, -0.5])
    assert out["term_homo_log10k"].tolist() == pytest.approx([0.0, 1.2])
    total = out["baseline_log10k"] + out["term_barrier_log10k"] + out["term_homo_log10k"]
    assert total.tolist() == pytest.approx(t["log10_k_pred"].tolist())
    assert out["model_terms"][1].startswith("barrier -0.50, HOMO +1.20")


def test_a_dienophile_outside_the_reference_set_is_flagged_on_every_ranked_row():
    out, extra = ranking.bench_view(_table([1.0, 0.5]), SUMMARY | {"run_dienophile": "C=CC#N"}, pd.DataFrame())
    assert not extra["bench"]["dienophile_in_reference"]
    assert (~out["dienophile_in_reference"]).all()
    assert all("dienophile not in the reference set" in n for n in out["domain_note"])
    same, _ = ranking.bench_view(_table([1.0, 0.5]), SUMMARY, pd.DataFrame())
    assert same["dienophile_in_reference"].all() and not any(same["domain_note"])
    assert np.isfinite(out["log10_k_pred"]).all()


def test_an_anchor_turns_relative_rates_into_half_lives():
    # second order, equal starting concentrations: t1/2 = 1/(k c) (common practice, any kinetics text)
    t = _table([2.2, 0.2], smiles=["C1=CCC=C1", "C=CC=C"])
    anchor = {"smiles": "C=CC=C", "k_L_per_mol_s": 1e-4, "concentration_M": 0.5}
    out, extra = ranking.bench_view(t, SUMMARY, pd.DataFrame(), anchor)
    # butadiene: 1/(1e-4 * 0.5) s = 20000 s = 5.56 h; cyclopentadiene 100 times faster
    assert out["half_life_h"].tolist() == pytest.approx([0.0556, 5.556], rel=1e-3)
    none, extra_none = ranking.bench_view(t, SUMMARY, pd.DataFrame(), {"k_L_per_mol_s": None})
    assert "half_life_h" not in none and not extra_none["bench"]["half_life"]["given"]
    # where the reference set measured the anchor diene, its measured value places it on the scale
    ref = pd.DataFrame({"id": ["ref-01"], "smiles": ["C=CC=C"], "dienophile_smiles": ["O=C1OC(=O)C=C1"],
                        "log10_k": [0.0]})
    measured, extra_m = ranking.bench_view(t, SUMMARY, ref, anchor)
    assert measured["half_life_h"].tolist() == pytest.approx([5.556 / 158.49, 5.556 / 1.585], rel=1e-3)
    assert extra_m["bench"]["yardstick"]["source"] == "measured, reference row ref-01"
    assert measured["reference_log10_k"].tolist()[1] == 0.0
