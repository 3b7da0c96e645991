"""Common dienophiles accepted by name."""
from pathlib import Path

import pytest
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from dienes import dienophiles
from dienes.library import check_dienophile

from .conftest import REPO

# molecular formulas of the named compounds (common practice: any chemical catalogue)
FORMULAS = {"maleic anhydride": "C4H2O3", "maleimide": "C4H3NO2", "N-methylmaleimide": "C5H5NO2",
            "N-phenylmaleimide": "C10H7NO2", "dimethyl acetylenedicarboxylate": "C6H6O4",
            "dimethyl fumarate": "C6H8O4", "dimethyl maleate": "C6H8O4", "methyl acrylate": "C4H6O2",
            "acrylonitrile": "C3H3N", "acrolein": "C3H4O", "methyl vinyl ketone": "C4H6O",
            "p-benzoquinone": "C6H4O2", "tetracyanoethylene": "C6N4", "ethylene": "C2H4"}


@pytest.mark.parametrize("name", sorted(dienophiles.COMMON))
def test_each_name_is_its_compound_and_a_valid_dienophile(name):
    from rdkit import Chem
    smiles = dienophiles.smiles_of(name)
    assert CalcMolFormula(Chem.MolFromSmiles(smiles)) == FORMULAS[name]
    assert check_dienophile(smiles) == ""
    assert dienophiles.name_of(smiles) == name


def test_names_are_read_loosely_and_anything_else_is_smiles(config):
    assert dienophiles.smiles_of("  n-Phenylmaleimide ") == dienophiles.COMMON["N-phenylmaleimide"]
    assert dienophiles.smiles_of("DMAD") == "COC(=O)C#CC(=O)OC"
    assert dienophiles.smiles_of("C=CC(=O)OCC") == "C=CC(=O)OCC"
    # the fumarate and the maleate are different compounds (E and Z)
    assert dienophiles.name_of("COC(=O)/C=C\\C(=O)OC") == "dimethyl maleate"
    # a name in the config reaches every step as the SMILES the result files are named by
    named = config | {"dienophile": "tetracyanoethylene"}
    assert named["dienophile"] == "N#CC(C#N)=C(C#N)C#N"
    assert named.transition_hash(named["dienophile"]) == config.transition_hash("N#CC(C#N)=C(C#N)C#N")


def test_the_command_line_names_conditions_and_dienophiles(config):
    # --temperature and --solvent become the config values the workflow validates; a bad solvent is
    # refused by the same validation (one line)
    from dienes import cli
    from dienes import settings as cfg
    args = cli.parser().parse_args(["rank", "lib.csv", "--temperature", "313.15", "--solvent", "toluene",
                                    "--dienophile", "N-phenylmaleimide"])
    assert cli.condition_overrides(args) == ["temperature_K=313.15", "solvent=toluene"]
    s = config | {"temperature_K": 313.15, "solvent": "toluene", "dienophile": args.dienophile}
    assert s["temperature_K"] == 313.15 and s["dienophile"] == "O=C1C=CC(=O)N1c1ccccc1"
    with pytest.raises(cfg.ConfigError, match="solvent"):
        config | {"solvent": "dioxane-ish"}


def test_the_run_time_is_estimated_before_the_run(tmp_path):
    # 50 new rows on 2 cores at the default level: (reference once + each row's per-row core-s scaled by
    # its size) / 2 / efficiency, the demo's own measured costs (README, Throughput); rows already
    # computed in the working directory cost nothing, and the quick screen skips the
    # density-functional part
    import json
    from dienes import cli, estimate
    lib = tmp_path / "lib.csv"
    smiles = [f"C=CC=C{'C' * (i // 10)}" for i in range(50)]   # five dienes, ten rows each
    lib.write_text("id,smiles\n" + "".join(f"r{i},{s}\n" for i, s in enumerate(smiles)))
    line = cli.run_estimate(lib, tmp_path, 2, quick=False)
    g, d = estimate.size_factors(smiles, "O=C1OC(=O)C=C1")
    expected = (estimate.GFN2_REFERENCE_ONCE_CORE_S + estimate.DFT_REFERENCE_ONCE_CORE_S
                + g * estimate.GFN2_ROW_CORE_S + d * estimate.DFT_ROW_CORE_S) / 2 / estimate.PARALLEL_EFFICIENCY
    assert "50 rows, 50 to compute plus the reference set" in line and estimate.say(expected) in line
    # a working directory whose manifest lists the first four dienes (40 rows) and the reference set:
    # a row counts as computed only where its result files are on disk
    results = tmp_path / "results"
    (results / "structures").mkdir(parents=True)
    (results / "levels" / "dft-0" / "pairs").mkdir(parents=True)
    records = [{"smiles": s, "status": "ok", "isomers": [{"key": f"k{i}"}],
                "dienophile": {"smiles": "O=C1OC(=O)C=C1"}} for i, s in enumerate(sorted(set(smiles[:40])))]
    ref = {"smiles": "C=CC=C", "status": "ok", "isomers": [{"key": "ref"}], "dienophile": {"smiles": "O=C1OC(=O)C=C1"}}
    (results / "manifest.json").write_text(json.dumps({"records": records, "reference_records": [ref]}))
    for key in [f"k{i}" for i in range(4)] + ["ref"]:
        (results / "structures" / f"{key}.json").write_text("{}")
    assert "50 rows, 10 to compute;" in cli.run_estimate(lib, tmp_path, 2, quick=True)
    assert "50 rows, 50 to compute plus the reference set" in cli.run_estimate(lib, tmp_path, 2, quick=False)
    for key in [f"k{i}" for i in range(4)] + ["ref"]:
        (results / "levels" / "dft-0" / "pairs" / f"{key}__t.json").write_text("{}")
    assert "50 rows, 10 to compute;" in cli.run_estimate(lib, tmp_path, 2, quick=False)
    assert "10 to compute;" in cli.run_estimate(lib, tmp_path, 2, quick=False, level_key="dft-0")
    assert "50 to compute plus" in cli.run_estimate(lib, tmp_path, 2, quick=False, level_key="dft-1")  # other settings
    assert "50 rows, 50 to compute;" in cli.run_estimate(lib, tmp_path, 2, quick=False, dienophile="C=C")
    again = cli.run_estimate(lib, tmp_path, 2, quick=True)
    assert "quick screen" in again
    g10, d10 = estimate.size_factors(smiles[40:], "O=C1OC(=O)C=C1")
    assert estimate.say(g10 * estimate.GFN2_ROW_CORE_S / 2 / estimate.PARALLEL_EFFICIENCY) in again
    # ranking.rows N: only N of the rows cost a density-functional part (10 new rows here)
    five = cli.run_estimate(lib, tmp_path, 2, quick=False, rows="5")
    assert "the 5 best by GFN2-xTB" in five
    assert estimate.say((g10 * estimate.GFN2_ROW_CORE_S + 0.1 * d10 * estimate.DFT_ROW_CORE_S) / 2
                        / estimate.PARALLEL_EFFICIENCY) in five


def test_the_estimate_charges_by_size_and_skips_what_the_reference_set_computes(tmp_path):
    # per-row cost against size: power laws measured on the benchmark library's run (dienes/estimate.py),
    # relative to the demo's average accepted row; a row is read as the run reads it
    from dienes import estimate
    from dienes.library import read_rows
    assert estimate.atoms("C=CC=C") == 10 and estimate.atoms("C=CC=C.[Na+].[Cl-]") == 10
    # rows the library refuses (unreadable, no diene unit) cost nothing
    assert estimate.size_factors(["not a smiles", "CC=CC", "C1=CC"], "C=C") == (0.0, 0.0)
    # the demo's three rows the run refuses are not charged: 1,4-pentadiene and styrene have no
    # conjugated C=C-C=C unit, 'C1=CC=C' does not parse (common practice: a skipped methylene and a
    # benzene ring are not dienes; an unclosed ring is not a structure)
    demo = [s for _, s, _ in read_rows(Path(REPO) / "config" / "demo_library.csv")]
    assert estimate._work(demo, "O=C1OC(=O)C=C1")[2] == 47
    # a larger diene or dienophile costs more; unspecified E/Z is computed for both isomers
    butadiene = estimate.size_factors(["C=CC=C"], "O=C1OC(=O)C=C1")
    larger = estimate.size_factors(["C=CC=CC(C)(C)CCCC"], "O=C1OC(=O)C=C1")
    with_npm = estimate.size_factors(["C=CC=C"], "O=C1C=CC(=O)N1c1ccccc1")
    assert all(a < b for a, b in zip(butadiene, larger)) and all(a < b for a, b in zip(butadiene, with_npm))
    both = estimate.size_factors(["CC=CC=C"], "O=C1OC(=O)C=C1")
    e, z = (estimate.size_factors([s], "O=C1OC(=O)C=C1") for s in ("C/C=C/C=C", "C/C=C\\C=C"))
    assert both == pytest.approx((e[0] + z[0], e[1] + z[1]))
    ref = tmp_path / "ref.csv"
    ref.write_text("id,smiles,dienophile_smiles,log10_k\nb,C=CC=C,O=C1OC(=O)C=C1,0\n")
    assert estimate.shared_with_reference(["C(=C)C=C", "CC=CC=C"], ref, "O=C1OC(=O)C=C1") == ["C(=C)C=C"]
    assert estimate.shared_with_reference(["C=CC=C"], ref, "C=C") == []
    assert estimate.shared_with_reference(["C=CC=C"], tmp_path / "missing.csv", "O=C1OC(=O)C=C1") == []
