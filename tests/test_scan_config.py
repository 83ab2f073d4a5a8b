"""Scan config validation: a bad config stops before any job, naming the key path and the bad value.

Where the expectations come from: every check in this file is the project's own documented config
contract (README "Command line" and "Models", ``workflow/schemas/config.schema.yaml``, the
``InputError`` docstring in ``holoscan/errors.py``, the rule in DEVELOPERS.md that bad input raises
only ``InputError`` before any work, and the documented scan keys) -- config contract
documented in README / schema (common practice, no source). The point counts of the positive test
are computed here independently with numpy from the grid spec in ``config/config.yaml``.

Contents:

1. ``CASES``: hand-written malformed configs, one kind of mistake each (``validate_scan_config``).
2. A hypothesis property over generated single mutations of a valid config.
3. ``python -m holoscan check`` on a few of the cases (one line on stderr, exit 2, no traceback).
4. One Snakemake run on a bad config: it stops at parse time, before any job.
5. The default config validates, with the point count computed independently.
6. Regression tests of bugs this file found (now fixed).
"""
from __future__ import annotations

import copy
import math
import os
import re
import shutil
import string
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from holoscan.errors import InputError
from holoscan.scan.config import validate_scan_config
from holoscan.settings import methods

REPO = Path(__file__).resolve().parents[1]
NAN, INF = float("nan"), float("inf")

# A valid scan config of the documented shape (kept here, not read from config/config.yaml, so that
# edits of the demo file do not move the key paths below): model 0 uses the top-level grid and
# solver, model 1 has its own grid (mu given as mu/T ratios) and its own solver block.
BASE = {
    "scan": "demo",
    "models": [
        {"id": "rn4-demo", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {
            "id": "rn3-demo", "kind": "rn", "d": 3, "kappa_sq": 1.2, "e_sq": 0.8,
            "solver": {"method": "shooting", "rtol": 1.0e-10},
            "grid": {
                "T": {"min": 0.05, "max": 1.0, "num": 10, "spacing": "log"},
                "mu_over_T": [0.0, 0.5, 1.0, 2.0, 4.0, 8.0],
            },
        },
    ],
    "grid": {
        "T": {"min": 0.05, "max": 2.0, "num": 60, "spacing": "log"},
        "mu": {"min": -3.0, "max": 3.0, "num": 61},
    },
    "solver": {"method": "auto"},
    "points_per_job": 400,
}


def test_base_config_is_valid():
    # The mutations below are only meaningful if the unmutated base passes (config contract).
    cfg = validate_scan_config(copy.deepcopy(BASE))
    assert cfg.scan == "demo" and [m.model.id for m in cfg.models] == ["rn4-demo", "rn3-demo"]


class Replace:
    """Returned by a mutation that replaces the whole document (by anything, even None)."""

    def __init__(self, doc):
        self.doc = doc


def mutated(mutation):
    """Deep copy of BASE with ``mutation(doc)`` applied in place (or replaced, see Replace)."""
    doc = copy.deepcopy(BASE)
    out = mutation(doc)
    return out.doc if isinstance(out, Replace) else doc


def at(doc, path):
    for p in path:
        doc = doc[p]
    return doc


def put(path, value):
    def mutation(doc):
        at(doc, path[:-1])[path[-1]] = value
    return mutation


def drop(path):
    def mutation(doc):
        del at(doc, path[:-1])[path[-1]]
    return mutation


def rename(path, new):
    def mutation(doc):
        parent = at(doc, path[:-1])
        parent[new] = parent.pop(path[-1])
    return mutation


def replace_doc(new):
    return lambda doc: Replace(new)


def chain(*mutations):
    def mutation(doc):
        for m in mutations:
            m(doc)
    return mutation


def grid_with(**axes):
    """A top-level grid made of the given axes (T from BASE unless given)."""
    return put(["grid"], {"T": copy.deepcopy(BASE["grid"]["T"]), **axes})


# ---------------------------------------------------------------------------------------------------
# 1. Hand-written malformed configs: (id, mutation, key path that must be named, bad value whose repr
#    must appear). Expectation for every row: config contract documented in README / schema (common
#    practice, no source) -- InputError, message "<key> = <value repr>: <reason>".
# ---------------------------------------------------------------------------------------------------
_BOTH_GRID = {**copy.deepcopy(BASE["grid"]), "mu_over_T": [0.0, 1.0]}
_NEITHER_GRID = {"T": copy.deepcopy(BASE["grid"]["T"])}
_OVERFLOW_GRID = {"T": copy.deepcopy(BASE["grid"]["T"]), "mu_over_T": [1e308]}
_M1_BOTH_GRID = {**copy.deepcopy(BASE["models"][1]["grid"]), "mu": [1.0]}

CASES = [
    # top level
    ("top-level-list", replace_doc(["scan", "demo"]), "(top level)", ["scan", "demo"]),
    ("top-level-string", replace_doc("scan: demo"), "(top level)", "scan: demo"),
    ("top-level-none", replace_doc(None), "(top level)", None),
    ("unknown-top-key-typo", rename(["points_per_job"], "point_per_job"), "point_per_job", 400),
    # scan name
    ("scan-missing", drop(["scan"]), "scan", None),
    ("scan-wrong-type", put(["scan"], 5), "scan", 5),
    ("scan-bad-name", put(["scan"], "my scan/1"), "scan", "my scan/1"),
    ("scan-empty", put(["scan"], ""), "scan", ""),
    # models list
    ("models-missing", drop(["models"]), "models", None),
    ("models-empty", put(["models"], []), "models", []),
    ("models-mapping", put(["models"], {"rn4-demo": {"d": 4}}), "models", {"rn4-demo": {"d": 4}}),
    ("model-not-mapping", put(["models", 1], "rn3-demo"), "models[1]", "rn3-demo"),
    # model blocks
    ("kind-unknown", put(["models", 0, "kind"], "kerr"), "models[0].kind", "kerr"),
    ("kind-not-string", put(["models", 0, "kind"], 3), "models[0].kind", 3),
    ("kind-missing", drop(["models", 0, "kind"]), "models[0].kind", None),
    ("d-below-3", put(["models", 0, "d"], 2), "models[0].d", 2),
    ("d-not-integer", put(["models", 1, "d"], 3.5), "models[1].d", 3.5),
    ("d-string", put(["models", 0, "d"], "four"), "models[0].d", "four"),
    ("d-bool", put(["models", 0, "d"], True), "models[0].d", True),
    ("kappa_sq-zero", put(["models", 0, "kappa_sq"], 0), "models[0].kappa_sq", 0),
    ("kappa_sq-negative", put(["models", 1, "kappa_sq"], -1.2), "models[1].kappa_sq", -1.2),
    ("e_sq-nan", put(["models", 0, "e_sq"], NAN), "models[0].e_sq", NAN),
    ("e_sq-inf", put(["models", 1, "e_sq"], INF), "models[1].e_sq", INF),
    ("e_sq-missing", drop(["models", 0, "e_sq"]), "models[0].e_sq", None),
    ("model-key-typo", rename(["models", 0, "kappa_sq"], "kapa_sq"), "models[0].kapa_sq", 0.5),
    ("model-id-duplicate", put(["models", 1, "id"], "rn4-demo"), "models[1].id", "rn4-demo"),
    ("model-id-bad-chars", put(["models", 0, "id"], "rn 4"), "models[0].id", "rn 4"),
    ("model-id-missing", drop(["models", 1, "id"]), "models[1].id", None),
    # grid axes
    ("spacing-unknown", put(["grid", "T", "spacing"], "logarithmic"), "grid.T.spacing", "logarithmic"),
    ("log-spacing-T-min-zero", put(["grid", "T", "min"], 0.0), "grid.T.min", 0.0),
    ("log-spacing-mu-min-negative",
     put(["models", 1, "grid", "mu_over_T"], {"min": -1.0, "max": 8.0, "num": 5, "spacing": "log"}),
     "models[1].grid.mu_over_T.min", -1.0),
    ("max-below-min", put(["grid", "mu", "max"], -4.0), "grid.mu.max", -4.0),
    ("num-zero", put(["grid", "T", "num"], 0), "grid.T.num", 0),
    ("num-not-integer", put(["grid", "mu", "num"], 2.5), "grid.mu.num", 2.5),
    ("num-string", put(["grid", "T", "num"], "60"), "grid.T.num", "60"),
    ("num-one-with-min-ne-max", put(["grid", "mu", "num"], 1), "grid.mu.num", 1),
    ("num-above-schema-max", put(["grid", "T", "num"], 100001), "grid.T.num", 100001),
    ("range-missing-num", drop(["grid", "T", "num"]), "grid.T.num", None),
    ("range-unknown-key", put(["grid", "T", "step"], 0.1), "grid.T.step", 0.1),
    ("range-bound-nan", put(["grid", "T", "max"], NAN), "grid.T.max", NAN),
    ("range-bound-inf", put(["grid", "mu", "min"], -INF), "grid.mu.min", -INF),
    ("both-mu-and-mu_over_T", put(["grid"], copy.deepcopy(_BOTH_GRID)), "grid", _BOTH_GRID),
    ("neither-mu-nor-mu_over_T", drop(["grid", "mu"]), "grid", _NEITHER_GRID),
    ("T-missing", drop(["grid", "T"]), "grid.T", None),
    ("T-list-negative", put(["grid", "T"], [0.1, -0.2, 0.3]), "grid.T[1]", -0.2),
    ("T-list-zero-per-model", put(["models", 1, "grid", "T"], [0.0, 0.5]), "models[1].grid.T[0]", 0.0),
    ("axis-empty-list", put(["grid", "T"], []), "grid.T", []),
    ("axis-string", put(["grid", "T"], "0.05..2"), "grid.T", "0.05..2"),
    ("axis-list-with-string", put(["grid", "mu"], [0.0, "one"]), "grid.mu[1]", "one"),
    ("axis-list-nan", put(["grid", "mu"], [0.0, NAN]), "grid.mu[1]", NAN),
    ("grid-unknown-axis", put(["grid", "Mu"], [1.0]), "grid.Mu", [1.0]),
    ("grid-not-mapping", put(["grid"], None), "grid", None),
    ("mu-from-ratio-overflows", put(["grid"], copy.deepcopy(_OVERFLOW_GRID)), "grid", _OVERFLOW_GRID),
    ("no-grid-anywhere", drop(["grid"]), "models[0].grid", None),
    # per-model grid errors carry the model's key path
    ("per-model-num-zero", put(["models", 1, "grid", "T", "num"], 0), "models[1].grid.T.num", 0),
    ("per-model-num-negative", put(["models", 1, "grid", "T", "num"], -3), "models[1].grid.T.num", -3),
    ("per-model-both-axes", put(["models", 1, "grid", "mu"], [1.0]), "models[1].grid", _M1_BOTH_GRID),
    ("per-model-ratio-inf", put(["models", 1, "grid", "mu_over_T", 2], INF),
     "models[1].grid.mu_over_T[2]", INF),
    # solver blocks
    ("solver-method-unknown", put(["solver", "method"], "rk4"), "solver.method", "rk4"),
    ("per-model-solver-method", put(["models", 1, "solver", "method"], "euler"),
     "models[1].solver.method", "euler"),
    ("rtol-zero", put(["solver", "rtol"], 0), "solver.rtol", 0),
    ("rtol-too-large", put(["solver", "rtol"], 0.5), "solver.rtol", 0.5),
    ("rtol-below-double-precision", put(["models", 1, "solver", "rtol"], 1e-15),
     "models[1].solver.rtol", 1e-15),
    ("rtol-nan", put(["models", 1, "solver", "rtol"], NAN), "models[1].solver.rtol", NAN),
    ("accept_error-negative", put(["solver", "accept_error"], -1e-8), "solver.accept_error", -1e-8),
    ("solver-unknown-key", put(["solver", "atol"], 1e-12), "solver.atol", 1e-12),
    ("solver-not-mapping", put(["solver"], "shooting"), "solver", "shooting"),
    # job sizing
    ("points_per_job-zero", put(["points_per_job"], 0), "points_per_job", 0),
    ("points_per_job-string", put(["points_per_job"], "400"), "points_per_job", "400"),
    ("points_per_job-fraction", put(["points_per_job"], 2.5), "points_per_job", 2.5),
    ("max_jobs-negative", put(["max_jobs"], -5), "max_jobs", -5),
    ("max_jobs-too-large", put(["max_jobs"], 10**9), "max_jobs", 10**9),
]


def test_cases_are_distinct_and_enough():
    # At least 25 kinds of malformed config are covered.
    ids = [c[0] for c in CASES]
    assert len(ids) == len(set(ids)) >= 25


@pytest.mark.parametrize("mutation,key,value", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_malformed_config_names_key_and_value(mutation, key, value):
    # config contract documented in README / schema (common practice, no source)
    doc = mutated(mutation)
    with pytest.raises(InputError) as ei:
        validate_scan_config(doc)
    msg = str(ei.value)
    assert ei.value.key == key, msg
    assert msg.startswith(f"{key} = "), msg
    assert repr(value) in msg, msg
    assert ei.value.reason and msg.endswith(ei.value.reason)


# ---------------------------------------------------------------------------------------------------
# 2. Generated malformed configs. One mutation of BASE per example:
#    - replace a leaf by a wrong-typed or out-of-range value,
#    - replace a block or list by a value of the wrong type,
#    - delete a required key,
#    - insert an unknown key into any mapping.
#    Property (config contract, common practice, no source): InputError and nothing else; its key is
#    prefix-compatible with the mutated path; the bad value's repr is in the message.
# ---------------------------------------------------------------------------------------------------
NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")  # schema pattern of scan and model ids
METHODS = methods()  # every method of a registered kind (the registry is the one list)


def _floatlike(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


# Non-numeric text: numeric strings such as "0.5" are accepted for model parameters on purpose
# (holoscan.validate.number), so they are not malformed there.
junk_text = st.text(max_size=16).filter(lambda s: not _floatlike(s))
non_finite = st.sampled_from([NAN, INF, -INF])
fraction = st.floats(allow_nan=False, allow_infinity=False).filter(lambda x: not x.is_integer())
small_list = st.lists(st.integers(-5, 5), max_size=3)
small_dict = st.dictionaries(st.sampled_from(["a", "b"]), st.integers(0, 3), max_size=2)
not_a_number = st.one_of(st.none(), st.booleans(), junk_text, small_list, small_dict)
BIG = 10**12  # bounded: integers beyond float range are a known bug, see section 6


def _ints_outside(lo, hi):
    return st.one_of(st.integers(-BIG, lo - 1), st.integers(hi + 1, BIG))


def bad_value(cls):
    """Values that break leaf class ``cls`` on their own (no sibling involved)."""
    kind = cls[0]
    if kind == "pos":  # finite and > 0
        return st.one_of(not_a_number, non_finite, st.integers(-BIG, 0),
                         st.floats(max_value=0.0, allow_nan=False, allow_infinity=False))
    if kind == "below":  # finite, >= cls[1] (the max of a range whose min is cls[1]), and > 0 if cls[2]
        return st.one_of(not_a_number, non_finite,
                         st.floats(max_value=cls[1], exclude_max=True, allow_nan=False,
                                   allow_infinity=False))
    if kind == "any":  # any finite number
        return st.one_of(not_a_number, non_finite)
    if kind == "int":  # integer in [cls[1], cls[2]]
        return st.one_of(not_a_number, non_finite, fraction, _ints_outside(cls[1], cls[2]))
    if kind == "tol":  # number in (0, cls[1]]; rtol also >= 1e-13
        out = [not_a_number, non_finite, st.integers(-BIG, 0),
               st.floats(max_value=0.0, allow_nan=False, allow_infinity=False),
               st.floats(min_value=cls[1], exclude_min=True, allow_nan=False, allow_infinity=False)]
        if cls[2]:
            out.append(st.floats(min_value=0.0, max_value=1e-13, exclude_min=True, exclude_max=True))
        return st.one_of(*out)
    if kind == "enum":  # one of cls[1]
        return st.one_of(st.none(), st.booleans(), st.integers(-5, 5), small_list,
                         st.text(max_size=16).filter(lambda s: s not in cls[1]))
    if kind == "name":  # schema name pattern; jsonschema matches with re.search (see section 6)
        return st.one_of(st.none(), st.booleans(), st.integers(-5, 5), small_list,
                         st.text(max_size=80).filter(lambda s: NAME_RE.search(s) is None))
    raise AssertionError(cls)


def _model_leaves(i):
    m = ("models", i)
    return [(m + ("id",), ("name",)), (m + ("kind",), ("enum", ("rn",))),
            (m + ("d",), ("int", 3, 12)), (m + ("kappa_sq",), ("pos",)), (m + ("e_sq",), ("pos",))]


def _range_leaves(p, max_class):
    return [(p + ("min",), ("pos",) if max_class[0] == "below" and max_class[2] else ("any",)),
            (p + ("max",), max_class),
            (p + ("num",), ("int", 2, 100000)),  # num 1 is invalid too: min != max in BASE
            (p + ("spacing",), ("enum", ("linear", "log")))]


# (path, leaf class); paths absent from BASE are added by the mutation (optional keys).
LEAVES = (
    [(("scan",), ("name",)), (("points_per_job",), ("int", 1, 10**6)), (("max_jobs",), ("int", 1, 10**5)),
     (("solver", "method"), ("enum", METHODS)), (("solver", "rtol"), ("tol", 0.01, True)),
     (("solver", "horizon_offset"), ("tol", 0.01, False)), (("solver", "accept_error"), ("tol", 0.1, False)),
     (("solver", "fd_step"), ("tol", 0.1, False)),
     (("models", 1, "solver", "method"), ("enum", METHODS)),
     (("models", 1, "solver", "rtol"), ("tol", 0.01, True))]
    + _model_leaves(0) + _model_leaves(1)
    + _range_leaves(("grid", "T"), ("below", 0.05, True))
    + _range_leaves(("grid", "mu"), ("below", -3.0, False))
    + _range_leaves(("models", 1, "grid", "T"), ("below", 0.05, True))
    + [(("models", 1, "grid", "mu_over_T", j), ("any",)) for j in range(6)]
)
DICT_BLOCKS = [("models", 0), ("models", 1), ("models", 1, "grid"), ("models", 1, "grid", "T"),
               ("models", 1, "solver"), ("grid",), ("grid", "T"), ("grid", "mu"), ("solver",)]
LIST_BLOCKS = [("models",), ("models", 1, "grid", "mu_over_T")]
REQUIRED = (
    [("scan",), ("models",), ("grid", "T"), ("grid", "mu"),
     ("models", 1, "grid", "T"), ("models", 1, "grid", "mu_over_T")]
    + [("models", i, k) for i in (0, 1) for k in ("id", "kind", "d", "kappa_sq", "e_sq")]
    + [p + (k,) for p in (("grid", "T"), ("grid", "mu"), ("models", 1, "grid", "T"))
       for k in ("min", "max", "num")]
)
_MODEL_KEYS = {"id", "kind", "d", "kappa_sq", "e_sq", "grid", "solver"}
_SOLVER_KEYS = {"method", "rtol", "horizon_offset", "accept_error", "fd_step"}
_RANGE_KEYS = {"min", "max", "num", "spacing"}
_GRID_KEYS = {"T", "mu", "mu_over_T"}
MAPPINGS = {
    (): {"scan", "models", "grid", "solver", "points_per_job", "max_jobs"},
    ("models", 0): _MODEL_KEYS, ("models", 1): _MODEL_KEYS,
    ("models", 1, "grid"): _GRID_KEYS, ("models", 1, "grid", "T"): _RANGE_KEYS,
    ("models", 1, "solver"): _SOLVER_KEYS, ("grid",): _GRID_KEYS, ("grid", "T"): _RANGE_KEYS,
    ("grid", "mu"): _RANGE_KEYS, ("solver",): _SOLVER_KEYS,
}
key_text = st.text(alphabet=string.ascii_letters + string.digits + "_-", min_size=1, max_size=12)


@st.composite
def mutations(draw):
    """(action, path, value): one malformed change of BASE."""
    action = draw(st.sampled_from(["leaf", "block", "delete", "unknown"]))
    if action == "leaf":
        path, cls = draw(st.sampled_from(LEAVES))
        return action, path, draw(bad_value(cls))
    if action == "block":
        path, is_dict = draw(st.sampled_from([(p, True) for p in DICT_BLOCKS] + [(p, False) for p in LIST_BLOCKS]))
        scalar = st.one_of(st.none(), st.booleans(), st.integers(-5, 5),
                           st.floats(allow_infinity=True, allow_nan=True), junk_text)
        return action, path, draw(st.one_of(scalar, st.just([] if is_dict else {})))
    if action == "delete":
        return action, draw(st.sampled_from(REQUIRED)), None
    parent = draw(st.sampled_from(sorted(MAPPINGS, key=len)))
    name = draw(key_text.filter(lambda k: k not in MAPPINGS[parent]))
    return action, parent + (name,), draw(st.one_of(st.integers(-5, 5), junk_text, st.none()))


def fmt_path(path) -> str:
    """Key path in the documented form, e.g. models[1].grid.T.num."""
    out = ""
    for p in path:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out


def prefix_compatible(a: str, b: str) -> bool:
    """One key path is the other or an ancestor of it (models[1].grid is an ancestor of models[1].grid.T)."""
    short, long_ = sorted((a, b), key=len)
    return long_ == short or (long_.startswith(short) and long_[len(short)] in ".[")


@settings(max_examples=150, deadline=None, database=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutations())
def test_generated_malformed_config_raises_input_error(mut):
    # config contract documented in README / schema (common practice, no source)
    action, path, value = mut
    doc = copy.deepcopy(BASE)
    if action == "delete":
        del at(doc, path[:-1])[path[-1]]
    else:
        at(doc, path[:-1])[path[-1]] = value
    with pytest.raises(InputError) as ei:  # any other exception type propagates and fails the test
        validate_scan_config(doc)
    exc, msg, where = ei.value, str(ei.value), fmt_path(path)
    assert isinstance(exc.key, str) and msg.startswith(f"{exc.key} = "), msg
    assert str(path[0]) in msg, (where, msg)  # at least the top-level key of the mutation
    assert prefix_compatible(exc.key, where), (where, msg)
    if action != "delete" and len(exc.key) <= len(where):
        # the error is at the mutated key or at an ancestor whose value contains the bad value
        assert repr(value) in msg, (where, msg)


def test_prefix_compatible_helper():
    # self-check of the comparison used above (so the property cannot pass vacuously)
    assert prefix_compatible("models[1].grid", "models[1].grid.T.num")
    assert prefix_compatible("grid.T[3]", "grid.T")
    assert not prefix_compatible("grid.T", "grid.Tx")
    assert not prefix_compatible("grid.T.min", "grid.T.max")
    assert not prefix_compatible("models[1]", "models[10]")
    assert fmt_path(("models", 1, "grid", "T", "num")) == "models[1].grid.T.num"


# ---------------------------------------------------------------------------------------------------
# 3. The command line: one line "holoscan: error: <key> = <value>: <reason>" on stderr, exit 2
#    (README "Command line"; config contract, common practice, no source).
# ---------------------------------------------------------------------------------------------------
CLI_CASES = ["scan-bad-name", "d-below-3", "e_sq-nan", "log-spacing-T-min-zero",
             "per-model-num-zero", "rtol-too-large", "points_per_job-string"]
_BY_ID = {c[0]: c[1:] for c in CASES}


def _run(args, cwd, timeout):
    return subprocess.run(args, capture_output=True, text=True, timeout=timeout, cwd=cwd,
                          env={**os.environ, "PYTHONHASHSEED": "0"})


@pytest.mark.workflow
@pytest.mark.parametrize("case", CLI_CASES)
def test_cli_check_bad_config(tmp_path, case):
    mutation, key, value = _BY_ID[case]
    cfg = tmp_path / "scan.yaml"
    cfg.write_text(yaml.safe_dump(mutated(mutation), sort_keys=False))
    out = _run([sys.executable, "-m", "holoscan", "check", "--config", str(cfg)], tmp_path, 60)
    assert out.returncode == 2, out.stderr
    assert "Traceback" not in out.stderr + out.stdout
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1, out.stderr
    assert lines[0].startswith(f"holoscan: error: {key} = {value!r}: "), out.stderr
    assert out.stdout == ""


# ---------------------------------------------------------------------------------------------------
# 4. Snakemake: a bad config stops at parse time, before any job.
# ---------------------------------------------------------------------------------------------------
@pytest.mark.workflow
def test_snakemake_stops_before_any_job(tmp_path):
    shutil.copy(REPO / "Snakefile", tmp_path / "Snakefile")
    shutil.copytree(REPO / "workflow", tmp_path / "workflow")
    (tmp_path / "config").mkdir()
    doc = mutated(put(["models", 1, "grid", "T", "num"], 0))
    (tmp_path / "config" / "config.yaml").write_text(yaml.safe_dump(doc, sort_keys=False))
    out = _run([sys.executable, "-m", "snakemake", "--cores", "1", "-d", str(tmp_path)], tmp_path, 120)
    text = out.stdout + out.stderr
    assert out.returncode != 0, text
    assert "Traceback" not in text
    assert "holoscan: invalid config: models[1].grid.T.num = 0: " in text, text
    assert not (tmp_path / "results" / "demo" / "segments").exists()
    assert not (tmp_path / "results" / "demo" / "plan").exists()  # not even a chunk manifest
    assert not (tmp_path / "logs").exists()


# ---------------------------------------------------------------------------------------------------
# 5. The default config validates; its points are computed here independently with numpy.
# ---------------------------------------------------------------------------------------------------
def _axis(spec) -> np.ndarray:
    """Distinct values of one axis spec (README / schema: {min, max, num, spacing} or a list)."""
    if isinstance(spec, list):
        return np.unique(np.asarray(spec, dtype=float))
    num, lo, hi = spec["num"], spec["min"], spec["max"]
    t = np.arange(num) / max(num - 1, 1)
    if spec.get("spacing", "linear") == "log":
        vals = np.exp(math.log(lo) + (math.log(hi) - math.log(lo)) * t)  # equal ratios
    else:
        vals = lo + (hi - lo) * t  # equal steps
    return np.unique(vals)


@pytest.mark.workflow
def test_default_config_validates_with_independent_point_count(tmp_path):
    doc = yaml.safe_load((REPO / "config" / "config.yaml").read_text())
    cfg = validate_scan_config(copy.deepcopy(doc))
    total = 0
    assert [m.model.id for m in cfg.models] == [b["id"] for b in doc["models"]]
    for block, plan in zip(doc["models"], cfg.models):
        grid = block.get("grid", doc.get("grid"))
        Ts = _axis(grid["T"])
        other = _axis(grid["mu"] if "mu" in grid else grid["mu_over_T"])
        n = len(Ts) * len(other)  # Cartesian product; distinct T and distinct mu (or mu/T) values
        assert len(plan.points) == n, (block["id"], len(plan.points), n)
        got_T = np.unique([p[0] for p in plan.points])
        np.testing.assert_allclose(got_T, Ts, rtol=1e-11)
        mus = np.array([p[1] for p in plan.points])
        if "mu" in grid:
            np.testing.assert_allclose(np.unique(mus), other, rtol=1e-11, atol=1e-12)
        else:  # mu = (mu/T) * T at each T
            expect = np.sort(np.array([r * T for T in Ts for r in other]))
            np.testing.assert_allclose(np.sort(mus), expect, rtol=1e-11, atol=1e-12)
        total += n
    assert cfg.n_points == total
    # and the command line reports the same count
    out = _run([sys.executable, "-m", "holoscan", "check", "--config", str(REPO / "config" / "config.yaml")],
               tmp_path, 60)
    assert out.returncode == 0, out.stderr
    assert f"{total} grid point(s)" in out.stdout, out.stdout


# ---------------------------------------------------------------------------------------------------
# 6. Fixed bugs: regressions of bugs found by this file and fixed (huge integers,
#    unknown keys of mixed types, names with a trailing newline, non-string key paths).
# ---------------------------------------------------------------------------------------------------
_HUGE = 10**400  # an integer literal beyond float range; YAML reads "1000...0" as such an int


@pytest.mark.parametrize("path,key", [
    (["models", 0, "kappa_sq"], "models[0].kappa_sq"),
    (["models", 1, "e_sq"], "models[1].e_sq"),
    (["grid", "T", "max"], "grid.T.max"),
    (["models", 1, "grid", "mu_over_T", 1], "models[1].grid.mu_over_T[1]"),
])
def test_regression_integer_beyond_float_range(path, key):
    with pytest.raises(InputError) as ei:
        validate_scan_config(mutated(put(path, _HUGE)))
    assert ei.value.key == key


@pytest.mark.parametrize("path", [[], ["grid", "T"]])
def test_regression_unknown_keys_of_mixed_types(path):
    def mutation(doc):
        at(doc, path).update({1: "x", "foo": 2})
    with pytest.raises(InputError) as ei:
        validate_scan_config(mutated(mutation))
    assert ei.value.key in {fmt_path([*path, "1"]), fmt_path([*path, "foo"])}  # a mapping key, not an index


@pytest.mark.parametrize("path,key", [(["scan"], "scan"), (["models", 0, "id"], "models[0].id")])
def test_regression_name_with_trailing_newline(path, key):
    bad = "demo\n"
    with pytest.raises(InputError) as ei:
        validate_scan_config(mutated(put(path, bad)))
    assert ei.value.key == key and repr(bad) in str(ei.value)


def test_regression_top_level_non_string_key_path_type():
    with pytest.raises(InputError) as ei:
        validate_scan_config(mutated(put([7], "x")))
    assert isinstance(ei.value.key, str) and ei.value.key == "7"


@pytest.mark.workflow
def test_regression_cli_traceback_on_huge_integer(tmp_path):
    cfg = tmp_path / "scan.yaml"
    cfg.write_text(yaml.safe_dump(mutated(put(["models", 0, "kappa_sq"], _HUGE)), sort_keys=False))
    out = _run([sys.executable, "-m", "holoscan", "check", "--config", str(cfg)], tmp_path, 60)
    assert "Traceback" not in out.stderr, out.stderr[-300:]
    assert out.returncode == 2 and "models[0].kappa_sq" in out.stderr
