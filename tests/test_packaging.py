"""The package declares what it needs: every third-party module imported by holoscan/ is provided
by a distribution named in pyproject's dependencies, and the install carries what `snakemake
--report` needs (Snakemake's own "reports" extra, read from Snakemake's installed metadata).

Module -> distribution names come from the installed distributions' records
(importlib.metadata.packages_distributions); requirement strings are parsed with `packaging`
(PEP 508) and names compared after PEP 503 normalisation.
"""
from __future__ import annotations

import ast
import importlib.metadata as md
import re
import sys
import tomllib
from pathlib import Path

from packaging.requirements import Requirement

REPO = Path(__file__).resolve().parents[1]


def _norm(name: str) -> str:
    return re.sub(r"[-_.]+", "-", name).lower()


def _dependencies() -> list[Requirement]:
    doc = tomllib.loads((REPO / "pyproject.toml").read_text())
    return [Requirement(r) for r in doc["project"]["dependencies"]]


def _third_party_imports() -> dict[str, str]:
    """Top-level module -> first file importing it, for modules outside the standard library."""
    out = {}
    for p in sorted((REPO / "holoscan").rglob("*.py")):
        for n in ast.walk(ast.parse(p.read_text())):
            names = [a.name for a in n.names] if isinstance(n, ast.Import) else (
                [n.module] if isinstance(n, ast.ImportFrom) and n.level == 0 and n.module else [])
            for name in names:
                top = name.split(".")[0]
                if top not in sys.stdlib_module_names and top != "holoscan":
                    out.setdefault(top, str(p.relative_to(REPO)))
    return out


def test_every_imported_distribution_is_declared():
    declared = {_norm(r.name) for r in _dependencies()}
    provided = md.packages_distributions()
    imports = _third_party_imports()
    assert {"numpy", "yaml", "jsonschema"} <= set(imports)  # the scan finds real imports
    for module, where in imports.items():
        dists = {_norm(d) for d in provided.get(module, [])}
        assert dists, f"{module} (imported by {where}) is not installed"
        assert dists & declared, f"{module} (imported by {where}) comes from {sorted(dists)}, not declared"


def test_the_install_carries_what_the_snakemake_report_needs():
    reports = [Requirement(r) for r in md.requires("snakemake") or []]
    reports = [r for r in reports if r.marker is not None and r.marker.evaluate({"extra": "reports"})
               and not r.marker.evaluate({"extra": ""})]
    assert reports, "Snakemake's metadata lists no 'reports' extra"
    deps = _dependencies()
    snake = [r for r in deps if _norm(r.name) == "snakemake"]
    assert snake, "snakemake is not a dependency"
    declared = {_norm(r.name) for r in deps}
    for need in reports:
        assert "reports" in snake[0].extras or _norm(need.name) in declared, (
            f"`snakemake --report` needs {need.name}: declare snakemake[reports] or {need.name}")
