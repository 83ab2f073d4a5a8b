"""Read a YAML config file into validated models and solver settings (for the command line).

The file is a mapping with a ``models:`` list of model blocks and an optional ``solver:`` block;
the scan config of the workflow extends this same format.
"""
from __future__ import annotations

import re
from pathlib import Path

import yaml

from .errors import InputError
from .kinds import models_from_list
from .settings import SolverSettings

#: largest config file read (bytes): a scan config is a few kilobytes; a bigger file is refused
#: before it is parsed
MAX_CONFIG_BYTES = 1 << 20

_FLOAT = re.compile(r"^[-+]?(?:[0-9][0-9_]*(?:\.[0-9_]*)?|\.[0-9_]+)(?:[eE][-+]?[0-9]+)?$"
                    r"|^[-+]?\.(?:inf|Inf|INF)$|^\.(?:nan|NaN|NAN)$")


class _ConfigLoader(yaml.SafeLoader):
    """PyYAML's safe loader with two changes: anchors and aliases are refused (a config needs none,
    and nested aliases expand to billions of nodes once validated), and numbers with an exponent
    read as floats as in YAML 1.2 (``1e-5``, ``1.0e100``), not as text as in YAML 1.1."""

    def compose_node(self, parent, index):
        if self.check_event(yaml.events.AliasEvent):
            event = self.peek_event()
            raise _AliasRefused(event.start_mark)
        event = self.peek_event()
        if getattr(event, "anchor", None):
            raise _AliasRefused(event.start_mark)
        return super().compose_node(parent, index)


class _AliasRefused(Exception):
    def __init__(self, mark):
        self.mark = mark


_ConfigLoader.yaml_implicit_resolvers = {k: list(v) for k, v in yaml.SafeLoader.yaml_implicit_resolvers.items()}
for _first in list("-+0123456789."):
    _ConfigLoader.yaml_implicit_resolvers[_first] = [
        (tag, rx) for tag, rx in _ConfigLoader.yaml_implicit_resolvers.get(_first, []) if tag != "tag:yaml.org,2002:float"]
    _ConfigLoader.yaml_implicit_resolvers[_first].append(("tag:yaml.org,2002:float", _FLOAT))
    # an integer wins over a float for plain digits: keep int first
    _ConfigLoader.yaml_implicit_resolvers[_first].sort(key=lambda r: r[0] != "tag:yaml.org,2002:int")


def parse_yaml_text(data: bytes, key: str, source: str):
    """Parse config bytes with the rules of :func:`read_yaml`; ``source`` names them in errors."""
    if len(data) > MAX_CONFIG_BYTES:
        raise InputError(key, source, f"is {len(data)} bytes; a config is at most {MAX_CONFIG_BYTES} bytes")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(key, source, f"is not UTF-8 text (byte {exc.start} is 0x{data[exc.start]:02x})") from None
    try:
        return yaml.load(text, Loader=_ConfigLoader)  # a safe loader subclass
    except _AliasRefused as exc:
        raise InputError(key, source, f"uses a YAML anchor or alias at line {exc.mark.line + 1}; "
                         "write each value out (anchors and aliases are not accepted)") from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        raise InputError(key, source, f"not valid YAML{where}") from None


def read_yaml(path, key: str = "--config"):
    """Read one config file: at most MAX_CONFIG_BYTES, UTF-8, YAML without anchors or aliases,
    exponent numbers as floats. The same rules hold for ``holoscan check``, ``holoscan point`` and
    the workflow, so one file is judged the same way everywhere."""
    p = Path(path)
    if not p.is_file():
        raise InputError(key, str(path), "no such file")
    size = p.stat().st_size
    if size > MAX_CONFIG_BYTES:
        raise InputError(key, str(path), f"is {size} bytes; a config is at most {MAX_CONFIG_BYTES} bytes")
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise InputError(key, str(path), f"cannot be read: {exc.strerror}") from None
    doc = parse_yaml_text(data, key, str(path))
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
