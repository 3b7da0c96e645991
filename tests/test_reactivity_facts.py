"""Known reactivity facts through the whole in-process ranking at the fast level (slow).

One in-process run ranks a panel with the shipped reference set (maleic
anhydride) at GFN2-xTB alone (ranking.levels [gfn2]: density-functional
single points of 28 pairs do not fit in CI), so these are the facts the quick
screen gets right, and the one it gets wrong is a strict xfail. Where both
dienes of a fact are in the reference set they are left out of the fit, so
the fact is predicted, not fitted. Sources beside each fact.
"""
import csv
from pathlib import Path

import numpy as np
import pytest

from dienes.run import rank_in_process

from .conftest import REPO

pytestmark = pytest.mark.slow

PANEL = [
    ("bd", "C=CC=C"), ("dmb", "C=C(C)C(C)=C"), ("e-pd", "C/C=C/C=C"), ("z-pd", "C/C=C\\C=C"),
    ("cpd", "C1=CCC=C1"), ("dtb", "C=C(C(C)(C)C)C(=C)C(C)(C)C"), ("mch", "C=C1CCCC=C1"),
    ("furan", "c1ccoc1"), ("mefuran", "Cc1ccco1"), ("thiophene", "c1ccsc1"), ("nmp", "Cn1cccc1"),
    ("anthracene", "c1ccc2cc3ccccc3cc2c1"),
]
with open(Path(REPO) / "config" / "reference_rates.csv") as fh:
    REFERENCE = {r["smiles"]: r["id"] for r in csv.DictReader(fh)}
    fh.seek(0)
    REFERENCE_Y = {r["id"]: float(r["log10_k"]) for r in csv.DictReader(fh)}


@pytest.fixture(scope="module")
def panel(tmp_path_factory, config):
    d = tmp_path_factory.mktemp("facts")
    lib = d / "panel.csv"
    with open(lib, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        w.writerows(PANEL)
    cfg = config | dict(library=str(lib), reference=str(Path(REPO) / "config" / "reference_rates.csv"),
                        ranking={"levels": ["gfn2"]})
    return cfg, d


def _pred(panel, leave_out=()):
    cfg, cache = panel
    keep = [i for s, i in REFERENCE.items() if s not in leave_out]
    table, _, summary = rank_in_process(cfg, cache_dir=cache, reference_ids=keep)
    return {r["id"]: r for _, r in table.iterrows()}, summary


@pytest.mark.parametrize("fast,slow", [
    ("cpd", "bd"),      # about 1000-fold with maleic anhydride (Sauer & Sustmann 1980, recalled)
    ("e-pd", "z-pd"),   # the (Z)-1-methyl points into the s-cis diene (common practice)
    ("dmb", "bd"),      # 2,3-dimethyl groups favour s-cis and raise the HOMO (Sauer & Sustmann, recalled)
])
def test_order(panel, fast, slow):
    smiles = dict(PANEL)
    rows, _ = _pred(panel, leave_out=(smiles[fast], smiles[slow]))
    assert rows[fast]["log10_k_pred"] > rows[slow]["log10_k_pred"]


@pytest.mark.parametrize("slow", ["furan", "mefuran", "thiophene", "nmp", pytest.param("anthracene", marks=(
    pytest.mark.xfail(strict=True, reason="GFN2-xTB puts anthracene's 9,10 saddle about 6 kJ/mol below "
                      "cyclopentadiene's: a known failure of the fast level, which the density-functional level "
                      "(docs/validation.md) does not share; strict, so a fix shows up")))])
def test_heteroaromatic_and_acene_dienes_below_cyclopentadiene(panel, slow):
    # with maleic anhydride furans add slowly and reversibly, thiophene and pyrroles give no
    # normal cycloadduct, anthracene needs hot xylene where cyclopentadiene reacts at 0 degC
    # (common practice); reached through the located barrier, no rule for classes
    rows, _ = _pred(panel)
    assert rows[slow]["barrier_kJmol"] > rows["cpd"]["barrier_kJmol"]
    assert rows[slow]["log10_k_pred"] < rows["cpd"]["log10_k_pred"]


def test_no_row_of_the_panel_is_left_unverified(panel):
    # every diene of the panel that can react has a located saddle that passed every check:
    # a failed search would leave a row ts_unverified (its barrier a model structure's)
    rows, _ = _pred(panel)
    for key, r in rows.items():
        if key != "mch":
            assert r["status"] == "ok", (key, r["status"], r["message"])
            assert np.isfinite(r["barrier_kJmol"]), key


def test_di_tert_butyl_at_the_bottom_and_locked_s_trans_not_ranked(panel):
    # 2,3-di-tert-butylbutadiene cannot reach s-cis and does not react (common practice)
    rows, _ = _pred(panel)
    ranked = {k: r for k, r in rows.items() if r["status"] == "ok"}
    assert max(int(r["rank"]) for r in ranked.values()) == int(ranked["dtb"]["rank"])
    assert rows["mch"]["status"] == "locked_s_trans"
    assert rows["mch"]["rank"] is None or str(rows["mch"]["rank"]) in ("<NA>", "nan")


def test_model_on_the_reference_set(panel):
    rows, model = _pred(panel)
    summary = model["levels"]["gfn2"]
    assert summary["n_reference"] == 16
    y = np.array(list(REFERENCE_Y.values()))
    # the model must beat predicting the mean of the reference values: the leave-one-out
    # RMSE of that null model is sd(y) * sqrt(n / (n - 1))
    null = y.std(ddof=0) * np.sqrt(len(y) / (len(y) - 1))
    assert summary["nested_cv"]["cv_rmse_log10k"] < null
    # a higher barrier means a slower reaction (transition-state theory), and the fitted slope
    # is flatter than -1/(RT ln 10): GFN2-xTB barriers spread too widely (they are far too low)
    b = summary["coefficients"]["barrier_kJmol"]
    assert summary["physical_slope_per_kJmol"] < b < 0
