import os
import subprocess
import sys

import pytest


@pytest.fixture
def run_cli(tmp_path):
    """Run ``python -m holoscan ARGS`` in a subprocess; returns CompletedProcess."""

    def run(*args, timeout=300):
        return subprocess.run([sys.executable, "-m", "holoscan", *map(str, args)], capture_output=True,
                              text=True, timeout=timeout, cwd=tmp_path, env={**os.environ, "PYTHONHASHSEED": "0"})

    return run
