# The table of the current plan, from every segment that holds one of its points. Quick: run by
# the main process.
rule assemble:
    input:
        plan=lambda wc: str(PLAN.table_file),
        segments=get_segments,
    output:
        table="results/{scan}/points.parquet",
        summary="results/{scan}/summary.json",
        summary_text="results/{scan}/summary.txt",
    params:
        plan_hash=PLAN.plan_hash,
    log:
        "logs/assemble/{scan}.log",
    localrule: True
    shell:
        "{PY} -m holoscan assemble {input.plan} --out {output.table} --summary {output.summary} "
        "--summary-text {output.summary_text} > {log} 2>&1"


onsuccess:
    for name in ("summary.txt", "phase_summary.txt"):
        p = Path(f"results/{PLAN.scan}/{name}")
        if p.exists():
            print(p.read_text(), end="")
