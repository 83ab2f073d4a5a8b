"""Validate a scan config (JSON schema, then holoscan's own physics rules) into a :class:`ScanConfig`.

Structure is checked against ``workflow/schemas/config.schema.yaml``; model parameters, grid ranges
and solver settings are then checked by the same validators the physics uses. Every failure is an
:class:`~holoscan.errors.InputError` naming the key path (``models[1].grid.T.num``) and the value.
"""
from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import jsonschema
import yaml

from .. import validate as v
from ..errors import InputError
from ..kinds import model_from_block
from ..point import resolve_method
from ..settings import SolverSettings
from .grid import grid_points
from .members import expand

#: points per job when the config gives none: for a kind solved point by point, and for a batched
#: kind with a shared state (its atlas is built once by its own job; a chunk then costs little more
#: than its points' verification shots, so few large chunks are near-best: a 400-point scan is one
#: job, a 3,600-point one four, measured in bench/scan_onecharge.py)
POINTS_PER_JOB = 200
BATCHED_POINTS_PER_JOB = 1000
#: keys of a model block that belong to the scan, not to the model kind
SCAN_MODEL_KEYS = ("grid", "solver", "points_per_job", "isentropes")


def schema_path() -> Path:
    """The scan config schema shipped with the workflow (repository layout)."""
    return Path(__file__).resolve().parents[2] / "workflow" / "schemas" / "config.schema.yaml"


def load_schema(path=None) -> dict:
    return yaml.safe_load(Path(path or schema_path()).read_text())


def _key(path) -> str:
    out = ""
    for p in path:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out or "(top level)"


_HINTS = {
    "axis": "must be {min, max, num[, spacing]} or a non-empty list of numbers",
}


def _schema_error(err: jsonschema.ValidationError) -> InputError:
    key = _key(err.absolute_path)
    if err.validator == "additionalProperties":
        extra = sorted(set(err.instance) - set(err.schema.get("properties", {})), key=str)
        k = f"{key}.{extra[0]}" if key != "(top level)" else str(extra[0])
        allowed = ", ".join(sorted(err.schema.get("properties", {})))
        return InputError(k, err.instance[extra[0]], f"unknown key; allowed keys: {allowed}")
    if err.validator == "required":
        missing = err.message.split("'")[1] if "'" in err.message else err.message
        k = f"{key}.{missing}" if key != "(top level)" else missing
        return InputError(k, None, "required key is missing")
    if err.validator == "oneOf":
        if isinstance(err.instance, dict) and "T" in err.instance:
            return InputError(key, err.instance, "give exactly one of 'mu' and 'mu_over_T'")
        return InputError(key, err.instance, _HINTS["axis"])
    if err.validator == "type" and isinstance(err.instance, str) and _looks_numeric(err.instance):
        return InputError(key, err.instance, "is text, not a number: write it without quotes")
    msg = err.message
    if len(msg) > 200:
        msg = msg[:200] + "..."
    return InputError(key, err.instance, msg)


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False


#: default cap on the grid points of one scan (all models); a config raises it with ``max_points``
DEFAULT_MAX_POINTS = 1_000_000


def _axis_length(spec) -> int:
    return len(spec) if isinstance(spec, list) else int(spec["num"])


def _check_size(doc: dict) -> None:
    """Refuse a scan with more than ``max_points`` grid points, counted from the axis lengths
    before any point is made (a product of two 10^5 axes would not fit in memory)."""
    cap = int(doc.get("max_points", DEFAULT_MAX_POINTS))
    total = 0
    for i, block in enumerate(doc["models"]):
        grid, key = (block["grid"], f"models[{i}].grid") if "grid" in block else (doc.get("grid"), "grid")
        if grid is None:
            continue
        other = grid["mu"] if "mu" in grid else grid["mu_over_T"]
        n = _axis_length(grid["T"]) * _axis_length(other)
        total += n
        if total > cap:
            raise InputError(key, f"{_axis_length(grid['T'])} x {_axis_length(other)} points",
                             f"the scan would have more than max_points = {cap} grid points; "
                             "raise max_points in the config to allow it")


@dataclass(frozen=True)
class ModelPlan:
    """One model of a scan: the model, its solver settings and its (T, mu) points."""

    model: object
    settings: SolverSettings
    points: tuple
    points_per_job: int
    explicit_points_per_job: bool = False  # the model block gave its own points_per_job
    family: dict | None = None  # a family member: {"id": family id, "values": {key: value}}
    isentropes: tuple = ()  # values of s/rho whose paths the phase tables trace (scan/isentropes.py)


@dataclass(frozen=True)
class ScanConfig:
    scan: str
    models: tuple  # of ModelPlan
    points_per_job: int
    max_jobs: int
    raw: dict
    job_minutes: float | None = None  # size chunks from measured cost (see scan/sizing.py)

    @property
    def n_points(self) -> int:
        return sum(len(m.points) for m in self.models)

    def canonical_json(self) -> str:
        return json.dumps(self.raw, sort_keys=True, separators=(",", ":"), default=str)


def validate_scan_config(doc, schema: dict | None = None) -> ScanConfig:
    """Validate a parsed config document. Raises InputError on the first problem found."""
    if not isinstance(doc, dict):
        raise InputError("(top level)", doc, "the config must be a mapping of keys to values")
    validator = jsonschema.Draft202012Validator(schema or load_schema())
    err = jsonschema.exceptions.best_match(validator.iter_errors(doc))
    if err is not None:
        raise _schema_error(err)
    v.name(doc["scan"], "scan")
    _check_size(doc)
    default_solver = SolverSettings.from_block(doc.get("solver"), "solver")
    plans, seen = [], set()
    members = [(i, mb, fam) for i, block in enumerate(doc["models"]) for mb, fam in expand(block, f"models[{i}]")]
    for i, block, family in members:
        key = f"models[{i}]" + (f" (member {block['id']})" if family else "")
        model = model_from_block({k: x for k, x in block.items() if k not in SCAN_MODEL_KEYS}, key)
        if model.id in seen:
            raise InputError(f"{key}.id", model.id, "duplicate model id")
        seen.add(model.id)
        settings = (SolverSettings.from_block(block["solver"], f"{key}.solver") if "solver" in block
                    else default_solver)
        settings = resolve_method(model, settings, f"{key}.solver.method" if "solver" in block else "solver.method")
        if "grid" in block:
            pts = grid_points(block["grid"], f"{key}.grid")
        elif "grid" in doc:
            pts = grid_points(doc["grid"], "grid")
        else:
            raise InputError(f"{key}.grid", None, "no grid: give a top-level 'grid' or one in the model block")
        default = BATCHED_POINTS_PER_JOB if model.batched and model.shares_state(settings) else POINTS_PER_JOB
        plans.append(ModelPlan(model, settings, tuple(pts),
                               int(block.get("points_per_job", doc.get("points_per_job", default))),
                               "points_per_job" in block, family, _isentropes(block, key)))
    return ScanConfig(
        scan=doc["scan"],
        models=tuple(plans),
        points_per_job=int(doc.get("points_per_job", POINTS_PER_JOB)),
        max_jobs=int(doc.get("max_jobs", 1000)),
        raw=doc,
        job_minutes=float(doc["job_minutes"]) if "job_minutes" in doc else None,
    )


def _isentropes(block: dict, key: str) -> tuple:
    vals = block.get("isentropes", [])
    out = tuple(v.number(x, f"{key}.isentropes[{i}]") for i, x in enumerate(vals))
    for i, x in enumerate(out):
        if x == 0.0:
            raise InputError(f"{key}.isentropes[{i}]", x, "s/rho must be nonzero")
    return out


def read_scan_config(path, key: str = "--config") -> ScanConfig:
    from ..config import read_yaml

    return validate_scan_config(read_yaml(path, key))
