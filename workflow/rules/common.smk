# The config and the plan of the scan, at parse time, before any job runs. Parsing only reads:
# every file the plan needs is written by a job (rules below and in solve.smk), so a dry run,
# --unlock, --lint, --report or a run the lock refuses changes nothing on disk.
import re
import sys
import time
from pathlib import Path

from holoscan.scan.plan import write_plan_file
from holoscan.scan.snakemake_glue import ConfigProblem, plan_scan, scan_config_document, start_run

# The interpreter that runs Snakemake runs the jobs too (same environment, also on a cluster).
PY = sys.executable
MAIN = workflow.is_main_process
RUN_START = time.time()

try:
    # a --configfile is the whole scan config; config/config.yaml applies only when none is given
    CONFIG = scan_config_document(
        workflow.config_settings.configfiles,
        workflow.config_settings.config,
        Path(workflow.basedir) / "config" / "config.yaml",
    )
    CFG, PLAN = plan_scan(CONFIG, Path(workflow.basedir) / "workflow" / "schemas" / "config.schema.yaml", "results")
except ConfigProblem as exc:
    print(f"holoscan: {exc}", file=sys.stderr)
    sys.exit(1)

if MAIN:
    for chunk, reason in sorted(PLAN.invalid.items()):
        print(f"holoscan: segment {chunk} not used ({reason}); its points will be solved again", file=sys.stderr)
    for path, reason in sorted((PLAN.remade or {}).items()):
        print(f"holoscan: {path} will be made again ({reason})", file=sys.stderr)
    for mid, ppj, sec, source in PLAN.sizing:
        if source == "measured":
            print(f"holoscan: model '{mid}': {sec:.3g} s per point ({source}) -> {ppj} points per job", file=sys.stderr)
    print(
        f"holoscan: scan '{PLAN.scan}': {PLAN.n_points} points, {PLAN.n_missing} to solve "
        f"in {len(PLAN.chunk_ids)} job(s) of <= {PLAN.chunk_size} points",
        file=sys.stderr,
    )


def _only(names):
    """A wildcard constraint matching exactly ``names`` (nothing when empty)."""
    return "|".join(re.escape(str(n)) for n in names) if names else "(?!)"


onstart:
    # only in a run that holds the lock and has jobs to run (never in a dry run)
    for chunk, reason in start_run(PLAN, RUN_START):
        print(f"holoscan: segment {chunk} moved to quarantine ({reason})", file=sys.stderr)


def get_final_targets():
    # The plan files and the new chunks' segments are targets themselves: Snakemake does not remake
    # a missing intermediate file for a consumer that is otherwise up to date (and a plan file under
    # a new name is how stale tables are made again).
    new = [str(PLAN.table_file), *map(str, PLAN.manifests.values()), *(str(PLAN.segment(c)) for c in PLAN.chunk_ids)]
    root = f"results/{PLAN.scan}"
    tables = [f"{root}/{n}" for n in ("points.parquet", "summary.json", "phases.parquet", "transitions.parquet",
                                      "critical_points.parquet", "families.parquet", "isentropes.parquet")]
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


# The plan's files. The table file (every point, its key and its chunk) is written first, by the
# main process's run; the manifests of the new chunks and of the lines jobs are made from it. Each
# manifest's name carries the hash of its text and the table file's the plan hash, so a changed
# plan gets new files and a damaged one is never trusted (the plan picks another name).
rule plan_table:
    output:
        str(PLAN.table_file),
    localrule: True
    run:
        write_plan_file(PLAN, output[0])


rule plan_manifest:
    input:
        table=str(PLAN.table_file),
    output:
        "results/{scan}/plan/{name}.json",
    wildcard_constraints:
        name=_only([Path(p).name[: -len(".json")] for p in PLAN.manifests.values()]) if MAIN else "(?!)",
    localrule: True
    shell:
        "{PY} -m holoscan write-manifest {input.table} {output}"
