# One job solves one chunk of grid points (a manifest written by the plan) into a sealed segment.
# Only the new chunks of the plan have a rule: a segment already sealed is a plain input, never
# solved again nor deleted by Snakemake (whatever happens to its manifest).
rule solve_chunk:
    input:
        manifest=lambda wc: str(PLAN.chunk_manifest(wc.chunk)),
    output:
        segment="results/{scan}/segments/{chunk}.parquet",
        seal="results/{scan}/segments/{chunk}.json",
    log:
        "logs/solve_chunk/{scan}/{chunk}.log",
    wildcard_constraints:
        chunk=_only(PLAN.chunk_ids) if MAIN else "[0-9a-f]{16}",
    resources:
        # minutes to ask a scheduler for: 3x the chunk's expected time, >= 10, times the attempt
        runtime=lambda wc, attempt: chunk_runtime(wc.chunk, attempt),
    shell:
        "{PY} -m holoscan solve-chunk {input.manifest} --out {output.segment} --log {log} > {log} 2>&1"
