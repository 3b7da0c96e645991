"""Common dienophiles by name: a chemist may write `--dienophile N-phenylmaleimide`
instead of its SMILES. Structures as drawn in any organic chemistry text (common
practice); any other dienophile is given as SMILES."""

from __future__ import annotations

COMMON = {
    "maleic anhydride": "O=C1OC(=O)C=C1",
    "maleimide": "O=C1C=CC(=O)N1",
    "N-methylmaleimide": "CN1C(=O)C=CC1=O",
    "N-phenylmaleimide": "O=C1C=CC(=O)N1c1ccccc1",
    "dimethyl acetylenedicarboxylate": "COC(=O)C#CC(=O)OC",
    "dimethyl fumarate": "COC(=O)/C=C/C(=O)OC",
    "dimethyl maleate": "COC(=O)/C=C\\C(=O)OC",
    "methyl acrylate": "C=CC(=O)OC",
    "acrylonitrile": "C=CC#N",
    "acrolein": "C=CC=O",
    "methyl vinyl ketone": "C=CC(C)=O",
    "p-benzoquinone": "O=C1C=CC(=O)C=C1",
    "tetracyanoethylene": "N#CC(C#N)=C(C#N)C#N",
    "ethylene": "C=C",
}
ALIASES = {"dmad": "dimethyl acetylenedicarboxylate", "tcne": "tetracyanoethylene", "npm": "N-phenylmaleimide",
           "nmm": "N-methylmaleimide", "1,4-benzoquinone": "p-benzoquinone", "benzoquinone": "p-benzoquinone",
           "mvk": "methyl vinyl ketone", "ma": "maleic anhydride"}


def _key(text: str) -> str:
    return " ".join(text.strip().lower().replace("_", " ").split())


_BY_KEY = {_key(name): name for name in COMMON} | {_key(a): name for a, name in ALIASES.items()}


def smiles_of(text: str) -> str:
    """The SMILES of a common dienophile named by `text` (case and spacing free), or `text`
    unchanged (taken as SMILES)."""
    name = _BY_KEY.get(_key(text or ""))
    return COMMON[name] if name else text


def name_of(smiles: str) -> str:
    """The common name of a dienophile SMILES ('' when it is none of the table's)."""
    from .settings import canonical_smiles
    target = canonical_smiles(smiles)
    return next((name for name, s in COMMON.items() if canonical_smiles(s) == target), "")
