"""Onset of condensation and the condensed (hairy) brane family of a charged-scalar model.

Everything is in units of the temperature (the model is conformal: the unsourced scalar leaves
``x = mu/T`` as the only parameter; ``mu >= 0`` here, the sign symmetry is applied by the caller).
Shots come from :class:`holoscan.kinds.charged_scalar.brane.HairyBrane` with horizon data ``(psi0, E)``.

Onset. On the normal brane (``psi0 = 0``: the scalar is linearised on Reissner-Nordstrom, or on
Schwarzschild with a probe gauge field) the horizon-regular static scalar has a source coefficient
``src(x)``. A zero of ``src`` is a normalisable static zero mode, the onset of the instability; the
lowest such ``x`` is ``x_c = mu/T_c`` (found by a batched scan of ``x`` from 0.05 to 400 and Brent's
method on the first sign change).

Condensed family. Parametrised by ``s = psi0`` (the horizon value of the scalar, in units r_h = 1),
each member solves ``src(s, E) = 0`` for ``E > 0``, iterated in ``log E`` (the horizon field falls
off exponentially as T -> 0 at fixed mu, so only relative accuracy in E is meaningful). The family
is built once per model, tolerance and process, panel by panel: Chebyshev-Lobatto nodes in ``s``
(the first panel starts at the onset ``s = 0``), all nodes of a panel solved together by a batched
Newton iteration; a panel whose interpolants of ``x(s)`` and ``rho_hat(s)`` are not resolved to
``1e-10`` is halved, one resolved to ``1e-12`` is followed by one twice as wide. The panels give
guesses for targeted solves and the pressure by the first law::

    P(T=1, x) = P_normal(x_c) + int_{x_c}^{x} rho_hat dx'     (= int rho_hat(s) x'(s) ds)

A targeted solve at ``x`` is a 2D Newton iteration in ``(psi0, E)`` on ``(src, x(psi0, E) - x)``,
started from the family's interpolant. Derivatives along the family: first order for chi2 and cs2
(:func:`family_gradients`), up to fourth order for chi3 and chi4 (:func:`family_cumulants`, from a
stencil of shots that rides along in the same batched calls).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial import Chebyshev

from ...numerics import derivatives as fd
from ...numerics.cheb import interpolant, lobatto, tail
from .brane import HairyBrane, Shots

#: observables carried along (attribute names of Shots)
OBS = ("x", "rho_hat", "s_hat", "p_hat", "O_hat")
#: Chebyshev-Lobatto degree of a family panel
DEGREE = 14
#: a panel is accepted when the trailing Chebyshev coefficients of x(s), rho_hat(s) are below this;
#: the next panel is twice as wide when they are below PANEL_TOL / 100 (near the shots' noise floor)
PANEL_TOL = 1e-10


#: the family derivatives step in psi0 relative to max(psi0, PSI_STEP_FLOOR)
PSI_STEP_FLOOR = 0.1


class SolveError(ArithmeticError):
    """A numerical step failed; the message says which (caught and reported by the model)."""


@dataclass
class Work:
    """Right-hand-side evaluations, steps and shots spent on one result."""

    nfev: int = 0
    nsteps: int = 0
    shots: int = 0

    def add(self, sh: Shots, n: int) -> None:
        self.nfev += sh.nfev
        self.nsteps += sh.nsteps
        self.shots += n


def normal_E(brane: HairyBrane, x):
    """Horizon field E of the normal brane with mu/T = x (r_h = 1): from ``x = 4 pi a / g'(1)``,
    ``a = E/(d-2)``, ``g'(1) = d - kappa^2 E^2 / ((d-1) e^2)``."""
    d, k2, e2 = brane.d, brane.kappa_sq, brane.e_sq
    x = np.asarray(x, float)
    if k2 == 0.0:
        return x * d * (d - 2) / (4.0 * math.pi)
    c = k2 / ((d - 1) * e2)
    # x (d - c E^2)(d-2) = 4 pi E  ->  c x (d-2) E^2 + 4 pi E - d (d-2) x = 0
    A = c * x * (d - 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        E = 2.0 * d * (d - 2) * x / (4.0 * math.pi + np.sqrt(16.0 * math.pi**2 + 4.0 * A * d * (d - 2) * x))
    return E


@dataclass
class Onset:
    x_c: float                 # mu/T at the onset (inf when there is none)
    E_c: float
    shots: Shots | None        # boundary data of the normal brane at the onset (None if none)
    error: float               # relative change of x_c under 100x tighter tolerances
    work: Work


def find_onset(brane: HairyBrane, rtol: float, offset: float, x_max: float = 400.0) -> Onset:
    """Lowest x with a normalisable static zero mode of the scalar on the normal brane."""
    from scipy.optimize import brentq

    work = Work()
    xs = np.geomspace(0.05, x_max, 96)

    def src(x, rt):
        sh = brane.shoot([0.0], [float(normal_E(brane, x))], rt, offset)
        work.add(sh, 1)
        if not sh.ok[0]:
            raise SolveError(f"onset shot failed at mu/T = {x:.6g}")
        return float(sh.src[0])

    sh = brane.shoot(np.zeros_like(xs), normal_E(brane, xs), rtol, offset)
    work.add(sh, xs.size)
    v = np.where(sh.ok, sh.src, np.nan)
    change = np.flatnonzero(np.isfinite(v[1:]) & np.isfinite(v[:-1]) & (np.sign(v[1:]) != np.sign(v[:-1])))
    if change.size == 0:
        return Onset(math.inf, math.nan, None, 0.0, work)
    i = int(change[0])
    roots = []
    for rt in (rtol, max(rtol / 100.0, 2.3e-14)):
        roots.append(brentq(src, xs[i], xs[i + 1], args=(rt,), xtol=1e-15, rtol=1e-15, maxiter=200))
    x_c = roots[0]
    E_c = float(normal_E(brane, x_c))
    final = brane.shoot([0.0], [E_c], rtol, offset)
    work.add(final, 1)
    return Onset(x_c, E_c, final, abs(roots[0] - roots[1]) / roots[1], work)


@dataclass
class Panel:
    a: float
    b: float
    s: np.ndarray
    E: np.ndarray
    obs: dict                   # name -> values at the nodes
    poly: dict = field(default_factory=dict)  # name -> Chebyshev interpolant (also "logE")
    P_start: float = 0.0        # first-law pressure (T = 1) at s = a
    tail: float = 0.0           # size of the trailing coefficients (resolution)


class Family:
    """The condensed family of one brane at one tolerance and horizon offset (built lazily)."""

    def __init__(self, brane: HairyBrane, onset: Onset, rtol: float, offset: float):
        self.brane, self.onset, self.rtol, self.offset = brane, onset, rtol, offset
        self.panels: list[Panel] = []
        self.work = Work()
        self.failed: str | None = None

    # -- node solves --------------------------------------------------------------------------------
    def solve_E(self, s: np.ndarray, E: np.ndarray, max_iter: int = 15):
        """Batched Newton iteration in log E for src(s, E) = 0; returns (E, shots) or raises."""
        br, n = self.brane, s.size
        if not np.all(E > 0):
            raise SolveError("non-positive horizon field guessed along the family")
        L = np.log(E)
        h = 1e-7
        for _ in range(max_iter):
            sh = br.shoot(np.concatenate([s, s]), np.exp(np.concatenate([L, L + h])), self.rtol, self.offset)
            self.work.add(sh, 2 * n)
            if not np.all(sh.ok):
                raise SolveError("a family shot failed")
            f0, f1 = sh.src[:n], sh.src[n:]
            if np.any(f1 == f0):
                raise SolveError("the source no longer responds to the horizon field (E below resolution)")
            dL = np.clip(-f0 * h / (f1 - f0), -0.5, 0.5)
            L = L + dL
            if np.all(np.abs(dL) <= max(1e-13, self.rtol)):
                break
        else:
            raise SolveError("the family's Newton iteration did not converge")
        E = np.exp(L)
        fin = br.shoot(s, E, self.rtol, self.offset)
        self.work.add(fin, n)
        if not np.all(fin.ok):
            raise SolveError("a family shot failed")
        return E, fin

    def _make_panel(self, a: float, b: float, E_guess) -> Panel:
        s = 0.5 * (a + b) + 0.5 * (b - a) * lobatto(DEGREE + 1)
        E = np.asarray(E_guess(s), float)
        start = 0
        if a == 0.0:  # the onset itself: psi0 = 0 is the normal brane at x_c
            start = 1
        E_sol, sh = self.solve_E(s[start:], E[start:])
        E[start:] = E_sol
        obs = {k: np.empty(s.size) for k in OBS}
        for k in OBS:
            getattr_ = getattr(sh, k)
            obs[k][start:] = getattr_
        if start:
            on = self.onset.shots
            for k in OBS:
                obs[k][0] = 0.0 if k == "O_hat" else float(getattr(on, k)[0])
            E[0] = self.onset.E_c
        p = Panel(a, b, s, E, obs)
        for k in OBS:
            p.poly[k] = interpolant(s, obs[k], a, b)
        p.poly["logE"] = interpolant(s, np.log(E), a, b)
        p.tail = max(tail(p.poly["x"].coef), tail(p.poly["rho_hat"].coef))
        return p

    def _pilot_width(self) -> float:
        """Width of the first panel: x(s) - x_c ~ c s^2; aim at a 5% step in x."""
        s1 = 1e-2
        E1, sh = self.solve_E(np.array([s1]), np.array([self.onset.E_c]))
        c = (float(sh.x[0]) - self.onset.x_c) / s1**2
        self._pilot = (s1, float(E1[0]))
        if not c > 0:
            raise SolveError("the condensed family does not start towards larger mu/T")
        return math.sqrt(0.05 * self.onset.x_c / c)

    def extend(self) -> None:
        """Add one panel (halving its width until it is resolved)."""
        if not self.panels:
            w = self._pilot_width()
            s1, E1 = self._pilot
            Ec = self.onset.E_c
            guess = lambda s: Ec + (E1 - Ec) * (s / s1) ** 2
            a = 0.0
        else:
            last = self.panels[-1]
            a, w = last.b, (last.b - last.a) * (2.0 if last.tail < 1e-2 * PANEL_TOL else 1.0)
            lo = Chebyshev.fit(last.s[-6:], np.log(last.E[-6:]), deg=3)
            guess = lambda s: np.exp(lo(s))
        for _ in range(6):
            try:
                p = self._make_panel(a, a + w, guess)
            except SolveError:
                w *= 0.5
                continue
            if p.tail <= PANEL_TOL:
                break
            w *= 0.5
        else:
            raise SolveError("could not resolve the condensed family (panel width collapsed)")
        if self.panels:
            prev = self.panels[-1]
            p.P_start = prev.P_start + self._integral(prev, prev.b)
        else:
            p.P_start = float(self.onset.shots.p_hat[0])
        self.panels.append(p)

    @staticmethod
    def _integral(p: Panel, s: float) -> float:
        """int_{p.a}^{s} rho_hat(s') x'(s') ds' on panel p."""
        f = (p.poly["rho_hat"] * p.poly["x"].deriv()).integ(lbnd=p.a)
        return float(f(s))

    def ensure(self, x: float, max_panels: int = 80) -> None:
        """Extend the family until it reaches mu/T = x. Panels depend only on their predecessors, so
        the family (and every result drawn from it) does not depend on the order of requests; a
        failure to extend is remembered and reported again without new work."""
        while not self.panels or self.panels[-1].obs["x"][-1] < x:
            if self.failed is not None:
                raise SolveError(self.failed)
            if len(self.panels) >= max_panels:
                raise SolveError(f"mu/T = {x:.6g} lies beyond the {max_panels} panels of the condensed family "
                                 f"(mu/T <= {self.panels[-1].obs['x'][-1]:.6g})")
            prev_x = self.panels[-1].obs["x"][-1] if self.panels else self.onset.x_c
            if self.panels and self.panels[-1].E[-1] < 1e-30 * self.onset.E_c:
                self.failed = (f"the condensed family is followed only to mu/T = {prev_x:.6g}: there the horizon "
                               "field has fallen below 1e-30 of its onset value (deep in the condensed phase)")
                raise SolveError(self.failed)
            try:
                self.extend()
                if not self.panels[-1].obs["x"][-1] > prev_x:
                    raise SolveError("mu/T stopped growing along the condensed family")
            except SolveError as exc:
                self.failed = f"condensed family ends at mu/T = {prev_x:.6g}: {exc}"
                raise SolveError(self.failed) from None

    def locate(self, x: float):
        """(s, E) of the member with mu/T = x, from the interpolants (a guess for Newton)."""
        from scipy.optimize import brentq

        self.ensure(x)
        for p in self.panels:
            if p.obs["x"][0] <= x <= p.obs["x"][-1]:
                s = brentq(lambda t, x_of=p.poly["x"]: x_of(t) - x, p.a, p.b, xtol=1e-15, rtol=1e-15)
                return s, float(np.exp(p.poly["logE"](s)))
        raise SolveError(f"mu/T = {x:.6g} not found on the condensed family (x is not monotone in psi0)")

    def log_E_slope(self, s: float) -> float:
        """``d log E/d psi0`` along the family at ``psi0 = s`` from the panel interpolants (NaN
        outside the panels built so far); it sets the shape of the stencil of the higher cumulants."""
        for p in self.panels:
            if p.a <= s <= p.b:
                return float(p.poly["logE"].deriv()(s))
        return math.nan

    def pressure(self, s: float) -> tuple[float, float]:
        """First-law pressure P/T^d (T = 1) at family parameter s, and its error estimate (the
        panels' resolution times the size of the integral)."""
        for p in self.panels:
            if p.a <= s <= p.b:
                val = p.P_start + self._integral(p, s)
                tail = max(q.tail for q in self.panels if q.a <= s)
                return val, tail * abs(val - float(self.onset.shots.p_hat[0])) + 1e-16 * abs(val)
        raise SolveError(f"psi0 = {s:.6g} lies outside the condensed family")


@dataclass
class Member:
    """A solved member of the condensed family at a target x (units T = 1)."""

    s: float
    E: float
    vals: dict                   # OBS -> value
    src_ratio: float             # |src/vev| (zero-source mismatch)
    residual: float              # radial-charge drift (backreacted) or 0
    niter: int


def solve_member(brane: HairyBrane, x: float, guess, rtol: float, offset: float, work: Work,
                 max_iter: int = 30) -> Member:
    """2D Newton iteration in (log psi0, log E) on (src, x(psi0, E)/x - 1), forward-difference
    Jacobian. Stops when the step is below max(rtol, 1e-13), or at the noise floor of the shots (the
    step stops shrinking while both conditions hold to 1000 rtol; close to the onset x(psi0) is flat
    and the floor is high, which the caller's error estimate then reports)."""
    if not (guess[0] > 0 and guess[1] > 0):
        raise SolveError("the targeted solve needs psi0 > 0 and E > 0")
    v = np.log(np.array(guess, float))
    h = 1e-7
    prev = math.inf
    last = None
    for it in range(1, max_iter + 1):
        V = np.exp(np.array([v, v + [h, 0.0], v + [0.0, h]]))
        sh = brane.shoot(V[:, 0], V[:, 1], rtol, offset)
        work.add(sh, 3)
        if not np.all(sh.ok):
            raise SolveError("a shot of the targeted solve failed")
        F = np.array([sh.src, sh.x / x - 1.0])
        J = (F[:, 1:] - F[:, :1]) / h
        try:
            dv = -np.linalg.solve(J, F[:, 0])
        except np.linalg.LinAlgError:
            raise SolveError("singular Jacobian in the targeted solve") from None
        dv = np.clip(dv, -0.5, 0.5)
        last = sh
        step = float(np.max(np.abs(dv)))
        if step <= max(1e-13, rtol):
            break
        floor = abs(F[0, 0]) <= 1e3 * rtol * abs(float(sh.vev[0])) and abs(F[1, 0]) <= 1e3 * rtol
        if it >= 3 and step > 0.5 * prev and floor:
            break
        prev = step
        v = v + dv
    else:
        raise SolveError("the targeted Newton iteration did not converge")
    vals = {k: float(getattr(last, k)[0]) for k in OBS}
    s_, E_ = np.exp(v)
    return Member(float(s_), float(E_), vals, abs(float(last.src[0]) / float(last.vev[0])),
                  float(last.residual[0]), it)


def family_gradients(brane: HairyBrane, m: Member, step: float, rtol: float, offset: float, work: Work,
                     variants=(), cumulant_step: tuple[float, float] | None = None):
    """Derivatives along the family at member m of the observables OBS (units T = 1).

    The family tangent is ``t = (dsrc/dE, -dsrc/dpsi0)`` (normalised). Each partial derivative in
    ``psi0`` and ``E`` is a central difference with steps ``h, 2h, 4h`` (``h = step *
    max(psi0, PSI_STEP_FLOOR)``, ``step * E``: near the onset psi0 -> 0 and a step relative to it
    would let the shots' noise dominate), Richardson-extrapolated once: ``R(h) = (4 D(h) - D(2h))/3`` is used and
    ``|R(h) - R(2h)|`` of the derivatives along the tangent (about 15 times the O(h^4)
    truncation, and a sample of the noise) is their error. ``variants`` is a sequence of
    ``(name, brane, rtol, offset, weight)``: ``R(h)`` along the tangent is repeated with those
    settings and ``weight * |change|`` is that choice's error. Both are taken on the extrapolated
    derivative along the tangent: off the family (a sourced scalar) the charge read-out drifts
    linearly with the end of the integration, as the source squared; through the curvature of the
    source that leaves an O(h^2) term in D(h) proportional to the end point, which the
    extrapolation removes.

    Returns ``(deriv, errors)``: ``deriv`` maps each name of OBS to its derivative along ``t``;
    ``errors`` maps each error source (``"fd"`` and the variants' names) to a dict name -> error.

    With ``cumulant_step = (H, psi_scale)`` (a step ``H`` in the scaled data ``(psi0/psi_scale, E/E)``,
    :func:`cumulant_stencil`) every one of these batched calls also shoots the stencil of :func:`family_cumulants`
    (extra columns of the same batch: each column of a batch is integrated on its own, so the
    derivatives above do not change), and a third item is returned: ``{"base" or variant name:
    (weight, stencil shots)}``, the stencil shots a dict of ``ok``, ``src``, ``x``, ``rho_hat``."""
    hs = np.array([step * max(m.s, PSI_STEP_FLOOR), step * m.E])
    names = ("src",) + OBS
    extra_P = extra_Q = np.zeros(0)
    if cumulant_step is not None:
        extra_P, extra_Q = cumulant_stencil(m.s, m.E, *cumulant_step)
    stencils = {}

    def partials(br, rt, off, mults, name, weight):
        P, Q = [], []
        for k in range(2):
            for f in mults:
                for sgn in (1, -1):
                    du = np.zeros(2)
                    du[k] = sgn * f * hs[k]
                    P.append(m.s + du[0])
                    Q.append(m.E + du[1])
        n = len(P)
        sh = br.shoot(np.concatenate([np.array(P), extra_P]), np.concatenate([np.array(Q), extra_Q]), rt, off)
        work.add(sh, n + extra_P.size)
        if not np.all(sh.ok[:n]):
            raise SolveError("a derivative shot failed")
        if extra_P.size:
            stencils[name] = (weight, {k: getattr(sh, k)[n:] for k in ("ok", "src", "x", "rho_hat")})
        out = {}
        for nm in names:
            v = getattr(sh, nm)[:n].reshape(2, len(mults), 2)
            out[nm] = (v[:, :, 0] - v[:, :, 1]) / (2.0 * np.outer(hs, mults))  # (direction, step)
        return out

    def along(g):
        t = np.array([g["src"][1], -g["src"][0]])
        t /= np.linalg.norm(t)
        return {nm: float(g[nm] @ t) for nm in OBS}

    D = partials(brane, rtol, offset, (1.0, 2.0, 4.0), "base", 1.0)
    out = along({nm: (4.0 * D[nm][:, 0] - D[nm][:, 1]) / 3.0 for nm in names})
    R2 = along({nm: (4.0 * D[nm][:, 1] - D[nm][:, 2]) / 3.0 for nm in names})
    errors = {"fd": {nm: abs(out[nm] - R2[nm]) for nm in OBS}}
    for name, br, rt, off, w in variants:
        Dv = partials(br, rt, off, (1.0, 2.0), name, w)
        Rv = along({nm: (4.0 * Dv[nm][:, 0] - Dv[nm][:, 1]) / 3.0 for nm in names})
        errors[name] = {nm: w * abs(Rv[nm] - out[nm]) for nm in OBS}
    if cumulant_step is not None:
        return out, errors, stencils
    return out, errors


# -- higher cumulants along the family ---------------------------------------------------------------
#: directions (in the scaled data) of the one-dimensional stencils of :func:`family_cumulants`: eight,
#: so that the partial derivatives up to fourth order (five each) follow by least squares
CUM_DIRECTIONS = ((1.0, 0.0), (0.0, 1.0), (1.0, 1.0), (1.0, -1.0), (1.0, 2.0), (2.0, 1.0), (1.0, -2.0), (2.0, -1.0))
#: step multiples along each direction (three Richardson levels) and the two checks of them
CUM_STEPS = (1, 2, 4, 8)
CUM_CHECKS = ((1, 2, 4), (2, 4, 8))
#: the stencil's values: the centre first, then per direction +k, -k for k in CUM_STEPS
_CUM_KEYS = [(None, 0)] + [(j, sg * k) for j in range(len(CUM_DIRECTIONS)) for k in CUM_STEPS for sg in (1, -1)]


def cumulant_psi_scale(psi0: float, log_E_slope: float) -> float:
    """The unit of psi0 in the scaled data of the cumulant stencil: ``max(psi0, PSI_STEP_FLOOR)``,
    but at most ``1/|d log E/d psi0|``, so that the family runs no more steeply than the diagonal of
    the scaled data (deep in the condensed phase E falls fast along the family; measured on four
    models at T/T_c = 0.3: the estimate of chi4 fell from 0.3-400 to 2e-5-4e-3 relative)."""
    sp = max(psi0, PSI_STEP_FLOOR)
    if math.isfinite(log_E_slope) and log_E_slope != 0.0:
        sp = min(sp, 1.0 / abs(log_E_slope))
    return sp


def cumulant_stencil(psi0: float, E: float, H: float, sp: float) -> tuple[np.ndarray, np.ndarray]:
    """Horizon data ``(psi0, E)`` of the stencil of :func:`family_cumulants` about a member: the
    member itself, then ``+-k H`` along each of CUM_DIRECTIONS in the scaled data ``(psi0/sp, E/E)``
    (``sp`` from :func:`cumulant_psi_scale`)."""
    P = [psi0] + [psi0 + k * H * CUM_DIRECTIONS[j][0] * sp for j, k in _CUM_KEYS[1:]]
    Q = [E] + [E + k * H * CUM_DIRECTIONS[j][1] * E for j, k in _CUM_KEYS[1:]]
    return np.array(P), np.array(Q)


#: positions in the stencil's values of +k and -k (k in CUM_STEPS) along each direction: (direction, step)
_CUM_PLUS = np.array([[_CUM_KEYS.index((j, k)) for k in CUM_STEPS] for j in range(len(CUM_DIRECTIONS))])
_CUM_MINUS = np.array([[_CUM_KEYS.index((j, -k)) for k in CUM_STEPS] for j in range(len(CUM_DIRECTIONS))])


def _directional(values: np.ndarray, steps, orders, H: float) -> np.ndarray:
    """(direction, order) array of derivatives of one observable along CUM_DIRECTIONS: the symmetric
    differences of :func:`holoscan.numerics.derivatives.symmetric`, for all directions at once."""
    values = np.asarray(values, float)
    cols = [CUM_STEPS.index(k) for k in steps]
    plus, minus = values[_CUM_PLUS[:, cols]], values[_CUM_MINUS[:, cols]]
    odd, even = 0.5 * (plus - minus), 0.5 * (plus + minus) - values[0]
    out = np.empty((len(CUM_DIRECTIONS), len(orders)))
    for i, n in enumerate(orders):
        out[:, i] = ((odd if n % 2 else even) @ fd.weights(steps, n)) / H**n
    return out


#: pseudo-inverses taking the derivatives along CUM_DIRECTIONS of order n to the partials of order n
_PINV = {n: np.linalg.pinv(fd.direction_matrix(CUM_DIRECTIONS, n)) for n in (1, 2, 3, 4)}
_CUM_OBS = ("src", "x", "rho_hat")


def _partials(dd: dict, orders) -> dict:
    """name -> {n: partials of order n} from name -> (direction, order) derivatives."""
    return {nm: {n: _PINV[n] @ dd[nm][:, i] for i, n in enumerate(orders)} for nm in _CUM_OBS}


def _rho_x_derivatives(T: dict, order: int):
    """d^n rho_hat/dx^n (n = 1 .. order) along the family from the partials, and their scales."""
    cx, cr = fd.along_level_set(T["src"], [T["x"], T["rho_hat"]], order)
    return fd.curve_derivatives(cx, cr)


def family_cumulants(stencils: dict, H: float, x_target: float) -> dict:
    """``d^n rho_hat/dx^n`` (n = 1 .. 4) along the condensed family at a member, from the stencil
    shots of :func:`family_gradients` (units T = 1: chi3 = T^(d-3) R2, chi4 = T^(d-4) R3), and the
    errors of R2 and R3 by source (before any safety factor).

    Method. Along each of the eight CUM_DIRECTIONS the derivatives of ``src``, ``x``, ``rho_hat`` of
    orders 1 to 4 are symmetric differences at steps ``H, 2H, 4H, 8H`` (three Richardson levels,
    :func:`holoscan.numerics.derivatives.symmetric`); least squares over the directions gives the
    partial derivatives in the scaled data, the family's curve ``src = 0`` their derivatives along
    it (:func:`holoscan.numerics.derivatives.along_level_set`), the inverse chain rule those of
    ``rho_hat`` with respect to ``x``. Errors, each the change of R2 and R3 when the whole
    computation is repeated with one choice varied (not derivative by derivative: off the family
    the read-out of a shot with a source drifts with the end of the integration as the source
    squared, which changes the partials a great deal but cancels exactly along ``src = 0``; shifting
    the partials one by one would count it in full):

    * ``fd``: the three-level directional derivatives replaced by the two-level ones from steps
      (H, 2H, 4H), and by those from (2H, 4H, 8H): the two changes added;
    * each variant (``rtol``, ``offset``, ``readout``): its weight times the change when the
      stencil's shots are those of the variant;
    * ``root``: the member's x is the target's only to the Newton iteration's accuracy: the move
      ``|R3 dx|``, ``|R4 dx|`` (R4 from the fourth-order partials), counted in full.

    Returns ``{"R": [R1, R2, R3, R4], "scale": rounding scales of R2, R3, "components": {source:
    array([err R2, err R3])}}``; raises ArithmeticError when a stencil shot failed or the family's
    tangent is undefined."""
    _, base = stencils["base"]
    if not np.all(base["ok"]):
        raise ArithmeticError("a stencil shot of the higher cumulants failed")
    orders = (1, 2, 3, 4)
    dd = {nm: _directional(base[nm], CUM_STEPS, orders, H) for nm in _CUM_OBS}
    T = _partials(dd, orders)
    R, scale = _rho_x_derivatives(T, 4)
    o3 = (1, 2, 3)
    ref = np.array(R[1:3])

    def change(shots, steps) -> np.ndarray:
        """|change of (R2, R3)| with the stencil's values and step multiples replaced."""
        Tv = _partials({nm: _directional(shots[nm], steps, o3, H) for nm in _CUM_OBS}, o3)
        return np.abs(np.array(_rho_x_derivatives(Tv, 3)[0][1:3]) - ref)

    comps = {"fd": sum(change(base, steps) for steps in CUM_CHECKS)}
    for name, (w, sh) in stencils.items():
        if name == "base":
            continue
        if not np.all(sh["ok"]):
            raise ArithmeticError(f"a stencil shot of the higher cumulants failed ({name} variant)")
        comps[name] = w * change(sh, CUM_STEPS)
    move = abs(x_target - float(base["x"][0]))
    comps["root"] = np.array([abs(R[2]) * move, abs(R[3]) * move])
    if not all(np.all(np.isfinite(c)) for c in comps.values()) or not np.all(np.isfinite(R)):
        raise ArithmeticError("the higher cumulants are not finite (family tangent undefined)")
    return {"R": [float(r) for r in R], "scale": np.array(scale[1:3]), "components": comps}

