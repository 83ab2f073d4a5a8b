"""holoscan.expr: values, exact derivatives and rejection of anything outside the whitelist.

References: numpy (values), mpmath at 40 digits (derivatives, Taylor coefficients) -- both
general-purpose reference libraries -- and Python's own arithmetic for operator precedence.
"""
import builtins
import functools
import io
import math
import os
import pickle
import subprocess
import tokenize
import warnings
from pathlib import Path
from types import SimpleNamespace

import mpmath
import numpy as np
import pytest

import holoscan.expr as expr_mod
from holoscan.errors import InputError
from holoscan.expr import ParsedCoupling, parse

KEY = "models[2].V"
V1 = "-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))"   # one-charge black-hole potential

# One reference formula per case, evaluated with either backend: numpy for values, mpmath for derivatives.
NP = SimpleNamespace(exp=np.exp, log=np.log, sqrt=np.sqrt, cosh=np.cosh, sinh=np.sinh, tanh=np.tanh,
                     sech=lambda x: 1.0 / np.cosh(x), cos=np.cos, sin=np.sin, pi=np.pi)
MP = SimpleNamespace(exp=mpmath.exp, log=mpmath.log, sqrt=mpmath.sqrt, cosh=mpmath.cosh, sinh=mpmath.sinh,
                     tanh=mpmath.tanh, sech=mpmath.sech, cos=mpmath.cos, sin=mpmath.sin, pi=mpmath.pi)

CASES = [
    (V1, lambda x, m: -(8 * m.exp(x / m.sqrt(6)) + 4 * m.exp(-2 * x / m.sqrt(6)))),
    ("exp(-4*phi/sqrt(6))", lambda x, m: m.exp(-4 * x / m.sqrt(6))),
    ("-12*cosh(0.6*phi) + 0.8*phi**2", lambda x, m: -12 * m.cosh(0.6 * x) + 0.8 * x**2),
    ("sech(1.2*phi - 0.3)", lambda x, m: m.sech(1.2 * x - 0.3)),
    ("tanh(phi)**2 - 3*tanh(0.5*phi)", lambda x, m: m.tanh(x)**2 - 3 * m.tanh(0.5 * x)),
    ("sin(2*phi) + cos(phi/3)", lambda x, m: m.sin(2 * x) + m.cos(x / 3)),
    ("log(2 + phi**2)", lambda x, m: m.log(2 + x**2)),
    ("sqrt(1 + phi**2)", lambda x, m: m.sqrt(1 + x**2)),
    ("phi**4 - 2*phi**3 + phi/7", lambda x, m: x**4 - 2 * x**3 + x / 7),
    ("exp(sin(phi)) * cosh(tanh(phi))", lambda x, m: m.exp(m.sin(x)) * m.cosh(m.tanh(x))),
    ("(1 + phi**2)**(-1.5)", lambda x, m: (1 + x**2)**(-1.5)),
    ("(2 + cos(phi))**(sinh(phi)/3)", lambda x, m: (2 + m.cos(x))**(m.sinh(x) / 3)),
    ("-phi**2", lambda x, m: -(x**2)),
    ("pi*phi/4 - 1.5e-3*phi**3", lambda x, m: m.pi * x / 4 - 1.5e-3 * x**3),
    (".5*sinh(phi) + 1/(1 + phi**2)", lambda x, m: 0.5 * m.sinh(x) + 1 / (1 + x**2)),
    ("2**phi - 2*-phi", lambda x, m: 2**x + 2 * x),
    ("exp(-phi**2/2)/sqrt(2*pi)", lambda x, m: m.exp(-x**2 / 2) / m.sqrt(2 * m.pi)),
]
IDS = [c[0] for c in CASES]


@functools.cache
def coupling(text):
    return ParsedCoupling(text, KEY)


def mp_derivative(formula, x, n):
    with mpmath.workdps(40):
        return mpmath.diff(lambda t: formula(t, MP), mpmath.mpf(x), n)


def rel_err(got, ref):
    return abs((mpmath.mpf(got) - ref) / ref)


# -- values -------------------------------------------------------------------------------------
@pytest.mark.parametrize("text,formula", CASES, ids=IDS)
def test_values_match_numpy(text, formula):
    # Reference: the same formula written directly in numpy (general-purpose reference library).
    x = np.linspace(-2.5, 2.5, 51)
    ref = formula(x, NP)
    got = parse(text, KEY).evaluate(x)
    assert got.shape == x.shape
    np.testing.assert_allclose(got, ref, rtol=1e-13, atol=1e-14 * np.max(np.abs(ref)))
    scalar = parse(text, KEY).evaluate(0.7)
    assert isinstance(scalar, float)
    assert scalar == pytest.approx(float(formula(0.7, NP)), rel=1e-13)


@pytest.mark.parametrize("text,expected", [
    # Reference: Python's own operator precedence and associativity, the same text written as
    # Python arithmetic in this source (common practice, no source).
    ("2**3**2", 2**3**2),            # 512: ** is right-associative
    ("1/2/4", 1 / 2 / 4),            # 0.125: / is left-associative
    ("2*-3", 2 * -3),
    ("-2**2", -2**2),                # unary minus binds looser than **
    ("2**-1", 2**-1),
    ("(2**3)**2", (2**3)**2),
    ("10 - 4 - 3", 10 - 4 - 3),
    ("12/3*2", 12 / 3 * 2),
    ("-3**2*2", -3**2 * 2),
    ("2*3 + 4*5", 2 * 3 + 4 * 5),
    ("- -2", - -2),  # noqa: B002 - double negation on purpose: Python's own value of the same text
    (".5 + 1.5e-3*1000", .5 + 1.5e-3 * 1000),
])
def test_precedence(text, expected):
    assert parse(text, KEY).evaluate(0.0) == pytest.approx(expected, rel=1e-15)


def test_precedence_with_phi():
    # -phi**2 = -(phi**2) and a**b**c = a**(b**c), as in Python (common practice, no source).
    x = np.array([-3.0, -0.5, 2.0])
    np.testing.assert_allclose(parse("-phi**2", KEY).evaluate(x), -(x**2), rtol=1e-15)
    np.testing.assert_allclose(parse("2**phi**2", KEY).evaluate(x), 2**(x**2), rtol=1e-14)
    np.testing.assert_allclose(parse("phi - 1 - phi/2/2", KEY).evaluate(x), x - 1 - x / 4, rtol=1e-15)


# -- derivatives --------------------------------------------------------------------------------
@pytest.mark.parametrize("x", [0.3, 1.7, -2.2])
@pytest.mark.parametrize("text,formula", CASES, ids=IDS)
def test_derivatives_match_mpmath(text, formula, x):
    # Reference: mpmath.diff at 40 digits (general-purpose reference library); bar 1e-12 relative.
    ref1, ref2 = mp_derivative(formula, x, 1), mp_derivative(formula, x, 2)
    e = parse(text, KEY)
    assert rel_err(e.derivative().evaluate(x), ref1) < 1e-12
    assert rel_err(e.derivative().derivative().evaluate(x), ref2) < 1e-12
    v, d1, d2 = coupling(text).derivs(x)
    assert rel_err(v, mp_derivative(formula, x, 0)) < 1e-13
    assert rel_err(d1, ref1) < 1e-12
    assert rel_err(d2, ref2) < 1e-12


NEAR_ZERO = [1e-13, 1e-9, 1e-6, 1e-3, -1e-7, 0.009999, 0.010001, -0.0100001]


@pytest.mark.parametrize("x", NEAR_ZERO)
def test_one_charge_potential_near_zero(x):
    # Reference: mpmath.diff at 40 digits (general-purpose reference library); bar 1e-12 relative.
    # V' = (8/sqrt6)(e^{phi/sqrt6} - e^{-2 phi/sqrt6}) cancels catastrophically as phi -> 0.
    formula = CASES[0][1]
    _, d1, d2 = coupling(V1).derivs(x)
    assert rel_err(d1, mp_derivative(formula, x, 1)) < 1e-12
    assert rel_err(d2, mp_derivative(formula, x, 2)) < 1e-12


def test_naive_derivative_would_fail_near_zero():
    # The same bar applied to direct evaluation of the symbolic derivative fails at phi = 1e-13:
    # the near-zero test above would catch an implementation without the Taylor branch.
    x = 1e-13
    ref = mp_derivative(CASES[0][1], x, 1)
    assert rel_err(parse(V1, KEY).derivative().evaluate(x), ref) > 1e-12
    assert rel_err(coupling(V1).derivs(x)[1], ref) < 1e-12


@pytest.mark.parametrize("x", [1e-11, 1e-5, -2e-3])
def test_second_derivative_cancellation_near_zero(x):
    # d2 of exp(phi/3) - exp(-phi/3) is a difference of exponentials too.
    # Reference: mpmath.diff at 40 digits (general-purpose reference library).
    text, formula = "exp(phi/3) - exp(-phi/3)", lambda t, m: m.exp(t / 3) - m.exp(-t / 3)
    _, d1, d2 = coupling(text).derivs(x)
    assert rel_err(d1, mp_derivative(formula, x, 1)) < 1e-12
    assert rel_err(d2, mp_derivative(formula, x, 2)) < 1e-12


def test_taylor_coefficients_closed_form():
    # d^k/dphi^k e^{c phi} at 0 is c^k (elementary calculus; common practice, no source).
    a = 1 / math.sqrt(6)
    got = coupling(V1).taylor0(14)
    ref = np.array([-(8 * a**k + 4 * (-2 * a)**k) for k in range(1, 15)])
    np.testing.assert_allclose(got, ref, rtol=1e-13, atol=1e-15)
    assert len(coupling(V1).taylor0(3)) == 3


def test_taylor_coefficients_match_mpmath():
    # Reference: mpmath.taylor at 40 digits (general-purpose reference library).
    text, formula = CASES[3]
    with mpmath.workdps(40):
        series = mpmath.taylor(lambda t: formula(t, MP), 0, 14)
    ref = [float(series[k] * mpmath.factorial(k)) for k in range(1, 15)]
    np.testing.assert_allclose(coupling(text).taylor0(14), ref, rtol=1e-11)


def test_repeated_differentiation_stays_small():
    # D^k sech(u) is a polynomial in sech(u), tanh(u) of degree k+1 with at most k+2 monomials, and
    # D^k of a sum of exponentials is again such a sum (elementary calculus; common practice, no source).
    e = parse("sech(1.2*phi - 0.3)", KEY)
    for k in range(1, 15):
        e = e.derivative()
        assert len(getattr(e, "terms", (e,))) <= k + 2
    v = parse(V1, KEY)
    for _ in range(14):
        v = v.derivative()
    assert len(str(v)) < 120


def test_canonical_form_round_trips_and_collects():
    # Canonical trees: str() parses back to the same node, equal expressions are one object
    # (common practice, no source).
    for text, _ in CASES:
        e = parse(text, KEY)
        assert parse(str(e), KEY) is e
    assert parse("phi*2", KEY) is parse("2*phi", KEY) is parse("phi + phi", KEY)
    assert str(parse("phi - phi + 0*exp(phi) + 1*phi**1", KEY)) == "phi"
    assert str(parse("2**3**2", KEY)) == "512"


def test_tree_is_immutable():
    # Common practice, no source.
    e = parse("phi + 1", KEY)
    with pytest.raises(AttributeError):
        e.terms = ()
    with pytest.raises(AttributeError):
        del e.terms


# -- vectorisation and numerical trouble --------------------------------------------------------
def test_derivs_vectorised():
    # Shapes follow the input; array results equal the scalar ones elementwise (common practice, no source).
    c = coupling(V1)
    x = np.array([[-3.0, -1e-3, 0.0, 1e-12], [0.005, 0.02, 1.5, 4.0]])
    out = c.derivs(x)
    for arr in out:
        assert isinstance(arr, np.ndarray) and arr.shape == x.shape
    for idx in np.ndindex(x.shape):
        scalar = c.derivs(float(x[idx]))
        assert all(isinstance(s, float) for s in scalar)
        assert [arr[idx] for arr in out] == list(scalar)
    zero_d = c.derivs(np.float64(0.3))
    assert [float(z) for z in zero_d] == list(c.derivs(0.3))
    const = ParsedCoupling("2.5", "models[0].f").derivs(np.ones(4))
    assert [list(a) for a in const] == [[2.5] * 4, [0.0] * 4, [0.0] * 4]


def test_evaluation_never_raises_or_warns():
    # Out-of-domain and overflowing values come out as nan/inf, matching numpy's own results
    # (general-purpose reference library), with no exception and no warning.
    x = np.array([-1.0, 0.0, 1e-3, 2.0, 800.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        v, d1, d2 = ParsedCoupling("log(phi)", KEY).derivs(x)
        big = parse("exp(1000*phi)", KEY).evaluate(x)
        sech = parse("sech(1000*phi)", KEY).evaluate(x)
    with np.errstate(all="ignore"):
        np.testing.assert_array_equal(v, np.log(x))
        np.testing.assert_allclose(d1, 1 / x, rtol=1e-15)
        np.testing.assert_allclose(d2, -1 / x**2, rtol=1e-15)
        np.testing.assert_array_equal(big, np.exp(1000 * x))
        np.testing.assert_allclose(sech, 1 / np.cosh(1000 * x), rtol=1e-14, atol=1e-300)


def test_sech_never_overflows():
    # sech = 1/cosh without forming cosh (which overflows past |x| ~ 710); values against mpmath.sech
    # (general-purpose reference library). Private helper: evaluation itself silences numpy errors.
    x = np.array([-1e4, -710.0, -3.0, 0.0, 0.5, 20.0, 709.0, 750.0, 1e6, np.inf])
    with np.errstate(over="raise", invalid="raise", divide="raise"):   # underflow to 0 is the answer
        got = expr_mod._sech(x)
    ref = [float(mpmath.sech(mpmath.mpf(v))) for v in x]
    np.testing.assert_allclose(got, ref, rtol=4e-16, atol=0)


def test_singular_taylor_falls_back_to_direct():
    # sqrt(phi) has no Taylor series at 0; near 0 the derivatives are evaluated directly.
    # Reference: d/dx sqrt(x) = 1/(2 sqrt(x)) in numpy (general-purpose reference library).
    _, d1, d2 = ParsedCoupling("sqrt(phi)", KEY).derivs(1e-4)
    assert d1 == pytest.approx(0.5 / np.sqrt(1e-4), rel=1e-14)
    assert d2 == pytest.approx(-0.25 * 1e-4**-1.5, rel=1e-14)


def test_coupling_pickles():
    # Chunk jobs may receive couplings through pickle (common practice, no source).
    c = coupling(CASES[3][0])
    back = pickle.loads(pickle.dumps(c))
    assert back == c and back.text == c.text and back.derivs(0.4) == c.derivs(0.4)


def test_too_complex_to_differentiate_is_input_error():
    # Bounded work (common practice, no source): deep nesting makes the 14th derivative explode.
    with pytest.raises(InputError, match=r"models\[2\]\.V.*too complex"):
        ParsedCoupling("sin(" * 8 + "phi" + ")" * 8, KEY)


# -- hostile input --------------------------------------------------------------------------------
HOSTILE = [  # (text, or a function of the sentinel path; offending token as shown; its position)
    (lambda s: f"__import__('os').system('touch {s}')", "'__import__'", 0),
    ("phi.__class__", "'.'", 3),
    ("().__class__.__bases__[0].__subclasses__()", "'.'", 2),
    ("()", "')'", 1),
    ("lambda: 0", "'lambda'", 0),
    ("exec('1')", "'exec'", 0),
    ("eval('phi')", "'eval'", 0),
    (lambda s: f"os.system('touch {s}')", "'os'", 0),
    (lambda s: f"open('{s}', 'w')", "'open'", 0),
    ("open('/etc/passwd')", "'open'", 0),
    ("phi if 1 else 0", "'if'", 4),
    ("[phi]", "'['", 0),
    ("'phi'", repr("'"), 0),
    ("phi; import os", "';'", 3),
    ("9**9**9", "'9**9**9'", 0),
    ("1e400", "'1e400'", 0),
    ("2e6*phi", "'2e6'", 0),
    ("exp(1000)", "'exp(1000)'", 0),
    ("1/0", "'1/0'", 0),
    ("sqrt(-1)", "'sqrt(-1)'", 0),
    ("phi*" + "*".join(["1e6"] * 60), "'phi*1e6", 0),
    ("(" * 100 + "phi" + ")" * 100, "'('", 50),
    ("exp(" * 60 + "phi" + ")" * 60, "'('", 203),
    ("-" * 60 + "phi", "'-'", 50),
    ("2**" * 60 + "2", "'**'", 151),
    ("phi" + "+phi" * 2000, "2000", 2000),
    ("+".join(["1"] * 1000), "1000 tokens", 1000),
    ("x", "'x'", 0),
    ("exp(phi, 2)", "','", 7),
    ("exp", "'exp'", 0),
    ("2 phi", "'phi'", 2),
    ("2(phi)", "'('", 1),
    ("phi(2)", "'('", 3),
    ("", "empty", 0),
    ("phi)", "')'", 3),
    ("(phi", "end of input", 4),
    ("phi**", "end of input", 5),
    ("getattr(phi, 'x')", "'getattr'", 0),
    ("__builtins__", "'__builtins__'", 0),
    ("{phi}", "'{'", 0),
    ("phi\x00", repr("\x00"), 3),
    ("\u03c6 + 1", repr("\u03c6"), 0),
    ("1_000", "'_000'", 1),
    ("phi ^ 2", "'^'", 4),
]
TRIPWIRES = [(builtins, "__import__"), (builtins, "eval"), (builtins, "exec"), (builtins, "compile"),
             (builtins, "open"), (os, "system"), (os, "popen"), (subprocess, "Popen")]


def _recorder(calls, armed, name, real):
    def wrapper(*args, **kwargs):
        if armed:                       # only while parse() runs: pytest itself imports lazily
            calls.append(name)
        return real(*args, **kwargs)
    return wrapper


@pytest.mark.parametrize("text,token,pos", HOSTILE, ids=range(len(HOSTILE)))
def test_hostile_input_rejected_before_anything_runs(text, token, pos, tmp_path, monkeypatch):
    # Security: every string outside the whitelist raises InputError naming the key, the offending
    # token and its position; no import, eval, exec, compile, open or shell call happens while
    # parsing, and a payload's side effect never appears (common practice, no source).
    sentinel = tmp_path / "pwned"
    if callable(text):
        text = text(sentinel)
    calls, armed, err = [], [], None
    for module, name in TRIPWIRES:
        monkeypatch.setattr(module, name, _recorder(calls, armed, name, getattr(module, name)))
    armed.append(True)
    try:
        parse(text, KEY)
    except InputError as e:
        err = e
    finally:
        armed.clear()
        monkeypatch.undo()
    assert calls == []
    assert err is not None, f"{text[:40]!r} was accepted"
    assert str(err).startswith(f"{KEY} = ") and err.key == KEY
    assert f"position {pos}" in err.reason, err.reason       # the reason itself names token and place
    assert token in err.reason, err.reason
    assert not sentinel.exists()


def test_non_string_rejected():
    # Common practice, no source.
    for bad in (None, 3.0, ["phi"], b"phi"):
        with pytest.raises(InputError, match=r"models\[2\]\.V"):
            parse(bad, KEY)


def test_unknown_name_message_lists_allowed_names():
    # Common practice, no source.
    with pytest.raises(InputError) as info:
        parse("os", KEY)
    assert info.value.key == KEY and info.value.value == "os"
    assert "unknown name 'os' at position 0; allowed names: phi, pi, exp, log" in info.value.reason


def test_parser_source_uses_no_dynamic_evaluation():
    # Security by construction (common practice, no source): the module never names Python's dynamic
    # evaluation facilities or a general-purpose expression library.
    # The one allowed use is re.compile (regular expressions for numbers and names).
    source = Path(expr_mod.__file__).read_text()
    toks = [t.string for t in tokenize.generate_tokens(io.StringIO(source).readline)
            if t.type in (tokenize.NAME, tokenize.OP)]
    forbidden = {"eval", "exec", "compile", "__import__", "literal_eval", "ast", "sympy", "numexpr",
                 "getattr", "globals", "locals", "vars", "importlib", "subprocess", "system"}
    hits = [(i, t) for i, t in enumerate(toks) if t in forbidden]
    assert [t for i, t in hits if toks[i - 2:i] != ["re", "."] or t != "compile"] == []
    assert any(t == "compile" for _, t in hits)   # the check sees names at all
