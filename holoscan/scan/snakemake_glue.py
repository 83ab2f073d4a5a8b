"""What the Snakefile calls at parse time: validate the config and plan, with errors as one line.

Kept free of Snakemake imports: the Snakefile passes in whether it is the main process and turns
:class:`ConfigProblem` into its own error.
"""
from __future__ import annotations

from ..errors import InputError
from .config import load_schema, validate_scan_config
from .plan import make_plan


class ConfigProblem(Exception):
    pass


def plan_scan(config: dict, schema_file, results_dir="results", *, main_process: bool = True):
    """Validate ``config`` (schema, then physics rules) and return the plan. No job has run yet."""
    try:
        cfg = validate_scan_config(config, load_schema(schema_file))
    except InputError as exc:
        raise ConfigProblem(f"invalid config: {exc}") from None
    return cfg, make_plan(cfg, results_dir, write=main_process)
