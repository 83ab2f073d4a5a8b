"""A model's shared state (the emd atlas built once per scan and adopted by every chunk job) changes
no number, only the time: rows solved after adopting it equal, bit for bit, rows solved from
scratch (common practice, no source: a cache must be invisible in the results). The one-charge
black hole's rows are also checked against its closed form (Gubser 1998, arXiv:hep-th/9810126;
Cvetic & Gubser 1999, JHEP 04, 024), so the adopted atlas gives right numbers, not only equal ones.
"""
from __future__ import annotations

import io
import math

import numpy as np
import pytest
from reference import onecharge as oc

from holoscan.kinds import model_from_block
from holoscan.numerics.memo import clear_all
from holoscan.point import resolve_method, solve_points
from holoscan.settings import SolverSettings

ONECHARGE = {"id": "oc", "kind": "emd", "kappa_sq": 1.0, "V": "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))",
             "f": "exp(-4*phi/sqrt(6))", "source": False}
FIELDS = ("s", "rho", "P", "epsilon", "chi2", "cs2", "error_estimate", "status", "branch", "message")


def _rows(model, targets, settings):
    return [tuple(getattr(r, f) for f in FIELDS) for rs in solve_points(model, targets, settings) for r in rs]


def test_adopted_atlas_gives_the_same_rows_bit_for_bit():
    m = model_from_block(ONECHARGE)
    st = resolve_method(m, SolverSettings())
    scan = [(float(T), float(x * T)) for T in np.linspace(0.5, 1.5, 4) for x in np.linspace(0.0, 1.9, 4)]
    chunk = scan[5:11]
    clear_all()
    fresh = _rows(m, chunk, st)
    clear_all()
    state = m.shared_state(scan, st)        # built for the whole scan, as the build_state job does
    buf = io.BytesIO()
    np.savez(buf, **state)                  # through the file format the workflow uses
    buf.seek(0)
    with np.load(buf) as z:
        loaded = {k: z[k] for k in z.files}
    clear_all()                             # a new job: nothing built yet
    m.adopt_shared_state(loaded, st)
    adopted = _rows(m, chunk, st)
    assert adopted == fresh
    # and right: the stable branch of every target against the closed form
    for (T, mu), rs in zip(chunk, solve_points(m, chunk, st)):
        ref = max(oc.points(T, mu), key=lambda p: p["s"])
        r = max(rs, key=lambda r: r.s)
        assert r.status == "ok"
        assert abs(r.s - ref["s"]) / ref["s"] < 1e-8


def test_a_state_for_other_settings_is_refused():
    m = model_from_block(ONECHARGE)
    st = resolve_method(m, SolverSettings())
    clear_all()
    state = m.shared_state([(1.0, 0.5)], st)
    other = resolve_method(m, SolverSettings(rtol=1e-9))
    with pytest.raises(ValueError, match="other settings"):
        m.adopt_shared_state(state, other)
    assert math.isfinite(float(state["leaf_coeffs"].sum()))
