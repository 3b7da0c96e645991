"""How long a run will take, said before it starts.

Per-row costs in core-seconds, measured on a clean run of the demo library (README, "Throughput":
`benchmarks/plan.py` on its results): the GFN2-xTB stage (conformers, optimisation, planar s-cis, transition
structures) and the density-functional single points of one row, plus the reference set's
one-off cost the first time a working directory sees it. A row already computed in the
working directory (same SMILES in its results/manifest.json with status ok) costs nothing; the
estimate assumes catalogues like the demo (size, flexibility), so it is a guide within a factor
of about two.
"""

from __future__ import annotations

import json
from pathlib import Path

GFN2_ROW_CORE_S = 23.0          # GFN2-xTB stage per library row
# density-functional single points per library row (default level): 88 measured on the demo before
# each pair also computed its cycloadduct, which costs about one transition-structure single point
# (measured side by side on demo pairs: 0.9-1.3 times, median transition structure 48 s)
DFT_ROW_CORE_S = 88.0 + 48.0
GFN2_REFERENCE_ONCE_CORE_S = 223.0      # the reference set at GFN2-xTB, once per working directory
REFERENCE_ONCE_CORE_S = 223.0 + 890.0 * DFT_ROW_CORE_S / 88.0   # the reference set, GFN2-xTB + density functional, once
PARALLEL_EFFICIENCY = 0.96      # measured on the demo: core-seconds / (wall x cores)
CONTENDERS_SHARE = 1.0          # a contenders run: at most every row. Measured (benchmarks/contenders.py): 0.92 of
                                # the core-seconds on the demo, 0.84 on 103 benchmark rows; less on catalogues of
                                # many hundreds (estimated, docs/validation.md), so this stays an upper bound


def rows_to_compute(library_smiles: list[str], workdir: Path) -> tuple[int, bool]:
    """(library rows not yet computed in `workdir`, whether its reference set is computed)."""
    manifest = Path(workdir) / "results" / "manifest.json"
    try:
        done = json.loads(manifest.read_text())
    except (OSError, ValueError):
        return len(library_smiles), False
    seen = {r["smiles"] for r in done.get("records", []) if r.get("status") == "ok"}
    return sum(1 for s in library_smiles if s not in seen), bool(done.get("reference_records"))


def dft_share(rows, n_rows: int) -> tuple[float, str]:
    """(share of the rows recomputed at the density-functional level, how it is said) for what
    ranking.rows means on a library of n_rows ('all', 'contenders' or N: Settings.rows_mode)."""
    rows = str(rows)
    if rows.isdigit():
        share = min(1.0, int(rows) / max(n_rows, 1))
        return share, f", the {min(int(rows), n_rows)} best by GFN2-xTB recomputed at the density-functional level"
    if rows == "contenders":
        return CONTENDERS_SHARE, (", only the dienes that could reach the top recomputed at the "
                                  "density-functional level (so the time below is an upper bound)")
    return 1.0, ""


def wall_time_s(new_rows: int, cores: int, quick: bool, reference_done: bool, dft_share: float = 1.0) -> float:
    """Expected wall time (s) of a run computing `new_rows` rows on `cores` cores, dft_share of them
    at the density-functional level."""
    per_row = GFN2_ROW_CORE_S + (0.0 if quick else DFT_ROW_CORE_S * dft_share)
    once = 0.0 if reference_done else (GFN2_REFERENCE_ONCE_CORE_S if quick else REFERENCE_ONCE_CORE_S)
    return (once + new_rows * per_row) / max(int(cores), 1) / PARALLEL_EFFICIENCY


def say(seconds: float) -> str:
    """'about 40 min', 'about 3.5 h', 'under a minute'."""
    if seconds < 60:
        return "under a minute"
    if seconds < 5400:
        return f"about {max(1, round(seconds / 60))} min"
    return f"about {seconds / 3600:.1f} h"
