"""The `holoscan onset` command: one JSON object with T_c, mu and rho at the onset of condensation.

Physics reference: in the probe limit in AdS4 with m^2 = -2, q = 1 and rho the coefficient of -1/r
in A_t, T_c = 0.118 rho^(1/2) for the dimension-2 operator and 0.226 rho^(1/2) for dimension 1
(Hartnoll, Herzog & Horowitz 2008, Phys. Rev. Lett. 101, 031601). The output keys and the error
behaviour are the documented command-line contract (README "Command line"; common practice, no source).
"""
import json
import math

import pytest

pytestmark = pytest.mark.workflow  # every test runs `holoscan onset` in a subprocess

CFG = """models:
  - {id: o2, kind: charged-scalar, d: 3, m_sq: -2, q: 1, delta: 2, probe: true}
  - {id: o1, kind: charged-scalar, d: 3, m_sq: -2, q: 1, delta: 1, probe: true}
  - {id: r, kind: rn, d: 4, kappa_sq: 0.5, e_sq: 2.0}
"""


@pytest.fixture
def cfg(tmp_path):
    p = tmp_path / "m.yaml"
    p.write_text(CFG)
    return p


@pytest.mark.parametrize("model,ratio", [("o2", 0.118), ("o1", 0.226)])
def test_onset_matches_published_probe_values(cfg, run_cli, model, ratio):
    for mu in (1.0, -2.5):
        out = run_cli("onset", "--config", cfg, "--model", model, "--mu", mu)
        assert out.returncode == 0, out.stderr
        doc = json.loads(out.stdout)
        assert doc["status"] == "ok" and doc["mu"] == mu
        assert round(doc["T_c"] / math.sqrt(abs(doc["rho"])), 3) == ratio
        # the onset line of a conformal model is a ray: T_c proportional to |mu|
        assert doc["T_c"] == pytest.approx(abs(mu) / doc["mu_over_T"], rel=1e-12)


def test_onset_errors_name_the_key(cfg, run_cli):
    out = run_cli("onset", "--config", cfg, "--model", "r", "--mu", 1.0)
    assert out.returncode == 2 and "--model" in out.stderr and "charged-scalar" in out.stderr
    out = run_cli("onset", "--config", cfg, "--model", "o2", "--mu", 0)
    assert out.returncode == 2 and "--mu" in out.stderr
    out = run_cli("onset", "--config", cfg, "--model", "o2", "--mu", "nan")
    assert out.returncode == 2 and "--mu" in out.stderr and "Traceback" not in out.stderr
