"""Known orders of aromatic dienes and acenes at the shipped level (slow; see tests/known_orders.py
for the data, the level and how the margins are set). A file of its own: the acenes are the dearest
single points, and the test runner gives each file its own worker."""
import pytest

from .known_orders import barrier_kJmol

pytestmark = pytest.mark.slow


@pytest.mark.parametrize("fast,slow,margin_kJmol,source", [
    # cyclopentadiene adds maleic anhydride at 0 degC, anthracene needs refluxing xylene (common
    # practice): at least four orders of magnitude, 23 kJ/mol, halved
    ("cyclopentadiene", "anthracene", 11.0, "common practice"),
    # 9,10-dimethylanthracene adds maleic anhydride about an order of magnitude faster than
    # anthracene (from memory): 5.7 kJ/mol, halved
    ("9,10-dimethylanthracene", "anthracene", 2.8, "from memory"),
    # furan gives the (reversible) adduct at room temperature, thiophene none under ordinary
    # conditions (common practice): at least three orders of magnitude, 17 kJ/mol, halved
    ("furan", "thiophene", 8.5, "common practice"),
])
def test_known_order_at_the_shipped_level(fast, slow, margin_kJmol, source):
    assert barrier_kJmol(slow) - barrier_kJmol(fast) > margin_kJmol, (fast, slow, source)
