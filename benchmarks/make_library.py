"""Write a large synthetic diene library (no computation) for throughput checks.

Substituent patterns on acyclic 1,3-butadienes (positions 1-4, E/Z given),
cyclopentadienes, 1,3-cyclohexadienes and furans; duplicates removed by
canonical SMILES; deterministic. Ids are invented (SYN-00001, ...).

    python benchmarks/make_library.py 10000 big_library.csv
    python benchmarks/make_library.py 120 spread.csv --spread 7 --max-groups 2

--spread SEED draws the dienes at random (seeded) from every pattern instead of listing the
patterns in order, so that a small library spans the ring kinds and substituents; --max-groups
keeps at most that many substituents per diene (small molecules: a cheap benchmark).
"""

from __future__ import annotations

import argparse
import csv
import itertools

from rdkit import Chem, RDLogger

RDLogger.DisableLog("rdApp.*")

GROUPS = ["", "C", "CC", "OC", "OC(C)=O", "c1ccccc1", "Cl", "C(=O)OC", "O[Si](C)(C)C", "CO", "C(C)C",
          "C(C)(C)C", "F", "C#N", "N(C)C", "SC", "c1ccc(OC)cc1", "C1CC1", "CCC=C(C)C", "c1ccco1"]


def _sub(g: str) -> str:
    return f"({g})" if g else ""


def acyclic():
    """1-R1, 2-R2, 3-R3, 4-R4 butadienes, both geometries at C1 when R1 is given. Every group is
    written as a branch, so that its first atom is the one bonded to the diene."""
    for r1, r2, r3, r4 in itertools.product(GROUPS, repeat=4):
        n = sum(1 for g in (r1, r2, r3, r4) if g)
        if not r1:
            yield f"C=C{_sub(r2)}C{_sub(r3)}=C{_sub(r4)}", n
            continue
        for ez in ("/", "\\"):
            yield f"C({ez}{r1})=C{_sub(r2)}/C{_sub(r3)}=C{_sub(r4)}", n


def cyclic():
    """1,4-substituted cyclopentadienes, 1,3-cyclohexadienes and 2,5-substituted furans (ring
    label 9, so that the groups' own ring labels do not clash with it)."""
    for a, b in itertools.product(GROUPS, repeat=2):
        n = sum(1 for g in (a, b) if g)
        yield f"C9{_sub(a)}=CC=C{_sub(b)}C9", n
        yield f"C9{_sub(a)}=CC=C{_sub(b)}CC9", n
        yield f"c9{_sub(a)}ccc{_sub(b)}o9", n


def generate(n: int) -> list[tuple[str, str]]:
    seen, out = set(), []
    for smi, _ in itertools.chain(cyclic(), acyclic()):
        mol = Chem.MolFromSmiles(smi)
        if mol is None:
            continue
        can = Chem.MolToSmiles(mol)
        if can in seen:
            continue
        seen.add(can)
        out.append((f"SYN-{len(out) + 1:05d}", can))
        if len(out) >= n:
            break
    return out


def spread(n: int, seed: int, max_groups: int = 4) -> list[tuple[str, str]]:
    """n distinct dienes drawn at random (seeded) from every pattern, at most max_groups
    substituents each; ids as in generate()."""
    import random
    pool, seen = [], set()
    for smi, groups in itertools.chain(cyclic(), acyclic()):
        if groups > max_groups:
            continue
        mol = Chem.MolFromSmiles(smi)
        if mol is None:
            continue
        can = Chem.MolToSmiles(mol)
        if can not in seen:
            seen.add(can)
            pool.append(can)
    picked = random.Random(seed).sample(pool, min(n, len(pool)))
    return [(f"SYN-{i + 1:05d}", smi) for i, smi in enumerate(picked)]


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("n", type=int, help="number of dienes")
    ap.add_argument("out", help="CSV file to write (id,smiles)")
    ap.add_argument("--spread", type=int, metavar="SEED", help="draw at random (seeded) from every pattern")
    ap.add_argument("--max-groups", type=int, default=4, help="at most this many substituents (with --spread)")
    args = ap.parse_args()
    rows = spread(args.n, args.spread, args.max_groups) if args.spread is not None else generate(args.n)
    with open(args.out, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        w.writerows(rows)
    print(f"{len(rows)} dienes written to {args.out}")


if __name__ == "__main__":
    main()
