"""Read a diene library and standardise it: one record per input row, each with a status.

Formats: CSV with columns ``id`` and ``smiles`` (or the usual other headers
for them, ``SMILES_COLUMNS`` and ``ID_COLUMNS``; other columns are carried
through), ``.smi`` (SMILES then an optional id per line) and ``.sdf``.
A file that cannot be read at all raises :class:`LibraryError` naming the
file and the problem; every readable row becomes a :class:`Record`, whatever
is wrong with it.
"""

from __future__ import annotations

import csv
import io
import itertools
import logging
import re
from dataclasses import dataclass, field
from pathlib import Path

from rdkit import Chem, rdBase
from rdkit.Chem import rdMolDescriptors
from rdkit.Chem.EnumerateStereoisomers import EnumerateStereoisomers, StereoEnumerationOptions
from rdkit.Chem.MolStandardize import rdMolStandardize

from .backends import SUPPORTED_ELEMENTS
from .sites import find_sites

# RDKit's messages go to one quiet Python logger so that a row's problem can be quoted
rdBase.LogToPythonLogger()
_RDKIT_LOG = logging.getLogger("rdkit")
_RDKIT_LOG.propagate = False


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__()
        self.lines: list[str] = []

    def emit(self, record):
        self.lines.append(record.getMessage())


_COLLECTOR = _Collect()
_RDKIT_LOG.handlers = [_COLLECTOR]

EXTENSIONS = {".csv": "csv", ".tsv": "csv", ".smi": "smi", ".smiles": "smi", ".sdf": "sdf", ".sd": "sdf"}
MAX_DIENOPHILE_HEAVY_ATOMS = 30

MAX_DIENE_STEREO_ISOMERS = 8
NOATOM = 4294967295
# lone metal ions that are counter-ions of a salt, not part of the diene
COUNTER_ION_METALS = frozenset({3, 11, 12, 19, 20, 37, 38, 55, 56})
NON_METALS = frozenset({1, 2, 5, 6, 7, 8, 9, 10, 14, 15, 16, 17, 18, 33, 34, 35, 36, 52, 53, 54, 85, 86})


class LibraryError(ValueError):
    """The library file as a whole cannot be read."""


@dataclass
class Isomer:
    """One fully specified structure to compute: canonical isomeric SMILES and InChIKey."""

    smiles: str
    inchikey: str
    n_sites: int


@dataclass
class Record:
    """One input row. status is 'ok' (to compute) or a reason code; message says why."""

    row: int
    id: str
    smiles: str
    extra: dict = field(default_factory=dict)
    status: str = "ok"
    message: str = ""
    std_smiles: str = ""
    isomers: list[Isomer] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def fail(self, status: str, message: str) -> "Record":
        self.status, self.message = status, message
        return self


@dataclass
class Limits:
    """Caps that keep one diene from eating the run."""

    max_heavy_atoms: int = 60
    max_rotatable_bonds: int = 12


# ---------------------------------------------------------------- reading

def _decode(path: Path) -> str:
    data = path.read_bytes()
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise LibraryError(f"{path}: not UTF-8 text (undecodable byte at offset {exc.start}); "
                           "save the file as UTF-8 and run again") from None


# headers a CSV's SMILES and id columns may carry, compared without case, spaces, '_', '-', '.' or '#'
# (catalogues name them many ways; common practice); the first found wins, any others are carried through
SMILES_COLUMNS = ("smiles", "canonical_smiles", "isomeric_smiles", "smiles_string")
ID_COLUMNS = ("id", "compound_id", "mol_id", "molecule_id", "catalog_id", "catalogue_id", "catalog_number",
              "catalog_no", "cat_no", "name", "compound", "compound_name", "title", "identifier")


def _key(header: str) -> str:
    return re.sub(r"[\s_.#-]+", "", header.lower())


def _column(names: list[str], accepted: tuple[str, ...]) -> int | None:
    """Index of the first accepted header present in `names` (None: none is)."""
    keys = [_key(n) for n in names]
    for want in accepted:
        if _key(want) in keys:
            return keys.index(_key(want))
    return None


def _read_csv(path: Path) -> list[tuple[str, str, dict]]:
    text = _decode(path)
    try:
        dialect = csv.Sniffer().sniff(text[:4096], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader(io.StringIO(text), dialect)
    try:
        header = next(reader)
    except StopIteration:
        raise LibraryError(f"{path}: the file is empty") from None
    names = [h.strip() for h in header]
    i_smi, i_id = _column(names, SMILES_COLUMNS), _column(names, ID_COLUMNS)
    if i_smi is None or i_id is None:
        raise LibraryError(f"{path}: needs a column of SMILES (headed {', '.join(SMILES_COLUMNS)}) and one of ids "
                           f"(headed {', '.join(ID_COLUMNS[:6])}, name, ...); found {names} (a list of SMILES "
                           "without ids can be a .smi file)")
    rows = []
    for cells in reader:
        if not any(c.strip() for c in cells):
            continue  # blank line, not a row
        cells = cells + [""] * (len(names) - len(cells))
        extra = {n: cells[k] for k, n in enumerate(names) if k not in (i_id, i_smi)}
        rows.append((cells[i_id].strip(), cells[i_smi].strip(), extra))
    return rows


def _read_smi(path: Path) -> list[tuple[str, str, dict]]:
    rows = []
    for line in _decode(path).splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        parts = line.split(None, 1)
        rows.append((parts[1].strip() if len(parts) > 1 else "", parts[0], {}))
    return rows


def _read_sdf(path: Path) -> list[tuple[str, str, dict]]:
    rows = []
    with open(path, "rb") as fh:
        for mol in Chem.ForwardSDMolSupplier(fh, sanitize=True, removeHs=False):
            if mol is None:
                rows.append(("", "", {"_sdf_error": "unreadable SDF record"}))
                continue
            props = mol.GetPropsAsDict()
            keys = list(props)
            i_id = _column(keys, ID_COLUMNS)
            rid = str((props.pop(keys[i_id]) if i_id is not None else "")
                      or (mol.GetProp("_Name") if mol.HasProp("_Name") else ""))
            rows.append((rid.strip(), Chem.MolToSmiles(mol), {k: str(v) for k, v in props.items()}))
    return rows


def read_rows(path, what: str = "library") -> list[tuple[str, str, dict]]:
    """(id, smiles, extra columns) per row of a library file, chosen by its extension."""
    path = Path(path)
    if not path.is_file():
        raise LibraryError(f"{what} {path}: no such file")
    kind = EXTENSIONS.get(path.suffix.lower())
    if kind is None:
        raise LibraryError(f"{what} {path}: unknown file type {path.suffix or '(no extension)'!r}; "
                           "name it .csv (columns id, smiles), .smi (SMILES then id) or .sdf")
    try:
        return {"csv": _read_csv, "smi": _read_smi, "sdf": _read_sdf}[kind](path)
    except LibraryError as exc:
        raise LibraryError(f"{what} {exc}") from None


def parse_smiles(smiles: str) -> tuple[Chem.Mol | None, str]:
    """RDKit molecule and '' , or None and RDKit's own reason."""
    _COLLECTOR.lines.clear()
    mol = Chem.MolFromSmiles(smiles)
    if mol is not None:
        return mol, ""
    lines = [re.sub(r"^\[[0-9:]+\]\s*", "", x).strip() for x in _COLLECTOR.lines]
    lines = [x for x in lines if x and not set(x) <= set("~^ ")]
    reason = lines[0] if lines else "RDKit cannot parse this SMILES"
    return None, f"RDKit: {reason}"


def check_dienophile(smiles: str) -> str:
    """'' when `smiles` can serve as the dienophile, otherwise the problem in words:
    it must parse, be one closed-shell neutral molecule of supported elements, at most
    MAX_DIENOPHILE_HEAVY_ATOMS heavy atoms, with a C=C or C#C bond."""
    if not smiles or any(c.isspace() for c in smiles.strip()):
        return "give one SMILES without spaces"
    mol, why = parse_smiles(smiles.strip())
    if mol is None:
        return f"not a valid SMILES ({why})"
    if len(Chem.GetMolFrags(mol)) > 1:
        return "more than one molecule"
    bad = sorted({a.GetSymbol() for a in mol.GetAtoms() if a.GetAtomicNum() not in SUPPORTED_ELEMENTS})
    if bad:
        return f"elements outside the GFN2-xTB setup: {', '.join(bad)}"
    if any(a.GetNumRadicalElectrons() for a in mol.GetAtoms()):
        return "open-shell (radical): only closed-shell dienophiles are treated"
    if Chem.GetFormalCharge(mol):
        return f"net charge {Chem.GetFormalCharge(mol):+d}: only neutral dienophiles are treated"
    if mol.GetNumHeavyAtoms() > MAX_DIENOPHILE_HEAVY_ATOMS:
        return f"{mol.GetNumHeavyAtoms()} heavy atoms; dienophiles of up to {MAX_DIENOPHILE_HEAVY_ATOMS} are treated"
    kek = Chem.Mol(mol)
    Chem.Kekulize(kek, clearAromaticFlags=True)
    has_cc = any(b.GetBondType() in (Chem.BondType.DOUBLE, Chem.BondType.TRIPLE)
                 and b.GetBeginAtom().GetAtomicNum() == 6 and b.GetEndAtom().GetAtomicNum() == 6
                 and not mol.GetAtomWithIdx(b.GetBeginAtomIdx()).GetIsAromatic()
                 for b in kek.GetBonds())
    if not has_cc:
        return ("no C=C or C#C bond outside an aromatic ring: hetero-dienophiles (C=O, N=N, N=O) "
                "are not treated")
    return ""


# ---------------------------------------------------------- standardising

def standardise(mol: Chem.Mol) -> tuple[Chem.Mol, list[str]]:
    """Largest organic fragment, neutralised where possible; stereo kept."""
    notes = []
    n_frag = len(Chem.GetMolFrags(mol))
    mol = rdMolStandardize.Cleanup(mol)
    if n_frag > 1:
        mol = rdMolStandardize.LargestFragmentChooser(preferOrganic=True).choose(mol)
        notes.append(f"kept the largest organic fragment of {n_frag}")
    charged_before = any(a.GetFormalCharge() for a in mol.GetAtoms())
    mol = rdMolStandardize.Uncharger().uncharge(mol)
    if charged_before and not any(a.GetFormalCharge() for a in mol.GetAtoms()):
        notes.append("neutralised")
    if any(a.GetIsotope() for a in mol.GetAtoms()):
        notes.append("isotope labels kept in the key, ignored by GFN2-xTB")
    # a fresh parse gives clean stereo perception for what follows
    return Chem.MolFromSmiles(Chem.MolToSmiles(mol)), notes


def _diene_bonds(mol: Chem.Mol, sites=None) -> set[int]:
    bonds = set()
    for site in find_sites(mol) if sites is None else sites:
        a1, a2, a3, a4 = site.atoms
        bonds.add(mol.GetBondBetweenAtoms(a1, a2).GetIdx())
        bonds.add(mol.GetBondBetweenAtoms(a3, a4).GetIdx())
    return bonds


def enumerate_diene_stereo(mol: Chem.Mol, sites=None) -> tuple[list[Chem.Mol], list[str]]:
    """Fully specified isomers of `mol`.

    Unspecified E/Z on a diene double bond is enumerated (each isomer is
    computed and reported). Other unspecified stereo (stereocentres, other
    double bonds) is fixed to the first isomer RDKit enumerates, and said so.
    """
    notes = []
    diene_bonds = _diene_bonds(mol, sites)
    open_bonds = []
    other_open = 0
    for info in Chem.FindPotentialStereo(mol):
        if info.specified != Chem.StereoSpecified.Unspecified:
            continue
        if info.type == Chem.StereoType.Bond_Double and info.centeredOn in diene_bonds:
            ca = list(info.controllingAtoms)
            left = ca[0] if ca[0] != NOATOM else ca[1]
            right = ca[2] if ca[2] != NOATOM else ca[3]
            open_bonds.append((info.centeredOn, left, right))
        else:
            other_open += 1
    isomers = []
    for choice in itertools.product((Chem.BondStereo.STEREOTRANS, Chem.BondStereo.STEREOCIS),
                                    repeat=len(open_bonds)):
        iso = Chem.Mol(mol)
        for (b, left, right), stereo in zip(open_bonds, choice):
            bond = iso.GetBondWithIdx(b)
            bond.SetStereoAtoms(left, right)
            bond.SetStereo(stereo)
        isomers.append(iso)
        if len(isomers) > MAX_DIENE_STEREO_ISOMERS:
            break
    if open_bonds:
        n_unique = len({Chem.MolToSmiles(m) for m in isomers[:MAX_DIENE_STEREO_ISOMERS]})
        notes.append(f"E/Z unspecified on {len(open_bonds)} diene double bond(s): "
                     f"{n_unique} isomers computed, the most reactive reported")
    if other_open:
        opts = StereoEnumerationOptions(onlyUnassigned=True, unique=True, maxIsomers=1)
        isomers = [next(iter(EnumerateStereoisomers(iso, options=opts)), iso) for iso in isomers]
        notes.append(f"{other_open} other unspecified stereo element(s) fixed arbitrarily")
    return isomers, notes


def _metal_problem(mol: Chem.Mol) -> str:
    """A reason when the structure holds a metal other than a lone counter-ion."""
    for atom in mol.GetAtoms():
        z = atom.GetAtomicNum()
        if z in NON_METALS:
            continue
        if z in COUNTER_ION_METALS and atom.GetDegree() == 0:
            continue
        return f"contains {atom.GetSymbol()}: metal complexes, organometallics and metalloid compounds are not treated"
    return ""


def prepare_record(row: int, rid: str, smiles: str, extra: dict, limits: Limits) -> Record:
    """Parse, standardise and check one row; find its isomers and diene sites.
    Never raises: anything unexpected becomes the status 'processing_error'."""
    try:
        return _prepare(row, rid, smiles, extra, limits)
    except Exception as exc:  # noqa: BLE001 - one bad row must not stop the others
        rec = Record(row=row, id=rid, smiles=smiles, extra=dict(extra))
        return rec.fail("processing_error", f"RDKit could not process this structure "
                                                f"({type(exc).__name__}: {str(exc)[:200]})")


def _prepare(row: int, rid: str, smiles: str, extra: dict, limits: Limits) -> Record:
    rec = Record(row=row, id=rid, smiles=smiles, extra=dict(extra))
    if "_sdf_error" in rec.extra:
        return rec.fail("unreadable_sdf_record", rec.extra.pop("_sdf_error"))
    if not smiles.strip():
        return rec.fail("empty_smiles", "the smiles cell is empty")
    if any(c.isspace() for c in smiles.strip()):
        return rec.fail("invalid_smiles", "the smiles cell holds more than one word")
    mol, why = parse_smiles(smiles.strip())
    if mol is None:
        return rec.fail("invalid_smiles", why)
    if not rid:
        rec.notes.append("id cell is empty")
    metal = _metal_problem(mol)
    if metal:
        return rec.fail("metal_complex", metal)
    mol, notes = standardise(mol)
    if mol is None:
        return rec.fail("processing_error", "the structure could not be standardised "
                                                "(fragment or charge clean-up failed)")
    rec.notes += notes
    rec.std_smiles = Chem.MolToSmiles(mol)
    bad = sorted({a.GetSymbol() for a in mol.GetAtoms()
                  if a.GetAtomicNum() not in SUPPORTED_ELEMENTS})
    if bad:
        return rec.fail("unsupported_element", f"elements outside the GFN2-xTB setup: {', '.join(bad)}")
    if any(a.GetNumRadicalElectrons() for a in mol.GetAtoms()):
        return rec.fail("radical", "open-shell structure (radical); only closed-shell dienes are treated")
    charge = Chem.GetFormalCharge(mol)
    if charge:
        return rec.fail("charged", f"net charge {charge:+d} remains after neutralisation")
    sites = find_sites(mol)
    if not sites:
        return rec.fail("no_diene", "no conjugated C=C-C=C unit")
    heavy = mol.GetNumHeavyAtoms()
    if heavy > limits.max_heavy_atoms:
        return rec.fail("too_large", f"{heavy} heavy atoms; the cap is {limits.max_heavy_atoms} "
                                     "(config max_heavy_atoms)")
    n_rot = rdMolDescriptors.CalcNumRotatableBonds(mol)
    if n_rot > limits.max_rotatable_bonds:
        return rec.fail("too_flexible", f"{n_rot} rotatable bonds; the cap is "
                                        f"{limits.max_rotatable_bonds} (config max_rotatable_bonds)")
    isomers, notes = enumerate_diene_stereo(mol, sites)
    rec.notes += notes
    seen = set()
    for iso in isomers[:MAX_DIENE_STEREO_ISOMERS]:
        iso_smiles = Chem.MolToSmiles(iso)
        if iso_smiles not in seen:
            seen.add(iso_smiles)
            rec.isomers.append(Isomer(iso_smiles, Chem.MolToInchiKey(iso), len(sites)))  # stereo leaves the sites as they are
    return rec


def read_library(path, limits: Limits | None = None, what: str = "library") -> list[Record]:
    """Every row of the library as a Record, in input order (row numbers 1-based).
    `what` names the file in error messages ('library' or 'reference')."""
    limits = limits or Limits()
    rows = read_rows(path, what)
    if not rows:
        raise LibraryError(f"{what} {path}: the file holds no rows")
    records = [prepare_record(i, rid, smi, extra, limits)
               for i, (rid, smi, extra) in enumerate(rows, start=1)]
    first_id: dict[str, int] = {}
    first_key: dict[str, int] = {}
    for rec in records:
        if rec.id:
            if rec.id in first_id:
                rec.notes.append(f"id also used on row {first_id[rec.id]}")
            first_id.setdefault(rec.id, rec.row)
        if rec.isomers:
            k = rec.isomers[0].inchikey
            if k in first_key:
                rec.notes.append(f"same structure as row {first_key[k]}")
            first_key.setdefault(k, rec.row)
    for rec in records:
        if rec.status == "ok":
            rec.message = "; ".join(rec.notes)
        elif rec.notes:
            rec.message = "; ".join([rec.message] + rec.notes)
    return records
