"""Find and classify the conjugated diene sites of a molecule.

A site is four sp2 carbons C1=C2-C3=C4 in conjugation, found in every Kekule
structure of the molecule (so aromatic systems such as furan or anthracene
9,10 are found). Sites are classified by the C2-C3 bond:

- ``acyclic``: C2-C3 is not in a ring; the diene dihedral is free.
- ``ring_s_cis``: all four atoms lie in one ring of at most 6 atoms
  (cyclopentadiene, 1,3-cyclohexadiene, furan): locked s-cis.
- ``ring_other``: C2-C3 is in a ring but the diene is not inside one small
  ring of at most 6 atoms (1,2-dimethylenecycloalkanes, 3-methylene-
  cyclohexene, 1,3-cyclooctadiene): the 3D structure decides whether the
  ring lets it reach s-cis (then at a computed cost) or locks it s-trans.

Double bonds of an isolated six-membered aromatic ring (benzene, pyridine)
are not taken as diene bonds: breaking such an aromatic sextet is not a
practical Diels-Alder reaction (common practice). A six-membered ring that
is aromatic only through an exocyclic double bond on one of its atoms
(2-pyrone, 2-pyridone: the ring C=O) is not such a sextet: 2-pyrones and
2-pyridones are established dienes (common practice), so their diene is
kept. Fused aromatics, five- and seven-membered aromatic rings (furan,
tropone) are kept; every such site is flagged ``aromatic``.
"""

from __future__ import annotations

from dataclasses import dataclass, asdict

from rdkit import Chem

MAX_KEKULE_STRUCTURES = 64
MAX_LOCKING_RING_SIZE = 6

ACYCLIC, RING_S_CIS, RING_OTHER = "acyclic", "ring_s_cis", "ring_other"


@dataclass(frozen=True)
class Site:
    """A diene unit: atoms (C1, C2, C3, C4) as atom indices, its kind, aromatic flag."""

    atoms: tuple[int, int, int, int]
    kind: str
    aromatic: bool

    @property
    def termini(self) -> tuple[int, int]:
        return self.atoms[0], self.atoms[3]

    @property
    def label(self) -> str:
        return "-".join(str(i + 1) for i in self.atoms)

    def as_dict(self) -> dict:
        return asdict(self) | {"label": self.label}


def _kekule_forms(mol: Chem.Mol) -> list[Chem.Mol]:
    if not any(a.GetIsAromatic() for a in mol.GetAtoms()):
        return [mol]
    supplier = Chem.ResonanceMolSupplier(mol, Chem.KEKULE_ALL)
    forms = []
    for i, form in enumerate(supplier):
        if i >= MAX_KEKULE_STRUCTURES:
            break
        if form is not None:
            forms.append(form)
    if not forms:
        kek = Chem.Mol(mol)
        Chem.Kekulize(kek, clearAromaticFlags=True)
        forms = [kek]
    return forms


def _exocyclic_double_bond(mol: Chem.Mol, ring_atoms: set[int]) -> bool:
    """True when an atom of the ring carries a double bond to an atom outside it (a ring C=O)."""
    return any(b.GetBondType() == Chem.BondType.DOUBLE and b.GetOtherAtomIdx(i) not in ring_atoms
               for i in ring_atoms for b in mol.GetAtomWithIdx(i).GetBonds())


def _isolated_six_ring_bonds(mol: Chem.Mol) -> set[int]:
    """Bond indices of aromatic sextets: aromatic six-membered rings fused to no other ring and
    without an exocyclic double bond (so benzene and pyridine, not 2-pyrone)."""
    ri = mol.GetRingInfo()
    bond_rings = [set(r) for r in ri.BondRings()]
    atom_rings = [set(r) for r in ri.AtomRings()]
    out: set[int] = set()
    for k, ring in enumerate(bond_rings):
        if len(ring) != 6 or not all(mol.GetBondWithIdx(b).GetIsAromatic() for b in ring):
            continue
        fused = any(len(atom_rings[k] & other) >= 2 for j, other in enumerate(atom_rings) if j != k)
        if not fused and not _exocyclic_double_bond(mol, atom_rings[k]):
            out |= ring
    return out


def _is_sp2_carbon(atom: Chem.Atom, form: Chem.Mol) -> bool:
    if atom.GetAtomicNum() != 6:
        return False
    n_double = sum(1 for b in form.GetAtomWithIdx(atom.GetIdx()).GetBonds()
                   if b.GetBondType() == Chem.BondType.DOUBLE)
    n_triple = sum(1 for b in form.GetAtomWithIdx(atom.GetIdx()).GetBonds()
                   if b.GetBondType() == Chem.BondType.TRIPLE)
    return n_double == 1 and n_triple == 0


def _classify(mol: Chem.Mol, atoms: tuple[int, int, int, int]) -> str:
    a1, a2, a3, a4 = atoms
    b12 = mol.GetBondBetweenAtoms(a1, a2).GetIdx()
    b23 = mol.GetBondBetweenAtoms(a2, a3).GetIdx()
    b34 = mol.GetBondBetweenAtoms(a3, a4).GetIdx()
    ri = mol.GetRingInfo()
    if not ri.NumBondRings(b23):
        return ACYCLIC
    for ring in ri.BondRings():
        if len(ring) <= MAX_LOCKING_RING_SIZE and {b12, b23, b34} <= set(ring):
            return RING_S_CIS
    return RING_OTHER


def find_sites(mol: Chem.Mol) -> list[Site]:
    """All diene sites of `mol` (with or without explicit hydrogens), in a stable order."""
    excluded_bonds = _isolated_six_ring_bonds(mol)
    found: dict[tuple[int, int], Site] = {}
    for form in _kekule_forms(mol):
        for bond in form.GetBonds():
            if bond.GetBondType() != Chem.BondType.SINGLE:
                continue
            a2, a3 = bond.GetBeginAtom(), bond.GetEndAtom()
            if not (_is_sp2_carbon(a2, form) and _is_sp2_carbon(a3, form)):
                continue
            ends = []
            for centre, other in ((a2, a3), (a3, a2)):
                dbl = [b for b in centre.GetBonds()
                       if b.GetBondType() == Chem.BondType.DOUBLE]
                term = dbl[0].GetOtherAtom(centre)
                if term.GetIdx() == other.GetIdx() or not _is_sp2_carbon(term, form):
                    break
                if dbl[0].GetIdx() in excluded_bonds:
                    break
                ends.append(term.GetIdx())
            if len(ends) != 2 or ends[0] == ends[1]:
                continue
            atoms = (ends[0], a2.GetIdx(), a3.GetIdx(), ends[1])
            if atoms[3] < atoms[0]:
                atoms = atoms[::-1]
            key = (atoms[0], atoms[3])
            if key in found:
                continue
            aromatic = any(mol.GetAtomWithIdx(i).GetIsAromatic() for i in atoms)
            kind = _classify(mol, atoms)
            if aromatic and kind == RING_OTHER and all(
                    mol.GetAtomWithIdx(i).GetIsAromatic() for i in atoms) and not any(
                    set(atoms) <= set(ring) for ring in mol.GetRingInfo().AtomRings()):
                continue  # spans two fused aromatic rings: not a diene unit (one ring of 7, tropone's, is)
            found[key] = Site(atoms, kind, aromatic)
    return [found[k] for k in sorted(found)]
