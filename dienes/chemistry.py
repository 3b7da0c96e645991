"""What the bench knows about a diene class beyond its rate: competing paths, reversibility and
handling, as notes on the rows concerned. Each note is matched by a substructure (SMARTS) on
the diene and says where it comes from; all are common practice of the trade."""

from __future__ import annotations

from functools import lru_cache

from rdkit import Chem

# (name, SMARTS on the diene, note shown on the row)
CLASS_NOTES = (
    ("pyrrole", "[nX3;r5;!$(n-C=O);!$(n-S(=O)=O)]1cccc1",
     "pyrroles often react with electron-poor alkenes (maleic anhydride, maleimides) by Michael-type "
     "substitution at C2 instead of cycloaddition; an N-acyl or N-sulfonyl group favours the "
     "cycloadduct (common practice)"),
    ("furan", "o1cccc1",
     "furan cycloadducts revert easily (retro-Diels-Alder near room temperature for some); the "
     "product mixture can shift from endo to exo with time (common practice)"),
    ("thiophene", "s1cccc1",
     "thiophenes rarely give Diels-Alder adducts except under high pressure or with very reactive "
     "dienophiles (common practice)"),
    ("silyloxy diene", "[CX3]=[CX3]-O[Si]",
     "silyl enol ethers hydrolyse with moisture or acid: dry solvent, fresh or freshly distilled "
     "diene (common practice)"),
    ("amino diene", "[CX3]=[CX3]-[NX3;!$(N-C=O);!$(N-S(=O)=O)]",
     "amino dienes are moisture- and acid-sensitive (enamine hydrolysis) and may add stepwise to "
     "strongly electron-poor dienophiles (common practice)"),
    ("alkoxy diene", "[CX3]=[CX3]-[OX2][CX4]",
     "enol ethers are acid-sensitive: avoid acidic catalysts and wet solvents unless wanted "
     "(common practice)"),
    ("cyclopentadiene", "[CX4;H1,H2;R1]1[CX3]=[CX3][CX3]=[CX3]1",
     "cyclopentadienes dimerise on standing at room temperature: crack or distil freshly and use "
     "at once (common practice)"),
    ("2-pyrone", "O=c1[c;R1][c;R1][c;R1][c;R1]o1",
     "2-pyrones are electron-poor dienes that need electron-rich or strained dienophiles or heat; "
     "their bicyclic lactone adducts lose CO2 on warming (with an alkyne the product is a benzene) "
     "(common practice)"),
    ("2-pyridone", "O=c1[c;R1][c;R1][c;R1][c;R1][nX3]1",
     "2-pyridones are reluctant dienes (their ring is partly aromatic): expect heat or high pressure "
     "with most dienophiles (common practice)"),
    ("tropone", "O=c1cccccc1",
     "tropones give [6+4] as well as [4+2] cycloadducts (the [6+4] path dominates with "
     "cyclopentadiene): expect more than one product (common practice)"),
    ("acene", "c1ccc2cc3ccccc3cc2c1",
     "anthracene adducts can revert at high temperature (retro-Diels-Alder above about 200 C for "
     "maleic anhydride adducts; common practice)"),
)


@lru_cache(maxsize=None)
def _patterns():
    return [(name, Chem.MolFromSmarts(smarts), note) for name, smarts, note in CLASS_NOTES]


def class_notes(smiles: str) -> list[tuple[str, str]]:
    """(class name, note) of every class the diene belongs to; [] for unreadable SMILES."""
    mol = Chem.MolFromSmiles(smiles) if isinstance(smiles, str) and smiles else None
    if mol is None:
        return []
    return [(name, note) for name, patt, note in _patterns() if mol.HasSubstructMatch(patt)]


def chemistry_note(smiles: str) -> str:
    """The notes of class_notes joined for one table cell."""
    return "; ".join(note for _, note in class_notes(smiles))
