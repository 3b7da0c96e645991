import pytest
from rdkit import Chem

from dienes.sites import ACYCLIC, RING_OTHER, RING_S_CIS, find_sites

# (SMILES, expected number of sites, expected kinds, any aromatic) -- classes are common practice
CASES = [
    ("C=CC=C", 1, {ACYCLIC}, False),                       # 1,3-butadiene
    ("C/C=C\\C=C", 1, {ACYCLIC}, False),                   # (Z)-1,3-pentadiene
    ("C1=CCC=C1", 1, {RING_S_CIS}, False),                 # cyclopentadiene
    ("C1=CCCC=C1", 1, {RING_S_CIS}, False),                # 1,3-cyclohexadiene
    ("C=C1CCCCC1=C", 1, {RING_OTHER}, False),              # 1,2-dimethylenecyclohexane
    ("C=C1CCCC=C1", 1, {RING_OTHER}, False),               # 3-methylenecyclohexene (s-trans, decided in 3D)
    ("C1CC/C=C\\C=C/C1", 1, {RING_OTHER}, False),          # 1,3-cyclooctadiene: ring too big to lock
    ("c1ccoc1", 1, {RING_S_CIS}, True),                    # furan
    ("c1cc[nH]c1", 1, {RING_S_CIS}, True),                 # pyrrole
    ("C=C/C=C/C=C", 2, {ACYCLIC}, False),                  # 1,3,5-hexatriene: two sites
    ("C=CC1=CCCCC1", 1, {ACYCLIC}, False),                 # 1-vinylcyclohexene
    ("CO/C=C/C(=C)O[Si](C)(C)C", 1, {ACYCLIC}, False),     # silyloxy diene
    # rings RDKit calls aromatic only through a ring C=O are dienes (common practice): 2-pyrone
    # (C3-C6), methyl coumalate, N-methyl-2-pyridone; tropone across C2-C5 (two equivalent units)
    ("O=c1cccco1", 1, {RING_S_CIS}, True),
    ("COC(=O)c1ccc(=O)oc1", 1, {RING_S_CIS}, True),
    ("Cn1ccccc1=O", 1, {RING_S_CIS}, True),
    ("O=c1cccccc1", 2, {RING_OTHER}, True),
]


@pytest.mark.parametrize("smiles,n,kinds,aromatic", CASES)
def test_site_classes(smiles, n, kinds, aromatic):
    sites = find_sites(Chem.MolFromSmiles(smiles))
    assert len(sites) == n
    assert {s.kind for s in sites} == kinds
    assert any(s.aromatic for s in sites) == aromatic


@pytest.mark.parametrize("smiles", [
    "C=CCC=C",        # 1,4-pentadiene: skipped, not conjugated
    "C=C=CC=C",       # vinylallene: sp centre
    "C=CC#C",         # enyne
    "c1ccccc1",       # benzene: isolated aromatic sextet
    "C=Cc1ccccc1",    # styrene: would break the benzene ring
    "c1ccncc1",       # pyridine
    "Oc1ccccn1",      # 2-hydroxypyridine: the aromatic tautomer of 2-pyridone
    "O=c1ccocc1",     # 4-pyrone: its C=C bonds are not conjugated with each other
    "CCCC",
    "C=O",
])
def test_not_a_diene(smiles):
    assert find_sites(Chem.MolFromSmiles(smiles)) == []


def test_anthracene_has_its_9_10_site():
    mol = Chem.MolFromSmiles("c1ccc2cc3ccccc3cc2c1")
    ch_central = {a.GetIdx() for a in mol.GetAtoms()
                  if a.GetTotalNumHs() == 1 and a.IsInRingSize(6)
                  and all(n.GetDegree() == 3 for n in a.GetNeighbors())}
    termini = {frozenset(s.termini) for s in find_sites(mol)}
    assert frozenset(ch_central) in termini
    assert all(s.kind == RING_S_CIS for s in find_sites(mol))


def test_pyrone_diene_is_the_ring_carbons():
    # 2-pyrone adds a dienophile across C3 and C6 (common practice): the unit is the four ring
    # carbons, C2 (the carbonyl carbon) is not in it
    mol = Chem.MolFromSmiles("O=c1cccco1")
    (site,) = find_sites(mol)
    assert all(mol.GetAtomWithIdx(i).GetSymbol() == "C" and mol.GetAtomWithIdx(i).GetTotalNumHs() == 1
               for i in site.atoms)


def test_sites_independent_of_hydrogens_and_stable():
    mol = Chem.MolFromSmiles("C/C=C/C=C")
    a = find_sites(mol)
    b = find_sites(Chem.AddHs(mol))
    assert [s.atoms for s in a] == [s.atoms for s in b]
    s = a[0]
    assert mol.GetBondBetweenAtoms(s.atoms[0], s.atoms[1]).GetBondType() == Chem.BondType.DOUBLE
    assert mol.GetBondBetweenAtoms(s.atoms[1], s.atoms[2]).GetBondType() == Chem.BondType.SINGLE
