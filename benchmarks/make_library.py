"""Write a large synthetic diene library (no computation) for throughput checks.

Substituent patterns on acyclic 1,3-butadienes (positions 1-4, E/Z given),
cyclopentadienes, 1,3-cyclohexadienes and furans; duplicates removed by
canonical SMILES; deterministic. Ids are invented (SYN-00001, ...).

    python benchmarks/make_library.py 10000 big_library.csv
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
    """1-R1, 2-R2, 3-R3, 4-R4 butadienes, both geometries at C1 when R1 is given."""
    for r1, r2, r3, r4 in itertools.product(GROUPS, repeat=4):
        for ez in ("/", "\\"):
            if not r1 and ez == "\\":
                continue
            head = f"{r1}/C=C{_sub(r2)}" if r1 else f"C=C{_sub(r2)}"
            if r1 and ez == "\\":
                head = f"{r1}\\C=C{_sub(r2)}"
            yield f"{head}/C{_sub(r3)}=C{_sub(r4)}" if r1 else f"{head}C{_sub(r3)}=C{_sub(r4)}"


def cyclic():
    for a, b in itertools.product(GROUPS, repeat=2):
        yield f"C1{_sub(a)}=CC=C{_sub(b)}C1"           # 1,4-substituted cyclopentadienes
        yield f"C1{_sub(a)}=CC=C{_sub(b)}CC1"          # 1,3-cyclohexadienes
        yield f"c1{_sub(a)}ccc{_sub(b)}o1"             # furans


def generate(n: int) -> list[tuple[str, str]]:
    seen, out = set(), []
    for smi in itertools.chain(cyclic(), acyclic()):
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


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("n", type=int, help="number of dienes")
    ap.add_argument("out", help="CSV file to write (id,smiles)")
    args = ap.parse_args()
    rows = generate(args.n)
    with open(args.out, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        w.writerows(rows)
    print(f"{len(rows)} dienes written to {args.out}")


if __name__ == "__main__":
    main()
