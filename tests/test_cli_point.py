"""The `holoscan point` command: JSON output and clear errors for bad input (no tracebacks).

Expectations are the project's documented command-line contract (README "Command line"; common
practice, no source); the physics values themselves are checked in test_rn_thermo.py.
"""
import json
import math

import pytest

pytestmark = pytest.mark.workflow  # every test runs `holoscan point` in a subprocess

GOOD = "models:\n  - {id: a, kind: rn, d: 4, kappa_sq: 0.5, e_sq: 2.0}\n"


def write(tmp_path, text, name="m.yaml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_point_prints_json_with_metadata(tmp_path, run_cli):
    cfg = write(tmp_path, GOOD)
    for method in ("closed-form", "shooting"):
        out = run_cli("point", "--config", cfg, "--model", "a", "--T", 0.25, "--mu", -0.6, "--method", method)
        assert out.returncode == 0, out.stderr
        row = json.loads(out.stdout)
        for k in ("T", "mu", "s", "rho", "epsilon", "P", "chi2", "cs2", "status", "message", "method",
                  "rtol", "nfev", "nsteps", "niter", "residual", "error_estimate", "wall_time",
                  "s_hat", "rho_hat", "P_hat", "chi2_hat", "Omega"):
            assert k in row, k
        assert row["status"] == "ok" and row["method"] == method
        assert row["rho"] < 0 and row["Omega"] == -row["P"]
        # the ratios printed are the stated ones (d = 4)
        assert row["s_hat"] == pytest.approx(row["s"] / 0.25**3, rel=1e-14)
        assert row["chi2_hat"] == pytest.approx(row["chi2"] / 0.25**2, rel=1e-14)


def test_default_method_is_closed_form_for_rn(tmp_path, run_cli):
    cfg = write(tmp_path, GOOD)
    out = run_cli("point", "--config", cfg, "--model", "a", "--T", 1, "--mu", 0)
    assert json.loads(out.stdout)["method"] == "closed-form"


BAD_BLOCKS = [
    # (model block or file text, key that must be named, value that must be named)
    ("{id: a, kind: rn, d: 2, kappa_sq: 0.5, e_sq: 2.0}", "models[0].d", "2"),
    ("{id: a, kind: rn, d: 3.5, kappa_sq: 0.5, e_sq: 2.0}", "models[0].d", "3.5"),
    ("{id: a, kind: rn, d: 4, kappa_sq: 0.0, e_sq: 2.0}", "models[0].kappa_sq", "0.0"),
    ("{id: a, kind: rn, d: 4, kappa_sq: -1, e_sq: 2.0}", "models[0].kappa_sq", "-1"),
    ("{id: a, kind: rn, d: 4, kappa_sq: 0.5, e_sq: 0}", "models[0].e_sq", "0"),
    ("{id: a, kind: rn, d: 4, kappa_sq: .nan, e_sq: 1}", "models[0].kappa_sq", "nan"),
    ("{id: a, kind: rn, d: 4, kappa_sq: .inf, e_sq: 1}", "models[0].kappa_sq", "inf"),
    ("{id: a, kind: rnx, d: 4, kappa_sq: 1, e_sq: 1}", "models[0].kind", "rnx"),
    ("{id: a, kind: rn, kappa_sq: 1, e_sq: 1}", "models[0].d", "None"),
    ("{id: a, kind: rn, d: 4, kapa_sq: 1, e_sq: 1}", "models[0].kapa_sq", "1"),
    ("{id: a, kind: rn, d: 4, kappa_sq: abc, e_sq: 1}", "models[0].kappa_sq", "abc"),
]


@pytest.mark.parametrize("block,key,value", BAD_BLOCKS)
def test_bad_model_block(tmp_path, run_cli, block, key, value):
    cfg = write(tmp_path, f"models:\n  - {block}\n")
    out = run_cli("point", "--config", cfg, "--model", "a", "--T", 1, "--mu", 0)
    assert out.returncode != 0
    assert "Traceback" not in out.stderr
    assert key in out.stderr and value in out.stderr, out.stderr
    assert out.stdout == ""


@pytest.mark.parametrize("T,mu,key", [(0, 1, "--T"), (-1, 1, "--T"), ("nan", 1, "--T"), ("inf", 1, "--T"),
                                      (1, "nan", "--mu"), (1, "-inf", "--mu")])
def test_bad_target(tmp_path, run_cli, T, mu, key):
    cfg = write(tmp_path, GOOD)
    out = run_cli("point", "--config", cfg, "--model", "a", f"--T={T}", f"--mu={mu}")
    assert out.returncode != 0 and "Traceback" not in out.stderr
    assert key in out.stderr and str(T if key == "--T" else mu) in out.stderr


@pytest.mark.parametrize("text,args,needle", [
    (GOOD, ["--model", "zz"], "--model = 'zz'"),
    ("models: []\n", ["--model", "a"], "models"),
    ("solver: {}\n", ["--model", "a"], "models"),
    ("models: [\n", ["--model", "a"], "not valid YAML"),
    (GOOD + "solver: {method: spectral}\n", ["--model", "a"], "solver.method = 'spectral'"),
    (GOOD + "solver: {rtol: -1}\n", ["--model", "a"], "solver.rtol = -1"),
    ("models:\n  - {id: a, kind: rn, d: 4, kappa_sq: 1, e_sq: 1}\n  - {id: a, kind: rn, d: 3, kappa_sq: 1, e_sq: 1}\n",
     ["--model", "a"], "models[1].id = 'a'"),
])
def test_bad_config_file(tmp_path, run_cli, text, args, needle):
    cfg = write(tmp_path, text)
    out = run_cli("point", "--config", cfg, *args, "--T", 1, "--mu", 0)
    assert out.returncode != 0 and "Traceback" not in out.stderr
    assert needle in out.stderr, out.stderr


def test_missing_config_file(tmp_path, run_cli):
    out = run_cli("point", "--config", tmp_path / "nope.yaml", "--model", "a", "--T", 1, "--mu", 0)
    assert out.returncode != 0 and "--config" in out.stderr and "nope.yaml" in out.stderr
    assert "Traceback" not in out.stderr


def test_json_has_no_nan_tokens(tmp_path, run_cli):
    # A failed point prints null, never the invalid JSON token NaN (RFC 8259; common practice, no source).
    cfg = write(tmp_path, GOOD + "solver: {accept_error: 1.0e-30}\n")
    out = run_cli("point", "--config", cfg, "--model", "a", "--T", 1, "--mu", 1, "--method", "shooting")
    row = json.loads(out.stdout)
    assert row["status"] == "not converged" and "NaN" not in out.stdout
    assert math.isfinite(row["s"])
