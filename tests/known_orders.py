"""The known orders of docs/validation.md at the shipped level, on shipped GFN2-xTB structures.

tests/data/known_orders.json holds the GFN2-xTB stage of each diene with maleic anhydride
(benchmarks/known_orders_data.py writes it, never by hand); the tests recompute every single point
at the shipped density-functional settings (config.yaml's ranking level: B3LYP/def2-SVP, density
fitting, grid 1), with the GFN2-xTB thermal corrections at the shipped temperature, and compare
free-energy barriers, the barrier the default ranking rests on. tests/data/gas_phase_pairs.json holds
the same for the measured gas-phase pairs of tests/test_gas_kinetics.py (each with its own dienophile;
`--gas-phase`), priced there for electronic barriers.

Margins: a measured or bench difference in rate, converted at the shipped temperature
(RT ln 10 = 5.7 kJ/mol per factor of 10) and halved, because the fitted slope of the model is
well below transition-state theory's (0.38, docs/validation.md): the level's barrier differences
are not the rate differences. The three orders of cyclopentadiene over 2-substituted butadienes
hold at this level by 0.2-2.7 kJ/mol (the level underestimates cyclopentadiene's lead, docs/
validation.md, "The ranking level against coupled-cluster-quality barriers"): order only.
"""
import json
from functools import cache, lru_cache
from pathlib import Path

from dienes import settings as cfg
from dienes.singlepoints import (
    Thermal,
    price_adduct,
    price_dienophile,
    price_pair,
    price_structure,
)

from .conftest import REPO

DATA = Path(REPO) / "tests" / "data" / "known_orders.json"


@lru_cache(maxsize=1)
def data() -> dict:
    return json.loads(DATA.read_text())


@lru_cache(maxsize=1)
def shipped():
    """The shipped settings, the ranking level's energies (one thread) and the thermal source."""
    settings = cfg.load(Path(REPO) / "config" / "config.yaml")
    level = settings.ranking_levels[0]
    thermal = Thermal(settings.backend_settings(), float(settings["temperature_K"]))
    return settings, level.energy_backend(threads=1), thermal


@lru_cache(maxsize=1)
def dienophile() -> dict:
    _, energies, thermal = shipped()
    return price_dienophile(data()["dienophile"], energies, thermal)


@cache
def priced(name: str) -> tuple[dict, dict]:
    """The diene's minima and its pair with maleic anhydride at the shipped level."""
    _, energies, thermal = shipped()
    d = data()["dienes"][name]
    minima = price_structure(d["structure"], energies, thermal)
    return minima, price_pair(minima, d["transition"], dienophile(), energies, thermal)


@cache
def barrier_kJmol(name: str) -> float:
    """The diene's free-energy barrier with maleic anhydride at the shipped level: its best priced site."""
    pair = priced(name)[1]
    values = [s["free_energy_barrier_kJmol"] for s in pair["sites"].values() if s.get("status") == "ok"]
    assert values, (name, pair.get("message"))
    return min(values)


@cache
def adduct(name: str) -> dict:
    """The cycloadduct of the diene's best site with maleic anhydride at the shipped level."""
    _, energies, thermal = shipped()
    d = data()["dienes"][name]
    minima, pair = priced(name)
    return price_adduct(d["structure"], minima, d["transition"], data()["dienophile"], dienophile(), pair,
                        energies, thermal)


def stored_settings_match() -> str:
    """'' when the stored GFN2-xTB stages (this file's and the gas-phase pairs') were computed with
    the shipped settings, else what to do."""
    settings = shipped()[0]
    for stored, path, option in ((data(), DATA, ""), (gas_data(), GAS_DATA, " --gas-phase")):
        if (stored["structure_settings"] != settings.structure_settings()
                or stored["transition_state"] != dict(settings["transition_state"])):
            return (f"{path.relative_to(REPO)} was computed with other GFN2-xTB settings than the shipped "
                    f"ones: run python benchmarks/known_orders_data.py{option}")
    return ""


# ------------------------------------------------------------------ gas-phase pairs
GAS_DATA = Path(REPO) / "tests" / "data" / "gas_phase_pairs.json"


@lru_cache(maxsize=1)
def gas_data() -> dict:
    return json.loads(GAS_DATA.read_text())


@cache
def electronic_barrier_kJmol(diene: str, dienophile_smiles: str) -> float:
    """A gas-phase pair's electronic barrier at the shipped level (its best priced site) on its
    stored GFN2-xTB stage (tests/data/gas_phase_pairs.json; `diene` by name)."""
    _, energies, _ = shipped()
    pair = next(p for p in gas_data()["pairs"] if p["diene"] == diene and p["dienophile_smiles"] == dienophile_smiles)
    out = price_pair(price_structure(pair["structure"], energies), pair["transition"],
                     price_dienophile(pair["dienophile"], energies), energies)
    values = [s["electronic_barrier_kJmol"] for s in out["sites"].values() if s.get("status") == "ok"]
    assert values, (diene, dienophile_smiles, out.get("message"))
    return min(values)
