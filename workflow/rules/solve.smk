# One job solves one chunk of grid points (a manifest written by the plan) into a sealed segment.
# Only the new chunks of the plan have a rule: a segment already sealed is a plain input, never
# solved again nor deleted by Snakemake (whatever happens to its manifest).
rule solve_chunk:
    input:
        manifest=lambda wc: str(PLAN.chunk_manifest(wc.chunk)),
        # the state the model's new chunks share (the emd atlas), built once by build_state
        shared=lambda wc: [str(p) for p in PLAN.chunk_states(wc.chunk)],
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


# What all new chunks of one model share and is costly to build (for emd with method atlas: the
# atlas of its horizon-data map), built once for all of them; adopting it changes no number.
rule build_state:
    input:
        manifest=lambda wc: str(PLAN.state_manifest_file(wc.key)),
    output:
        "results/{scan}/shared/{key}.npz",
    log:
        "logs/build_state/{scan}/{key}.log",
    wildcard_constraints:
        key="[0-9a-f]{16}",
    priority: 10
    shell:
        "{PY} -m holoscan build-state {input.manifest} --out {output} > {log} 2>&1"
