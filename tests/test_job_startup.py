"""Job start-up: a chunk job imports only what solving needs.

Scenario: a small plan of one closed-form rn model and one emd model (the one-charge potential of
Behrndt, Cvetic & Sabra 1999, Nucl. Phys. B 553, 317; Gubser 1998, hep-th/9810225), each chunk run
as the workflow runs it (``python -X importtime -m holoscan solve-chunk``). The modules the process
imported are read from Python's own import-time report (CPython documentation, ``-X importtime``).
A chunk job must not import matplotlib, Snakemake or YAML (the manifest is JSON), and pandas only
through pyarrow (whose ``pyarrow.array`` imports pandas, when installed, to recognise pandas objects;
nothing of holoscan's imports it); the measured import time of the job is printed for the record,
not asserted (timing is a bench's job).
"""
from __future__ import annotations

import subprocess
import sys

import pytest

from holoscan.scan.config import validate_scan_config
from holoscan.scan.plan import make_plan, write_plan_files

pytestmark = pytest.mark.workflow  # runs holoscan in subprocesses

FORBIDDEN = ("matplotlib", "snakemake", "yaml")

CFG = {
    "scan": "startup",
    "models": [
        {"id": "a", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0},
        {"id": "oc", "kind": "emd", "kappa_sq": 1.0, "V": "-8*cosh(phi/sqrt(6)) - 4*cosh(2*phi/sqrt(6))",
         "f": "exp(-4*phi/sqrt(6))", "source": False, "solver": {"method": "shooting"},
         "grid": {"T": [1.0], "mu": [0.5]}},
    ],
    "grid": {"T": [0.5, 1.0], "mu": [0.0, 1.0]},
}


def test_a_chunk_job_imports_no_matplotlib_snakemake_or_yaml(tmp_path):
    plan = make_plan(validate_scan_config(CFG), tmp_path / "results")
    write_plan_files(plan)
    assert len(plan.chunk_ids) == 2
    for cid in plan.chunk_ids:
        p = subprocess.run([sys.executable, "-X", "importtime", "-m", "holoscan", "solve-chunk",
                            str(plan.chunk_manifest(cid)), "--out", str(plan.segment(cid))],
                           capture_output=True, text=True, timeout=300, cwd=tmp_path)
        assert p.returncode == 0, p.stderr[-2000:]
        assert plan.segment(cid).exists()
        rows = [ln.split("|") for ln in p.stderr.splitlines() if ln.startswith("import time:")]
        rows = [(int(r[1]), r[2][1:]) for r in rows[1:]]        # after the header; one blank, then nesting
        top = {name for _, name in rows if not name.startswith(" ")}
        assert top, "no import-time report"
        names = [name.strip() for _, name in rows]
        assert not [n for n in names if n.split(".")[0] in FORBIDDEN], sorted(top)
        if "pandas" in top:  # imported at top level only by pyarrow's array constructor, after the solve
            assert names.index("pandas") > names.index("holoscan.scan.chunk")
            assert not any(n.startswith("pandas") for n in names[:names.index("holoscan.scan.chunk") + 1])
        total = sum(us for us, name in rows if not name.startswith(" ")) / 1e6
        print(f"chunk {cid} ({plan.chunk_models[cid][0]}): {len(top)} top-level imports in {total:.2f} s")
