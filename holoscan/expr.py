r"""Whitelisted scalar expressions in ``phi``: the user-given couplings ``V(phi)`` and ``f(phi)``.

Grammar (blanks, tabs and newlines between tokens are ignored)::

    expr   := term (('+' | '-') term)*
    term   := unary (('*' | '/') unary)*
    unary  := '-' unary | power
    power  := atom ('**' unary)?                      right-associative: 2**3**2 = 2**9
    atom   := NUMBER | 'phi' | 'pi' | FUNC '(' expr ')' | '(' expr ')'
    FUNC   := exp | log | sqrt | cosh | sinh | tanh | sech | cos | sin
    NUMBER := ASCII digits with optional '.', fraction and exponent: 3, 2.5, .5, 1.5e-3

Precedence is Python's: ``-phi**2`` is ``-(phi**2)``, ``1/2/4`` is ``0.125``, ``2*-3`` is ``-6``.
Implicit multiplication (``2 phi``, ``2(phi)``) is an error; ``sech(x) = 1/cosh(x)``.

Security
--------
The text is never given to Python or to any general-purpose expression library: there is no
``eval``, ``exec``, ``compile`` or import of user text. A hand-written tokenizer accepts only the
characters, numbers and names of the grammar above; a recursive-descent parser builds an immutable
tree from a closed set of node types; evaluation runs that tree, flattened into a list of steps,
with numpy functions from a fixed table. Anything else is rejected with
:class:`~holoscan.errors.InputError` before any evaluation, naming the key, the offending token
and its 0-based character position. The work is bounded:
at most 2000 characters, 1000 tokens and 50 levels of nesting (parentheses, calls, unary minus,
exponents), literals of magnitude at most 1e6, constant sub-expressions folded at parse time
must be finite, and :class:`ParsedCoupling` caps the work spent on its symbolic derivatives.

Trees are canonical (sums and products flattened, like terms and powers collected, constants
folded) and interned, so equal expressions are the same object.
"""
from __future__ import annotations

import contextvars
import keyword
import math
import re
import weakref
from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["FUNCTIONS", "MAX_CHARS", "MAX_DEPTH", "MAX_LITERAL", "MAX_TOKENS", "Expr", "ParsedCoupling",
           "check_param_name", "names_used", "parse"]

MAX_CHARS = 2000
MAX_TOKENS = 1000
MAX_DEPTH = 50
MAX_LITERAL = 1e6
FUNCTIONS = ("exp", "log", "sqrt", "cosh", "sinh", "tanh", "sech", "cos", "sin")
_NAMES = ("phi", "pi") + FUNCTIONS


def _sech(x):
    e = np.exp(-np.abs(x))              # 1/cosh(x) = 2 e^{-|x|} / (1 + e^{-2|x|}): never overflows
    return 2.0 * e / (1.0 + e * e)


_NUMPY = {"exp": np.exp, "log": np.log, "sqrt": np.sqrt, "cosh": np.cosh, "sinh": np.sinh,
          "tanh": np.tanh, "sech": _sech, "cos": np.cos, "sin": np.sin}
_FUNC_INDEX = {name: i for i, name in enumerate(FUNCTIONS)}


# -- tree nodes ---------------------------------------------------------------------------------
class Expr:
    """An immutable, interned expression tree in ``phi``; build one with :func:`parse`.

    Node types: ``Num`` (a float), ``Var`` (phi), ``Add`` (terms, constant last), ``Mul``
    (factors, coefficient first; ``a/b`` is ``a * b**-1``), ``Pow`` and ``Call``.
    """

    __slots__ = ("__weakref__", "_const", "_d", "_h")
    _fields: tuple = ()
    _rank = 0

    def __setattr__(self, name, value):
        raise AttributeError("expression nodes are immutable")

    def __delattr__(self, name):
        raise AttributeError("expression nodes are immutable")

    def __reduce__(self):
        return _make, (type(self), *self._values())

    def _values(self) -> tuple:
        return ()

    @property
    def children(self) -> tuple:
        return ()

    def _ident(self) -> tuple:
        return ()

    def derivative(self) -> Expr:
        """Exact d/dphi, simplified (memoised on the node)."""
        d = self._d
        if d is None:
            d = self._derive()
            object.__setattr__(self, "_d", d)
        return d

    def evaluate(self, phi):
        """Value at ``phi`` (float for a scalar, else an ndarray of the same shape; never raises).

        Non-finite results (overflow, a logarithm of a negative number, ...) come out as inf/nan.
        """
        return _evaluate((self,), phi)[0]

    def __repr__(self):
        return f"<Expr {self}>"


def _make(cls, *values):
    """The unique node of type ``cls`` with these field values (hash-consing)."""
    key = (cls, *values)
    node = _TABLE.get(key)
    if node is None:
        _charge(1)
        node = object.__new__(cls)
        for name, value in zip(cls._fields, values):
            object.__setattr__(node, name, value)
        kids = node.children
        object.__setattr__(node, "_const", cls is not Var and all(k._const for k in kids))
        object.__setattr__(node, "_h", hash((cls._rank, *node._ident(), *(k._h for k in kids))))
        object.__setattr__(node, "_d", None)
        _TABLE[key] = node
    return node


class Num(Expr):
    __slots__ = ("value",)
    _fields = ("value",)

    def _values(self):
        return (self.value,)

    def _ident(self):
        return (self.value,)

    def _derive(self):
        return ZERO


    def __str__(self):
        return _fmt(self.value)


class Var(Expr):
    __slots__ = ()
    _rank = 1

    def _derive(self):
        return ONE


    def __str__(self):
        return "phi"


class Call(Expr):
    __slots__ = ("arg", "fn")
    _fields = ("fn", "arg")
    _rank = 2

    def _values(self):
        return (self.fn, self.arg)

    @property
    def children(self):
        return (self.arg,)

    def _ident(self):
        return (_FUNC_INDEX[self.fn],)

    def _derive(self):
        return mul(_OUTER[self.fn](self), self.arg.derivative())


    def __str__(self):
        return f"{self.fn}({self.arg})"


class Pow(Expr):
    __slots__ = ("base", "exp")
    _fields = ("base", "exp")
    _rank = 3

    def _values(self):
        return (self.base, self.exp)

    @property
    def children(self):
        return (self.base, self.exp)

    def _derive(self):
        b, e = self.base, self.exp
        if e._const:                                    # (b**c)' = c b**(c-1) b'
            return mul(e, pow_(b, add(e, MINUS_ONE)), b.derivative())
        if b._const:                                    # (c**e)' = c**e log(c) e'
            return mul(self, call("log", b), e.derivative())
        return mul(self, add(mul(e.derivative(), call("log", b)),
                             mul(e, b.derivative(), pow_(b, MINUS_ONE))))


    def __str__(self):
        if _is_recip(self):
            return _mul_str(1.0, (self,))
        return f"{_wrap(self.base, 4)}**{_wrap(self.exp, 3)}"


class Mul(Expr):
    __slots__ = ("factors",)
    _fields = ("factors",)
    _rank = 4

    def _values(self):
        return (self.factors,)

    @property
    def children(self):
        return self.factors

    def _derive(self):
        fs = self.factors
        return add(*(mul(*fs[:i], f.derivative(), *fs[i + 1:]) for i, f in enumerate(fs) if not f._const))


    def __str__(self):
        c, rest = _split_coeff(self)
        return _mul_str(c, rest.factors if isinstance(rest, Mul) else (rest,))


class Add(Expr):
    __slots__ = ("terms",)
    _fields = ("terms",)
    _rank = 5

    def _values(self):
        return (self.terms,)

    @property
    def children(self):
        return self.terms

    def _derive(self):
        return add(*(t.derivative() for t in self.terms))


    def __str__(self):
        out = []
        for i, t in enumerate(self.terms):
            negative, body = _signed(t)
            out.append(("-" if negative else "") + body if i == 0 else (" - " if negative else " + ") + body)
        return "".join(out)


_TABLE: weakref.WeakValueDictionary = weakref.WeakValueDictionary()
_BUDGET: contextvars.ContextVar = contextvars.ContextVar("holoscan_expr_budget", default=None)


class _TooComplex(Exception):
    """The work budget of the current differentiation ran out."""


def _charge(units: int) -> None:
    """Count work (new nodes, operands simplified) against the active budget, if any."""
    budget = _BUDGET.get()
    if budget is not None:
        budget[0] -= units
        if budget[0] < 0:
            raise _TooComplex


def num(value) -> Num:
    return _make(Num, float(value))


ZERO, ONE, MINUS_ONE = num(0.0), num(1.0), num(-1.0)
PHI = _make(Var)


# -- simplifying constructors ---------------------------------------------------------------------
def _order(node):
    return (node._rank, node._h)


def _fold(fn, *args) -> Num:
    with np.errstate(all="ignore"):
        return num(fn(*(np.float64(a) for a in args)))


def _split_coeff(node):
    """``node = c * rest`` with a numeric ``c`` (``rest`` has no coefficient)."""
    if isinstance(node, Mul) and isinstance(node.factors[0], Num):
        rest = node.factors[1:]
        return node.factors[0].value, rest[0] if len(rest) == 1 else _make(Mul, rest)
    return 1.0, node


def _scaled(c: float, rest: Expr) -> Expr:
    if c == 1.0:
        return rest
    return _make(Mul, (num(c),) + (rest.factors if isinstance(rest, Mul) else (rest,)))


def add(*terms: Expr) -> Expr:
    """Sum with nested sums flattened, like terms (same non-numeric part) collected, zeros dropped."""
    _charge(len(terms))
    const, coeffs = 0.0, {}
    for t in terms:
        for u in (t.terms if isinstance(t, Add) else (t,)):
            if isinstance(u, Num):
                const += u.value
            else:
                c, rest = _split_coeff(u)
                coeffs[rest] = coeffs.get(rest, 0.0) + c
    rests = sorted((r for r, c in coeffs.items() if c != 0.0), key=_order)
    out = [_scaled(coeffs[r], r) for r in rests]
    if const != 0.0 or not out:
        out.append(num(const))
    return out[0] if len(out) == 1 else _make(Add, tuple(out))


def mul(*factors: Expr) -> Expr:
    """Product with nested products flattened, constants multiplied, powers of a base collected."""
    _charge(len(factors))
    coef, powers = 1.0, {}
    for f in factors:
        for u in (f.factors if isinstance(f, Mul) else (f,)):
            if isinstance(u, Num):
                coef *= u.value
            else:
                base, e = (u.base, u.exp.value) if isinstance(u, Pow) and isinstance(u.exp, Num) else (u, 1.0)
                powers[base] = powers.get(base, 0.0) + e
    if coef == 0.0:
        return ZERO
    items = [pow_(b, num(e)) for b, e in powers.items() if e != 0.0]
    if any(isinstance(i, (Mul, Num)) for i in items):   # a power distributed over a product
        return mul(num(coef), *items)
    items.sort(key=_order)
    if coef != 1.0 or not items:
        items.insert(0, num(coef))
    return items[0] if len(items) == 1 else _make(Mul, tuple(items))


def pow_(base: Expr, exp: Expr) -> Expr:
    """``base**exp``; folds constants and merges integer powers of powers and of products."""
    if isinstance(exp, Num):
        e = exp.value
        if e == 0.0:
            return ONE
        if e == 1.0:
            return base
        if isinstance(base, Num):
            return _fold(np.power, base.value, e)
        if e.is_integer() and isinstance(base, Pow) and isinstance(base.exp, Num):
            return pow_(base.base, num(base.exp.value * e))
        if e.is_integer() and isinstance(base, Mul):
            return mul(*(pow_(f, exp) for f in base.factors))
    if isinstance(base, Num) and base.value == 1.0:
        return ONE
    return _make(Pow, base, exp)


def call(fn: str, arg: Expr) -> Expr:
    if isinstance(arg, Num):
        return _fold(_NUMPY[fn], arg.value)
    return _make(Call, fn, arg)


_OUTER = {  # f'(u) for each function, given the node f(u)
    "exp": lambda n: n,
    "log": lambda n: pow_(n.arg, MINUS_ONE),
    "sqrt": lambda n: mul(num(0.5), pow_(n, MINUS_ONE)),
    "cosh": lambda n: call("sinh", n.arg),
    "sinh": lambda n: call("cosh", n.arg),
    "tanh": lambda n: pow_(call("sech", n.arg), num(2.0)),
    "sech": lambda n: mul(MINUS_ONE, n, call("tanh", n.arg)),
    "cos": lambda n: mul(MINUS_ONE, call("sin", n.arg)),
    "sin": lambda n: call("cos", n.arg),
}


# -- printing -----------------------------------------------------------------------------------
def _fmt(v: float) -> str:
    if math.isfinite(v) and v.is_integer() and abs(v) < 1e16:
        return str(int(v))
    return repr(v)


def _is_recip(node) -> bool:
    return isinstance(node, Pow) and isinstance(node.exp, Num) and node.exp.value < 0


def _prec(node) -> int:
    """Binding strength of the printed form: 1 sum, 2 product or negation, 3 power, 4 atom."""
    if isinstance(node, Num):
        return 2 if node.value < 0 else 4
    if isinstance(node, Pow):
        return 2 if _is_recip(node) else 3
    return {Add: 1, Mul: 2}.get(type(node), 4)


def _wrap(node, level: int) -> str:
    return f"({node})" if _prec(node) < level else str(node)


def _mul_str(coef: float, factors) -> str:
    top = [_wrap(f, 2) for f in factors if not _is_recip(f)]
    bottom = []
    for f in filter(_is_recip, factors):
        e = -f.exp.value
        bottom.append(_wrap(f.base, 3) if e == 1 else f"{_wrap(f.base, 4)}**{_fmt(e)}")
    if abs(coef) != 1.0 or not top:
        top.insert(0, _fmt(abs(coef)))
    text = "*".join(top) + "".join("/" + b for b in bottom)
    return "-" + text if coef < 0 else text


def _signed(term) -> tuple[bool, str]:
    """(is the term negative, its printed magnitude) for use inside a sum."""
    if isinstance(term, Num) and term.value < 0:
        return True, _fmt(-term.value)
    c, rest = _split_coeff(term)
    if c < 0:
        return True, _mul_str(-c, rest.factors if isinstance(rest, Mul) else (rest,))
    return False, str(term)


# -- evaluation ---------------------------------------------------------------------------------
class _Program:
    """Several trees flattened into one list of numpy steps, each shared node computed once.

    The steps are closures over the fixed function table, taken in post-order; they perform the
    same operations in the same order as a recursive walk of the trees would, without its per-node
    dispatch and memo look-ups.
    """

    __slots__ = ("outputs", "size", "slots", "steps")

    def __init__(self, nodes):
        index: dict = {}
        self.slots: list = []            # constants, filled once
        self.steps: list = []            # (slot, step(registers))

        def visit(node):
            i = index.get(node)
            if i is not None:
                return i
            kids = [visit(k) for k in node.children]
            i = index[node] = len(index)
            self.slots.append(node.value if isinstance(node, Num) else None)
            if not isinstance(node, Num):
                self.steps.append((i, _step(node, kids)))
            return i

        self.outputs = [visit(n) for n in nodes]
        self.size = len(index)

    def run(self, x) -> list:
        r = list(self.slots)
        for i, step in self.steps:
            r[i] = x if step is None else step(r)
        return [r[i] for i in self.outputs]


def _step(node, kids):
    """The closure that computes ``node`` from the registers of its children (None: phi itself)."""
    if isinstance(node, Var):
        return None
    if isinstance(node, Call):
        fn, (a,) = _NUMPY[node.fn], kids
        return lambda r: fn(r[a])
    if isinstance(node, Pow):
        a, b = kids
        return lambda r: np.power(r[a], r[b])
    first, rest = kids[0], kids[1:]
    if isinstance(node, Mul):
        if len(rest) == 1:
            (b,) = rest
            return lambda r: r[first] * r[b]

        def product(r):
            acc = r[first]
            for k in rest:
                acc = acc * r[k]
            return acc
        return product
    if len(rest) == 1:
        (b,) = rest
        return lambda r: r[first] + r[b]

    def total(r):
        acc = r[first]
        for k in rest:
            acc = acc + r[k]
        return acc
    return total


def _evaluate(nodes, phi, program: _Program | None = None) -> list:
    """Evaluate several trees at ``phi`` sharing common sub-expressions; shapes follow ``phi``."""
    x = np.asarray(phi, dtype=float)
    if program is None:
        program = _Program(nodes)
    with np.errstate(all="ignore"):
        values = program.run(x)
    if x.ndim == 0 and not isinstance(phi, np.ndarray):
        return [float(v) for v in values]
    out, seen = [], set()
    for v in values:                     # fresh arrays as they are; phi, constants and repeats copied
        if not (type(v) is np.ndarray and v.shape == x.shape and v.dtype == float and v is not x
                and id(v) not in seen):
            v = np.array(np.broadcast_to(np.asarray(v, dtype=float), x.shape))
        seen.add(id(v))
        out.append(v)
    return out


# -- tokenizer ----------------------------------------------------------------------------------
_NUMBER = re.compile(r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?", re.ASCII)
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*", re.ASCII)
_OPERATORS = ("+", "-", "*", "/", "(", ")")
_BLANKS = " \t\r\n"
_HINTS = {".": "attribute access is not allowed", ",": "functions take exactly one argument",
          "'": "strings are not allowed", '"': "strings are not allowed",
          "[": "brackets are not allowed", "]": "brackets are not allowed",
          "{": "braces are not allowed", "}": "braces are not allowed",
          ";": "only one expression is allowed", "^": "write powers as '**'"}


@dataclass(frozen=True)
class _Token:
    kind: str       # "num", "name", "op" or "end"
    text: str
    pos: int
    value: float = 0.0

    @property
    def end(self) -> int:
        return self.pos + len(self.text)

    def describe(self) -> str:
        if self.kind == "end":
            return "end of input"
        return {"num": "number ", "name": "name "}.get(self.kind, "") + repr(self.text)


def _tokenize(text: str, fail, params: dict | None = None) -> list[_Token]:
    tokens, i, n = [], 0, len(text)
    while i < n:
        ch = text[i]
        if ch in _BLANKS:
            i += 1
            continue
        if len(tokens) >= MAX_TOKENS:
            fail(f"more than {MAX_TOKENS} tokens (limit reached at position {i})")
        if m := _NUMBER.match(text, i):
            tokens.append(_literal(m.group(), i, fail))
        elif m := _NAME.match(text, i):
            tokens.append(_name(m.group(), i, fail, params))
        elif text.startswith("**", i) or ch in _OPERATORS:
            tokens.append(_Token("op", "**" if text.startswith("**", i) else ch, i))
        else:
            hint = f" ({_HINTS[ch]})" if ch in _HINTS else ""
            fail(f"unexpected character {ch!r} at position {i}{hint}; allowed: numbers, phi, pi, "
                 f"+ - * / ** ( ) and calls of {', '.join(FUNCTIONS)}")
        i = tokens[-1].end
    tokens.append(_Token("end", "", n))
    return tokens


def _literal(text: str, pos: int, fail) -> _Token:
    value = float(text)
    if not abs(value) <= MAX_LITERAL:
        fail(f"number {text!r} at position {pos} is too large (at most {MAX_LITERAL:g} in magnitude)")
    return _Token("num", text, pos, value)


def _name(name: str, pos: int, fail, params: dict | None = None) -> _Token:
    if params and name in params and name not in _NAMES:
        return _Token("num", name, pos, float(params[name]))   # a named number: its value, as an atom
    if name not in _NAMES:
        what = "Python keyword" if keyword.iskeyword(name) else "unknown name"
        extra = f", and the names in params ({', '.join(sorted(params))})" if params else ""
        fail(f"{what} {name!r} at position {pos}; allowed names: {', '.join(_NAMES)}{extra}")
    return _Token("name", name, pos)


#: what a name in ``params`` may look like (and must not be: a name of the grammar, a keyword)
PARAM_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]{0,31}", re.ASCII)


def check_param_name(name, key: str) -> str:
    """A name usable in ``params``: an identifier that is not phi, pi, a function or a keyword."""
    if not isinstance(name, str) or not PARAM_NAME.fullmatch(name) or name in _NAMES or keyword.iskeyword(name):
        raise InputError(key, name, f"a parameter name must be an identifier of at most 32 characters, not "
                         f"a Python keyword and not one of {', '.join(_NAMES)}")
    return name


def names_used(text: str, params: dict, key: str) -> set[str]:
    """The names of ``params`` that ``text`` uses (the text is tokenized, not evaluated)."""
    def fail(reason):
        raise InputError(key, _shown(text), reason)
    return {t.text for t in _tokenize(text, fail, params) if t.kind == "num" and t.text in params}


# -- parser -------------------------------------------------------------------------------------
def _shown(text: str) -> str:
    return text if len(text) <= 200 else f"{text[:80]}... ({len(text)} characters)"


class _Parser:
    """Recursive descent over the token list; every node is built by a simplifying constructor."""

    def __init__(self, text: str, key: str, params: dict | None = None):
        self.text, self.key = text, key
        self.tokens = _tokenize(text, self.fail, params)
        self.i = 0
        self.depth = 0

    def fail(self, reason: str):
        raise InputError(self.key, _shown(self.text), reason)

    @property
    def tok(self) -> _Token:
        return self.tokens[self.i]

    def take(self) -> _Token:
        tok = self.tokens[self.i]
        self.i += 1
        return tok

    def at(self, *ops) -> bool:
        return self.tok.kind == "op" and self.tok.text in ops

    def unexpected(self, expected: str):
        tok = self.tok
        hint = ""
        if tok.kind in ("num", "name") or (tok.kind == "op" and tok.text == "("):
            hint = " (implicit multiplication is not allowed; write '*')"
        self.fail(f"unexpected {tok.describe()} at position {tok.pos}; expected {expected}{hint}")

    def enter(self, tok: _Token):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            self.fail(f"nesting deeper than {MAX_DEPTH} levels at position {tok.pos} ({tok.text!r})")

    def checked(self, node: Expr, start: int) -> Expr:
        """Reject a node whose freshly folded constants are not finite."""
        if any(isinstance(n, Num) and not math.isfinite(n.value) for n in (node, *node.children)):
            end = self.tokens[self.i - 1].end
            self.fail(f"the constant sub-expression {self.text[start:end]!r} at position {start} is not "
                      "finite (overflow, division by zero or an invalid value)")
        return node

    def parse(self) -> Expr:
        if self.tok.kind == "end":
            self.fail("empty expression (nothing at position 0)")
        node = self.expr()
        if self.tok.kind != "end":
            if self.at(")"):
                self.fail(f"unmatched ')' at position {self.tok.pos}")
            self.unexpected("an operator or the end of input")
        if not _all_finite(node):
            self.fail("a constant in the expression starting at position 0 is not finite")
        return node

    def expr(self) -> Expr:
        start = self.tok.pos
        node = self.term()
        while self.at("+", "-"):
            op = self.take().text
            rhs = self.term()
            node = self.checked(add(node, rhs if op == "+" else mul(MINUS_ONE, rhs)), start)
        return node

    def term(self) -> Expr:
        start = self.tok.pos
        node = self.unary()
        while self.at("*", "/"):
            op = self.take().text
            rhs = self.unary()
            node = self.checked(mul(node, rhs if op == "*" else pow_(rhs, MINUS_ONE)), start)
        return node

    def unary(self) -> Expr:
        if not self.at("-"):
            return self.power()
        tok = self.take()
        self.enter(tok)
        node = self.checked(mul(MINUS_ONE, self.unary()), tok.pos)
        self.depth -= 1
        return node

    def power(self) -> Expr:
        start = self.tok.pos
        base = self.atom()
        if not self.at("**"):
            return base
        self.enter(self.take())
        node = self.checked(pow_(base, self.unary()), start)
        self.depth -= 1
        return node

    def atom(self) -> Expr:
        tok = self.tok
        if tok.kind == "num":
            self.take()
            return num(tok.value)
        if tok.kind == "name":
            self.take()
            if tok.text in FUNCTIONS:
                return self.call(tok)
            return PHI if tok.text == "phi" else num(math.pi)
        if self.at("("):
            self.enter(self.take())
            node = self.expr()
            self.close(tok)
            return node
        self.unexpected("a number, phi, pi, a function call or '('")

    def call(self, name: _Token) -> Expr:
        if not self.at("("):
            self.fail(f"function {name.text!r} at position {name.pos} must be called with one argument, "
                      f"e.g. {name.text}(phi)")
        self.enter(self.take())
        arg = self.expr()
        self.close(name)
        return self.checked(call(name.text, arg), name.pos)

    def close(self, opener: _Token):
        if not self.at(")"):
            self.unexpected(f"')' closing the {opener.text!r} at position {opener.pos}")
        self.take()
        self.depth -= 1


def _all_finite(node: Expr) -> bool:
    seen, stack = set(), [node]
    while stack:
        n = stack.pop()
        if n in seen:
            continue
        seen.add(n)
        if isinstance(n, Num) and not math.isfinite(n.value):
            return False
        stack.extend(n.children)
    return True


def parse(text: str, key: str, params: dict | None = None) -> Expr:
    """Parse a whitelisted expression in ``phi`` (grammar in the module docstring).

    Parameters
    ----------
    text : str
        The expression, e.g. ``"-(8*exp(phi/sqrt(6)) + 4*exp(-2*phi/sqrt(6)))"``.
    key : str
        Where the text came from (e.g. ``"models[2].V"``), used in error messages.
    params : dict, optional
        Named numbers the text may use (``{"g": 0.6}``): each occurrence stands for its value, as
        an atom (``-g**2`` with ``g = -0.5`` is ``-((-0.5)**2)``), so the tree is exactly that of
        the text with the number written in parentheses.

    Returns
    -------
    Expr
        The canonical, simplified tree.

    Raises
    ------
    InputError
        For anything outside the grammar or its limits, naming the offending token and its 0-based
        character position. Nothing of the text is executed, imported or evaluated beforehand.
    """
    if not isinstance(text, str):
        raise InputError(key, text, "must be a string: an expression in phi")
    if len(text) > MAX_CHARS:
        raise InputError(key, _shown(text), f"expression too long: {len(text)} characters, at most "
                         f"{MAX_CHARS} (position {MAX_CHARS} onwards is over the limit)")
    return _Parser(text, key, params).parse()


# -- couplings ----------------------------------------------------------------------------------
class ParsedCoupling:
    """A coupling (``V`` or ``f``) given as text; implements the ``Coupling`` protocol.

    Parameters
    ----------
    text : str
        Expression in ``phi`` (see :func:`parse`).
    key : str
        Config key path for error messages.

    Notes
    -----
    ``derivs(phi)`` returns the value and the exact first and second derivatives. For
    ``|phi| < SERIES_RADIUS`` (1e-2) the derivatives come from Taylor polynomials of degree 12 about
    ``phi = 0`` whose coefficients are the symbolic derivatives of orders 1..14 evaluated at 0
    (computed once here): evaluating a derivative such as ``a (e^{a phi} - e^{-2 a phi})`` directly
    near 0 cancels catastrophically. If any of those coefficients is not finite (``log(phi)``,
    ``sqrt(phi)``), the derivatives are evaluated directly everywhere. Evaluation never raises:
    overflow and invalid values come out as inf/nan for the caller to detect.

    Raises
    ------
    InputError
        If the text does not parse, or if computing its derivatives takes more than ``WORK_BUDGET``
        steps (new nodes plus operands simplified; about a second of work).
    """

    ORDERS = 14
    DEGREE = 12
    SERIES_RADIUS = 1e-2
    WORK_BUDGET = 500_000

    def __init__(self, text: str, key: str):
        self.text = text
        self.key = key
        self.expr = parse(text, key)
        chain = self._chain()
        self._d1, self._d2 = chain[1], chain[2]
        self._program1 = _Program((self.expr, self._d1))
        self._program_d1 = _Program((self._d1,))
        self._program2 = _Program((self.expr, self._d1, self._d2))
        self._at0 = np.array(_evaluate(chain, 0.0))
        fact = np.array([math.factorial(j) for j in range(self.DEGREE + 1)], dtype=float)
        self._c1 = self._at0[1:self.DEGREE + 2] / fact
        self._c2 = self._at0[2:self.DEGREE + 3] / fact
        self._series = bool(np.all(np.isfinite(self._at0[1:])))

    def _chain(self) -> list[Expr]:
        token = _BUDGET.set([self.WORK_BUDGET])
        try:
            chain = [self.expr]
            for _ in range(self.ORDERS):
                chain.append(chain[-1].derivative())
            return chain
        except _TooComplex:
            raise InputError(self.key, _shown(self.text), f"too complex: differentiating it {self.ORDERS} "
                             f"times takes more than {self.WORK_BUDGET} steps") from None
        finally:
            _BUDGET.reset(token)

    def taylor0(self, n: int) -> np.ndarray:
        """The first ``n`` derivatives at ``phi = 0``: element ``k-1`` is ``d^k f / dphi^k (0)``."""
        if not 0 <= n <= self.ORDERS:
            raise ValueError(f"n must be in 0..{self.ORDERS}")
        return self._at0[1:n + 1].copy()

    def derivs(self, phi):
        """``(f, f', f'')`` at ``phi`` (scalar -> floats, array -> arrays of the same shape)."""
        v, d1, d2 = _evaluate((), phi, self._program2)
        return v, self._near_zero(phi, d1, self._c1), self._near_zero(phi, d2, self._c2)

    def derivs1(self, phi):
        """``(f, f')`` only: what the field equations need, at two thirds of the cost of :meth:`derivs`."""
        v, d1 = _evaluate((), phi, self._program1)
        return v, self._near_zero(phi, d1, self._c1)

    def derivative1(self, phi):
        """``f'`` only (as :meth:`derivs1` gives it, to the bit), for equations that need no ``f``."""
        (d1,) = _evaluate((), phi, self._program_d1)
        return self._near_zero(phi, d1, self._c1)

    def _near_zero(self, phi, direct, coeffs):
        """``direct`` with the Taylor series (``coeffs``) where ``|phi| < SERIES_RADIUS`` (see the class notes)."""
        if not self._series:
            return direct
        x = np.asarray(phi, dtype=float)
        near = np.abs(x) < self.SERIES_RADIUS
        if not np.any(near):
            return direct
        with np.errstate(all="ignore"):
            return _blend(near, x, coeffs, direct)

    def __eq__(self, other):
        return isinstance(other, ParsedCoupling) and self.expr is other.expr

    def __hash__(self):
        return self.expr._h

    def __reduce__(self):
        return ParsedCoupling, (self.text, self.key)

    def __repr__(self):
        return f"ParsedCoupling({self.text!r}, {self.key!r})"


def _blend(near, x, coeffs, direct):
    """``direct`` with the entries where ``near`` replaced by the series (evaluated only there)."""
    if isinstance(direct, float) or np.ndim(direct) == 0:
        return float(_horner(coeffs, x))
    out = np.array(direct, dtype=float)
    out[near] = _horner(coeffs, x[near])
    return out


def _horner(coeffs, x):
    acc = np.full_like(x, coeffs[-1])
    for c in coeffs[-2::-1]:
        acc = acc * x + c
    return acc
