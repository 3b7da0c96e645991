"""Run settings: read and validate the config, derive the per-structure settings
and the hash that names per-structure result files."""

from __future__ import annotations

import copy
import hashlib
import json
from pathlib import Path

import yaml
from jsonschema import Draft202012Validator, validators

# Bump when a change in the science changes per-structure numbers: old result
# files then stop matching and are recomputed.
SCIENCE_VERSION = 2

SCHEMA_PATH = Path(__file__).resolve().parent.parent / "config" / "schema.yaml"

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


def validate(config: dict, schema_path=SCHEMA_PATH) -> dict:
    """A validated copy of `config` with schema defaults filled in."""
    cfg = copy.deepcopy(config)
    errors = sorted(_with_defaults(Draft202012Validator)(load_schema(schema_path)).iter_errors(cfg),
                    key=lambda e: list(e.path))
    if errors:
        lines = [f"{'/'.join(map(str, e.path)) or '(top)'}: {e.message}" for e in errors]
        raise ConfigError("invalid configuration: " + "; ".join(lines))
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
