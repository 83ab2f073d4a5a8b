# One job per model with transition lines (dilaton, charged-scalar): locate its first-order,
# second-order, crossover and instability points and its critical endpoints. Runs beside the chunks.
rule solve_lines:
    input:
        manifest=lambda wc: str(PLAN.lines_manifest_file(wc.key)),
    output:
        lines="results/{scan}/lines/{key}.parquet",
        critical="results/{scan}/lines/{key}-critical.parquet",
    log:
        "logs/solve_lines/{scan}/{key}.log",
    wildcard_constraints:
        key="[0-9a-f]{16}",
    shell:
        "{PY} -m holoscan solve-lines {input.manifest} --out {output.lines} --critical {output.critical} "
        "--log {log} > {log} 2>&1"


# The phases table (dominant phase per point) from the points table, and the transitions and
# critical-point tables from the lines jobs of the current plan. Quick: run by the main process.
rule phase_tables:
    input:
        plan=lambda wc: str(PLAN.table_file),
        points="results/{scan}/points.parquet",
        lines=get_lines,
    output:
        phases="results/{scan}/phases.parquet",
        transitions="results/{scan}/transitions.parquet",
        critical="results/{scan}/critical_points.parquet",
        families="results/{scan}/families.parquet",
        isentropes="results/{scan}/isentropes.parquet",
        summary="results/{scan}/phase_summary.json",
        summary_text="results/{scan}/phase_summary.txt",
    log:
        "logs/phase_tables/{scan}.log",
    localrule: True
    shell:
        "{PY} -m holoscan phase-tables {input.plan} --points {input.points} --out-phases {output.phases} "
        "--out-transitions {output.transitions} --out-critical {output.critical} --out-families {output.families} "
        "--out-isentropes {output.isentropes} "
        "--summary {output.summary} "
        "--summary-text {output.summary_text} > {log} 2>&1"
