"""The ``holoscan`` command line. Input errors print one line naming the key and exit 2."""
from __future__ import annotations

import argparse
import json
import math
import sys

from . import __version__
from .errors import InputError
from .kinds import KINDS
from .point import check_target, resolve_method, solve_point
from .settings import methods


def _json_ready(obj):
    """NaN and infinities are not JSON: write them as null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _json_ready(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_ready(v) for v in obj]
    if hasattr(obj, "item"):  # numpy scalars
        return _json_ready(obj.item())
    return obj


def cmd_point(args) -> int:
    from .config import load_models, pick_model, read_yaml  # (YAML only for the commands that read one)

    check_target(args.T, args.mu, key_T="--T", key_mu="--mu")
    doc = read_yaml(args.config)
    if "scan" in doc:  # a scan config: its model blocks with their own solver settings
        from .scan.config import validate_scan_config

        plans = {mp.model.id: mp for mp in validate_scan_config(doc).models}
        mp = pick_model(plans, args.model)
        model, settings = mp.model, mp.settings
    else:
        models, settings = load_models(doc)
        model = pick_model(models, args.model)
    if args.method:
        settings = settings.with_method(args.method)
    results = solve_point(model, args.T, args.mu, settings)
    rows = [r.to_dict() for r in results]
    out = rows[0] if len(rows) == 1 else rows
    print(json.dumps(_json_ready(out), indent=2, allow_nan=False))
    return 0


def cmd_check(args) -> int:
    from .scan.config import read_scan_config

    cfg = read_scan_config(args.config)
    print(f"config ok: scan '{cfg.scan}', {len(cfg.models)} model(s), {cfg.n_points} grid point(s)")
    return 0


def cmd_write_manifest(args) -> int:
    from .scan.plan import write_manifest_from_table

    try:
        write_manifest_from_table(args.table, args.out)
    except (OSError, ValueError, KeyError, StopIteration) as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    return 0


def cmd_solve_chunk(args) -> int:
    from .scan.chunk import run_chunk
    from .scan.manifests import StaleManifest

    try:
        n = run_chunk(args.manifest, args.out, log_file=args.log or "")
    except StaleManifest as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(f"wrote {n} rows to {args.out}")
    return 0


def cmd_build_state(args) -> int:
    from .scan.manifests import StaleManifest
    from .scan.shared_state import build_state

    try:
        n = build_state(args.manifest, args.out)
    except StaleManifest as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(f"wrote {n} bytes to {args.out}")
    return 0


def cmd_assemble(args) -> int:
    from .scan.assemble import AssemblyError, assemble, summary_text
    from .scan.plan import read_table_header

    try:
        summary = assemble(args.plan, args.out, args.summary, args.summary_text)
    except AssemblyError as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(summary_text(summary, read_table_header(args.plan)["scan"]), end="")
    return 0


def cmd_solve_lines(args) -> int:
    from .scan.lines_job import run_lines
    from .scan.manifests import StaleManifest

    try:
        n, c = run_lines(args.manifest, args.out, args.critical, log_file=args.log or "")
    except StaleManifest as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(f"wrote {n} line points to {args.out} and {c} critical point(s) to {args.critical}")
    return 0


def cmd_phase_tables(args) -> int:
    from pathlib import Path

    from .scan.phase_tables import build_phase_tables, dump_json, phase_summary_text
    from .scan.plan import plan_hash_of, read_table_header
    from .scan.seals import write_seal
    from .scan.store import atomic_write_text

    doc = read_table_header(args.plan)
    root = Path(args.plan).parent.parent
    keys = [k for _, k in doc.get("lines", [])]
    summary = build_phase_tables(args.points, [root / "lines" / f"{k}.parquet" for k in keys],
                                 [root / "lines" / f"{k}-critical.parquet" for k in keys],
                                 args.out_phases, args.out_transitions, args.out_critical,
                                 doc["models"], args.out_families, args.out_isentropes)
    summary_text_ = phase_summary_text(summary)
    if args.summary_text:
        atomic_write_text(Path(args.summary_text), summary_text_)
    if args.summary:
        atomic_write_text(Path(args.summary), dump_json(summary))
    plan_hash = plan_hash_of(Path(args.plan).read_text())
    for path in (args.out_phases, args.out_transitions, args.out_critical, args.out_families, args.out_isentropes,
                 args.summary, args.summary_text):
        if path:
            write_seal(path, plan_hash)
    print(summary_text_, end="")
    return 0


def cmd_onset(args) -> int:
    from .config import load_models, pick_model, read_yaml

    v_mu = check_target(1.0, args.mu, key_mu="--mu")[1]
    doc = read_yaml(args.config)
    models, settings = load_models(doc)
    model = pick_model(models, args.model)
    if not model.has_onset:
        raise InputError("--model", args.model, f"kind '{model.kind}' has no scalar condensation onset; "
                         "use a model of a kind with one: " + ", ".join(k for k, c in KINDS.items() if c.has_onset))
    if v_mu == 0.0:
        raise InputError("--mu", args.mu, "the onset temperature at mu = 0 is 0 (conformal model): give mu != 0")
    settings = resolve_method(model, settings, "solver.method")
    print(json.dumps(_json_ready(model.onset(v_mu, settings)), indent=2, allow_nan=False))
    return 0


def cmd_audit(args) -> int:
    from .scan.audit import audit_report

    check_target(args.T, args.mu, key_T="--T", key_mu="--mu")
    report = audit_report(args.table, args.model, args.T, args.mu, do_recompute=args.recompute)
    print(json.dumps(_json_ready(report), indent=2, allow_nan=False))
    return 0


def cmd_provenance(args) -> int:
    from .scan.provenance import write

    counts = write(args.results_dir, args.out, args.figures)
    print(f"wrote {args.out}: " + ", ".join(f"{v} {k}" for k, v in sorted(counts.items())))
    if args.ro_crate:
        from .scan.ro_crate import write_crate

        print(f"wrote {write_crate(args.results_dir, args.out, args.figures)}")
    return 0


def cmd_summary(args) -> int:
    from .scan.report_summary import collect, summary_text

    print(summary_text(collect(args.results_dir)), end="")
    return 0


def cmd_export(args) -> int:
    from pathlib import Path

    from .scan.export import LAYOUTS, check_scale, export_inverse, export_table, layout_options, write_export

    if args.format not in ("csv", "parquet"):
        raise InputError("--format", args.format, "must be csv or parquet")
    spec = layout_options(args.layout, args.nodes, args.epsilon_range, args.rho_range)  # before any work
    check_scale(args.scale)
    if spec is None:
        header, rows = export_table(args.results_dir, args.model, args.unit, args.scale)
        name, what = f"{args.model}.{args.format}", "grid points"
    else:
        header, rows = export_inverse(args.results_dir, args.model, spec, args.unit, args.scale)
        name, what = f"{args.model}-{LAYOUTS[1]}.{args.format}", "(epsilon, rho) nodes"
    out = Path(args.out) if args.out else Path(args.results_dir) / "export" / name
    out.parent.mkdir(parents=True, exist_ok=True)
    write_export(header, rows, out, args.format)
    print(f"wrote {out}: {len(rows)} {what} of model {args.model} "
          f"({', '.join(f'{k} {v}' for k, v in sorted(header['statuses'].items()))})")
    if spec is not None and header["accuracy"]:
        print(f"largest relative error estimate over the ok nodes: {header['accuracy']['all']:.2g}")
    return 0


def cmd_figures(args) -> int:
    from .scan.figures import write_figures

    try:
        written = write_figures(args.results_dir, jobs=args.jobs)
    except FileNotFoundError as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    for path in written:
        print(f"wrote {path}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="holoscan", description="Charged black-brane thermodynamics.")
    p.add_argument("--version", action="version", version=f"holoscan {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    pt = sub.add_parser("point", help="solve one model at one (T, mu) and print JSON")
    pt.add_argument("--config", required=True, help="YAML file with a 'models:' list")
    pt.add_argument("--model", required=True, help="model id in the config")
    pt.add_argument("--T", required=True, type=float, help="temperature (> 0)")
    pt.add_argument("--mu", required=True, type=float, help="chemical potential (any sign)")
    pt.add_argument("--method", choices=methods(), help="solution method (default: the kind's own)")
    pt.set_defaults(func=cmd_point)

    au = sub.add_parser("audit", help="print everything recorded about one row of a table")
    au.add_argument("table", help="a points table (Parquet) written by the workflow")
    au.add_argument("--model", required=True)
    au.add_argument("--T", required=True, type=float)
    au.add_argument("--mu", required=True, type=float)
    au.add_argument("--recompute", action="store_true", help="solve the point again now and compare")
    au.set_defaults(func=cmd_audit)

    on = sub.add_parser("onset", help="onset of scalar condensation (charged-scalar models): T_c at one mu, as JSON")
    on.add_argument("--config", required=True, help="YAML file with a 'models:' list")
    on.add_argument("--model", required=True, help="model id in the config (kind charged-scalar)")
    on.add_argument("--mu", required=True, type=float, help="chemical potential (non-zero)")
    on.set_defaults(func=cmd_onset)

    ck = sub.add_parser("check", help="validate a scan config and count its points")
    ck.add_argument("--config", required=True)
    ck.set_defaults(func=cmd_check)

    wm = sub.add_parser("write-manifest", help="(workflow) write a chunk or lines manifest from the plan's table file")
    wm.add_argument("table")
    wm.add_argument("out")
    wm.set_defaults(func=cmd_write_manifest)

    sc = sub.add_parser("solve-chunk", help="(workflow) solve one chunk manifest into a sealed segment")
    sc.add_argument("manifest")
    sc.add_argument("--out", required=True)
    sc.add_argument("--log", default="")
    sc.set_defaults(func=cmd_solve_chunk)

    asm = sub.add_parser("assemble", help="(workflow) assemble the table of a plan from its segments")
    asm.add_argument("plan")
    asm.add_argument("--out", required=True)
    asm.add_argument("--summary", required=True)
    asm.add_argument("--summary-text", default=None)
    asm.set_defaults(func=cmd_assemble)
    bs = sub.add_parser("build-state", help="(workflow) build the state a model's chunks share (its atlas) "
                        "from a state manifest")
    bs.add_argument("manifest")
    bs.add_argument("--out", required=True)
    bs.set_defaults(func=cmd_build_state)
    sl = sub.add_parser("solve-lines", help="(workflow) locate one model's transition lines from a lines manifest")
    sl.add_argument("manifest")
    sl.add_argument("--out", required=True)
    sl.add_argument("--critical", required=True)
    sl.add_argument("--log", default="")
    sl.set_defaults(func=cmd_solve_lines)

    pt2 = sub.add_parser("phase-tables", help="(workflow) phases, transitions and critical-point tables of a plan")
    pt2.add_argument("plan")
    pt2.add_argument("--points", required=True)
    pt2.add_argument("--out-phases", required=True)
    pt2.add_argument("--out-transitions", required=True)
    pt2.add_argument("--out-critical", required=True)
    pt2.add_argument("--out-families", default=None)
    pt2.add_argument("--out-isentropes", default=None)
    pt2.add_argument("--summary", default=None)
    pt2.add_argument("--summary-text", default=None)
    pt2.set_defaults(func=cmd_phase_tables)

    fg = sub.add_parser("figures", help="phase diagrams, equation of state, condensate, kurtosis, transport, "
                        "family and convergence figures (PNG, PDF) of a finished scan, under RESULTS_DIR/figures")
    fg.add_argument("results_dir", metavar="RESULTS_DIR", help="results/<scan> of a finished scan")
    fg.add_argument("--jobs", type=int, default=1, help="worker processes drawing the figures (default 1)")
    fg.set_defaults(func=cmd_figures)

    pv = sub.add_parser("provenance", help="W3C PROV record (PROV-JSON) of a finished scan")
    pv.add_argument("results_dir", metavar="RESULTS_DIR", help="results/<scan> of a finished scan")
    pv.add_argument("--out", required=True, help="PROV-JSON file to write")
    pv.add_argument("--figures", nargs="*", default=None, metavar="FILE",
                    help="the figure files to record (default: every file under RESULTS_DIR/figures)")
    pv.add_argument("--ro-crate", action="store_true",
                    help="also write RESULTS_DIR/ro-crate-metadata.json (RO-Crate 1.1, process run crate)")
    pv.set_defaults(func=cmd_provenance)

    ex = sub.add_parser("export", help="one model's equation of state on its (T, mu) grid, as CSV or Parquet")
    ex.add_argument("results_dir", metavar="RESULTS_DIR", help="results/<scan> of a finished scan")
    ex.add_argument("--model", required=True, help="model id (a family member's id for a family)")
    ex.add_argument("--format", default="csv", help="csv (default) or parquet")
    ex.add_argument("--unit", default=None, help="a physical energy unit, e.g. MeV (with --scale, or a "
                    "family member's matched scale)")
    ex.add_argument("--scale", type=float, default=None, help="the size of the model's energy unit E in --unit")
    ex.add_argument("--out", default=None, help="output file (default RESULTS_DIR/export/<model>.<format>, "
                    "<model>-epsilon-rho.<format> for that layout)")
    ex.add_argument("--layout", default="T-mu", help="T-mu (default): the solved (T, mu) grid; epsilon-rho: a "
                    "regular grid of energy and charge density, by inversion of the solved grid")
    ex.add_argument("--nodes", default=None, metavar="N|NE,NR", help="epsilon-rho layout: nodes along epsilon "
                    "and rho (default 50,50)")
    ex.add_argument("--epsilon-range", default=None, metavar="MIN,MAX", help="epsilon-rho layout: range of "
                    "epsilon in the output units (default: the span of the solved ok dominant points)")
    ex.add_argument("--rho-range", default=None, metavar="MIN,MAX", help="epsilon-rho layout: range of rho "
                    "in the output units (default: the span of the solved ok dominant points); a negative MIN "
                    "needs the form --rho-range=MIN,MAX")
    ex.set_defaults(func=cmd_export)

    sm = sub.add_parser("summary", help="short text summary of a finished scan")
    sm.add_argument("results_dir", metavar="RESULTS_DIR", help="results/<scan> of a finished scan")
    sm.set_defaults(func=cmd_summary)
    return p


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    try:
        return args.func(args)
    except InputError as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
