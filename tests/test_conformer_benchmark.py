"""The conformer protocol against a denser reference search: the quick mode of
benchmarks/conformer_protocol.py (slow), whose reference embeds three times as many
conformers as the protocol and optimises every one tightly. Only accuracy is asserted here; the speed
figures it prints are for people, not for a timed test.

The reference search is stored (tests/data/conformer_reference.json, written by
`python benchmarks/conformer_protocol.py --quick --cache tests/data/conformer_reference.json`):
its entries are keyed by the GFN2-xTB settings' hash, so after a change to the settings the
benchmark computes the reference again instead of comparing with a stale one. The science version is
left out of the key on purpose (a new protocol is compared with the same reference): after a change
to how a penalty is defined, rewrite the file with the command above."""
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from .conftest import REPO

pytestmark = pytest.mark.slow


def test_quick_benchmark_penalties_agree_with_the_exhaustive_search(tmp_path):
    cache = tmp_path / "reference.json"       # a copy: the benchmark extends its cache file
    shutil.copy(Path(REPO) / "tests" / "data" / "conformer_reference.json", cache)
    out = subprocess.run([sys.executable, str(Path(REPO) / "benchmarks" / "conformer_protocol.py"), "--quick",
                          "--cache", str(cache)],
                         capture_output=True, text=True, timeout=1200, env=dict(os.environ, OMP_NUM_THREADS="1"))
    assert out.returncode == 0, out.stderr[-3000:]
    m = re.search(r"speedup_vs_exhaustive=([\d.]+) penalty_agreement=([\d.]+) max_penalty_error_kJmol=([\d.]+)",
                  out.stdout)
    assert m, out.stdout[-2000:]
    # targets of the protocol: every penalty within 1 kJ/mol of the exhaustive search, none beyond 3
    assert float(m.group(2)) >= 0.95 and float(m.group(3)) <= 3.0, out.stdout
