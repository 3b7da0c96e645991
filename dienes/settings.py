"""Run settings: read and validate the config, derive the per-structure settings
and the hash that names per-structure result files."""

from __future__ import annotations

import copy
import hashlib
import json
import logging
from pathlib import Path

import yaml
from jsonschema import Draft202012Validator, validators

from .paths import workflow_root

# Bump when a change in the science changes per-structure numbers: old result
# files then stop matching and are recomputed.
SCIENCE_VERSION = 4
# Bump when a change in the pricing at the refined level changes its numbers.
REFINE_VERSION = 4

SCHEMA_PATH = workflow_root() / "config" / "schema.yaml"

# keys that change a per-structure result (the rest only change ranking and report)
STRUCTURE_KEYS = ("temperature_K", "solvent", "backend", "seed", "conformers", "optimisation")


class ConfigError(ValueError):
    """The configuration is invalid."""


def _with_defaults(validator_class):
    validate_props = validator_class.VALIDATORS["properties"]

    def set_defaults(validator, properties, instance, schema):
        for name, sub in properties.items():
            if isinstance(instance, dict) and "default" in sub:
                instance.setdefault(name, copy.deepcopy(sub["default"]))
        yield from validate_props(validator, properties, instance, schema)

    return validators.extend(validator_class, {"properties": set_defaults})


def load_schema(path=SCHEMA_PATH) -> dict:
    return yaml.safe_load(Path(path).read_text())


_FALLBACK_SAID = []


def _backend_fallback(cfg: dict) -> None:
    """xtb-python has wheels up to Python 3.11: where it is missing and tblite is
    present, tblite (the same GFN2-xTB Hamiltonian) is used, said once per process."""
    from .backends import available
    if cfg.get("backend") == "xtb-python" and not available("xtb-python") and available("tblite"):
        cfg["backend"] = "tblite"
        if not _FALLBACK_SAID:
            _FALLBACK_SAID.append(True)
            logging.getLogger("dienes").warning(
                "backend xtb-python is not installed for this Python; using tblite (same GFN2-xTB)")


def _coerce(value, schema: dict):
    """Strings where the schema wants a number or a flag become one: Snakemake's
    --config hands nested values over as text (refine={top: 10} gives '10')."""
    kind = schema.get("type")
    if isinstance(value, dict) and kind == "object":
        props = schema.get("properties", {})
        return {k: _coerce(v, props.get(k, {})) for k, v in value.items()}
    if isinstance(value, list) and kind == "array":
        return [_coerce(v, schema.get("items", {})) for v in value]
    if isinstance(value, str):
        try:
            if kind == "integer" or (not kind and schema.get("oneOf") and value.isdigit()):
                return int(value)
            if kind == "number":
                return float(value)
        except ValueError:
            return value
        if kind == "boolean" and value.lower() in ("true", "false"):
            return value.lower() == "true"
    return value


def validate(config: dict, schema_path=SCHEMA_PATH) -> dict:
    """A validated copy of `config` with schema defaults filled in."""
    cfg = _coerce(copy.deepcopy(config), load_schema(schema_path))
    if isinstance(cfg.get("refine"), dict) and "top" in cfg["refine"]:
        raise ConfigError("invalid configuration: refine/top was replaced by refine/rows: all (the default: "
                          "every diene at the refined level), none (GFN2-xTB only) or N (the N best by "
                          "GFN2-xTB)")
    errors = sorted(_with_defaults(Draft202012Validator)(load_schema(schema_path)).iter_errors(cfg),
                    key=lambda e: list(e.path))
    if errors:
        lines = [f"{'/'.join(map(str, e.path)) or '(top)'}: {e.message}" for e in errors]
        raise ConfigError("invalid configuration: " + "; ".join(lines))
    _backend_fallback(cfg)
    return cfg


def load(path) -> dict:
    return validate(yaml.safe_load(Path(path).read_text()) or {})


def structure_settings(config: dict) -> dict:
    """The part of the config a per-structure computation depends on."""
    out = {k: copy.deepcopy(config[k]) for k in STRUCTURE_KEYS}
    out["science_version"] = SCIENCE_VERSION
    return out


def settings_hash(settings: dict) -> str:
    blob = json.dumps(settings, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(blob.encode()).hexdigest()[:10]


def structure_key(inchikey: str, settings: dict) -> str:
    """File-name key of one structure under one set of settings."""
    return f"{inchikey}_{settings_hash(settings)}"


def canonical_smiles(smiles: str) -> str:
    """RDKit canonical SMILES (the input unchanged when it does not parse)."""
    from rdkit import Chem
    mol = Chem.MolFromSmiles(smiles)
    return Chem.MolToSmiles(mol) if mol is not None else smiles


def dienophile_hash(config: dict, smiles: str) -> str:
    """Names the result file of one dienophile under the per-structure settings."""
    return settings_hash(structure_settings(config) | {"dienophile": canonical_smiles(smiles)})


def transition_hash(config: dict, dienophile_smiles: str) -> str:
    """Names transition-structure result files: per-structure settings, the
    transition-state settings and the dienophile."""
    return settings_hash(structure_settings(config) | {"transition_state": config["transition_state"],
                                                       "dienophile": canonical_smiles(dienophile_smiles)})


def refine_hash(config: dict) -> str:
    """Names the folder of refined results: the level's settings, code defaults included
    (which rows are refined does not change a priced number)."""
    from .refine import level_settings
    return settings_hash({"level": level_settings(config["refine"]).as_dict(), "version": REFINE_VERSION})
