"""Model families: a model block with ``vary:`` stands for one model per member.

A block may carry two keys of its own (removed before the kind sees the block):

``params: {name: number, ...}``
    Named numbers that the kind's formulas (its ``formulas``, e.g. ``V`` and ``f`` of ``emd``) may
    use by name. Every name must be used by some formula. Each member's formulas are parsed with
    its values substituted (:func:`holoscan.expr.parse`) and written back as the canonical text of
    the substituted tree, so a member's spec, and hence its point keys, are those of the same model
    written out by hand.
``match: {landmark, value, unit}``
    Compare the members in one physical unit: see :mod:`holoscan.scan.landmarks`.
``vary: {key: values, ..., zip: {key: [values], ...}}``
    The keys to sweep: a name in ``params``, or a numeric key of the kind (``e_sq``, ``kappa_sq``,
    ``q``, ``m_sq``, ``energy_scale``, ...). Values as a grid axis: a list of numbers, or
    ``{min, max, num[, spacing: linear|log]}``. The members are the product of the axes; the lists
    under ``zip`` are paired (equal lengths) and enter the product as one axis.

A member's id is the family id followed by ``_<key><value>`` for each varied key in the order
given (``dl_g0.55_b0.7``; values in 6 significant digits, more where needed to keep members apart,
``+`` dropped), so it is safe in file names and Snakemake wildcards; when that is longer than 64
characters the values are replaced by a hash. Every problem is an
:class:`~holoscan.errors.InputError` naming the block, the member and the key, raised while the
config is validated, before any solve.
"""
from __future__ import annotations

import hashlib
import itertools
import json
import math
import re

from ..errors import InputError
from ..expr import check_param_name, names_used, parse
from ..kinds import kind_class
from .grid import axis_values, canon

FAMILY_KEYS = ("vary", "params", "match")
_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,63}")
MAX_MEMBERS = 1000


def _number(x, key: str) -> float:
    if isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x):
        raise InputError(key, x, "must be a finite number")
    return float(x)


def _params(block: dict, key: str) -> dict:
    raw = block.get("params", {})
    if not isinstance(raw, dict):
        raise InputError(f"{key}.params", raw, "must be a mapping of names to numbers")
    return {check_param_name(n, f"{key}.params"): _number(x, f"{key}.params.{n}") for n, x in raw.items()}


def _axes(block: dict, key: str) -> list[tuple[tuple[str, ...], list[tuple[float, ...]]]]:
    """The axes of ``vary``: (keys, rows of values), one key per axis except a ``zip`` group."""
    vary = block["vary"]
    if not isinstance(vary, dict) or not vary:
        raise InputError(f"{key}.vary", vary, "must be a non-empty mapping of keys to values")
    axes = []
    for k, spec in vary.items():
        if k == "zip":
            if not isinstance(spec, dict) or not spec:
                raise InputError(f"{key}.vary.zip", spec, "must map keys to lists of equal length")
            cols = {z: _in_order(s, f"{key}.vary.zip.{z}") for z, s in spec.items()}
            lengths = {len(c) for c in cols.values()}
            if len(lengths) != 1:
                raise InputError(f"{key}.vary.zip", {z: len(c) for z, c in cols.items()},
                                 "the paired lists must have equal lengths")
            axes.append((tuple(cols), list(zip(*cols.values()))))
        else:
            axes.append(((k,), [(x,) for x in axis_values(spec, f"{key}.vary.{k}")]))
    return axes


def _in_order(spec, key: str) -> list[float]:
    """A paired axis: a list keeps its order (the pairs are by position), a range is ascending."""
    if isinstance(spec, list):
        return [canon(_number(x, f"{key}[{i}]")) for i, x in enumerate(spec)]
    return axis_values(spec, key)


def _text(x: float, digits: int) -> str:
    t = format(x, f".{digits}g") if digits < 17 else repr(x)
    return t.replace("+", "")


def member_ids(family: str, keys: list[str], rows: list[tuple[float, ...]]) -> list[str]:
    """Ids of the members (see the module docstring): distinct, file-name and wildcard safe."""
    for digits in (6, 10, 17):
        ids = [family + "".join(f"_{k}{_text(x, digits)}" for k, x in zip(keys, row)) for row in rows]
        if len(set(ids)) == len(ids):
            break
    if any(len(i) > 64 or not _ID.fullmatch(i) for i in ids):
        ids = [f"{family[:40]}_{hashlib.sha256(json.dumps(row).encode()).hexdigest()[:12]}" for row in rows]
    return ids


def expand(block: dict, key: str) -> list[tuple[dict, dict | None]]:
    """The model blocks a config block stands for, each with its family record (None for a plain
    block): ``{"id": family id, "values": {key: value}}``."""
    if not isinstance(block, dict) or not any(k in block for k in FAMILY_KEYS):
        return [(block, None)]
    kind = kind_class(block.get("kind")) if isinstance(block.get("kind"), str) else None
    if kind is None:
        return [({k: x for k, x in block.items() if k not in FAMILY_KEYS}, None)]  # the kind check names it
    params = _params(block, key)
    formulas = tuple(f for f in getattr(kind, "formulas", ()) if isinstance(block.get(f), str))
    used = set()
    for f in formulas:
        used |= names_used(block[f], params, f"{key}.{f}")
    if params and not formulas:
        raise InputError(f"{key}.params", sorted(params), f"kind {block['kind']} has no formulas to use them")
    for n in params:
        if n not in used:
            raise InputError(f"{key}.params.{n}", params[n],
                             f"no formula uses it (formulas of kind {block['kind']}: {', '.join(formulas)})")
    base = {k: x for k, x in block.items() if k not in FAMILY_KEYS}
    if "match" in block and "vary" not in block:
        raise InputError(f"{key}.match", block["match"], "matching a scale needs a family (vary:)")
    if "vary" not in block:
        return [(_member(base, params, {}, formulas, key, base.get("id")), None)]
    axes = _axes(block, key)
    keys = [k for ks, _ in axes for k in ks]
    if len(set(keys)) != len(keys):
        raise InputError(f"{key}.vary", keys, "a key is varied twice")
    allowed = set(getattr(kind, "KEYS", ())) - {"id", "kind"}
    for k in keys:
        if k in params:
            continue
        if k not in allowed and k not in base:
            raise InputError(f"{key}.vary.{k}", block["vary"].get(k), f"kind {block['kind']} has no key {k!r} "
                             f"and params has no such name; numeric keys of the kind: {', '.join(sorted(allowed))}")
        if k in base and (isinstance(base[k], bool) or not isinstance(base[k], (int, float))):
            raise InputError(f"{key}.vary.{k}", base[k], "only numeric keys can be varied")
    match = _match(block, key)
    rows = [tuple(x for part in combo for x in part) for combo in itertools.product(*(r for _, r in axes))]
    if len(rows) > MAX_MEMBERS:
        raise InputError(f"{key}.vary", f"{len(rows)} members", f"a family has at most {MAX_MEMBERS} members")
    fid = base.get("id")
    if not isinstance(fid, str) or not _ID.fullmatch(fid):
        raise InputError(f"{key}.id", fid, "a family needs an id of letters, digits, '_', '.' or '-'")
    out = []
    for mid, row in zip(member_ids(fid, keys, rows), rows):
        values = dict(zip(keys, row))
        mb = dict(base, id=mid)
        for k, x in values.items():
            if k not in params:
                mb[k] = int(x) if isinstance(base.get(k), int) and float(x).is_integer() else x
        out.append((_member(mb, {**params, **{k: x for k, x in values.items() if k in params}}, values,
                            formulas, key, mid), {"id": fid, "values": values, **({"match": match} if match else {})}))
    return out


def _match(block: dict, key: str) -> dict | None:
    """The family's ``match: {landmark, value, unit}`` (see holoscan.scan.landmarks), checked."""
    from .landmarks import MATCHABLE

    m = block.get("match")
    if m is None:
        return None
    if not isinstance(m, dict) or set(m) != {"landmark", "value", "unit"}:
        raise InputError(f"{key}.match", m, "must be {landmark, value, unit}")
    if m["landmark"] not in MATCHABLE:
        raise InputError(f"{key}.match.landmark", m["landmark"], f"must be one of {', '.join(MATCHABLE)}")
    value = _number(m["value"], f"{key}.match.value")
    if not value > 0:
        raise InputError(f"{key}.match.value", m["value"], "must be > 0")
    if not isinstance(m["unit"], str) or not _ID.fullmatch(m["unit"]):
        raise InputError(f"{key}.match.unit", m["unit"], "must be a unit name such as MeV")
    return {"landmark": m["landmark"], "value": value, "unit": m["unit"]}


def _member(block: dict, params: dict, values: dict, formulas, key: str, mid) -> dict:
    """The member's block with its parameters substituted into the formulas."""
    where = f"{key} (member {mid})"
    out = dict(block)
    for f in formulas:
        out[f] = str(parse(block[f], f"{where}.{f}", params))
    return out
