# Validation of the config and the plan of the scan, at parse time, before any job runs.
import sys
from pathlib import Path

from holoscan.scan.snakemake_glue import ConfigProblem, plan_scan

# The interpreter that runs Snakemake runs the jobs too (same environment, also on a cluster).
PY = sys.executable

try:
    CFG, PLAN = plan_scan(
        config,
        Path(workflow.basedir) / "workflow" / "schemas" / "config.schema.yaml",
        "results",
        main_process=workflow.is_main_process,
    )
except ConfigProblem as exc:
    print(f"holoscan: {exc}", file=sys.stderr)
    sys.exit(1)

if workflow.is_main_process:
    for chunk, reason in PLAN.quarantined:
        print(f"holoscan: segment {chunk} quarantined ({reason}); its points will be solved again", file=sys.stderr)
    for mid, ppj, sec, source in PLAN.sizing:
        if source in ("probe", "measured"):
            print(f"holoscan: model '{mid}': {sec:.3g} s per point ({source}) -> {ppj} points per job", file=sys.stderr)
    print(
        f"holoscan: scan '{PLAN.scan}': {PLAN.n_points} points, {PLAN.n_missing} to solve "
        f"in {len(PLAN.chunk_ids)} job(s) of <= {PLAN.chunk_size} points",
        file=sys.stderr,
    )


def get_final_targets():
    # The new chunks' segments are targets themselves: Snakemake does not remake a missing
    # intermediate file for a consumer that is otherwise up to date, and a deleted or quarantined
    # segment comes back under the same chunk id with an unchanged plan.
    new = [str(PLAN.segment(c)) for c in PLAN.chunk_ids]
    root = f"results/{PLAN.scan}"
    tables = [f"{root}/{n}" for n in ("points.parquet", "summary.json", "phases.parquet", "transitions.parquet",
                                      "critical_points.parquet")]
    # figure_targets and provenance_targets live in figures.smk and provenance.smk
    return [*tables, *new, *get_lines(None), *figure_targets(), *provenance_targets()]


def get_segments(wildcards):
    return [f"results/{wildcards.scan}/segments/{c}.parquet" for c in PLAN.segment_ids]


def get_lines(wildcards):
    return [str(p) for k in PLAN.lines_ids for p in PLAN.lines_outputs(k)]


def chunk_runtime(chunk, attempt):
    """Runtime (minutes) of a chunk job; an hour per attempt when its cost is not known yet."""
    from holoscan.scan.sizing import runtime_minutes

    seconds = (PLAN.chunk_seconds or {}).get(chunk)
    return runtime_minutes(seconds if seconds is not None else 1200.0, attempt)
