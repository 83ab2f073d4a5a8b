"""Read a YAML config file into validated models and solver settings (for the command line).

The file is a mapping with a ``models:`` list of model blocks and an optional ``solver:`` block;
the scan config of the workflow extends this same format.
"""
from __future__ import annotations

from pathlib import Path

import yaml

from .errors import InputError
from .models import models_from_list
from .settings import SolverSettings


def read_yaml(path, key: str = "--config"):
    p = Path(path)
    if not p.is_file():
        raise InputError(key, str(path), "no such file")
    try:
        doc = yaml.safe_load(p.read_text())
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        raise InputError(key, str(path), f"not valid YAML{where}") from None
    if not isinstance(doc, dict):
        raise InputError(key, str(path), "must hold a mapping with a 'models' list")
    return doc


def load_models(doc: dict) -> tuple[dict, SolverSettings]:
    """Validated ``({id: model}, solver settings)`` from a parsed config document."""
    if "models" not in doc:
        raise InputError("models", None, "required key is missing")
    return models_from_list(doc["models"], "models"), SolverSettings.from_block(doc.get("solver"), "solver")


def pick_model(models: dict, model_id: str, key: str = "--model"):
    if model_id not in models:
        raise InputError(key, model_id, f"unknown model id; ids in the config: {', '.join(models)}")
    return models[model_id]
