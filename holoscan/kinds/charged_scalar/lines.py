"""The ``second-order`` line ``T_c(mu)`` of a ``charged-scalar`` model: the onset of a
normalisable static scalar zero mode on the normal brane, at every non-zero grid ``|mu|``
(config units)."""
from __future__ import annotations

import math
import time

from ...phases.lines import LinePoint, failed_point


def onset_line(model, settings, mus):
    rows = []
    for mu in mus:
        if mu == 0.0:
            continue
        t0 = time.perf_counter()
        try:
            on = model.onset(mu, settings)
        except (ArithmeticError, ValueError, RuntimeError) as exc:
            rows.append(failed_point(model.id, "second-order", "onset of a static scalar zero mode", math.nan, mu, exc, t0))
            continue
        rows.append(LinePoint(model.id, "second-order", on.get("method", "onset of a static scalar zero mode"),
                              on["T_c"], mu, T_err=abs(on["T_c"]) * on.get("error_estimate", math.nan),
                              status=on.get("status", "ok"), message=on.get("message", ""),
                              wall_time=time.perf_counter() - t0,
                              extra={"rho": on.get("rho"), "mu_over_T": on.get("mu_over_T")}))
    return rows
