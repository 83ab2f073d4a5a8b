# holoscan workflow: (T, mu) scans of charged black branes into Parquet phase-diagram tables.
# The rules live in workflow/rules/; this file only includes them. The scan config is the one
# --configfile given, or config/config.yaml when none is (workflow/rules/common.smk reads it: a
# given config is never merged with the default one).
report: "workflow/report/workflow.rst"


include: "workflow/rules/common.smk"
include: "workflow/rules/solve.smk"
include: "workflow/rules/assemble.smk"
include: "workflow/rules/phases.smk"
include: "workflow/rules/figures.smk"
include: "workflow/rules/provenance.smk"


rule all:
    input:
        get_final_targets(),
    default_target: True
