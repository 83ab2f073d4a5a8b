"""Arrow schema of the phase-diagram tables, with each column's unit and meaning in field metadata.

File-level metadata: one namespaced, versioned JSON key ``holoscan`` (see :func:`file_metadata`).
"""
from __future__ import annotations

import json
import math

import pyarrow as pa

SCHEMA_VERSION = "1.4"
META_KEY = b"holoscan"

F64, I64, STR = pa.float64(), pa.int64(), pa.string()

#: (name, type, unit, meaning). Units: L = 1 and the boundary energy unit E; d = boundary dimension.
COLUMNS = [
    ("model_id", STR, "", "model id from the config"),
    ("kind", STR, "", "model kind"),
    ("d", I64, "", "boundary spacetime dimension (bulk AdS_{d+1})"),
    ("branch", I64, "", "solution branch index at this (T, mu), 0 first"),
    ("T", F64, "E", "temperature"),
    ("mu", F64, "E", "chemical potential, A_t(boundary) - A_t(horizon)"),
    ("s", F64, "E^(d-1)", "entropy density"),
    ("rho", F64, "E^(d-1)", "charge density dP/dmu at fixed T"),
    ("epsilon", F64, "E^d", "energy density"),
    ("P", F64, "E^d", "pressure"),
    ("Omega", F64, "E^d", "grand potential density, -P"),
    ("chi2", F64, "E^(d-2)", "charge susceptibility d rho/d mu at fixed T"),
    ("cs2", F64, "1", "speed of sound squared, dP/d epsilon at fixed s/rho"),
    ("P_check", F64, "E^d", "pressure by a second independent route (per model kind)"),
    ("P_mismatch", F64, "1", "|P - P_check| / |P|: disagreement of the two pressure routes"),
    ("trace_anomaly", F64, "1", "(epsilon - (d-1) P) / T^d"),
    ("stability", STR, "", "stable (Hessian of P in (T, mu) positive definite) or unstable"),
    ("phase", STR, "", "phase label of this branch (normal, condensed, unique, high-entropy, intermediate, low-entropy)"),
    ("phase_flag", STR, "",
     "stable (dominant: lowest Omega among locally stable branches) | metastable | unstable | unknown"),
    ("dominant", pa.bool_(), "", "true for the dominant branch at this (T, mu)"),
    ("s_hat", F64, "1", "s / T^(d-1)"),
    ("rho_hat", F64, "1", "rho / T^(d-1)"),
    ("P_hat", F64, "1", "P / T^d"),
    ("chi2_hat", F64, "1", "chi2 / T^(d-2)"),
    ("chi3", F64, "E^(d-3)", "third cumulant d^2 rho/d mu^2 at fixed T (null: not computed for this kind)"),
    ("chi4", F64, "E^(d-4)", "fourth cumulant d^3 rho/d mu^3 at fixed T (null: not computed for this kind)"),
    ("chi3_err", F64, "E^(d-3)", "bound on the absolute error of chi3 (not part of error_estimate)"),
    ("chi4_err", F64, "E^(d-4)", "bound on the absolute error of chi4 (not part of error_estimate)"),
    ("kurtosis_ratio", F64, "E^(-2)", "chi4 / chi2"),
    ("sigma", F64, "E^(d-3)", "charge conductivity finite at nonzero density: horizon value times (sT/(epsilon+P))^2"),
    ("eta_over_s", F64, "1", "shear viscosity over entropy density (1/(4 pi) for these two-derivative actions)"),
    ("D_charge", F64, "E^(-1)", "charge diffusion constant sigma / chi2 (Einstein relation)"),
    ("status", STR, "", "ok | not converged | failed | no solution | out of range"),
    ("message", STR, "", "reason for the status, in words"),
    ("method", STR, "", "solution method"),
    ("rtol", F64, "1", "relative tolerance of the ODE integration"),
    ("atol", F64, "1", "absolute tolerance of the ODE integration"),
    ("accept_error", F64, "1", "bar on error_estimate and residual for status ok"),
    ("nfev", I64, "", "right-hand-side evaluations"),
    ("nsteps", I64, "", "integrator steps"),
    ("niter", I64, "", "root-finder iterations"),
    ("residual", F64, "1", "largest relative violation of the Einstein constraint"),
    ("error_estimate", F64, "1", "largest relative change of s, rho, epsilon, P at 100x tighter tolerances"),
    ("wall_time", F64, "s", "time spent solving this point"),
    ("extra", STR, "", "method-specific diagnostics, JSON"),
    ("point_key", STR, "", "hash of model spec, solver settings, code hash, T, mu"),
    ("chunk_id", STR, "", "chunk (job) that solved this point"),
    ("code_hash", STR, "", "hash of the holoscan physics sources that produced the row"),
    ("package_version", STR, "", "holoscan version"),
    ("host", STR, "", "host name of the machine that solved the point"),
    ("start_time", STR, "ISO 8601 UTC", "when the solve of this point started"),
    ("end_time", STR, "ISO 8601 UTC", "when the solve of this point ended"),
    ("log_file", STR, "", "log file of the job that solved this point"),
]

#: columns whose values are physics: identical, bit for bit, for the same config and code
PHYSICS_COLUMNS = ["model_id", "kind", "d", "branch", "T", "mu", "s", "rho", "epsilon", "P", "Omega",
                   "chi2", "cs2", "chi3", "chi4", "chi3_err", "chi4_err", "sigma", "eta_over_s",
                   "P_check", "trace_anomaly", "stability", "phase", "phase_flag", "dominant",
                   "s_hat", "rho_hat", "P_hat", "chi2_hat", "status", "method",
                   "error_estimate", "residual", "point_key"]


def make_schema(columns, file_meta: dict | None = None) -> pa.Schema:
    """Arrow schema of ``columns`` ((name, type, unit, meaning) tuples) with the file metadata key."""
    fields = [pa.field(n, t, metadata={"unit": u, "description": m}) for n, t, u, m in columns]
    meta = {META_KEY: json.dumps(file_meta, sort_keys=True, default=str).encode()} if file_meta else None
    return pa.schema(fields, metadata=meta)


def schema(file_meta: dict | None = None, families: dict | None = None) -> pa.Schema:
    """Schema of the points table; with ``families`` (model id -> family record, see
    :func:`family_columns`) the family columns are appended."""
    return make_schema(COLUMNS + family_columns(families), file_meta)


def family_columns(families: dict | None) -> list:
    """The columns a scan with model families adds to its tables: ``family`` (the family id, null
    outside families) and ``vary_<key>`` for each key varied by some family (null elsewhere)."""
    records = [f for f in (families or {}).values() if f]
    if not records:
        return []
    keys = sorted({k for f in records for k in f["values"]})
    return [("family", STR, "", "id of the model family this model is a member of (null: not a member)")] + [
        (f"vary_{k}", F64, "as the key", f"value of {k} for this family member") for k in keys]


def family_arrays(model_ids: list, families: dict) -> dict:
    """The family columns' values for rows of these model ids (see :func:`family_columns`)."""
    cols = family_columns(families)
    out = {}
    for name, typ, _, _ in cols:
        if name == "family":
            vals = [(families.get(m) or {}).get("id") for m in model_ids]
        else:
            k = name[len("vary_"):]
            vals = [((families.get(m) or {}).get("values") or {}).get(k) for m in model_ids]
        out[name] = pa.array(vals, typ)
    return out


def _cell(v, t):
    """Missing or non-finite-because-unknown values are stored as null (NaN becomes null), so a
    failed point reads back the same through pyarrow and pandas."""
    if t == F64:
        if v is None or (isinstance(v, float) and math.isnan(v)):
            return None
        return float(v)
    if t == I64:
        return int(v) if v is not None else 0
    if t == pa.bool_():
        return bool(v)
    if pa.types.is_list(t):
        return [_cell(x, t.value_type) for x in (v or [])]
    return "" if v is None else str(v)


def table_from_rows(rows: list[dict], columns, file_meta: dict | None = None) -> pa.Table:
    """A table of ``columns`` from dict rows (missing keys become null, or 0 / "" / false)."""
    sch = make_schema(columns, file_meta)
    arrays = [pa.array([_cell(r.get(n), t) for r in rows], type=t) for n, t, _, _ in columns]
    return pa.Table.from_arrays(arrays, schema=sch)  # (from_pydict would import pandas)


def rows_to_table(rows: list[dict], file_meta: dict | None = None) -> pa.Table:
    """The points table from dict rows."""
    return table_from_rows(rows, COLUMNS, file_meta)


def file_metadata(table: pa.Table) -> dict:
    """The ``holoscan`` JSON key of a table's file-level metadata ({} if absent)."""
    raw = (table.schema.metadata or {}).get(META_KEY)
    return json.loads(raw) if raw else {}
