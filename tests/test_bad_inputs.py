"""Libraries from vendors, colleagues and old spreadsheets: every row gets a status."""
import csv
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from rdkit import Chem

from dienes.library import LibraryError, Limits, prepare_record, read_library
from dienes.sites import find_sites

from .conftest import REPO
from .test_workflow import _ranking, _setup, _snakemake

DATA = Path(__file__).parent / "data"
STATUSES = {"ok", "invalid_smiles", "empty_smiles", "unreadable_sdf_record", "no_diene",
            "unsupported_element", "metal_complex", "radical", "charged", "too_large",
            "too_flexible", "processing_error"}


def corpus():
    with open(DATA / "bad_inputs.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))[1:]
    return [(r + ["", "", "", ""])[:4] for r in rows]


def test_corpus_is_broad():
    assert len({r[2] for r in corpus()}) >= 25


def test_every_row_gets_its_status_at_reading():
    records = read_library(DATA / "bad_inputs.csv")
    rows = corpus()
    assert len(records) == len(rows)
    for rec, (rid, smiles, trouble, expected) in zip(records, rows):
        # ring locking is decided in 3D: at reading, such a row is still to be computed
        want = "ok" if expected in ("locked_s_trans", "") else expected
        if trouble == "" and rid == "BAD-35":
            want = "empty_smiles"      # a short row: the smiles cell is missing altogether
        assert rec.status == want, (rid, trouble, rec.message)
        assert rec.id == rid
        if rec.status != "ok":
            assert rec.message, (rid, trouble)


@pytest.mark.parametrize("name,pattern", [
    ("bad_encoding.csv", "bad_encoding.csv: not UTF-8 text"),
    ("no_smiles_column.csv", "no_smiles_column.csv: needs a column of SMILES"),
])
def test_unreadable_files_name_the_file_and_the_problem(name, pattern):
    with pytest.raises(LibraryError, match=pattern):
        read_library(DATA / name)


@pytest.mark.parametrize("content", [
    "Catalog No.,Name,Canonical SMILES\nC-1,butadiene,C=CC=C\nC-2,cyclopentadiene,C1=CCC=C1\n",
    "\ufeffCompound ID;SMILES\nC-1;C=CC=C\nC-2;C1=CCC=C1\n",
    "name\tisomeric_smiles\nC-1\tC=CC=C\nC-2\tC1=CCC=C1\n",
])
def test_catalogue_headers_for_ids_and_smiles_are_understood(tmp_path, content):
    # suppliers head these columns in many ways, with ; or tab as separator and a byte-order mark
    # from spreadsheet exports (common practice); the first id-like header is the id, others carried
    path = tmp_path / "catalogue.csv"
    path.write_text(content, encoding="utf-8")
    records = read_library(path)
    assert [(r.id, r.status) for r in records] == [("C-1", "ok"), ("C-2", "ok")]
    assert Chem.MolToSmiles(Chem.MolFromSmiles(records[1].smiles)) == "C1=CCC=C1"


@pytest.mark.parametrize("name,content,pattern", [
    ("zero.csv", "", "zero.csv: the file is empty"),
    ("header_only.csv", "id,smiles\n", "header_only.csv: the file holds no rows"),
    ("empty.smi", "\n\n", "empty.smi: the file holds no rows"),
    ("empty.sdf", "", "empty.sdf: the file"),
])
def test_empty_files_are_refused_with_their_name(tmp_path, name, content, pattern):
    # an empty library is a mistake to report, not a run with nothing in it (common practice)
    path = tmp_path / name
    path.write_text(content)
    with pytest.raises(LibraryError, match=pattern):
        read_library(path)


def test_a_working_directory_config_is_announced(tmp_path, monkeypatch, capsys):
    # a config/config.yaml in the working directory silently replacing the shipped one would change
    # every number without a word: the console names the file it uses
    import subprocess
    from dienes import cli
    (tmp_path / "config").mkdir()
    for name in ("config.yaml", "reference_rates.csv"):
        (tmp_path / "config" / name).write_text((Path(REPO) / "config" / name).read_text())
    lib = tmp_path / "lib.csv"
    lib.write_text("id,smiles\nA,C=CC=C\n")
    seen = {}
    monkeypatch.setattr(cli.subprocess, "run", lambda cmd, env: seen.setdefault("cmd", cmd) and subprocess.CompletedProcess(cmd, 0))
    cli.main(["rank", str(lib), "--workdir", str(tmp_path), "--quiet"])
    err = capsys.readouterr().err
    assert f"using {tmp_path / 'config' / 'config.yaml'}" in err
    assert str(tmp_path / "config" / "config.yaml") in seen["cmd"]


def test_a_working_directory_config_whose_reference_is_missing_is_refused(tmp_path, monkeypatch, capsys):
    # the shipped config names its reference kinetics relative to the directory it runs in; copied
    # alone into a working directory it would stop Snakemake with a missing-input trace: one line
    # naming the file and the remedy instead (common practice: fail early, say what to do)
    from dienes import cli
    (tmp_path / "config").mkdir()
    (tmp_path / "config" / "config.yaml").write_text((Path(REPO) / "config" / "config.yaml").read_text())
    lib = tmp_path / "lib.csv"
    lib.write_text("id,smiles\nA,C=CC=C\n")
    monkeypatch.setattr(cli.subprocess, "run", lambda *a, **k: pytest.fail("Snakemake started"))
    assert cli.main(["rank", str(lib), "--workdir", str(tmp_path), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "reference 'config/reference_rates.csv' is not a file" in err and "reference_rates.csv there" in err


SMILES_ALPHABET = "CcNnOoSsFlBrI()[]=#@+-/\\.%0123456789Hh "


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(alphabet=SMILES_ALPHABET, max_size=40))
def test_random_smiles_like_strings_never_crash(text):
    rec = prepare_record(1, "h", text, {}, Limits())
    assert rec.status in STATUSES
    assert rec.status == "ok" or rec.message


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(["C", "C=C", "C(C)", "c1ccoc1", "C1=CCC=C1", "O", "N", "Cl",
                                 "C#C", "C(=O)", "/C=C/", "C=CC=C"]), min_size=1, max_size=8))
def test_site_finder_on_random_valid_molecules(parts):
    mol = Chem.MolFromSmiles("".join(parts))
    if mol is None:
        return
    for site in find_sites(mol):
        a1, a2, a3, a4 = site.atoms
        assert len(set(site.atoms)) == 4
        assert all(mol.GetAtomWithIdx(i).GetAtomicNum() == 6 for i in site.atoms)
        assert mol.GetBondBetweenAtoms(a2, a3) is not None


@pytest.mark.slow
def test_corpus_through_the_workflow(tmp_path, reference_seed):
    # ranked at GFN2-xTB: every status of bad input is decided before any level prices a row, and
    # a row's way through the density-functional stage has its own tests (tests/test_faults.py)
    _setup(tmp_path, [], seed=reference_seed, ranking={"levels": ["gfn2"]})
    lib = tmp_path / "lib.csv"
    lib.write_bytes((DATA / "bad_inputs.csv").read_bytes())
    before = set(os.listdir(tmp_path))
    run = _snakemake(tmp_path)
    assert run.returncode == 0, run.stderr[-3000:]
    rows = _ranking(tmp_path)
    expected = corpus()
    assert len(rows) == len(expected)
    for out, (rid, smiles, trouble, want) in zip(rows, expected):
        shown = out["id"][1:] if out["id"].startswith("'") and rid[:1] in "=+-@" else out["id"]
        assert shown == rid                                   # every row, in input order
        if rid == "BAD-35":
            want = "empty_smiles"
        assert out["status"] == want, (rid, trouble, out["message"])
        if want != "ok":
            assert out["message"] and out["rank"] == ""
        else:
            assert out["rank"] != ""
    formula = next(r for r in rows if "HYPERLINK" in r["id"])
    assert formula["id"].startswith("'=")                     # a spreadsheet will not run it
    # nothing written outside results/, logs/ and Snakemake's own folder, whatever an id says
    assert set(os.listdir(tmp_path)) - before <= {"results", "logs", ".snakemake"}
    assert not (tmp_path.parent / "tmp" / "escape").exists()
    assert not Path("/tmp/escape").exists()


def test_no_user_string_reaches_a_shell():
    # the package and workflow run no shell commands at all (checked in the source)
    offenders = []
    for base in ("dienes", "workflow"):
        for p in (Path(REPO) / base).rglob("*"):
            if p.suffix in (".py", ".smk") and p.is_file():
                text = p.read_text()
                for bad in ("shell=True", "os.system(", "os.popen(", "shell:"):
                    if bad in text:
                        offenders.append(f"{p.name}: {bad}")
    assert not offenders


def test_formula_cells_are_neutralised(tmp_path):
    import pandas as pd
    from dienes.outputs import write_table
    df = pd.DataFrame({"id": ["=1+1", "+SUM(A1)", "-2+3", "@x", "plain"], "log10_k_pred": [-1.5, 2.0, 0.1, 0, 1]})
    write_table(df, tmp_path / "t.csv")
    rows = list(csv.DictReader(open(tmp_path / "t.csv")))
    assert [r["id"] for r in rows] == ["'=1+1", "'+SUM(A1)", "'-2+3", "'@x", "plain"]
    assert rows[0]["log10_k_pred"] == "-1.5"          # numbers stay numbers


def test_a_bad_reference_file_gives_each_row_its_reason(tmp_path, monkeypatch):
    # a chemist's own reference kinetics: a missing rate, a repeated measurement, a bad
    # dienophile and a duplicated id each reach reference_fit.csv with a reason, none stops the fit
    # (common practice: one measured pair counts once in a regression)
    from dienes import ranking, run, settings as cfg
    ref = tmp_path / "ref.csv"
    ref.write_text("id,smiles,dienophile_smiles,log10_k\n"
                   "r1,C=CC=C,O=C1OC(=O)C=C1,0.0\n"
                   "r2,C=CC(C)=C,O=C1OC(=O)C=C1,\n"
                   "r3,C=CC=C,O=C1OC(=O)C=C1,0.1\n"
                   "r4,C1=CCC=C1,C1CC1,3.1\n"
                   "r1,C=C(C)C(C)=C,O=C1OC(=O)C=C1,0.7\n")
    lib = tmp_path / "lib.csv"
    lib.write_text("id,smiles\nx1,C=CC=C\n")
    config = cfg.load(Path(REPO) / "config" / "config.yaml") | {"library": str(lib), "reference": str(ref)}
    manifest = run.prepare(config, tmp_path / "manifest.json", results=tmp_path / "results")
    site = {"site_status": "ok", "ts_verified": True, "gfn2_barrier_kJmol": 10.0, "site_kind": "acyclic",
            "aromatic": False}
    monkeypatch.setattr(ranking, "record_sites", lambda rec, computed, settings: [site])
    table = ranking.reference_rows(manifest["reference_records"], ranking.Computed(structures={}), config)
    assert table["usable"].tolist() == [True, False, False, False, True]
    assert table["reason"].iloc[1] == "log10_k missing or not a number"
    assert table["reason"].iloc[2] == "same diene and dienophile as reference row r1: counted once"
    assert table["reason"].iloc[3].startswith("invalid_dienophile: dienophile_smiles:")
    assert "id also used on row" in manifest["reference_records"][4]["message"]
