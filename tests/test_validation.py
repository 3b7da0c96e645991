"""Outside references through the project's own functions, on both backends (slow).
The reference values, sources and tolerances live in dienes/validation.py;
docs/validation.md is the generated table."""
import re

import pytest

from dienes import settings as cfg
from dienes import validation

from .conftest import BACKENDS

pytestmark = pytest.mark.slow

# a known error of the fast level is reported in docs/validation.md, not asserted
NAMES = [c.name for c in validation.checks() if c.kind != "known"]


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("name", NAMES)
def test_check_within_tolerance(name, backend):
    check = next(c for c in validation.checks(backend) if c.name == name)
    observed = check.observe({})
    assert check.passes(observed), f"{name}: observed {observed:.3f}, reference {check.reference} ({check.source})"


# the comparison of the two implementations needs both (xtb-python has no wheels after Python 3.11)
needs_both = pytest.mark.skipif(len(BACKENDS) < 2, reason="needs xtb-python and tblite")


@needs_both
@pytest.mark.parametrize("check", validation.backend_checks(), ids=lambda c: c.name)
def test_backends_agree(check):
    observed = check.observe({})
    assert check.passes(observed), f"{check.name}: {observed:.2e}"


def _observed_in_doc():
    text = validation.generated_block(validation.DOC_PATH.read_text())
    text = text.split(validation.REFINED_HEADER.strip().splitlines()[0])[0]
    out = {}
    for line in text.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 8 and cells[0] not in ("check", "---"):
            out[cells[0]] = float(cells[3])
    return out


@needs_both
def test_document_matches_the_code():
    doc = _observed_in_doc()
    checks = validation.checks() + validation.backend_checks()
    assert set(doc) == {c.name for c in checks}, "docs/validation.md is stale: run python -m dienes.validation"
    for c in checks:
        observed = c.observe({})
        assert doc[c.name] == pytest.approx(observed, abs=0.011, rel=0.05), (
            f"{c.name}: docs say {doc[c.name]}, code gives {observed}; run python -m dienes.validation")
    assert not re.search(r"\|\s*NO\s*\|", validation.generated_block(validation.DOC_PATH.read_text()).split(
        validation.REFINED_HEADER.strip().splitlines()[0])[0])


def test_refined_table_matches_the_code():
    # the table a chemist reads for the ranking level: the shipped level, the code's checks with their
    # references, sources and tolerances, a verdict that follows from the observed value it prints,
    # and (two single points) the observed s-cis penalty recomputed; the butadiene - cyclopentadiene
    # row is recomputed by tests/test_known_orders.py and the cyclohexadiene + ethylene row by
    # tests/test_gas_kinetics.py, each on stored structures; the scan's barrier top (37 single
    # points) only by hand (python -m dienes.validation --refined)
    level = cfg.load(validation.CONFIG_PATH, fallback=False).priced_levels[0]
    label, rows = validation.refined_table()
    assert label == level.label(), "docs/validation.md: refined table of another level; rerun --refined"
    checks = validation.level_checks(level)
    assert set(rows) == {c.name for c in checks}, "refined table is stale: python -m dienes.validation --refined"
    for c in checks:
        name, reference, source, observed, tolerance, why, _, verdict = rows[c.name]
        assert (reference, source, tolerance, why) == (
            f"{validation._fmt(c.reference)} {c.unit}", c.source, c.tolerance_text(), c.why), c.name
        assert verdict == validation._verdict(c, float(observed)) != "NO", (c.name, observed, verdict)
    scis = next(c for c in checks if "s-cis above s-trans" in c.name)
    assert float(rows[scis.name][3]) == pytest.approx(scis.observe({}), abs=0.02), scis.name


def test_regenerating_keeps_the_hand_written_sections():
    # the generated block is replaced, everything outside it kept word for word
    old = (validation.TITLE + validation.BEGIN_MARK + "\nold table\n" + validation.END_MARK
           + "\n\n## The refined level: how the default was chosen\n\nhand-written text\n")
    new = validation.replace_generated(old, "new table")
    assert "new table" in new and "old table" not in new
    assert new.endswith("## The refined level: how the default was chosen\n\nhand-written text\n")
    # a document without a block keeps its text after the new block
    fresh = validation.replace_generated(validation.TITLE + "notes\n", "table")
    assert fresh.index("table") < fresh.index("notes")


def test_known_errors_are_few_and_say_so():
    # most checks must be able to fail: a known error is the exception, and says it is one
    known = [c for c in validation.checks() if c.kind == "known"]
    assert len(known) <= len(validation.checks()) // 3
    assert all(c.why.startswith("known error, not tested") for c in known)


def test_every_check_says_why_its_tolerance():
    for c in validation.checks() + validation.backend_checks() + validation.level_checks(
            cfg.load(validation.CONFIG_PATH).levels["dft"]):
        assert c.source and c.why, c.name
