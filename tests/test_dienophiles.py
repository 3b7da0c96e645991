"""Common dienophiles accepted by name."""
import pytest
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from dienes import dienophiles
from dienes.library import check_dienophile

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
    # 50 new rows on 2 cores at the default level: (reference once + 50 x per-row core-s) / 2 /
    # efficiency, the demo's own measured costs (README, Throughput); rows already computed in the
    # working directory cost nothing, and the quick screen skips the density-functional part
    import json
    from dienes import cli, estimate
    lib = tmp_path / "lib.csv"
    lib.write_text("id,smiles\n" + "".join(f"r{i},C=CC=C{'C' * i}\n" for i in range(50)))
    line = cli.run_estimate(lib, tmp_path, 2, quick=False)
    expected = (estimate.REFERENCE_ONCE_CORE_S + 50 * (estimate.GFN2_ROW_CORE_S + estimate.DFT_ROW_CORE_S)) / 2 / estimate.PARALLEL_EFFICIENCY
    assert "50 rows, 50 to compute plus the reference set" in line and estimate.say(expected) in line
    (tmp_path / "results").mkdir()
    (tmp_path / "results" / "manifest.json").write_text(json.dumps({
        "records": [{"smiles": f"C=CC=C{'C' * i}", "status": "ok"} for i in range(40)], "reference_records": [{}]}))
    again = cli.run_estimate(lib, tmp_path, 2, quick=True)
    assert "50 rows, 10 to compute;" in again and "quick screen" in again
    assert estimate.say(10 * estimate.GFN2_ROW_CORE_S / 2 / estimate.PARALLEL_EFFICIENCY) in again
    # ranking.rows N: only N of the rows cost a density-functional part (10 new rows here)
    five = cli.run_estimate(lib, tmp_path, 2, quick=False, rows="5")
    assert "the 5 best by GFN2-xTB" in five
    assert estimate.say(10 * (estimate.GFN2_ROW_CORE_S + 0.1 * estimate.DFT_ROW_CORE_S) / 2
                        / estimate.PARALLEL_EFFICIENCY) in five
