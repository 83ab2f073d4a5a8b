"""The ``holoscan`` command line. Input errors print one line naming the key and exit 2."""
from __future__ import annotations

import argparse
import json
import math
import sys

from . import __version__
from .config import load_models, pick_model, read_yaml
from .errors import InputError
from .point import check_target, solve_point
from .settings import METHODS


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
    check_target(args.T, args.mu, key_T="--T", key_mu="--mu")
    doc = read_yaml(args.config)
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


def cmd_solve_chunk(args) -> int:
    from .scan.chunk import StaleManifest, run_chunk

    try:
        n = run_chunk(args.manifest, args.out, log_file=args.log or "")
    except StaleManifest as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(f"wrote {n} rows to {args.out}")
    return 0


def cmd_assemble(args) -> int:
    from .scan.assemble import AssemblyError, assemble, summary_text

    try:
        summary = assemble(args.plan, args.out, args.summary, args.summary_text)
    except AssemblyError as exc:
        print(f"holoscan: error: {exc}", file=sys.stderr)
        return 3
    print(summary_text(summary, json.loads(open(args.plan).read())["scan"]), end="")
    return 0


def cmd_audit(args) -> int:
    from .scan.audit import audit_report

    check_target(args.T, args.mu, key_T="--T", key_mu="--mu")
    report = audit_report(args.table, args.model, args.T, args.mu, do_recompute=args.recompute)
    print(json.dumps(_json_ready(report), indent=2, allow_nan=False))
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
    pt.add_argument("--method", choices=METHODS, help="solution method (default: the kind's own)")
    pt.set_defaults(func=cmd_point)

    au = sub.add_parser("audit", help="print everything recorded about one row of a table")
    au.add_argument("table", help="a points table (Parquet) written by the workflow")
    au.add_argument("--model", required=True)
    au.add_argument("--T", required=True, type=float)
    au.add_argument("--mu", required=True, type=float)
    au.add_argument("--recompute", action="store_true", help="solve the point again now and compare")
    au.set_defaults(func=cmd_audit)

    ck = sub.add_parser("check", help="validate a scan config and count its points")
    ck.add_argument("--config", required=True)
    ck.set_defaults(func=cmd_check)

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
