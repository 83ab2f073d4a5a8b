"""The model-kind contract: registry, layout rules, code hash, and a kind added from one file.

The kind added here (tests/kinds/neutral_brane.py) is the neutral planar AdS_{d+1} black brane,
solved by its own ODE integration. Its entropy density s = 2 pi r_h^(d-1)/kappa^2 with
T = d r_h/(4 pi) (horizon area and surface gravity of the planar AdS-Schwarzschild brane: Witten
1998, Adv. Theor. Math. Phys. 2, 505, arXiv:hep-th/9803131; derived again for the areal gauge in
the kind file's docstring), i.e. s = 2 pi (4 pi T/d)^(d-1)/kappa^2; for d = 4 with
kappa^2 = 4 pi^2/N^2 this is s = pi^2 N^2 T^3/2 (Gubser, Klebanov & Peet 1996, Phys. Rev. D 54,
3915). Its pressure is read from the metric's mass parameter, a route that does not use s, and must
obey the Euler relation P = T s/d of a conformal neutral plasma (common practice, no source).
"""
from __future__ import annotations

import ast
import math
import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pyarrow.parquet as pq
import pytest
from workflow_helpers import run, workspace

import holoscan
from holoscan.errors import InputError
from holoscan.kinds import KINDS, all_methods, load_kind_file, model_from_block, register
from holoscan.kinds.base import ModelKind
from holoscan.point import resolve_method, solve_point
from holoscan.scan.identity import PHYSICS, physics_files
from holoscan.settings import SolverSettings

PKG = Path(holoscan.__file__).resolve().parent
KIND_FILE = Path(__file__).resolve().parent / "kinds" / "neutral_brane.py"
BUILTIN = ("rn", "emd", "charged-scalar")


def _s_closed_form(T, d, kappa_sq):
    return 2 * math.pi * (4 * math.pi * T / d) ** (d - 1) / kappa_sq


# -- registry ------------------------------------------------------------------------------------

def test_methods_and_kinds_come_from_the_registry():
    # every kind's methods are allowed settings, including emd's own default (atlas)
    assert set(all_methods()) == {"auto"} | {m for c in KINDS.values() for m in c.methods}
    assert SolverSettings.from_block({"method": "atlas"}).method == "atlas"
    emd = model_from_block({"id": "x", "kind": "emd", "kappa_sq": 1.0, "V": "-12*cosh(0.6*phi)+0.96*phi**2",
                            "f": "1"})
    assert resolve_method(emd, SolverSettings(method="atlas")).method == "atlas"
    rn = model_from_block({"id": "r", "kind": "rn", "d": 4, "kappa_sq": 1.0, "e_sq": 1.0})
    with pytest.raises(InputError) as e:
        resolve_method(rn, SolverSettings(method="atlas"))
    assert "solver.method" in str(e.value) and "closed-form" in str(e.value)
    with pytest.raises(InputError) as e:
        model_from_block({"id": "q", "kind": "no-such-kind"}, "models[3]")
    assert "models[3].kind" in str(e.value) and all(k in str(e.value) for k in BUILTIN)


def test_register_refuses_a_class_that_breaks_the_contract():
    @dataclass(frozen=True)
    class NoSolve(ModelKind):
        id: str = "a"
        kind = "no-solve"
        methods = ("m",)
        default_method = "m"

        @classmethod
        def from_block(cls, block, key="model"):
            return cls()

        def spec(self):
            return {}

    with pytest.raises(TypeError, match="solve"):
        register(NoSolve)

    class Taken(NoSolve):
        kind = "rn"

        def solve(self, T, mu, settings=SolverSettings()):
            return []

    with pytest.raises(TypeError, match="already registered"):
        register(Taken)
    assert "no-solve" not in KINDS and KINDS["rn"].__name__ == "RNModel"


# -- layout rules (checked on the source, so a later edit cannot slip past) -------------------------

def _modules():
    for p in sorted(PKG.rglob("*.py")):
        rel = p.relative_to(PKG.parent).with_suffix("")
        parts = rel.parts[:-1] if rel.name == "__init__" else rel.parts
        yield ".".join(parts), p, rel.name == "__init__"


def _imports(mod, path, is_pkg):
    """(imported holoscan module, imported names) of every import statement in a module."""
    tree = ast.parse(path.read_text())
    base = mod.split(".") if is_pkg else mod.split(".")[:-1]
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                target = ".".join(base[: len(base) - node.level + 1] + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.startswith("holoscan"):
                yield target, [a.name for a in node.names]
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("holoscan"):
                    yield a.name, []


def test_nothing_outside_the_kinds_switches_on_a_kind_name():
    offenders = []
    for mod, path, _ in _modules():
        if mod.startswith("holoscan.kinds"):
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Compare):
                consts = [n for n in ast.walk(node) if isinstance(n, ast.Constant) and n.value in BUILTIN]
                if consts:
                    offenders.append(f"{path.relative_to(PKG)}:{node.lineno}")
    assert not offenders, f"kind names compared outside holoscan/kinds: {offenders}"


def test_import_graph_no_cycles_no_private_names_across_packages_numerics_knows_no_kind():
    modules = {m for m, _, _ in _modules()}
    graph, problems = {}, []
    for mod, path, is_pkg in _modules():
        pkg = mod if is_pkg else mod.rsplit(".", 1)[0]
        deps = set()
        for target, names in _imports(mod, path, is_pkg):
            for n in names:
                sub = f"{target}.{n}"
                deps.add(sub if sub in modules else target)
                if n.startswith("_") and n != "__version__":
                    tpkg = target if target + ".__init__" in modules or any(
                        m.startswith(target + ".") for m in modules) else target.rsplit(".", 1)[0]
                    if not (tpkg == pkg or tpkg.startswith(pkg + ".") or pkg.startswith(tpkg + ".")):
                        problems.append(f"{mod} imports private {n} from {target}")
            if not names:
                deps.add(target)
            if mod.startswith("holoscan.numerics") and target.startswith(("holoscan.kinds", "holoscan.bulk",
                                                                           "holoscan.scan")):
                problems.append(f"{mod} (generic numerics) imports {target}")
            if not mod.startswith("holoscan.scan") and mod != "holoscan.cli" and target.startswith("holoscan.scan"):
                problems.append(f"{mod} (physics) imports the scan layer {target}")
        graph[mod] = {d for d in deps if d in modules and d != mod}
    # cycles among modules that are not packages' __init__ re-exports
    state, stack = {}, []

    def visit(m):
        state[m] = 1
        stack.append(m)
        for d in sorted(graph.get(m, ())):
            if state.get(d) == 1:
                cyc = stack[stack.index(d):] + [d]
                if not any(PKG.joinpath(*c.split(".")[1:], "__init__.py").exists() for c in cyc[:-1]):
                    problems.append("import cycle: " + " -> ".join(cyc))
            elif d not in state:
                visit(d)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m)
    assert not problems, "\n".join(problems)


def test_code_hash_covers_the_named_physics_parts_and_kind_files():
    files = {p.relative_to(PKG).as_posix() for p in physics_files()}
    for part in ("kinds", "numerics", "bulk"):
        assert {p.relative_to(PKG).as_posix() for p in (PKG / part).rglob("*.py")} <= files
    assert not any(f.startswith("scan/") for f in files)
    assert not {"cli.py", "config.py", "validate.py", "errors.py"} & files
    assert all((PKG / p).exists() for p in PHYSICS)

    def hash_with(env):
        return subprocess.run([sys.executable, "-c", "from holoscan.scan.identity import code_hash; print(code_hash())"],
                              capture_output=True, text=True, check=True,
                              env={**os.environ, **env}).stdout.strip()

    plain = hash_with({"HOLOSCAN_KIND_FILES": ""})
    assert hash_with({"HOLOSCAN_KIND_FILES": str(KIND_FILE)}) != plain


# -- a kind added from one file ---------------------------------------------------------------

@pytest.mark.parametrize("d", [3, 4, 5])
def test_neutral_brane_kind_against_its_closed_form(d):
    load_kind_file(KIND_FILE)
    m = model_from_block({"id": f"n{d}", "kind": "neutral-brane", "d": d, "kappa_sq": 0.7})
    for T in (0.05, 0.3, 2.0):
        (r,) = solve_point(m, T, 0.4)
        assert r.status.value == "ok" and r.dominant
        exact = _s_closed_form(T, d, 0.7)
        err_s = abs(r.s - exact) / exact
        err_P = abs(r.P - T * exact / d) / (T * exact / d)
        assert err_s < 1e-9 and err_P < 1e-9
        assert r.error_estimate >= max(err_s, err_P)
        assert r.rho == 0.0 and r.chi2 == 0.0


@pytest.mark.workflow
def test_neutral_brane_kind_scanned_through_snakemake(tmp_path):
    cfg = {"scan": "own-kind",
           "models": [{"id": "neutral4", "kind": "neutral-brane", "d": 4, "kappa_sq": 0.5},
                      {"id": "rn4", "kind": "rn", "d": 4, "kappa_sq": 0.5, "e_sq": 2.0}],
           "grid": {"T": {"min": 0.1, "max": 0.4, "num": 4}, "mu": [0.0, 0.3]}}
    ws = workspace(tmp_path / "ws", cfg)
    env = {"HOLOSCAN_KIND_FILES": str(KIND_FILE)}
    run(ws, env=env)
    res = ws / "results" / "own-kind"
    t = pq.read_table(res / "points.parquet").to_pandas()
    own = t[t.model_id == "neutral4"]
    assert len(own) == 8 and set(own.kind) == {"neutral-brane"} and set(own.status) == {"ok"}
    exact = _s_closed_form(own["T"].to_numpy(), 4, 0.5)
    assert (abs(own["s"].to_numpy() - exact) / exact).max() < 1e-9
    for stem in ("neutral4-phase-diagram", "neutral4-eos"):
        assert (res / "figures" / f"{stem}.png").stat().st_size > 0
    assert (res / "provenance.json").exists()
    # the rerun with the same kind file has nothing to do; without it the kind is unknown, by name
    p, _ = run(ws, "-n", env=env)
    assert "Nothing to be done" in p.stdout + p.stderr
    p, _ = run(ws, "-n", env={"HOLOSCAN_KIND_FILES": ""}, check=False)
    assert p.returncode != 0 and "neutral-brane" in p.stdout + p.stderr
