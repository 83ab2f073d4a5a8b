"""`holoscan audit` on tables it cannot read, its log lines, and `holoscan summary`'s times and digits.

Scenarios: a foreign Parquet file, the phases table, a points table with a column of another type
and a file that is not Parquet each give one line naming TABLE (exit 2, no traceback); a log line
belongs to a row by its exact point key (T = 0.5 is not T = 10.5); the audit run from another folder
finds the log relative to the table, and says plainly when there is none; a point solved in a batch
is listed with the batch's time divided by its points, and says so; a critical point is printed
with the digits its uncertainty supports, by the Particle Data Group's rounding rule (Review of
Particle Physics, Introduction, "Rounding": the three highest digits of the uncertainty from 100 to
354 keep two significant digits, 355 to 949 one, 950 to 999 round up to two).
"""
from __future__ import annotations

import json
import math
import os
import subprocess
import sys

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from holoscan.kinds import model_from_block
from holoscan.scan.chunk import solve_manifest
from holoscan.scan.identity import code_hash, model_context, point_key
from holoscan.scan.tables import rows_to_table
from holoscan.settings import SolverSettings

SPEC = {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}
POINTS = [(0.5, 1.0), (10.5, 1.0), (0.5, 2.0)]


def cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "holoscan", *map(str, args)], capture_output=True, text=True,
                          timeout=300, cwd=cwd, env={**os.environ, "PYTHONHASHSEED": "0"})


@pytest.fixture
def workspace(tmp_path):
    """A workflow-like folder: results/tab/points.parquet whose rows name logs/solve/c.log (relative
    to the folder), written by solving the points the way a chunk job does."""
    model = model_from_block(SPEC)
    solver = SolverSettings(method="closed-form").canonical()
    ctx = model_context(model.spec(), solver, code_hash())
    manifest = {"chunk": "c", "code_hash": code_hash(), "models": {"a": {"spec": model.spec(), "solver": solver}},
                "points": [["a", T, mu, point_key(ctx, T, mu)] for T, mu in POINTS]}
    log = tmp_path / "logs" / "solve" / "c.log"
    log.parent.mkdir(parents=True)
    with open(log, "w") as fh:
        rows = solve_manifest(manifest, log_file="logs/solve/c.log", log=lambda m: print(m, file=fh))
    for r in rows:
        r.update(point_key=next(p[3] for p in manifest["points"] if (p[1], p[2]) == (r["T"], r["mu"])))
    out = tmp_path / "results" / "tab" / "points.parquet"
    out.parent.mkdir(parents=True)
    pq.write_table(rows_to_table(rows, {"scan": "tab", "code_hash": code_hash(), "config": {
        "scan": "tab", "models": [{**SPEC, "solver": {"method": "closed-form"}}], "grid": {"T": [0.5], "mu": [1.0]}}}),
        out)
    return tmp_path, out, {(T, mu): k for _, T, mu, k in manifest["points"]}


def one_line_error(p, *words):
    assert p.returncode == 2, p.stdout + p.stderr
    assert "Traceback" not in p.stderr and p.stderr.count("\n") == 1, p.stderr
    assert p.stderr.startswith("holoscan: error: TABLE = ")
    for w in words:
        assert w in p.stderr, (w, p.stderr)


@pytest.mark.workflow
def test_tables_audit_cannot_read_give_one_line(workspace):
    ws, table, _ = workspace
    foreign = ws / "foreign.parquet"
    pq.write_table(pa.table({"x": [1.0, 2.0], "label": ["p", "q"]}), foreign)
    one_line_error(cli("audit", foreign, "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=ws),
                   "not a holoscan points table", "model_id")

    from holoscan.scan.phase_tables import PHASE_COLUMNS
    from holoscan.scan.tables import table_from_rows

    phases = ws / "phases.parquet"
    pq.write_table(table_from_rows([{"model_id": "a", "T": 0.5, "mu": 1.0, "status": "ok"}], PHASE_COLUMNS), phases)
    one_line_error(cli("audit", phases, "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=ws),
                   "phases table", "points.parquet")

    t = pq.read_table(table)
    i = t.schema.get_field_index("T")
    typed = t.set_column(i, pa.field("T", pa.string()), pa.array([str(x) for x in t["T"].to_pylist()]))
    pq.write_table(typed, ws / "typed.parquet")
    one_line_error(cli("audit", ws / "typed.parquet", "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=ws),
                   "column 'T' has type string", "double")

    (ws / "text.parquet").write_text("model_id,T,mu\na,0.5,1.0\n")
    one_line_error(cli("audit", ws / "text.parquet", "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=ws),
                   "not a readable Parquet table")


@pytest.mark.workflow
def test_log_lines_belong_by_exact_point_key_from_any_folder(workspace, tmp_path_factory):
    ws, table, keys = workspace
    elsewhere = tmp_path_factory.mktemp("elsewhere")
    p = cli("audit", table, "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=elsewhere)
    assert p.returncode == 0, p.stderr
    rep = json.loads(p.stdout)
    # "T=0.5 mu=1.0" is also a substring of the line of T = 10.5: only the line of this key belongs
    (line,) = rep["log_lines"]
    assert f"key={keys[(0.5, 1.0)]}:" in line and "T=10.5" not in line
    assert rep["log_file_found"] == str(ws / "logs" / "solve" / "c.log") and "log_note" not in rep
    # the same from the workflow folder itself
    p = cli("audit", table.relative_to(ws), "--model", "a", "--T", 10.5, "--mu", 1.0, cwd=ws)
    (line,) = json.loads(p.stdout)["log_lines"]
    assert f"key={keys[(10.5, 1.0)]}:" in line
    # no log file anywhere: said plainly
    (ws / "logs" / "solve" / "c.log").unlink()
    p = cli("audit", table, "--model", "a", "--T", 0.5, "--mu", 1.0, cwd=elsewhere)
    rep = json.loads(p.stdout)
    assert p.returncode == 0 and rep["log_lines"] == [] and rep["log_file_found"] is None
    assert rep["log_note"].startswith("no log lines found: the log file 'logs/solve/c.log' does not exist")


def test_a_log_written_without_keys_is_matched_by_exact_model_T_and_mu(tmp_path):
    from holoscan.scan.audit import log_lines

    log = tmp_path / "old.log"
    log.write_text("a T=10.5 mu=1.0: ok (0.001 s)\na T=0.5 mu=1.0: ok (0.001 s)\nab T=0.5 mu=1.0: ok (0.001 s)\n"
                   "a T=0.5 mu=1.05: ok (0.001 s)\n")
    row = {"model_id": "a", "T": 0.5, "mu": 1.0, "point_key": "k", "log_file": str(log)}
    lines, found, note = log_lines(row, tmp_path / "points.parquet")
    assert lines == ["a T=0.5 mu=1.0: ok (0.001 s)"] and found == log and note == ""


# -- holoscan summary ------------------------------------------------------------------------------

def _row(mid, key, chunk, start, end, T=1.0, mu=0.0, branch=0):
    return {"model_id": mid, "point_key": key, "chunk_id": chunk, "start_time": start, "end_time": end, "T": T,
            "mu": mu, "branch": branch}


def test_points_of_a_batch_get_the_batch_time_divided_and_say_so():
    from holoscan.scan.report_summary import point_seconds, summary_text

    t0, t9, t1 = "2026-01-01T00:00:00+00:00", "2026-01-01T00:00:09+00:00", "2026-01-01T00:00:01+00:00"
    rows = [_row("emd", "k1", "c1", t0, t9, T=0.1), _row("emd", "k1", "c1", t0, t9, T=0.1, branch=1),
            _row("emd", "k2", "c1", t0, t9, T=0.2), _row("emd", "k3", "c1", t0, t9, T=0.3),
            _row("rn", "k4", "c2", t0, t1, T=0.4)]
    got = {r["point_key"]: (sec, n) for sec, n, r in point_seconds(rows)}
    # three points (k1 with two branches) share one 9 s batch: 3 s each; k4 alone took 1 s
    assert got == {"k1": (9.0 / 3, 3), "k2": (9.0 / 3, 3), "k3": (9.0 / 3, 3), "k4": (1.0, 1)}
    slow = sorted(point_seconds(rows), key=lambda x: -x[0])
    s = {"scan": "x", "package_version": "v", "code_hash": "h", "created": "now", "models": [],
         "by_status": {}, "by_phase": {}, "transitions": {}, "critical_points": [], "least_converged": [],
         "slowest": [{"model_id": r["model_id"], "T": r["T"], "mu": r["mu"], "seconds": sec, "batch_points": n,
                      "batch_seconds": sec * n} for sec, n, r in slow]}
    text = summary_text(s)
    batch = [ln for ln in text.splitlines() if ln.startswith("  emd")]
    assert len(batch) == 3 and all("3 s per point (a batch of 3 points solved together in 9 s" in ln for ln in batch)
    (single,) = [ln for ln in text.splitlines() if ln.startswith("  rn")]
    assert single.endswith(" 1 s") and "batch" not in single


def _pdg_decimals(err: float) -> int:
    """Decimal places of a value with uncertainty err, by the PDG rule (module docstring)."""
    text = f"{err:.15e}"  # d.ddd...e-XX: the leading three digits, not rounded, and the exponent
    three, e = int(text[0] + text[2:4]), int(text.split("e")[1])
    last = e - 1 if three <= 354 else e  # 950..999 round up to 1.0 x 10^(e+1): last digit still at 10^e
    return max(-last, 0)


@pytest.mark.parametrize("T, T_err", [(0.21470975123, 7e-9), (0.2147097512, 1.2e-8), (0.2147097512, 9.7e-9),
                                      (1.5123456, 0.0354), (1.5123456, 0.0355), (12.345678, 2.4e-3)])
def test_critical_point_digits_follow_its_uncertainty(T, T_err):
    from holoscan.scan.phase_tables import phase_summary_text
    from holoscan.scan.report_summary import summary_text

    n = _pdg_decimals(T_err)
    want = f"T = {T:.{n}f} +- "
    crit = {"model_id": "m", "T": T, "T_err": T_err, "mu": 0.585233111, "mu_err": 7e-8, "status": "ok"}
    s = {"scan": "x", "package_version": "v", "code_hash": "h", "created": "now", "models": [], "by_status": {},
         "by_phase": {}, "transitions": {}, "critical_points": [crit], "slowest": [], "least_converged": []}
    line = next(ln for ln in summary_text(s).splitlines() if ln.startswith("  m: T = "))
    assert want in line, (want, line)
    assert "mu = 0.58523311 +- " in line  # 7e-8: one significant digit, 8 decimals
    # the printed value is within half a unit of its last digit of T, and shows no digit beyond the
    # uncertainty's last one
    shown = line.split("T = ", 1)[1].split(" ", 1)[0]
    assert abs(float(shown) - T) <= 0.5 * 10.0**-n + 1e-15 and len(shown.split(".")[1]) == n
    err_shown = float(line.split("+- ", 1)[1].split(",", 1)[0])
    assert math.isclose(err_shown, T_err, rel_tol=0.15)
    text = phase_summary_text({"m": {"dominant_phases": {}, "line_points": {}, "critical_points": [crit]}})
    assert want in text
