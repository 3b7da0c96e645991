"""Measured gas-phase Diels-Alder kinetics as activation enthalpies and free energies, and
whether a cycloadduct may revert (`reversal`, at the end).

A gas-phase barrier needs no solvent model, so measured gas-phase rate
parameters are the cleanest outside check of the barriers the ranking rests
on. Each measurement gives k = A exp(-Ea / RT) (A in L mol^-1 s^-1) over a
temperature range; at the middle of that range (common practice) it is
turned into what a computed barrier is compared with:

- activation enthalpy dH = Ea - 2RT (a bimolecular gas-phase reaction in
  transition-state theory: Ea = dH + (1 - dn) RT with dn = -1);
- activation free energy in the 1 mol/L standard state,
  dG = -RT ln(k h / (kB T)) with k in L mol^-1 s^-1 (Eyring).

Rows of one paper for the same diene and dienophile are product channels
(endo/exo): their rate constants add, and the effective activation energy of
the sum is the k-weighted mean of the channels' (d ln k / d(1/T) of a sum).
A measurement without a temperature range takes its paper's range for the
same pair.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from .units import BOLTZMANN_J_K, GAS_CONSTANT_KJMOL_K, PLANCK_J_S


@dataclass
class Measurement:
    """One measured reaction (channels of one paper summed).

    record_ids: the rows it comes from; temperature_K: middle of the measured range;
    ea_kJmol: effective Arrhenius activation energy; log10_k: log10 of k (L mol^-1 s^-1)
    at temperature_K; dh_kJmol / dg_kJmol: activation enthalpy and 1 M free energy there."""

    diene_smiles: str
    dienophile_smiles: str
    diene: str
    dienophile: str
    citation: str
    compiled_in: str
    record_ids: list
    temperature_K: float
    ea_kJmol: float
    log10_k: float
    dh_kJmol: float
    dg_kJmol: float
    note: str


def activation_free_energy_kJmol(k_L_mol_s: float, temperature_K: float) -> float:
    """Eyring activation free energy (kJ/mol, 1 mol/L standard state) of a bimolecular k."""
    return -GAS_CONSTANT_KJMOL_K * temperature_K * math.log(
        k_L_mol_s * PLANCK_J_S / (BOLTZMANN_J_K * temperature_K))


def read_measurements(path) -> list[Measurement]:
    """The file's rows grouped into measured reactions (see the module text)."""
    import pandas as pd
    rows = pd.read_csv(Path(path), dtype={"Tmin_K": float, "Tmax_K": float})
    ranges = {}
    for _, r in rows.iterrows():
        if not math.isnan(r["Tmin_K"]):
            ranges.setdefault((r["diene_smiles"], r["dienophile_smiles"], r["citation"]),
                              (r["Tmin_K"], r["Tmax_K"]))
    out = []
    for (diene, dph, citation), grp in rows.groupby(["diene_smiles", "dienophile_smiles", "citation"], sort=False):
        lo, hi = ranges.get((diene, dph, citation), (float("nan"), float("nan")))
        if math.isnan(lo):
            continue                       # no temperature anywhere for this measurement
        T = 0.5 * (lo + hi)
        RT = GAS_CONSTANT_KJMOL_K * T
        ks = [float(a) * math.exp(-float(ea) / RT) for a, ea in zip(grp["A_L_per_mol_s"], grp["Ea_kJmol"])]
        k = sum(ks)
        ea = sum(ki * float(e) for ki, e in zip(ks, grp["Ea_kJmol"])) / k
        first = grp.iloc[0]
        notes = sorted({str(n) for n in grp["note"] if isinstance(n, str) and n})
        out.append(Measurement(diene, dph, first["diene"], first["dienophile"], citation, first["compiled_in"],
                               list(grp["record_id"]), T, ea, math.log10(k), ea - 2.0 * RT,
                               activation_free_energy_kJmol(k, T), "; ".join(notes)))
    return out


def pair_order_fraction(measured, computed, min_gap: float) -> tuple[int, int]:
    """Pairs whose measured values differ by at least `min_gap`: (how many the computed
    values put in the same order, how many such pairs)."""
    good = total = 0
    for i in range(len(measured)):
        for j in range(i + 1, len(measured)):
            if abs(measured[i] - measured[j]) < min_gap:
                continue
            total += 1
            good += (measured[i] - measured[j]) * (computed[i] - computed[j]) > 0
    return good, total


# An adduct may revert when its equilibrium constant at the run's temperature (1 mol/L standard
# state) is below REVERSAL_K_L_PER_MOL: at 0.1 mol/L of both partners about 3 % of them then stay
# free, and warming by some 80 K (a Diels-Alder reaction loses about 170 J/(mol K) of entropy,
# common practice) frees about half, so the adduct reverts on heating, in work-up or on storage.
REVERSAL_K_L_PER_MOL = 1.0e4
# the ranking level's error for Diels-Alder reaction energies (B3LYP/def2-SVP with D3(BJ)): mean
# absolute deviation 11.6 kJ/mol from the DARC benchmark on its own geometries (docs/validation.md);
# a reaction free energy within this of the reversible range is flagged too
REACTION_ENERGY_MARGIN_KJMOL = 11.6


def reversal_limit_kJmol(temperature_K: float) -> float:
    """The reaction free energy (kJ/mol) above which an adduct is flagged as one that may revert."""
    return -GAS_CONSTANT_KJMOL_K * temperature_K * math.log(REVERSAL_K_L_PER_MOL) - REACTION_ENERGY_MARGIN_KJMOL


def reversal(reaction_free_energy_kJmol: float, temperature_K: float, level: str = "") -> tuple[bool | None, str]:
    """Whether a cycloadduct may revert (retro-Diels-Alder), from its reaction free energy at
    temperature_K (1 mol/L): (True, why) above reversal_limit_kJmol, (False, '') below, (None, '')
    without a value."""
    dg = float(reaction_free_energy_kJmol)
    if not math.isfinite(dg):
        return None, ""
    if dg <= reversal_limit_kJmol(temperature_K):
        return False, ""
    at = f" at {level}" if level else ""
    return True, (f"the adduct may revert (retro-Diels-Alder) on warming or standing: reaction free energy "
                  f"{dg:+.0f} kJ/mol{at}, {temperature_K:.0f} K, above the "
                  f"{reversal_limit_kJmol(temperature_K):.0f} kJ/mol where adducts start to revert "
                  f"(error about {REACTION_ENERGY_MARGIN_KJMOL:.0f} kJ/mol)")
