"""Known reactivity facts (common practice) through the whole in-process ranking (slow).
Where both dienes of a fact are in the reference set, they are left out of the fit."""
import csv
from pathlib import Path

import pytest

from dienes.run import rank_in_process

from .conftest import REPO

pytestmark = pytest.mark.slow

PANEL = [
    ("bd", "C=CC=C"), ("iso", "C=CC(C)=C"), ("dmb", "C=C(C)C(C)=C"), ("e-pd", "C/C=C/C=C"),
    ("z-pd", "C/C=C\\C=C"), ("cpd", "C1=CCC=C1"), ("mp", "CC(C)=CC=C"),
    ("dtb", "C=C(C(C)(C)C)C(=C)C(C)(C)C"), ("mch", "C=C1CCCC=C1"), ("dmch", "C=C1CCCCC1=C"),
]
with open(Path(REPO) / "config" / "reference_rates.csv") as fh:
    REFERENCE = {r["smiles"]: r["id"] for r in csv.DictReader(fh)}


@pytest.fixture(scope="module")
def panel(tmp_path_factory, config):
    d = tmp_path_factory.mktemp("facts")
    lib = d / "panel.csv"
    with open(lib, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        w.writerows(PANEL)
    cfg = dict(config, library=str(lib), reference=str(Path(REPO) / "config" / "reference_rates.csv"))
    return cfg, d


def _pred(panel, leave_out=()):
    cfg, cache = panel
    keep = [i for s, i in REFERENCE.items() if s not in leave_out]
    table, _, _ = rank_in_process(cfg, cache_dir=cache, reference_ids=keep)
    return {r["id"]: r for _, r in table.iterrows()}


@pytest.mark.parametrize("fast,slow", [("cpd", "bd"), ("e-pd", "z-pd"), ("dmb", "bd")])
def test_order(panel, fast, slow):
    smiles = dict(PANEL)
    rows = _pred(panel, leave_out=(smiles[fast], smiles[slow]))
    assert rows[fast]["log10_k_pred"] > rows[slow]["log10_k_pred"]


def test_di_tert_butyl_at_the_bottom_and_locked_s_trans_not_ranked(panel):
    rows = _pred(panel)
    ranked = {k: r for k, r in rows.items() if r["status"] == "ok"}
    assert max(int(r["rank"]) for r in ranked.values()) == int(ranked["dtb"]["rank"])
    assert rows["mch"]["status"] == "locked_s_trans"
    assert rows["mch"]["rank"] is None or str(rows["mch"]["rank"]) in ("<NA>", "nan")


def test_model_on_the_reference_set(panel):
    # observed with the shipped reference set (entered from memory): LOO Spearman 0.61;
    # the floor guards against a regression of the descriptors
    cfg, cache = panel
    _, _, summary = rank_in_process(cfg, cache_dir=cache)
    assert summary["n_reference"] == 16
    assert summary["cv_spearman"] >= 0.5
    assert summary["cv_rmse_log10k"] <= 1.0
    # the free penalty coefficient agrees with the physical -1/(RT ln 10) within 3 standard errors
    phys = summary["physical_penalty_coefficient"]
    assert abs(summary["ols_penalty_coefficient"] - phys) <= 3 * summary["ols_penalty_coefficient_se"]
    assert summary["coefficients"]["homo_eV"] > 0          # electron-rich dienes react faster
    assert summary["coefficients"]["distortion_kJmol"] < 0
