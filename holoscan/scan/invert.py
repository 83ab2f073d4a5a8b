"""Invert a map given on a tensor grid: from target values of two functions back to the grid's coordinates.

Numerics only: no physics, no files. The caller hands over a tensor grid ``x`` (n values) by ``y``
(m values), both ascending, with functions ``f(x, y)`` given at its nodes; two of them, ``a`` and
``b``, are inverted. For every target ``(a*, b*)`` of a regular grid of targets, :func:`invert` finds
``(x, y)`` with ``a(x, y) = a*`` and ``b(x, y) = b*`` and returns every function there, with an
error bound for each.

Cells and stencils. A *cell* ``[x_i, x_(i+1)] x [y_j, y_(j+1)]`` is used when its four corners are
usable and carry one label (the caller's branch label), no edge of it is cut and it is not blocked
(lines of non-smoothness, :func:`line_cuts`). In it every function is the tensor-product Lagrange
interpolant on a stencil of 4 x 4 grid nodes, centred on the cell where it can be and shifted
towards the cell otherwise; every stencil node is usable and of the cell's label,
and no grid segment or cell inside the stencil is cut or blocked: the interpolant never reaches
across a change of label or a line. A cell with fewer than 4 such grid lines in a direction is not
used (status ``no stencil``).

Inversion. The targets a cell may hold are those inside its image's bounding box (sampled on a 5 x 5
lattice, widened by a quarter of its extent). For each such (target, cell) pair Newton's method on
the cell's interpolant starts at the cell's centre (steps clipped to one cell, at most 60 iterations,
converged when a step is below ``1e-13`` of the cell); a root counts when it lies in the cell (to
``1e-9`` of its width). Roots of one target found in neighbouring cells within half a cell of each
other are one root on their shared edge (the most interior is kept). A pair whose Newton iteration
ends inside its cell without converging makes the target ``no convergence`` (unless a root is found).

The map may fold. The caller states the orientation the map must have (the sign of
``det d(a, b)/d(x, y)``); a cell where the interpolant's determinant has the other sign or vanishes
anywhere on its 5 x 5 lattice, a root where it does, and a target with two or more distinct roots
are status ``fold`` and are not filled: a folded map has no single inverse.

Error bound of each output, per target (all absolute, in the functions' own units):

- interpolation: for every function and each direction, the differences at the root between the
  tensor interpolant ``C`` and the same with that direction's interpolation replaced by lower orders:
  linear between the cell's two grid lines (``L``), and quadratic on the stencil less its first or
  its last node (``Q``: the larger of the two differences); ``SAFETY`` (2) times the sum
  ``|C - L_x| + |C - Q_x| + |C - L_y| + |C - Q_y|``. The directions are added, so they cannot
  cancel; ``L`` alone is blind where the function has an inflection across the cell (a crossover:
  measured, the estimate then fell short by up to 10 times), ``Q`` alone where its third divided
  difference vanishes (an even function on a stencil symmetric about its centre); the two together
  are not;
- node data: ``sum |w_x w_y| err_node`` (the interpolation weights applied to the caller's node error
  bounds), and a round-off of ``1e-14 sum |w_x w_y f_node|``;
- the root: the errors of ``a`` and ``b`` (the above, plus Newton's final residual) move the root by
  ``J^-1 (da, db)``, ``J = d(a, b)/d(x, y)`` of the interpolant: ``x_err = |J^-1_00| da + |J^-1_01|
  db`` (and ``y_err``), and every output ``f`` gains ``|g_0| da + |g_1| db`` with ``g = grad f J^-1``.

The root's bound is first order in the errors; a target whose ``x_err`` or ``y_err`` exceeds a
quarter of its cell is status ``coarse``.

Measured (worst actual/estimate over the ``ok`` targets, every output):

- closed-form Reissner-Nordstrom-AdS5 plasma (``tests/test_export_inverse.py``: 25 x 25 solved
  grid in (T, mu), 30 x 30 targets, reference roots in 30-digit mpmath): 460 ``ok`` targets, 0.00078
  for x (= T), 0.00059 for y (= mu), 0.00048 for s, 0.0006 for chi2; cs2 and P are exact there up
  to round-off (ratios 0.03 and 1e-12). Conservative by three orders of magnitude on a smooth map;
- the demo dilaton model (a crossover, a first-order line and its critical endpoint; its 21 x 21
  demo grid, 60 x 60 targets; reference: direct solves of the model, Newton-corrected to each
  target's (epsilon, rho) to 1e-11, ``error_estimate`` 1e-10): 521 ``ok`` targets, worst 0.23 (T
  and cs2), 0.14 (P), 0.063 (chi2), 0.013 (mu), 0.0034 (s). Without ``SAFETY`` the worst was 0.61
  (cs2); with the linear comparison alone it fell short by up to 10 times (T, at the crossover).

Statuses of a target: ``ok``; ``fold``; ``coarse``; ``no convergence``; and, for a target no used
cell holds, the kind of the nearest edge of the covered region (in ``(a, b)`` scaled by the spans
of the usable node values), i.e. of the cell beyond that edge: ``outside`` (the edge of the grid),
``unusable`` (a cell with a corner that is not usable), ``change`` (corners of different labels, a
cut edge or a blocked cell) or ``no stencil``. ``where`` names the grid indices that cause it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Newton: most iterations, and the step (in cell widths) below which a root has converged
NEWTON_ITERATIONS = 60
NEWTON_STEP = 1e-13
#: how far outside its cell (in cell widths) a root may lie and still count as the cell's
INSIDE = 1e-9
#: round-off of an interpolated value, relative to the sum of the magnitudes of its terms
ROUNDOFF = 1e-14
#: a root whose error bound exceeds this fraction of its cell is "coarse" (the bound is first order)
LINEAR_LIMIT = 0.25
#: factor on the interpolation term of every bound: the worst measured actual/estimate was 0.61
#: without it (demo dilaton model, module docstring)
SAFETY = 2.0
#: stencil sizes tried, largest first (4 only: the bound's quadratic comparison needs 4 nodes)
STENCIL_SIZES = (4,)
#: lattice points per cell direction for bounding boxes and the fold check
LATTICE = 5


@dataclass
class TensorGrid:
    """Functions on a tensor grid.

    Attributes
    ----------
    x, y : arrays (n,), (m,)
        Strictly ascending grid coordinates.
    values : dict name -> array (n, m)
        Node values (any where not usable; NaN allowed in functions other than the inverted two,
        and gives NaN outputs).
    errors : dict name -> array (n, m)
        Bounds on the absolute error of each node value (same keys as ``values``).
    usable : bool array (n, m)
        Nodes whose values may be used.
    label : int array (n, m)
        A label per node; cells and stencils never mix labels.
    cut_x, cut_y : bool arrays (n - 1, m) and (n, m - 1), optional
        Grid segments ``(i, j)-(i + 1, j)`` and ``(i, j)-(i, j + 1)`` that a line of non-smoothness
        crosses: no cell or stencil contains a cut segment.
    blocked : bool array (n - 1, m - 1), optional
        Cells that no stencil may contain (and that are not used).
    """

    x: np.ndarray
    y: np.ndarray
    values: dict
    errors: dict
    usable: np.ndarray
    label: np.ndarray
    cut_x: np.ndarray | None = None
    cut_y: np.ndarray | None = None
    blocked: np.ndarray | None = None

    def __post_init__(self):
        n, m = len(self.x), len(self.y)
        if self.cut_x is None:
            self.cut_x = np.zeros((max(n - 1, 0), m), bool)
        if self.cut_y is None:
            self.cut_y = np.zeros((n, max(m - 1, 0)), bool)
        if self.blocked is None:
            self.blocked = np.zeros((max(n - 1, 0), max(m - 1, 0)), bool)


@dataclass
class Inverse:
    """The result of :func:`invert` for targets ``a_nodes x b_nodes`` (a outer, b inner: flat index
    ``k = ia * len(b_nodes) + ib``). ``x, y, values[name]`` and ``x_err, y_err, errors[name]`` are
    NaN where ``status`` is not ``ok``; ``where[k]`` is a tuple of grid indices explaining the status
    (the cell ``(i, j)`` of the root, or the grid nodes ``(i, j)`` that are not usable, ...)."""

    status: list
    where: list
    x: np.ndarray
    y: np.ndarray
    x_err: np.ndarray
    y_err: np.ndarray
    values: dict = field(default_factory=dict)
    errors: dict = field(default_factory=dict)


# ---------------------------------------------------------------------------------------------------
# Lagrange weights on padded stencils (vectorised over points)


def _weights(X, k, t):
    """Lagrange weights and their derivatives at ``t`` (P,) on stencils ``X`` (P, 4) whose first
    ``k`` (P,) entries are used (the rest are padding and get weight 0)."""
    P = len(t)
    valid = np.arange(4)[None, :] < k[:, None]
    w = np.zeros((P, 4))
    dw = np.zeros((P, 4))
    for a in range(4):
        factors, inverses = [], []
        for b in range(4):
            if b == a:
                continue
            vb = valid[:, b]
            den = np.where(vb, X[:, a] - X[:, b], 1.0)
            factors.append(np.where(vb, (t - X[:, b]) / den, 1.0))
            inverses.append(np.where(vb, 1.0 / den, 0.0))
        w[:, a] = np.where(valid[:, a], factors[0] * factors[1] * factors[2], 0.0)
        d = inverses[0] * factors[1] * factors[2] + factors[0] * inverses[1] * factors[2] \
            + factors[0] * factors[1] * inverses[2]
        dw[:, a] = np.where(valid[:, a], d, 0.0)
    return w, dw


def _linear_weights(X, p, t):
    """Weights of linear interpolation between stencil entries ``p`` and ``p + 1`` (P,)."""
    P = len(t)
    rows = np.arange(P)
    x0, x1 = X[rows, p], X[rows, p + 1]
    w = np.zeros((P, 4))
    w[rows, p] = (x1 - t) / (x1 - x0)
    w[rows, p + 1] = (t - x0) / (x1 - x0)
    return w


def _quadratic_weights(X, t):
    """Weights of the interpolants on a 4-node stencil less its last, and less its first, node."""
    three = np.full(len(t), 3)
    left, _ = _weights(X, three, t)
    w, _ = _weights(np.concatenate([X[:, 1:], X[:, :1]], axis=1), three, t)
    return [left, np.concatenate([np.zeros((len(t), 1)), w[:, :3]], axis=1)]


def _contract(wx, F, wy):
    """sum_ab wx[p, a] F[p, a, b, f] wy[p, b] -> (P, nf)."""
    return np.einsum("pa,pabf,pb->pf", wx, F, wy)


# ---------------------------------------------------------------------------------------------------
# cells and stencils


def _windows(i, n, size):
    """Starts of windows of ``size`` consecutive lines holding lines i and i + 1, centred first."""
    if size == 4:
        starts = (i - 1, i, i - 2)
    else:
        starts = (i, i - 1)
    return [s for s in starts if s >= 0 and s + size <= n]


@dataclass
class _Cells:
    ij: np.ndarray          # (C, 2) cell indices
    sx: np.ndarray          # (C,) stencil start in x
    kx: np.ndarray          # (C,) stencil size in x (3 or 4)
    sy: np.ndarray
    ky: np.ndarray
    X: np.ndarray           # (C, 4) padded stencil coordinates
    Y: np.ndarray
    F: np.ndarray           # (C, 4, 4, nf) stencil values (0 in padding)
    E: np.ndarray           # (C, 4, 4, nf) node error bounds


def _cell_kinds(g: TensorGrid):
    """Per cell: 'good' (corners usable, one label), 'unusable', 'change'; then stencils."""
    n, m = len(g.x), len(g.y)
    u, lab = g.usable, g.label
    kind = {}
    for i in range(n - 1):
        for j in range(m - 1):
            corners = [(i, j), (i + 1, j), (i, j + 1), (i + 1, j + 1)]
            bad = tuple(c for c in corners if not u[c])
            if bad:
                kind[(i, j)] = ("unusable", bad)
            elif len({int(lab[c]) for c in corners}) > 1 or g.blocked[i, j] or g.cut_x[i, j] or g.cut_x[i, j + 1] \
                    or g.cut_y[i, j] or g.cut_y[i + 1, j]:
                kind[(i, j)] = ("change", (i, j))
            else:
                kind[(i, j)] = ("good", (i, j))
    return kind


def _stencil(g: TensorGrid, i, j):
    """(sx, kx, sy, ky) of the cell's stencil, or None when none has 3+ usable lines each way."""
    n, m = len(g.x), len(g.y)
    lab = g.label[i, j]
    ok = g.usable & (g.label == lab)
    options = []
    for kx in STENCIL_SIZES:
        for ky in STENCIL_SIZES:
            for a, sx in enumerate(_windows(i, n, kx)):
                for b, sy in enumerate(_windows(j, m, ky)):
                    options.append((-(kx + ky), a + b, a, sx, kx, sy, ky))
    for *_, sx, kx, sy, ky in sorted(options):
        if ok[sx:sx + kx, sy:sy + ky].all() and not (g.cut_x[sx:sx + kx - 1, sy:sy + ky].any()
                                                     or g.cut_y[sx:sx + kx, sy:sy + ky - 1].any()
                                                     or g.blocked[sx:sx + kx - 1, sy:sy + ky - 1].any()):
            return sx, kx, sy, ky
    return None


def _build_cells(g: TensorGrid, names, cells):
    C, nf = len(cells), len(names)
    ij = np.array([c[0] for c in cells], dtype=int).reshape(C, 2)
    sx, kx, sy, ky = (np.array([c[1][q] for c in cells], dtype=int) for q in range(4))
    X, Y = np.zeros((C, 4)), np.zeros((C, 4))
    F, E = np.zeros((C, 4, 4, nf)), np.zeros((C, 4, 4, nf))
    for c in range(C):
        X[c, :kx[c]] = g.x[sx[c]:sx[c] + kx[c]]
        Y[c, :ky[c]] = g.y[sy[c]:sy[c] + ky[c]]
        for f, name in enumerate(names):
            F[c, :kx[c], :ky[c], f] = g.values[name][sx[c]:sx[c] + kx[c], sy[c]:sy[c] + ky[c]]
            E[c, :kx[c], :ky[c], f] = g.errors[name][sx[c]:sx[c] + kx[c], sy[c]:sy[c] + ky[c]]
    return _Cells(ij, sx, kx, sy, ky, X, Y, F, E)


def _evaluate(cells: _Cells, c, xs, ys, upto=None):
    """Values and first derivatives of the functions (the first ``upto``) of cells ``c`` at points."""
    wx, dwx = _weights(cells.X[c], cells.kx[c], xs)
    wy, dwy = _weights(cells.Y[c], cells.ky[c], ys)
    F = cells.F[c] if upto is None else cells.F[c][..., :upto]
    return _contract(wx, F, wy), _contract(dwx, F, wy), _contract(wx, F, dwy)


# ---------------------------------------------------------------------------------------------------


def invert(g: TensorGrid, a: str, b: str, a_nodes, b_nodes, outputs, orientation: int = 1) -> Inverse:
    """Invert ``(a, b)`` at every target of ``a_nodes x b_nodes``; return ``outputs`` there.

    Parameters
    ----------
    g : TensorGrid
    a, b : str
        The names of the two inverted functions in ``g.values``.
    a_nodes, b_nodes : arrays
        Target values of ``a`` and ``b``.
    outputs : sequence of str
        Names of the functions to return (may include ``a`` and ``b``).
    orientation : +1 or -1
        The sign ``det d(a, b)/d(x, y)`` must have on the covered region (see the module docstring).
    """
    a_nodes, b_nodes = np.asarray(a_nodes, float), np.asarray(b_nodes, float)
    names = [a, b] + [o for o in outputs if o not in (a, b)]
    col = {nm: k for k, nm in enumerate(names)}
    nA, nB = len(a_nodes), len(b_nodes)
    N = nA * nB
    ta = np.repeat(a_nodes, nB)
    tb = np.tile(b_nodes, nA)
    status = [None] * N
    where: list = [()] * N
    out = Inverse(status, where, np.full(N, np.nan), np.full(N, np.nan), np.full(N, np.nan), np.full(N, np.nan),
                  {o: np.full(N, np.nan) for o in outputs}, {o: np.full(N, np.nan) for o in outputs})

    kinds = _cell_kinds(g)
    stencils = {}
    for ij, (kd, _) in kinds.items():
        if kd == "good":
            st = _stencil(g, *ij)
            if st is None:
                kinds[ij] = ("no stencil", ij)
            else:
                stencils[ij] = st
    good = sorted(stencils)
    us = g.usable
    span_a = np.ptp(g.values[a][us]) if us.any() else 1.0
    span_b = np.ptp(g.values[b][us]) if us.any() else 1.0
    span_a, span_b = (span_a or 1.0), (span_b or 1.0)
    if not good:
        for k in range(N):
            status[k], where[k] = "outside", ()
        return out
    cells = _build_cells(g, names, [(ij, stencils[ij]) for ij in good])
    C = len(good)
    index_of = {ij: c for c, ij in enumerate(good)}
    hx = g.x[cells.ij[:, 0] + 1] - g.x[cells.ij[:, 0]]
    hy = g.y[cells.ij[:, 1] + 1] - g.y[cells.ij[:, 1]]
    x0, y0 = g.x[cells.ij[:, 0]], g.y[cells.ij[:, 1]]

    # image lattice of every cell: bounding boxes and the fold check
    s = np.linspace(0.0, 1.0, LATTICE)
    uu, vv = np.meshgrid(s, s, indexing="ij")
    cl = np.repeat(np.arange(C), LATTICE * LATTICE)
    lx = x0[cl] + np.tile(uu.ravel(), C) * hx[cl]
    ly = y0[cl] + np.tile(vv.ravel(), C) * hy[cl]
    val, dx_, dy_ = _evaluate(cells, cl, lx, ly, upto=2)
    det = (dx_[:, 0] * dy_[:, 1] - dy_[:, 0] * dx_[:, 1]) * orientation
    folded = ~(det > 0).reshape(C, -1).all(axis=1)
    va, vb = val[:, 0].reshape(C, -1), val[:, 1].reshape(C, -1)
    amin, amax, bmin, bmax = va.min(1), va.max(1), vb.min(1), vb.max(1)
    pa, pb = 0.25 * (amax - amin) + 1e-12 * span_a, 0.25 * (bmax - bmin) + 1e-12 * span_b
    amin, amax, bmin, bmax = amin - pa, amax + pa, bmin - pb, bmax + pb

    # (target, cell) pairs: targets in each cell's box (a rectangle of the regular target grid)
    oa, ob = np.argsort(a_nodes, kind="stable"), np.argsort(b_nodes, kind="stable")
    sa, sb = a_nodes[oa], b_nodes[ob]
    pt, pc = [], []
    for c in range(C):
        ia = oa[np.searchsorted(sa, amin[c], "left"):np.searchsorted(sa, amax[c], "right")]
        ib = ob[np.searchsorted(sb, bmin[c], "left"):np.searchsorted(sb, bmax[c], "right")]
        if len(ia) and len(ib):
            t = (ia[:, None] * nB + ib[None, :]).ravel()
            pt.append(t)
            pc.append(np.full(len(t), c))
    pt = np.concatenate(pt) if pt else np.zeros(0, int)
    pc = np.concatenate(pc) if pc else np.zeros(0, int)
    roots = _newton(cells, pt, pc, ta, tb, x0, y0, hx, hy)
    conv, rx, ry = roots
    u = (rx - x0[pc]) / hx[pc]
    v = (ry - y0[pc]) / hy[pc]
    inside = (u >= -INSIDE) & (u <= 1 + INSIDE) & (v >= -INSIDE) & (v <= 1 + INSIDE)
    found = conv & inside
    stuck = ~conv & inside

    per_target: dict = {}
    for q in np.flatnonzero(found):
        per_target.setdefault(int(pt[q]), []).append(q)
    stuck_targets = {int(pt[q]): int(pc[q]) for q in np.flatnonzero(stuck)}
    chosen = np.full(N, -1)
    for t, qs in per_target.items():
        depth = [min(u[q], 1 - u[q], v[q], 1 - v[q]) for q in qs]
        best = qs[int(np.argmax(depth))]
        ci = cells.ij[pc[best]]
        others = []
        for q in qs:
            if q == best:
                continue
            cj = cells.ij[pc[q]]
            near = abs(rx[q] - rx[best]) <= 0.5 * hx[pc[best]] and abs(ry[q] - ry[best]) <= 0.5 * hy[pc[best]]
            if not (near and abs(cj[0] - ci[0]) <= 1 and abs(cj[1] - ci[1]) <= 1):
                others.append(q)
        if others:
            status[t] = "fold"
            where[t] = tuple(tuple(int(z) for z in cells.ij[pc[q]]) for q in [best, *others])
        elif folded[pc[best]]:
            status[t] = "fold"
            where[t] = (tuple(int(z) for z in ci),)
        else:
            chosen[t] = best
    for t, c in stuck_targets.items():
        if status[t] is None and chosen[t] < 0:
            status[t], where[t] = "no convergence", (tuple(int(z) for z in cells.ij[c]),)

    sel = np.flatnonzero(chosen >= 0)
    if len(sel):
        _estimates(cells, col, names, outputs, out, sel, chosen[sel], pc, rx, ry, ta, tb, hx, hy, orientation)
        for t in sel:
            if status[t] is None:
                status[t], where[t] = "ok", (tuple(int(z) for z in cells.ij[pc[chosen[t]]]),)

    rest = [k for k in range(N) if status[k] is None]
    if rest:
        _classify(g, kinds, cells, index_of, a, b, span_a, span_b, ta, tb, rest, status, where)
    return out


def _newton(cells, pt, pc, ta, tb, x0, y0, hx, hy):
    """Vectorised Newton on the pairs' cell interpolants from the cells' centres."""
    P = len(pt)
    x = x0[pc] + 0.5 * hx[pc]
    y = y0[pc] + 0.5 * hy[pc]
    A, B = ta[pt], tb[pt]
    hxp, hyp = hx[pc], hy[pc]
    conv = np.zeros(P, bool)
    live = np.ones(P, bool)
    for _ in range(NEWTON_ITERATIONS):
        idx = np.flatnonzero(live)
        if not len(idx):
            break
        val, fx, fy = _evaluate(cells, pc[idx], x[idx], y[idx], upto=2)
        ra, rb = val[:, 0] - A[idx], val[:, 1] - B[idx]
        with np.errstate(all="ignore"):
            det = fx[:, 0] * fy[:, 1] - fy[:, 0] * fx[:, 1]
            dx = -(fy[:, 1] * ra - fy[:, 0] * rb) / det
            dy = -(-fx[:, 1] * ra + fx[:, 0] * rb) / det
        bad = ~(np.isfinite(dx) & np.isfinite(dy))
        dx = np.clip(np.where(bad, 0.0, dx), -hxp[idx], hxp[idx])
        dy = np.clip(np.where(bad, 0.0, dy), -hyp[idx], hyp[idx])
        x[idx] += dx
        y[idx] += dy
        small = (np.abs(dx) <= NEWTON_STEP * hxp[idx]) & (np.abs(dy) <= NEWTON_STEP * hyp[idx]) & ~bad
        far = (np.abs(x[idx] - x0[pc[idx]] - 0.5 * hxp[idx]) > 3 * hxp[idx]) | \
              (np.abs(y[idx] - y0[pc[idx]] - 0.5 * hyp[idx]) > 3 * hyp[idx])
        conv[idx[small]] = True
        live[idx[small | far | bad]] = False
    return conv, x, y


def _estimates(cells, col, names, outputs, out, targets, pairs, pc, rx, ry, ta, tb, hx, hy, orientation):
    """Values at the chosen roots and their error bounds (module docstring)."""
    c = pc[pairs]
    x, y = rx[pairs], ry[pairs]
    wx, dwx = _weights(cells.X[c], cells.kx[c], x)
    wy, dwy = _weights(cells.Y[c], cells.ky[c], y)
    px = cells.ij[c, 0] - cells.sx[c]
    py = cells.ij[c, 1] - cells.sy[c]
    lx = _linear_weights(cells.X[c], px, x)
    ly = _linear_weights(cells.Y[c], py, y)
    F, E = cells.F[c], cells.E[c]
    val = _contract(wx, F, wy)
    fx, fy = _contract(dwx, F, wy), _contract(wx, F, dwy)
    interp = np.abs(val - _contract(lx, F, wy)) + np.abs(val - _contract(wx, F, ly))
    four_x, four_y = (cells.kx[c] == 4)[:, None], (cells.ky[c] == 4)[:, None]
    qx = [np.abs(val - _contract(q, F, wy)) for q in _quadratic_weights(cells.X[c], x)]
    qy = [np.abs(val - _contract(wx, F, q)) for q in _quadratic_weights(cells.Y[c], y)]
    interp += np.where(four_x, np.maximum(*qx), 0.0) + np.where(four_y, np.maximum(*qy), 0.0)
    interp *= SAFETY
    data = _contract(np.abs(wx), E, np.abs(wy))
    rounding = ROUNDOFF * _contract(np.abs(wx), np.abs(F), np.abs(wy))
    delta = interp + data + rounding
    da = delta[:, 0] + np.abs(val[:, 0] - ta[targets])
    db = delta[:, 1] + np.abs(val[:, 1] - tb[targets])
    ax, ay, bx, by = fx[:, 0], fy[:, 0], fx[:, 1], fy[:, 1]
    det = ax * by - ay * bx
    x_err = (np.abs(by) * da + np.abs(ay) * db) / np.abs(det)
    y_err = (np.abs(bx) * da + np.abs(ax) * db) / np.abs(det)
    coarse = (x_err > LINEAR_LIMIT * hx[c]) | (y_err > LINEAR_LIMIT * hy[c]) | ~(det * orientation > 0)
    out.x[targets], out.y[targets] = x, y
    out.x_err[targets], out.y_err[targets] = x_err, y_err
    for o in outputs:
        f = col[o]
        g0 = (fx[:, f] * by - fy[:, f] * bx) / det
        g1 = (-fx[:, f] * ay + fy[:, f] * ax) / det
        out.values[o][targets] = val[:, f]
        out.errors[o][targets] = delta[:, f] + np.abs(g0) * da + np.abs(g1) * db
    for k, t in enumerate(targets):
        if coarse[k]:
            out.status[t] = "coarse"
            out.where[t] = (tuple(int(z) for z in cells.ij[c[k]]),)
            out.x[t] = out.y[t] = out.x_err[t] = out.y_err[t] = np.nan
            for o in outputs:
                out.values[o][t] = out.errors[o][t] = np.nan


def _classify(g, kinds, cells, index_of, a, b, span_a, span_b, ta, tb, rest, status, where):
    """Status of targets no used cell holds: the kind of the nearest edge of the covered region."""
    n, m = len(g.x), len(g.y)
    segs_c, segs_x, segs_y, info = [], [], [], []
    k = 9
    s = np.linspace(0.0, 1.0, k)
    for (i, j), c in index_of.items():
        edges = (((i - 1, j), np.full(k, g.x[i]), g.y[j] + s * (g.y[j + 1] - g.y[j])),
                 ((i + 1, j), np.full(k, g.x[i + 1]), g.y[j] + s * (g.y[j + 1] - g.y[j])),
                 ((i, j - 1), g.x[i] + s * (g.x[i + 1] - g.x[i]), np.full(k, g.y[j])),
                 ((i, j + 1), g.x[i] + s * (g.x[i + 1] - g.x[i]), np.full(k, g.y[j + 1])))
        for nb, ex, ey in edges:
            if nb in index_of:
                continue
            if not (0 <= nb[0] < n - 1 and 0 <= nb[1] < m - 1):
                kind = ("outside", ())
            else:
                kd, wh = kinds[nb]
                kind = (kd, wh if kd == "unusable" else (nb,))
            segs_c.append(np.full(k, c))
            segs_x.append(ex)
            segs_y.append(ey)
            info.append(kind)
    if not info:
        for t in rest:
            status[t], where[t] = "outside", ()
        return
    cc, xx, yy = np.concatenate(segs_c), np.concatenate(segs_x), np.concatenate(segs_y)
    val, _, _ = _evaluate(cells, cc, xx, yy, upto=2)
    pa = val[:, 0].reshape(len(info), k) / span_a
    pb = val[:, 1].reshape(len(info), k) / span_b
    p0a, p0b, p1a, p1b = pa[:, :-1].ravel(), pb[:, :-1].ravel(), pa[:, 1:].ravel(), pb[:, 1:].ravel()
    owner = np.repeat(np.arange(len(info)), k - 1)
    da, db = p1a - p0a, p1b - p0b
    L2 = da * da + db * db
    rest = np.asarray(rest)
    for lo in range(0, len(rest), 512):
        t = rest[lo:lo + 512]
        qa, qb = (ta[t] / span_a)[:, None], (tb[t] / span_b)[:, None]
        with np.errstate(all="ignore"):
            lam = np.clip(np.where(L2 > 0, ((qa - p0a) * da + (qb - p0b) * db) / L2, 0.0), 0.0, 1.0)
        d2 = (p0a + lam * da - qa) ** 2 + (p0b + lam * db - qb) ** 2
        near = owner[np.argmin(d2, axis=1)]
        for tt, e in zip(t, near):
            status[tt], where[tt] = info[e]


# ---------------------------------------------------------------------------------------------------
# lines of non-smoothness -> cut grid segments and blocked cells


def _index_coordinate(v, axis):
    """Fractional grid index of ``v`` along ``axis`` (piecewise linear, extrapolated beyond the ends)."""
    v = np.asarray(v, float)
    n = len(axis)
    out = np.interp(v, axis, np.arange(n, dtype=float))
    lo, hi = v < axis[0], v > axis[-1]
    out = np.where(lo, (v - axis[0]) / (axis[1] - axis[0]), out)
    return np.where(hi, n - 1 + (v - axis[-1]) / (axis[-1] - axis[-2]), out)


def _point_segment(px, py, ax, ay, bx, by):
    dx, dy = bx - ax, by - ay
    L2 = dx * dx + dy * dy
    with np.errstate(all="ignore"):
        t = np.clip(np.where(L2 > 0, ((px - ax) * dx + (py - ay) * dy) / L2, 0.0), 0.0, 1.0)
    return np.hypot(ax + t * dx - px, ay + t * dy - py)


def _segment_distance(A, B, C, D):
    """Distance between segments AB (G, 1, 2) and CD (1, L, 2), broadcast to (G, L)."""
    orient = lambda P, Q, R: ((Q[..., 0] - P[..., 0]) * (R[..., 1] - P[..., 1])
                              - (Q[..., 1] - P[..., 1]) * (R[..., 0] - P[..., 0]))
    cross = (orient(A, B, C) * orient(A, B, D) < 0) & (orient(C, D, A) * orient(C, D, B) < 0)
    d = np.minimum.reduce([
        _point_segment(A[..., 0], A[..., 1], C[..., 0], C[..., 1], D[..., 0], D[..., 1]),
        _point_segment(B[..., 0], B[..., 1], C[..., 0], C[..., 1], D[..., 0], D[..., 1]),
        _point_segment(C[..., 0], C[..., 1], A[..., 0], A[..., 1], B[..., 0], B[..., 1]),
        _point_segment(D[..., 0], D[..., 1], A[..., 0], A[..., 1], B[..., 0], B[..., 1])])
    return np.where(cross, 0.0, d)


def line_cuts(x, y, polylines):
    """Grid segments a set of curves crosses, and cells they end in, for :class:`TensorGrid`.

    Parameters
    ----------
    x, y : the grid axes (ascending).
    polylines : list of (px, py, ex, ey) arrays: the vertices of a curve in grid coordinates and
        their uncertainties; consecutive vertices are joined by straight segments (a single vertex
        is a point).

    Returns ``(cut_x, cut_y, blocked)``: a grid segment is cut when it comes within a curve's
    uncertainty of one of its segments; a cell is blocked when an end of a curve (e.g. a critical
    endpoint) lies in it, widened by the end's uncertainty. Distances are measured in grid
    index units (each cell is 1 x 1), so both axes count alike whatever their units.
    """
    n, m = len(x), len(y)
    cut_x, cut_y = np.zeros((n - 1, m), bool), np.zeros((n, m - 1), bool)
    blocked = np.zeros((n - 1, m - 1), bool)
    I, J = np.meshgrid(np.arange(n, dtype=float), np.arange(m, dtype=float), indexing="ij")
    for px, py, ex, ey in polylines:
        px, py = np.asarray(px, float), np.asarray(py, float)
        u, v = _index_coordinate(px, x), _index_coordinate(py, y)
        eu = np.abs(_index_coordinate(px + np.asarray(ex, float), x) - u)
        ev = np.abs(_index_coordinate(py + np.asarray(ey, float), y) - v)
        tol = np.maximum(eu, ev) + 1e-9
        for k in sorted({0, len(u) - 1}):        # cells holding an end of the curve
            i0, i1 = int(np.floor(u[k] - tol[k])), int(np.floor(u[k] + tol[k]))
            j0, j1 = int(np.floor(v[k] - tol[k])), int(np.floor(v[k] + tol[k]))
            blocked[max(i0, 0):max(min(i1 + 1, n - 1), 0), max(j0, 0):max(min(j1 + 1, m - 1), 0)] = True
        if len(u) < 2:
            continue
        C = np.stack([u[:-1], v[:-1]], -1)[None]
        D = np.stack([u[1:], v[1:]], -1)[None]
        t = np.maximum(tol[:-1], tol[1:])[None]
        for cut, di, dj in ((cut_x, 1, 0), (cut_y, 0, 1)):
            A = np.stack([I[:n - di, :m - dj], J[:n - di, :m - dj]], -1).reshape(-1, 1, 2)
            B = A + np.array([di, dj], float)
            hit = np.zeros(len(A), bool)
            for lo in range(0, len(A), 4096):
                hit[lo:lo + 4096] = (_segment_distance(A[lo:lo + 4096], B[lo:lo + 4096], C, D) <= t).any(axis=1)
            cut |= hit.reshape(cut.shape)
    return cut_x, cut_y, blocked
