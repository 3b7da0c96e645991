"""Known orders among butadienes and cyclopentadiene at the shipped level (slow; see
tests/known_orders.py for the data, the level and how the margins are set)."""
import pytest

from .known_orders import barrier_kJmol, shipped, stored_settings_match

pytestmark = pytest.mark.slow


def test_the_stored_structures_are_the_shipped_settings():
    # the backend may differ (tblite where xtb-python is missing): the settings compared are the
    # config's, as written, and the backend recorded with the data
    settings = shipped()[0]
    if settings.backend != "xtb-python":
        pytest.skip("stored with xtb-python; this Python runs tblite (the same GFN2-xTB)")
    assert stored_settings_match() == ""


@pytest.mark.parametrize("fast,slow,margin_kJmol,source", [
    # reference series (Sauer & Sustmann, recalled; config/reference_rates.csv): cyclopentadiene 3.13
    # log units above butadiene, 2,3-dimethyl- 0.69, 2-tert-butyl- 1.43, 2-phenyl- 0.90
    ("cyclopentadiene", "2,3-dimethylbutadiene", 0.0, "reference series; order only (see module text)"),
    ("cyclopentadiene", "2-tert-butylbutadiene", 0.0, "reference series; order only"),
    ("cyclopentadiene", "2-phenylbutadiene", 0.0, "reference series; order only"),
    # (E) 0.52 against (Z) -1.70 log units (reference series): 12.7 kJ/mol, halved
    ("(E)-piperylene", "(Z)-piperylene", 6.0, "reference series"),
    # butadiene 0 against 4-methyl-1,3-pentadiene -1.50 log units (reference series): 8.6 kJ/mol, halved
    ("butadiene", "4-methyl-1,3-pentadiene", 4.0, "reference series"),
])
def test_known_order_at_the_shipped_level(fast, slow, margin_kJmol, source):
    assert barrier_kJmol(slow) - barrier_kJmol(fast) > margin_kJmol, (fast, slow, source)
