"""The config validated once into read-only settings: named levels, old keys, the hashes that
name result files, and the GFN2-xTB backend decided once and recorded."""
import json

import pytest

from dienes import settings as cfg


def test_settings_are_read_only(config):
    with pytest.raises(TypeError):
        config["temperature_K"] = 300.0
    with pytest.raises(TypeError):
        config["conformers"]["n_conformers"] = 3
    with pytest.raises(AttributeError):
        config.backend_note = "x"
    assert isinstance(config["model"]["features"], tuple)
    json.dumps(config.as_config())          # the plain copy the manifest records


def test_the_shipped_levels_and_what_ranks(config):
    assert [lv.name for lv in config.ranking_levels] == ["dft", "corrected", "gfn2"]
    assert config.placing.name == "gfn2" and config.placing.label() == "GFN2-xTB"
    dft, corrected = config.levels["dft"], config.levels["corrected"]
    assert dft.label() == "B3LYP/def2-SVP" and dft.barrier == "free_energy" and config.placing.barrier == "electronic"
    # the corrected level computes nothing of its own: it estimates dft's barrier, of dft's kind
    assert corrected.corrects and corrected.target is dft and corrected.barrier == "free_energy"
    assert corrected.label() == "B3LYP/def2-SVP estimated from GFN2-xTB"
    assert [lv.name for lv in config.priced_levels] == ["dft"] and config.rows == "auto"
    # auto: every row up to ranking.contenders.from_rows library rows (150 as shipped), contenders above
    assert config.rows_mode(150) == "all" and config.rows_mode(151) == "contenders"
    assert dft.key().startswith("dft-") and len(dft.hash()) == 10


@pytest.mark.parametrize("old,says", [
    ({"refine": {"rows": "none"}}, "refine was replaced by levels"),
    ({"backend": "tblite"}, "backend was replaced by levels: {gfn2: {program: xtb, backend: tblite}}"),
])
def test_an_old_key_gets_one_line_saying_what_replaced_it(config, old, says):
    with pytest.raises(cfg.ConfigError, match="invalid configuration: " + says.split(":")[0]) as exc:
        cfg.resolve(config.as_config() | old)
    assert says in str(exc.value) and "\n" not in str(exc.value)


@pytest.mark.parametrize("change,says", [
    ({"ranking": {"levels": ["dft", "mp2"]}}, "'mp2' is not a level named under levels"),
    ({"levels": {"gfn2": {"program": "xtb"}, "alt": {"program": "xtb"}, "dft": {"program": "pyscf"}}},
     "exactly one level with program: xtb"),
    ({"ranking": {"levels": ["gfn2"], "rows": 5}}, "ranking/rows: N"),
    ({"ranking": {"levels": ["dft", "gfn2"], "rows": "contenders"}}, "add one to levels .program: correction"),
    ({"ranking": {"levels": ["corrected", "dft", "gfn2"]}}, "cannot rank first"),
    ({"ranking": {"levels": ["dft", "gfn2", "corrected"]}, "levels": {"gfn2": {"program": "xtb"},
      "dft": {"program": "pyscf"}, "corrected": {"program": "correction", "target": "gfn2"}}},
     "'gfn2' is not a single-point level"),
    ({"levels": {"gfn2": {"program": "xtb"}, "Bad_Name": {"program": "pyscf"}}}, "levels"),
    ({"levels": {"gfn2": {"program": "xtb"}, "dft": {"program": "pyscf", "basis": 3}}}, "levels"),
])
def test_bad_levels_are_refused_before_anything_runs(config, change, says):
    with pytest.raises(cfg.ConfigError, match=says):
        cfg.resolve(config.as_config() | change)


def test_a_third_level_is_configuration_alone(config):
    three = config | {"levels": config.as_config()["levels"] | {"hf": {"program": "pyscf", "method": "hf",
                                                                         "basis": "sto-3g"}},
                      "ranking": {"levels": ["hf", "dft", "gfn2"]}}
    assert [lv.name for lv in three.priced_levels] == ["hf", "dft"]
    assert three.levels["hf"].label() == "HF/STO-3G" and three.levels["hf"].barrier == "free_energy"
    # per-structure results do not depend on which levels rank: nothing at GFN2-xTB is redone
    assert three.structure_settings() == config.structure_settings()


def test_result_names_follow_what_changes_a_number(shipped):
    config = shipped
    # regression check (values only this code produced): the hashes of the shipped settings, kept
    # when the settings moved into named levels, so that earlier results are reused; a method that
    # changes the energies (a double hybrid) gets its own folder
    assert cfg.settings_hash(config.structure_settings()) == "fb8e4ccd47"
    assert config.levels["dft"].hash() == "49dc212276"
    dsd = config.replace(levels=config.as_config()["levels"] | {"dft": dict(config.levels["dft"].options) | {
        "program": "pyscf", "method": "dsd-blyp"}})
    assert dsd.levels["dft"].hash() == "1cb87ceff2"
    assert config.transition_hash("O=C1OC(=O)C=C1") == "510d0ba81e"
    # the temperature changes conformer weights and thermal terms: a new key; the interval does not
    assert (config | {"temperature_K": 310.0}).structure_key("X") != config.structure_key("X")
    assert (config | {"model": dict(config["model"], interval=0.8)}).structure_key("X") == config.structure_key("X")


def test_the_backend_fallback_is_decided_once_and_a_worker_without_it_stops(shipped, monkeypatch, tmp_path):
    config = shipped
    from dienes import backends, run
    monkeypatch.setattr(backends, "available", lambda name: name == "tblite")
    edge = cfg.resolve(config.as_config())
    assert edge.backend == "tblite" and "xtb-python is not installed" in edge.backend_note
    # a worker is handed what the edge recorded and never re-decides it
    recorded = config.as_config()            # recorded on a submit host that has xtb-python
    manifest = tmp_path / "manifest.json"
    manifest.write_text(json.dumps({"run_settings": recorded, "structures": {}, "batches": {"structures": {"b": []}}}))
    with pytest.raises(backends.BackendError, match="recorded for the GFN2-xTB backend xtb-python"):
        run.compute_structures(manifest, "b", tmp_path / "out.json", tmp_path)
    assert run.settings_of(json.loads(manifest.read_text())).backend == "xtb-python"
