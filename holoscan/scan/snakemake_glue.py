"""What the Snakefile calls: read and validate the config, plan, and list the files to make again.

Kept free of Snakemake imports: the Snakefile passes in what Snakemake knows (the config files
given on the command line, ``--config`` overrides) and turns :class:`ConfigProblem` into its own
error. Everything called at parse time only reads; :func:`start_run` is called from ``onstart``,
that is only in a run that holds the workflow lock and has jobs to run.
"""
from __future__ import annotations

from pathlib import Path

from ..config import read_yaml
from ..errors import InputError
from .config import load_schema, validate_scan_config
from .plan import make_plan
from .store import quarantine


class ConfigProblem(Exception):
    pass


def _merge(base: dict, over) -> dict:
    out = dict(base)
    for k, v in dict(over).items():
        out[k] = _merge(out[k], v) if isinstance(v, dict) and isinstance(out.get(k), dict) else v
    return out


def scan_config_document(configfiles, overrides, default_file) -> dict:
    """The config document of this run: the one ``--configfile`` (read by holoscan's own reader,
    exactly as ``holoscan check`` reads it), or, only when none is given, the default config; then
    ``--config key=value`` overrides on top. A given config file is never merged with the default."""
    configfiles = list(configfiles or ())
    try:
        if len(configfiles) > 1:
            raise InputError("--configfile", [str(p) for p in configfiles],
                             "give one scan config file; a scan config is whole by itself")
        doc = read_yaml(configfiles[0], "--configfile") if configfiles else read_yaml(default_file, "config")
    except InputError as exc:
        raise ConfigProblem(f"invalid config: {exc}") from None
    return _merge(doc, overrides or {})


def plan_scan(config: dict, schema_file, results_dir="results"):
    """Validate ``config`` (schema, then physics rules) and return (config, plan). Read-only."""
    try:
        cfg = validate_scan_config(config, load_schema(schema_file))
    except InputError as exc:
        raise ConfigProblem(f"invalid config: {exc}") from None
    return cfg, make_plan(cfg, results_dir)


def start_run(plan, run_start: float) -> list:
    """At the start of a run holding the lock: move damaged or incomplete segments to quarantine,
    except those changed at or after ``run_start`` (the POSIX time this run began planning): a
    seal younger than the run belongs to a job still going and is left alone. Returns the
    (chunk, reason) moved."""
    return quarantine(Path(plan.root) / "segments", plan.invalid, older_than=run_start)
