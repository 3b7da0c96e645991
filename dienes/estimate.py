"""How long a run will take, said before it starts.

Per-row costs in core-seconds, measured on a clean run of the demo library (README, "Throughput":
`benchmarks/plan.py` on its results): the GFN2-xTB stage (conformers, optimisation, planar s-cis, transition
structures) and the density-functional single points of one row, plus the reference set's
one-off cost the first time a working directory sees it. A row already computed in the
working directory (same SMILES in its results/manifest.json, its result files on disk) costs nothing. Each row is
read as the run reads it (a row the library refuses costs nothing; each E/Z isomer it computes is
charged) and charged by size: the diene's own part (conformers, minima) with its atoms, the rest
with the atoms of the pair it makes with the run's dienophile and with its number of diene units,
as power laws measured on the benchmark library's run, relative to the demo's average row. So a
catalogue of larger dienes or a larger dienophile is charged more than the demo. Flexibility is
taken as the demo's, so it is a guide within a factor of about two.
"""

from __future__ import annotations

import json
from pathlib import Path

GFN2_ROW_CORE_S = 23.0          # GFN2-xTB stage per library row the run accepts (status ok)
# density-functional single points per library row (default level): 88 measured on the demo before
# each pair also computed its cycloadduct, which costs about one transition-structure single point
# (measured side by side on demo pairs: 0.9-1.3 times, median transition structure 48 s)
DFT_ROW_CORE_S = 88.0 + 48.0
GFN2_REFERENCE_ONCE_CORE_S = 223.0      # the reference set at GFN2-xTB, once per working directory
DFT_REFERENCE_ONCE_CORE_S = 890.0 * DFT_ROW_CORE_S / 88.0       # ... and at the density-functional level
PARALLEL_EFFICIENCY = 0.96      # measured on the demo: core-seconds / (wall x cores)
# cost against size, fitted as power laws on the benchmark library's run (170 rows; 8-36 atoms a diene,
# hydrogens included, 17-45 a pair with maleic anhydride): GFN2-xTB conformers against the diene's
# atoms 3.3 (199 structures), transition structures against the pair's 3.0 (198; with the number of
# diene units as a second term 2.6 and 1.0-1.3, scatter down from a factor of 1.8 to 1.5); at the
# density-functional level the diene's minima 3.1 (50), transition structure + cycloadduct 2.8 (48).
# One exponent serves all four; a part that depends on the diene alone keeps its share of the demo's
# cost (from the same fits at the demo's size). A single row is off by a factor of about 1.5-2.6
# either way, a catalogue's total much less.
SIZE_EXPONENT = 3.0
SITES_EXPONENT = 1.0            # the pair's part grows with the diene units searched
GFN2_DIENE_SHARE = 0.17         # conformer search: 2.6 of 15.2 core-s at the demo's size
DFT_DIENE_SHARE = 0.15          # the diene's minima: 17 of 116 core-s at the demo's size
DEMO_DIENE_ATOMS = 19.4         # the demo's dienes and their pairs with maleic anhydride, cube-means:
DEMO_PAIR_ATOMS = 27.8          # where the two parts have those shares
CONTENDERS_SHARE = 1.0          # a contenders run: at most every row. Measured (benchmarks/contenders.py): 0.92 of
                                # the core-seconds on the demo, 0.75 on the 170-row benchmark library; less on
                                # catalogues of many hundreds (estimated, docs/validation.md); kept an upper bound


def rows_to_compute(library_smiles: list[str], workdir: Path, dienophile_smiles: str | None = None,
                    level_key: str = "*") -> tuple[list[str], list[str], tuple[bool, bool]]:
    """What `workdir`'s results already hold: (the rows whose GFN2-xTB stage is still to compute,
    the rows whose density-functional single points are, whether the reference set is computed at
    GFN2-xTB and at the density-functional level).
    A row is computed when a row with its SMILES is in results/manifest.json with status ok and the
    result files of every isomer are on disk (its structure; a pair with the same dienophile at the
    level `level_key`, '<name>-<hash>', or at any), so a run stopped early is charged for what it left."""
    from .layout import Layout
    from .settings import canonical_smiles
    results = Layout(Path(workdir) / "results")
    try:
        done = json.loads(results.manifest.read_text())
    except (OSError, ValueError):
        return list(library_smiles), list(library_smiles), (False, False)
    dph = canonical_smiles(dienophile_smiles) if dienophile_smiles else None
    priced = {f.name.split("__")[0] for f in results.root.glob(f"levels/{level_key}/pairs/*.json")}   # structures

    def computed(rec: dict, own_dienophile: bool = False) -> tuple[bool, bool]:
        keys = [i["key"] for i in rec.get("isomers", [])]
        if rec.get("status") != "ok" or not keys:
            return False, False
        fast = all(results.structure(k).is_file() for k in keys)
        given = canonical_smiles((rec.get("dienophile") or {}).get("smiles", ""))
        same = own_dienophile or dph is None or given == dph
        slow = fast and same and all(k in priced for k in keys)
        return fast, slow

    state = {r["smiles"]: computed(r) for r in done.get("records", [])}
    refs = [computed(r, own_dienophile=True) for r in done.get("reference_records", [])]
    return ([s for s in library_smiles if not state.get(s, (False, False))[0]],
            [s for s in library_smiles if not state.get(s, (False, False))[1]],
            (bool(refs) and all(f for f, _ in refs), bool(refs) and all(d for _, d in refs)))


def shared_with_reference(library_smiles: list[str], reference: Path | None, dienophile_smiles: str) -> list[str]:
    """The rows of `library_smiles` the reference set computes anyway: the same diene (canonical SMILES)
    with the same dienophile. An unreadable reference file shares nothing (the run says why)."""
    from .library import read_rows
    from .settings import canonical_smiles
    try:
        pairs = {(canonical_smiles(smiles), canonical_smiles(extra.get("dienophile_smiles") or ""))
                 for _, smiles, extra in read_rows(reference, what="reference")}
    except (OSError, TypeError, ValueError):
        return []
    dph = canonical_smiles(dienophile_smiles)
    return [s for s in library_smiles if (canonical_smiles(s), dph) in pairs]


def atoms(smiles: str) -> int:
    """Atoms of a SMILES' largest fragment, hydrogens included (0 where RDKit cannot read it)."""
    from rdkit import Chem, rdBase
    with rdBase.BlockLogs():               # the run quotes RDKit's reason for a bad row, not this line
        mol = Chem.MolFromSmiles(str(smiles))
    if mol is None:
        return 0
    return max(Chem.AddHs(frag).GetNumAtoms() for frag in Chem.GetMolFrags(mol, asMols=True))


def _work(library_smiles: list[str], dienophile_smiles: str, limits=None) -> tuple[float, float, int]:
    """(GFN2-xTB, density-functional) work of these rows under the size model, and how many rows will
    be computed: only rows the library accepts (status ok), each of its E/Z isomers, the part with the
    dienophile times its diene units."""
    from .library import Limits, prepare_record
    dph = atoms(dienophile_smiles)
    gfn2 = dft = 0.0
    rows = 0
    for smiles in library_smiles:
        rec = prepare_record(0, "", str(smiles), {}, limits or Limits())
        if rec.status != "ok":
            continue
        rows += 1
        for iso in rec.isomers:
            n = atoms(iso.smiles)
            diene = (n / DEMO_DIENE_ATOMS) ** SIZE_EXPONENT
            pair = ((n + dph) / DEMO_PAIR_ATOMS) ** SIZE_EXPONENT * max(iso.n_sites, 1) ** SITES_EXPONENT
            gfn2 += GFN2_DIENE_SHARE * diene + (1 - GFN2_DIENE_SHARE) * pair
            dft += DFT_DIENE_SHARE * diene + (1 - DFT_DIENE_SHARE) * pair
    return gfn2, dft, rows


def size_factors(library_smiles: list[str], dienophile_smiles: str, limits=None) -> tuple[float, float]:
    """(GFN2-xTB, density-functional) cost of these rows counted in demo rows (the per-row costs above
    are the demo's, per row the library accepts): their work under the size model over the work of
    the demo's average accepted row with maleic anhydride. A row the library refuses costs nothing."""
    gfn2, dft, _ = _work(library_smiles, dienophile_smiles, limits)
    demo_gfn2, demo_dft, demo_rows = _demo_work()
    return gfn2 / (demo_gfn2 / demo_rows), dft / (demo_dft / demo_rows)


def _demo_work() -> tuple[float, float, int]:
    from .library import read_rows
    from .paths import workflow_root
    if not _DEMO:
        smiles = [s for _, s, _ in read_rows(workflow_root() / "config" / "demo_library.csv")]
        _DEMO.extend(_work(smiles, "O=C1OC(=O)C=C1"))
    return tuple(_DEMO)


_DEMO: list = []


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


def wall_time_s(new_rows: tuple[float, float], cores: int, quick: bool, reference_done: tuple[bool, bool],
                dft_share: float = 1.0) -> float:
    """Expected wall time (s) of a run computing rows worth `new_rows` demo rows (GFN2-xTB stage,
    density-functional level: size_factors) on `cores` cores, dft_share of them at the
    density-functional level, and the reference set at each level where it is not yet computed."""
    gfn2_rows, dft_rows = new_rows
    work = GFN2_ROW_CORE_S * gfn2_rows + (0.0 if reference_done[0] else GFN2_REFERENCE_ONCE_CORE_S)
    if not quick:
        work += DFT_ROW_CORE_S * dft_share * dft_rows + (0.0 if reference_done[1] else DFT_REFERENCE_ONCE_CORE_S)
    return work / max(int(cores), 1) / PARALLEL_EFFICIENCY


def say(seconds: float) -> str:
    """'about 40 min', 'about 3.5 h', 'under a minute'."""
    if seconds < 60:
        return "under a minute"
    if seconds < 5400:
        return f"about {max(1, round(seconds / 60))} min"
    return f"about {seconds / 3600:.1f} h"
