"""Notes on the rows of diene classes with a known competing path or handling issue."""
import pytest

from dienes.chemistry import chemistry_note, class_notes


@pytest.mark.parametrize("smiles, expected", [
    ("Cn1cccc1", ["pyrrole"]),                       # N-methylpyrrole: Michael substitution (common practice)
    ("c1ccoc1", ["furan"]),                          # furan adducts revert (common practice)
    ("c1ccsc1", ["thiophene"]),
    ("C=CC(=C)O[Si](C)(C)C", ["silyloxy diene"]),    # 2-(trimethylsilyloxy)butadiene hydrolyses
    ("CN(C)/C=C/C=C", ["amino diene"]),
    ("C1=CCC=C1", ["cyclopentadiene"]),              # dimerises on standing
    ("c1ccc2cc3ccccc3cc2c1", ["acene"]),
    ("COC(=O)c1ccc(=O)oc1", ["2-pyrone"]),            # methyl coumalate: adducts lose CO2 (common practice)
    ("Cn1ccccc1=O", ["2-pyridone"]),                 # N-methyl-2-pyridone: reluctant diene (common practice)
    ("O=c1cccccc1", ["tropone"]),                    # tropone: [6+4] beside [4+2] (common practice)
    ("O=c1ccc2ccccc2o1", []),                        # coumarin: a dienophile far more often (common practice)
    ("C=CC=C", []),
    ("CC1(C)C=CC=C1", []),                           # 5,5-dimethylcyclopentadiene dimerises far more slowly (from memory)
    ("CC(=O)n1cccc1", []),                           # N-acylpyrroles favour the cycloadduct (common practice)
    ("not a smiles", []),
])
def test_each_class_is_named_only_where_it_applies(smiles, expected):
    assert [name for name, _ in class_notes(smiles)] == expected


def test_the_note_says_what_to_do_at_the_bench():
    assert "Michael" in chemistry_note("Cn1cccc1") and "revert" in chemistry_note("c1ccoc1")
