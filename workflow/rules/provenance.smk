# Provenance of a finished scan in W3C PROV (PROV-JSON) and its RO-Crate metadata, written once the
# tables and figures exist. `holoscan summary results/<scan>` prints the scan's text summary.
PROVENANCE_TABLES = ("points.parquet", "phases.parquet", "transitions.parquet", "critical_points.parquet",
                     "families.parquet", "isentropes.parquet", "summary.json", "summary.txt", "phase_summary.json", "phase_summary.txt")


rule provenance:
    input:
        plan=lambda wc: str(PLAN.table_file),
        segments=get_segments,
        lines=lambda wc: get_lines(None),
        tables=lambda wc: [f"results/{wc.scan}/{n}" for n in PROVENANCE_TABLES],
        figures=lambda wc: figure_targets(),
    output:
        prov=report("results/{scan}/provenance.json", caption="../report/provenance.rst", category="Provenance"),
        crate="results/{scan}/ro-crate-metadata.json",
    log:
        "logs/provenance/{scan}.log",
    localrule: True
    shell:
        "{PY} -m holoscan provenance results/{wildcards.scan} --out {output.prov} --ro-crate "
        "--figures {input.figures} > {log} 2>&1"


def provenance_targets():
    """Every provenance file the current plan produces (listed in rule all)."""
    return [f"results/{PLAN.scan}/provenance.json", f"results/{PLAN.scan}/ro-crate-metadata.json"]
