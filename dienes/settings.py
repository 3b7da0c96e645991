"""Run settings: the config validated once, at the edge (Snakefile, command line, Python
API), into a read-only :class:`Settings` that every step receives. It knows the named
levels of theory, which of them ranks, and the hashes that name result files.

A level is named in the config's ``levels`` mapping and chosen by name in ``ranking``:

- the one ``program: xtb`` level places every atom (conformers, planar s-cis,
  transition structures) and gives its own barriers;
- every ``program: pyscf`` level prices those structures with single points.

``ranking.levels`` lists the levels that rank, in order: each row is ranked at the
first level that has a prediction for it and the rest are shown beside it.
"""

from __future__ import annotations

import copy
import hashlib
import json
import logging
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from types import MappingProxyType

import yaml
from jsonschema import Draft202012Validator, validators

from .paths import workflow_root

# Bump when a change in the science changes per-structure numbers: old result
# files then stop matching and are recomputed.
SCIENCE_VERSION = 4
# Bump when a change in the single-point pricing at a level changes its numbers.
PRICING_VERSION = 4

SCHEMA_PATH = workflow_root() / "config" / "schema.yaml"

# keys that change a per-structure result (the rest only change ranking and report)
STRUCTURE_KEYS = ("temperature_K", "solvent", "backend", "seed", "conformers", "optimisation")
BARRIER_KINDS = ("free_energy", "electronic")

# config keys of earlier versions, each with what replaced it
REPLACED_KEYS = {
    "refine": "refine was replaced by levels (each level of theory by name, e.g. levels: {dft: {program: "
              "pyscf, method: b3lyp, basis: def2-svp, barrier: free_energy}}) and ranking (levels: [dft, gfn2] "
              "ranks at dft and falls back to gfn2; [gfn2] is the quick screen; rows: all or N)",
    "backend": "backend was replaced by levels: {gfn2: {program: xtb, backend: tblite}} (the GFN2-xTB level's "
               "backend)",
}


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


@lru_cache(maxsize=4)
def _schema_text(path: str) -> str:
    return Path(path).read_text()


def load_schema(path=SCHEMA_PATH) -> dict:
    return yaml.safe_load(_schema_text(str(path)))


def _branch(value, schema: dict, root: dict) -> dict:
    """The part of `schema` that applies to `value`: a $ref resolved, and an if/then/else on
    constant properties (a level's program) followed."""
    while True:
        if "$ref" in schema:
            schema = root["$defs"][schema["$ref"].rsplit("/", 1)[-1]]
        elif "if" in schema and isinstance(value, dict):
            consts = {k: v.get("const") for k, v in schema["if"].get("properties", {}).items()}
            schema = schema["then"] if all(value.get(k) == c for k, c in consts.items()) else schema.get("else", {})
        else:
            return schema


def _coerce(value, schema: dict, root: dict | None = None):
    """Strings where the schema wants a number or a flag become one: Snakemake's
    --config hands nested values over as text (ranking={rows: 10} gives '10')."""
    root = root if root is not None else schema
    schema = _branch(value, schema, root)
    kind = schema.get("type")
    if isinstance(value, dict) and (kind == "object" or "properties" in schema):
        props, extra = schema.get("properties", {}), schema.get("additionalProperties")
        return {k: _coerce(v, props.get(k, extra if isinstance(extra, dict) else {}), root) for k, v in value.items()}
    if isinstance(value, list) and kind == "array":
        return [_coerce(v, schema.get("items", {}), root) for v in value]
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


def settings_hash(settings: dict) -> str:
    blob = json.dumps(settings, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(blob.encode()).hexdigest()[:10]


def canonical_smiles(smiles: str) -> str:
    """RDKit canonical SMILES (the input unchanged when it does not parse)."""
    from rdkit import Chem
    mol = Chem.MolFromSmiles(smiles)
    return Chem.MolToSmiles(mol) if mol is not None else smiles


def _given(value):
    return None if value in (None, "", "none") else value


def _thaw(value):
    if isinstance(value, Mapping):
        return {k: _thaw(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_thaw(v) for v in value]
    return value


def _freeze(value):
    if isinstance(value, Mapping):
        return MappingProxyType({k: _freeze(v) for k, v in value.items()})
    if isinstance(value, (list, tuple)):
        return tuple(_freeze(v) for v in value)
    return value


@dataclass(frozen=True)
class Level:
    """One named level of theory of a run."""

    name: str
    program: str                 # "xtb" (places the atoms), "pyscf" (single points) or "correction"
    options: tuple               # ((key, value), ...) as validated, defaults filled in
    target: Level | None = None   # a correction level's single-point level
    base: Level | None = None     # a correction level's starting barrier (None: GFN2-xTB's)

    @property
    def corrects(self) -> bool:
        """A corrected fast level: the target level's barrier estimated from GFN2-xTB terms
        (dienes.correction), and from a cheaper single-point level's barrier where `base` names
        one, fitted in each run on the rows the target level computed."""
        return self.program == "correction"

    @property
    def places_atoms(self) -> bool:
        return self.program == "xtb"

    def option(self, key, default=None):
        return dict(self.options).get(key, default)

    @property
    def barrier(self) -> str:
        """Which barrier ranks at this level: free_energy or electronic (the located
        GFN2-xTB saddle gives an electronic barrier)."""
        if self.corrects:
            return self.target.barrier
        return "electronic" if self.places_atoms else self.option("barrier", "free_energy")

    def dft_settings(self):
        from .backends import DFTSettings
        o = dict(self.options)
        extra = {k: o[k] for k in ("grid_level", "density_fit") if k in o}
        return DFTSettings(method=o["method"], basis=o["basis"], dispersion=_given(o.get("dispersion")),
                           solvent=_given(o.get("solvent")), **extra)

    def label(self) -> str:
        """The level as a chemist writes it: GFN2-xTB, B3LYP/def2-SVP, ..."""
        if self.corrects:
            return f"{self.target.label()} estimated from {self.base.label() + ' and ' if self.base else ''}GFN2-xTB"
        return "GFN2-xTB" if self.places_atoms else self.dft_settings().label()

    def hash(self) -> str:
        """Names the folder of this level's priced results: the settings that change a priced
        number, code defaults included (the barrier kind and which rows are priced do not)."""
        if self.places_atoms or self.corrects:
            return ""
        return settings_hash({"level": self.dft_settings().as_dict(), "version": PRICING_VERSION})

    def key(self) -> str:
        """'<name>-<hash>': the folder of its results under results/levels/."""
        return f"{self.name}-{self.hash()}"

    def energy_backend(self, threads: int | None = None):
        """The object that computes energies at this level (dienes.backends)."""
        from .backends import DFTLevel
        if self.places_atoms:
            raise ValueError(f"level {self.name} places the atoms; its barriers come from the transition step")
        return DFTLevel(self.dft_settings(), threads)


class Settings(Mapping):
    """The validated config of a run, read-only (mappings come back as read-only views,
    lists as tuples), with its levels and the hashes that name result files."""

    __slots__ = ("_data", "backend_note", "_levels")

    def __init__(self, data: dict, backend_note: str = ""):
        object.__setattr__(self, "_data", _freeze(data))
        object.__setattr__(self, "backend_note", backend_note)
        levels = {name: Level(name, spec["program"], tuple(sorted((k, v) for k, v in spec.items() if k != "program")))
                  for name, spec in data["levels"].items()}
        for name, lv in levels.items():
            if lv.corrects:
                base = levels[lv.option("base")] if lv.option("base") else None
                levels[name] = Level(name, lv.program, lv.options, levels[lv.option("target")], base)
        object.__setattr__(self, "_levels", levels)

    def __setattr__(self, name, value):
        raise AttributeError("Settings are read-only: build new ones with replace()")

    def __getitem__(self, key):
        return self._data[key]

    def __iter__(self):
        return iter(self._data)

    def __len__(self):
        return len(self._data)

    def __repr__(self):
        return f"Settings({self.as_config()!r})"

    def as_config(self) -> dict:
        """A plain, JSON-ready copy (what the manifest records and model.json keeps)."""
        return _thaw(self._data)

    def __or__(self, changes: Mapping) -> "Settings":
        """settings | {key: value}: new settings with those top-level keys changed."""
        return self.replace(**changes)

    def replace(self, **changes) -> "Settings":
        """New settings with some top-level keys changed, validated again (no backend fallback:
        the one recorded here stays)."""
        return resolve(self.as_config() | changes, fallback=False)

    # ------------------------------------------------------------ levels
    @property
    def levels(self) -> dict[str, Level]:
        return dict(self._levels)

    @property
    def placing(self) -> Level:
        """The GFN2-xTB level: it places every atom."""
        return next(lv for lv in self.levels.values() if lv.places_atoms)

    @property
    def ranking_levels(self) -> list[Level]:
        """The levels that rank, in order: a row is ranked at the first with a prediction."""
        levels = self.levels
        return [levels[n] for n in self._data["ranking"]["levels"]]

    @property
    def priced_levels(self) -> list[Level]:
        """The single-point levels of the ranking (the ones whose results are computed)."""
        return [lv for lv in self.ranking_levels if lv.program == "pyscf"]

    @property
    def rows(self):
        """Rows the first ranking level computes as configured: 'all', 'contenders', 'auto' or N
        (the N best at the next level)."""
        return self._data["ranking"]["rows"]

    def rows_mode(self, n_library: int):
        """What ranking.rows means for a library of n_library rows: 'all', 'contenders' or N
        ('auto' is 'all' up to ranking.contenders.from_rows rows, 'contenders' above)."""
        rows = self.rows
        if rows == "auto":
            return "contenders" if n_library > self._data["ranking"]["contenders"]["from_rows"] else "all"
        return rows

    def rows_for(self, level: Level):
        """ranking.rows where `level` is the first ranking level, else 'all'."""
        first = self.ranking_levels[0]
        return self.rows if level.name == first.name else "all"

    # ----------------------------------------------------- GFN2-xTB, hashes
    @property
    def backend(self) -> str:
        return self.placing.option("backend", "xtb-python")

    def backend_settings(self):
        from .backends import Settings as BackendSettings
        return BackendSettings(name=self.backend, solvent=_given(self._data["solvent"]))

    def require_backend(self) -> None:
        """Stop with a clear message where this process cannot run the run's recorded backend
        (instead of computing under another backend's hash)."""
        from .backends import BackendError, available
        if not available(self.backend):
            raise BackendError(
                f"this run's results are recorded for the GFN2-xTB backend {self.backend}, which this Python "
                f"cannot import; install it here, or rerun with levels: {{{self.placing.name}: {{backend: "
                f"{'tblite' if self.backend == 'xtb-python' else 'xtb-python'}}}}} (a new set of results)")

    def structure_settings(self) -> dict:
        """The part of the config a per-structure computation depends on."""
        out = {k: _thaw(self._data[k]) for k in STRUCTURE_KEYS if k != "backend"}
        out["backend"] = self.backend
        out["science_version"] = SCIENCE_VERSION
        return out

    def structure_key(self, inchikey: str) -> str:
        """File-name key of one structure under these settings."""
        return f"{inchikey}_{settings_hash(self.structure_settings())}"

    def dienophile_hash(self, smiles: str) -> str:
        """Names the result file of one dienophile under the per-structure settings."""
        return settings_hash(self.structure_settings() | {"dienophile": canonical_smiles(smiles)})

    def transition_hash(self, dienophile_smiles: str) -> str:
        """Names transition-structure result files: per-structure settings, the
        transition-state settings and the dienophile."""
        return settings_hash(self.structure_settings() | {"transition_state": _thaw(self._data["transition_state"]),
                                                          "dienophile": canonical_smiles(dienophile_smiles)})

    def config_hash(self, version: str = "") -> str:
        """Changes with any setting: the whole-run steps (prepare, rank) rerun."""
        return settings_hash(self.as_config() | {"version": version})


def _level_defaults(levels: dict, schema: dict) -> None:
    """Fill each level's defaults from the schema definition of its program."""
    for spec in levels.values():
        if isinstance(spec, dict) and spec.get("program") in ("xtb", "pyscf", "correction"):
            props = schema["$defs"][f"{spec['program']}_level"]["properties"]
            for key, sub in props.items():
                if "default" in sub:
                    spec.setdefault(key, copy.deepcopy(sub["default"]))


def _check_levels(cfg: dict) -> list[str]:
    levels, ranking = cfg["levels"], cfg["ranking"]
    problems = []
    xtb = [n for n, s in levels.items() if s.get("program") == "xtb"]
    if len(xtb) != 1:
        problems.append(f"levels: exactly one level with program: xtb places the atoms (found {len(xtb)})")
    for name in ranking["levels"]:
        if name not in levels:
            problems.append(f"ranking/levels: {name!r} is not a level named under levels ({', '.join(levels)})")
    for name, spec in levels.items():
        if spec.get("program") == "correction":
            target = levels.get(spec.get("target"), {})
            if target.get("program") != "pyscf":
                problems.append(f"levels/{name}/target: {spec.get('target')!r} is not a single-point level "
                                f"(program: pyscf) named under levels")
            elif name in ranking["levels"] and (spec["target"] not in ranking["levels"] or ranking["levels"].index(
                    spec["target"]) > ranking["levels"].index(name)):
                problems.append(f"ranking/levels: the corrected level {name} follows its target {spec['target']}")
            base = spec.get("base")
            if base is not None and (levels.get(base, {}).get("program") != "pyscf" or base == spec.get("target")):
                problems.append(f"levels/{name}/base: {base!r} is not a single-point level (program: pyscf) named "
                                f"under levels other than the target")
            elif base is not None and name in ranking["levels"] and (
                    base not in ranking["levels"] or ranking["levels"].index(base) == 0):
                problems.append(f"levels/{name}/base: {base!r} must be named in ranking/levels after the first "
                                f"(so every row computes it)")
    if ranking["levels"] and levels.get(ranking["levels"][0], {}).get("program") == "correction":
        problems.append("ranking/levels: a corrected level cannot rank first (it is fitted on its target's rows)")
    if ranking["rows"] != "all":
        first = levels.get(ranking["levels"][0], {})
        if len(ranking["levels"]) < 2 or first.get("program") != "pyscf":
            problems.append("ranking/rows: N, contenders or auto let the first ranking level, a single-point one, "
                            "compute only some rows: name two levels, the single-point level first")
        elif ranking["rows"] in ("contenders", "auto") and not any(
                levels.get(n, {}).get("program") == "correction" and levels[n].get("target") == ranking["levels"][0]
                for n in ranking["levels"]):
            problems.append(f"ranking/rows: {ranking['rows']} ranks the rows not recomputed at "
                            f"{ranking['levels'][0]} on a corrected level: add one to levels (program: correction, "
                            f"target: {ranking['levels'][0]}) and to ranking/levels")
    return problems


_FALLBACK_SAID = []


def _backend_fallback(cfg: dict) -> str:
    """xtb-python has wheels up to Python 3.11: where it is missing and tblite is present,
    tblite (the same GFN2-xTB Hamiltonian) is recorded instead, once, at the edge."""
    from .backends import available
    placing = next(s for s in cfg["levels"].values() if s["program"] == "xtb")
    if placing.get("backend") == "xtb-python" and not available("xtb-python") and available("tblite"):
        placing["backend"] = "tblite"
        note = "backend xtb-python is not installed for this Python; using tblite (same GFN2-xTB)"
        if not _FALLBACK_SAID:
            _FALLBACK_SAID.append(True)
            logging.getLogger("dienes").warning(note)
        return note
    return ""


def resolve(config: Mapping, fallback: bool = True) -> Settings:
    """Validate a config (schema defaults filled in) into Settings. At the edge (`fallback`)
    a GFN2-xTB backend this Python lacks is replaced by the other one, once, and recorded."""
    if isinstance(config, Settings):
        return config
    schema = load_schema()
    cfg = _coerce(_thaw(config), schema)
    if isinstance(cfg.get("dienophile"), str):
        from .dienophiles import smiles_of
        cfg["dienophile"] = smiles_of(cfg["dienophile"])     # a common dienophile may be named
    for old, why in REPLACED_KEYS.items():
        if old in cfg:
            raise ConfigError(f"invalid configuration: {why}")
    if isinstance(cfg.get("levels"), dict):
        _level_defaults(cfg["levels"], schema)
    errors = sorted(_with_defaults(Draft202012Validator)(schema).iter_errors(cfg), key=lambda e: list(e.path))
    if errors:
        lines = [f"{'/'.join(map(str, e.path)) or '(top)'}: {e.message}" for e in errors]
        raise ConfigError("invalid configuration: " + "; ".join(lines))
    _level_defaults(cfg["levels"], schema)
    problems = _check_levels(cfg)
    if problems:
        raise ConfigError("invalid configuration: " + "; ".join(problems))
    note = _backend_fallback(cfg) if fallback else ""
    return Settings(cfg, note)


def load(path, fallback: bool = True) -> Settings:
    return resolve(yaml.safe_load(Path(path).read_text()) or {}, fallback)
