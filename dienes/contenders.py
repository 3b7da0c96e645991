"""Which library rows a run recomputes at the ranking level when it does not recompute them all
(ranking.rows: contenders, or auto above ranking.contenders.from_rows rows).

The rows that decide what a chemist does are the top of the ranking; a row far below it changes
nothing at the bench when its barrier carries a few kJ/mol more error, as long as its interval says
so. So the ranking level computes, in rounds:

- round 0: every reference diene (the model is fitted on them) and a first sample of the library
  chosen to span it: farthest-point sampling over the GFN2-xTB terms a correction can use
  (barrier, interaction, distortion, frontier orbitals, reaction energy), the size and the site
  class, starting from the row GFN2-xTB puts first;
- round k >= 1: the corrected level (dienes.correction) is fitted on everything computed so far
  and every row is ranked, each at the first level with a prediction for it. The cut is the
  lower of the prediction at place `top` and the lower edge of tier 1 (the first row's
  prediction less the tier width), so a row that could reach the top or tier 1 is above it.
  A row not yet computed is a contender when its optimistic prediction, its corrected estimate
  raised by the correction's own error at ranking.contenders.coverage (in log10 units through the
  model's barrier slope), reaches the cut; the contenders are computed and the next round ranks
  again;
- the rounds end when a round finds no contender (or at ranking.contenders.max_rounds).

Rows the corrected level cannot estimate (a term of its correction missing) are contenders
whenever they have a GFN2-xTB prediction: nothing says they cannot reach the top.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

SPAN_TERMS = ("interaction_kJmol", "distortion_kJmol", "homo_eV", "lumo_eV", "reaction_energy_kJmol")


def _heavy_atoms(smiles: str) -> int:
    from rdkit import Chem
    mol = Chem.MolFromSmiles(str(smiles))
    return mol.GetNumHeavyAtoms() if mol is not None else 0


def pair_table(sites: pd.DataFrame, base: str) -> pd.DataFrame:
    """One row per library (structure, dienophile) pair with a GFN2-xTB barrier: its lowest-barrier
    site's terms, the size and the site class."""
    from .ranking import site_class
    ok = sites[(sites["site_status"] == "ok") & sites[base].notna()] if len(sites) else sites
    if not len(ok):
        return pd.DataFrame(columns=["transition_key", base])
    best = ok.sort_values([base, "row"]).drop_duplicates("transition_key").copy()
    best["heavy_atoms"] = best["isomer_smiles"].map(_heavy_atoms)
    best["site_class"] = [site_class(k, a) for k, a in zip(best["site_kind"], best["aromatic"])]
    return best.reset_index(drop=True)


def first_sample(pairs: pd.DataFrame, n: int, base: str) -> list[str]:
    """n pairs spanning the library: farthest-point sampling on standardised terms (missing ones at
    the mean), size, and the site class (one unit apart), from the pair with the lowest GFN2-xTB
    barrier. Deterministic: ties go to the earlier row."""
    if n >= len(pairs):
        return list(pairs["transition_key"])
    cols = [base] + [c for c in SPAN_TERMS if c in pairs] + ["heavy_atoms"]
    X = pairs[cols].astype(float)
    X = ((X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)).fillna(0.0).to_numpy()
    classes = pd.get_dummies(pairs["site_class"]).to_numpy(float)
    Z = np.column_stack([X, classes])
    chosen = [int(np.argmin(pairs[base].to_numpy(float)))]
    dist = np.linalg.norm(Z - Z[chosen[0]], axis=1)
    while len(chosen) < n:
        i = int(np.argmax(dist))
        chosen.append(i)
        dist = np.minimum(dist, np.linalg.norm(Z - Z[i], axis=1))
    return [pairs["transition_key"].iloc[i] for i in chosen]


def first_count(n_pairs: int, share: float, minimum: int) -> int:
    """How many library pairs the first round computes."""
    return min(n_pairs, max(minimum, math.ceil(share * n_pairs)))


def cut_value(table: pd.DataFrame, top: int, tier_width_log10: float | None = None) -> tuple[float, int]:
    """The prediction a row must reach to matter: the lower of that of the row at place `top` and
    the lower edge of tier 1 (the first row's prediction less the tier width: a row above it joins
    tier 1, dienes.ranking.bench_view); -inf where no more than `top` rows are ranked (every row
    could reach the top). Returns (value, place): place is where that value falls in the ranking."""
    ranked = table[table["rank"].notna()].sort_values("rank")
    values = ranked["log10_k_pred"].astype(float).to_numpy()
    cut = float(values[top - 1]) if len(values) > top else -math.inf
    if len(values) and tier_width_log10 is not None and math.isfinite(float(tier_width_log10)):
        cut = min(cut, float(values[0]) - float(tier_width_log10))
    return cut, int((values >= cut).sum())


def contenders(sites: pd.DataFrame, table: pd.DataFrame, computed: set[str], corrected, placing,
               reach_log10: float, top: int, tier_width_log10: float | None = None) -> tuple[list[str], dict]:
    """The library pairs not yet computed at the ranking level whose optimistic prediction (the
    `corrected` level's, raised by `reach_log10`; `placing`'s where the correction has none) reaches
    the cut (see the module text), best first, and what the round saw: the cut, its place, the
    reach, and the pairs nearest the cut."""
    from .ranking import col
    cut, place = cut_value(table, top, tier_width_log10)
    pred_c, pred_g = col(corrected, "log10_k_pred"), col(placing, "log10_k_pred")
    ok = sites[(sites["site_status"] == "ok") & ~sites["transition_key"].isin(computed)] if len(sites) else sites
    best: dict[str, tuple] = {}           # pair -> (optimistic value, row id, corrected value)
    for key, c, g, rid in zip(ok.get("transition_key", []), ok.get(pred_c, pd.Series(np.nan, index=ok.index)),
                              ok.get(pred_g, pd.Series(np.nan, index=ok.index)), ok.get("id", [])):
        if pd.notna(c):
            value = float(c) + reach_log10
        elif pd.notna(g):
            value = math.inf              # no corrected estimate: nothing rules the row out
        else:
            continue
        if key not in best or value > best[key][0]:
            best[key] = (value, str(rid), float(c) if pd.notna(c) else None)
    picked = sorted((k for k, v in best.items() if v[0] >= cut), key=lambda k: (-best[k][0], k))
    near = sorted(best.items(), key=lambda kv: abs(kv[1][0] - cut) if math.isfinite(kv[1][0]) else math.inf)[:5]
    info = {"cut_log10_k": None if not math.isfinite(cut) else round(cut, 3), "cut_place": place,
            "reach_log10": round(reach_log10, 3), "contenders": len(picked),
            "nearest_cut": [{"id": v[1], "transition_key": k, "corrected_log10_k": None if v[2] is None else round(v[2], 3),
                             "optimistic_log10_k": round(v[0], 3) if math.isfinite(v[0]) else None,
                             "contender": k in picked} for k, v in near]}
    return picked, info
