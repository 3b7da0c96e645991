import pytest
from rdkit import Chem

from dienes.library import LibraryError, Limits, prepare_record, read_library


def _write(tmp_path, name, text, encoding="utf-8"):
    p = tmp_path / name
    p.write_bytes(text.encode(encoding))
    return p


def test_csv_rows_in_order_with_status(tmp_path):
    p = _write(tmp_path, "lib.csv", "id,smiles,vendor\n"
               "a1,C=CC=C,x\n"
               "a2,not a smiles,y\n"
               "a3,,z\n"
               "a4,CCCC,w\n")
    recs = read_library(p)
    assert [r.id for r in recs] == ["a1", "a2", "a3", "a4"]
    assert [r.status for r in recs] == ["ok", "invalid_smiles", "empty_smiles", "no_diene"]
    assert recs[0].extra == {"vendor": "x"}
    assert all(r.message for r in recs[1:])


def test_missing_columns_is_one_clear_error(tmp_path):
    p = _write(tmp_path, "lib.csv", "name,structure\nx,C=CC=C\n")
    with pytest.raises(LibraryError, match="lib.csv: needs a column of SMILES.*found \\['name', 'structure'\\]"):
        read_library(p)


def test_wrong_encoding_is_one_clear_error(tmp_path):
    p = _write(tmp_path, "lib.csv", "id,smiles\nb\u00e9ta,C=CC=C\n", encoding="latin-1")
    with pytest.raises(LibraryError, match="not UTF-8"):
        read_library(p)


def test_smi_and_sdf(tmp_path):
    p = _write(tmp_path, "lib.smi", "# comment\nC=CC=C bd\nC1=CCC=C1 cpd\n")
    assert [(r.id, r.status) for r in read_library(p)] == [("bd", "ok"), ("cpd", "ok")]
    sdf = tmp_path / "lib.sdf"
    w = Chem.SDWriter(str(sdf))
    m = Chem.MolFromSmiles("C=CC(C)=C")
    m.SetProp("_Name", "isoprene")
    w.write(m)
    m = Chem.MolFromSmiles("C1=CCC=C1")
    m.SetProp("_Name", "cyclopentadiene")
    m.SetProp("Catalog ID", "C-7")          # a supplier's id property wins over the record name
    m.SetProp("Purity", "97%")
    w.write(m)
    w.close()
    recs = read_library(sdf)
    assert recs[0].id == "isoprene" and recs[0].status == "ok"
    assert recs[1].id == "C-7" and recs[1].status == "ok" and recs[1].extra == {"Purity": "97%"}


def test_unspecified_diene_stereo_is_enumerated():
    rec = prepare_record(1, "pip", "CC=CC=C", {}, Limits())
    assert sorted(i.smiles for i in rec.isomers) == sorted(["C=C/C=C/C", "C=C/C=C\\C"])
    assert "E/Z unspecified" in " ".join(rec.notes)
    # (E,Z)- and (Z,E)-2,4-hexadiene are one molecule: three isomers, not four
    assert len(prepare_record(1, "hx", "CC=CC=CC", {}, Limits()).isomers) == 3


def test_given_stereo_is_kept():
    rec = prepare_record(1, "z", "C/C=C\\C=C", {}, Limits())
    assert [i.smiles for i in rec.isomers] == ["C=C/C=C\\C"]


@pytest.mark.parametrize("smiles,status", [
    ("[Na+].C/C=C/C=C/C(=O)[O-]", "ok"),       # salt: largest organic fragment, neutralised
    ("C=CC=C[Fe]", "metal_complex"),
    ("C=CC=C[As](C)C", "unsupported_element"),
    ("C=CC=C[CH2]", "radical"),
    ("C=CC=CC[N+](C)(C)C", "charged"),
    ("C=CC=C" + "C" * 70, "too_large"),
])
def test_statuses(smiles, status):
    rec = prepare_record(1, "x", smiles, {}, Limits())
    assert rec.status == status
    if status != "ok":
        assert rec.message


def test_duplicates_are_noted_not_dropped(tmp_path):
    p = _write(tmp_path, "lib.csv", "id,smiles\nd1,C=CC=C\nd1,C=CC(C)=C\nd3,C(=C)C=C\n")
    recs = read_library(p)
    assert len(recs) == 3
    assert "id also used on row 1" in recs[1].message
    assert "same structure as row 1" in recs[2].message


def test_header_only_library_is_one_clear_error(tmp_path):
    p = _write(tmp_path, "lib.csv", "id,smiles\n")
    with pytest.raises(LibraryError, match="lib.csv: the file holds no rows"):
        read_library(p)
