"""Propagating (u, du/dr*) across a region with a cost that does not grow with omega.

Method: a modified Magnus integrator in the tortoise coordinate (the interaction picture of Iserles,
BIT 42, 561 (2002), "On the global error of discretization methods for highly-oscillatory ordinary differential
equations"; in the constant-perturbation form of L. Gr. Ixaru, Numerical Methods for Differential Equations and
Applications, Reidel 1984).  Its zeroth order, freezing V at each step, is Pruess's method (SIAM J. Numer. Anal.
10, 55 (1973)); ``step_matrices`` is that exact constant-V propagator.  The step size is set by how fast V
varies, not by the wavelength: the cost per frequency does not grow with omega.
Each step is the exact propagator for the step's mean potential, corrected to first order (interaction
picture) for the potential's linear and quadratic variation, with the oscillatory integrals in closed form
(``corrected_matrices``); the scheme is fourth order and its error falls as omega grows.  Two grids (N and 2N
steps in a smooth grid parameter s) give the value and a conservative error estimate.

The grid: r(s), s in [0, 1], uniform in r on bounded regions and geometric out to a far radius; r* at the
nodes from Gauss-Legendre quadrature of dr*/dr on each step.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

GAUSS_NODES, GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(10)
CHUNK = 512   # frequencies per batch (memory: steps x CHUNK x 4 doubles)


@dataclass(frozen=True)
class Grid:
    """Nodes r_0 < ... < r_N of one region, the tortoise-coordinate length of each step (kept as increments:
    differences of large r* values would lose digits far out), and the step midpoints in r."""

    r: np.ndarray
    steps: np.ndarray
    midpoints: np.ndarray
    gauss_points: np.ndarray | None = None    # r at three Gauss points in r* of each step (steps, 3)


def radial_nodes(lower: float, upper: float, count: int, geometric: bool) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and midpoints in r, uniform in the grid parameter s (midpoints at s + ds/2)."""
    s = np.linspace(0.0, 1.0, count + 1)
    mid = (s[:-1] + s[1:]) / 2
    if geometric:
        ratio = upper / lower
        return lower * ratio ** s, lower * ratio ** mid
    return lower + (upper - lower) * s, lower + (upper - lower) * mid


_GRIDS: dict = {}        # (id(region), lower, upper, count, geometric) -> (region, Grid)
_GRID_LIMIT = 512


def make_grid(region, lower: float, upper: float, count: int, geometric: bool) -> Grid:
    """The steps of a piece, with the radii of each step's three Gauss points in r* (the potential is sampled
    there).  A grid depends on the piece only, not on l or omega, so it is kept for reuse (every l of an l-sum
    and every refinement that comes back to the same piece share it); entries are checked to belong to the same
    region object, and the store is emptied when it grows past a few hundred grids."""
    key = (id(region), float(lower), float(upper), int(count), bool(geometric))
    hit = _GRIDS.get(key)
    if hit is not None and hit[0] is region:
        _GRIDS[key] = _GRIDS.pop(key)       # most recently used last: the oldest go first when full
        return hit[1]
    r, mid = radial_nodes(lower, upper, count, geometric)
    a, b = r[:-1], r[1:]
    half = (b - a) / 2
    points = (a + b)[:, None] / 2 + half[:, None] * GAUSS_NODES[None, :]
    increments = half * np.sum(GAUSS_WEIGHTS[None, :] * region.dtortoise_dr(points), axis=1)
    grid = Grid(r, increments, mid)
    grid = replace(grid, gauss_points=_gauss_points(region, grid))
    while len(_GRIDS) >= _GRID_LIMIT:
        del _GRIDS[next(iter(_GRIDS))]
    _GRIDS[key] = (region, grid)
    return grid


def _gauss_points(region, grid) -> np.ndarray:
    """r at the three Gauss points (in r*) of every step: shape (steps, 3)."""
    h = grid.steps
    gauss = np.sqrt(3.0 / 5.0) / 2
    offsets = (h / 2)[:, None] + np.array([-gauss, 0.0, gauss])[None, :] * h[:, None]
    return tortoise_points(region, grid.r[:-1], grid.r[1:], offsets)


def step_matrices(k2: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Exact propagators for constant k^2 = omega^2 - V over steps h; shapes (steps, omegas) -> (..., 2, 2)."""
    k = np.sqrt(k2.astype(complex))
    kh = k * h
    cos = np.cos(kh).real
    small = np.abs(kh) < 1e-8
    safe_k = np.where(small, 1.0, k)
    sin_over_k = np.where(small, h * (1 - k2 * h * h / 6), (np.sin(kh) / safe_k).real)
    k_sin = np.where(small, k2 * h * (1 - k2 * h * h / 6), (k * np.sin(kh)).real)
    out = np.empty(k2.shape + (2, 2))
    out[..., 0, 0] = cos
    out[..., 0, 1] = sin_over_k
    out[..., 1, 0] = -k_sin
    out[..., 1, 1] = cos
    return out


BOUND = 300.0       # partial products are kept below e^BOUND between rescalings (doubles overflow near e^709)


def ordered_product(matrices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """M_{N-1} ... M_1 M_0 over the first axis, by pairwise reduction (log N vectorised products).

    Every partial product is kept at unit size with its own log scale (evanescent stretches would overflow
    otherwise); returns (product / exp(log_scale), log_scale), one per trailing index.  The 2x2 products go
    through numpy's matmul: writing them out on the components is four times faster but measurably less
    accurate where long evanescent stretches cancel (bound-state weights lost a factor 7; matmul's kernels
    round the sums of products more tightly), so accuracy wins."""
    logs = np.zeros(matrices.shape[:-2])
    # a bound on how large any partial product can grow before it is rescaled: log ||A B||_max <= log ||A||_max
    # + log ||B||_max + log 2; the partial products are rescaled only at the levels where the bound of the
    # products formed since the last rescaling could pass e^BOUND (every level rescaled cost as much as the
    # products themselves; oscillatory stretches need it rarely, evanescent ones at every level)
    # (the log of the largest entry: one reduction, no logarithm per step)
    growth = float(np.log(max(float(np.max(np.abs(matrices))), 1e-300))) + np.log(2.0)
    growth = max(growth, 0.0)
    block = 1                     # steps per partial product since the last rescaling
    while matrices.shape[0] > 1:
        if matrices.shape[0] % 2:
            identity = np.broadcast_to(np.eye(2), (1,) + matrices.shape[1:])
            matrices = np.concatenate([matrices, identity], axis=0)
            logs = np.concatenate([logs, np.zeros((1,) + logs.shape[1:])], axis=0)
        matrices = matrices[1::2] @ matrices[0::2]
        logs = logs[1::2] + logs[0::2]
        block *= 2
        if 2 * block * growth > BOUND or matrices.shape[0] == 1:
            size = np.max(np.abs(matrices), axis=(-2, -1))
            size = np.where(size > 0, size, 1.0)
            matrices = matrices / size[..., None, None]
            logs = logs + np.log(size)
            block = 1
    return matrices[0], logs[0]


def _trig_pair(k2, x):
    """c = cos(k x), so = sin(k x)/k for k^2 > 0 (cosh, sinh/gamma for k^2 < 0), real arithmetic, with the
    series near k x = 0."""
    z2 = k2 * x * x
    small = np.abs(z2) < 1e-3
    pos = (z2 > 0) & ~small
    if pos.all():              # the common case, oscillatory everywhere: no masked copies
        k = np.sqrt(k2)
        kx = k * x
        return np.cos(kx), np.sin(kx) / k
    c = np.empty(np.broadcast(k2, x).shape)
    so = np.empty_like(c)
    x = np.broadcast_to(x, c.shape)
    neg = (z2 < 0) & ~small
    if np.any(small):
        z = z2[small]
        c[small] = 1 - z / 2 * (1 - z / 12 * (1 - z / 30 * (1 - z / 56)))
        so[small] = x[small] * (1 - z / 6 * (1 - z / 20 * (1 - z / 42 * (1 - z / 72))))
    if np.any(pos):
        k = np.sqrt(k2[pos])
        kx = k * x[pos]
        c[pos] = np.cos(kx)
        so[pos] = np.sin(kx) / k
    if np.any(neg):
        g = np.sqrt(-k2[neg])
        gx = g * x[neg]
        c[neg] = np.cosh(gx)
        so[neg] = np.sinh(gx) / g
    return c, so


_S_SERIES = [2.0 / (float(np.prod(np.arange(1, 2 * n + 2))) * (2 * n + 3)) for n in range(9)]
_K_SERIES = [-4.0 * (2 / (float(np.prod(np.arange(1, 2 * m + 1))) * (2 * m + 3))
                     - (2.0 / 3.0) / float(np.prod(np.arange(1, 2 * m + 2)))) for m in range(1, 10)]


def step_integrals(k2, h, c=None, so=None):
    """For a step of length h in r*, k^2 = omega^2 - V0, a = h/2, beta = 2k:
    S = int_0^a x sin(beta x) dx / k  and  Kq = int_-a^a (x^2 - h^2/12) cos(beta x) dx / k^2,
    in real arithmetic (series in beta^2 a^2 below 0.25; closed forms above).

    The closed forms need sin(beta a)/beta and cos(beta a) only, which are (sin(k a)/k) cos(k a) and
    2 cos(k a)^2 - 1: given c = cos(k a) and so = sin(k a)/k (or cosh and sinh/gamma, from
    :func:`_trig_pair`), no further trigonometric function is evaluated, and one formula serves k^2 of
    either sign."""
    a = np.broadcast_to(h / 2, np.broadcast(k2, h).shape)
    if c is None or so is None:
        c, so = _trig_pair(k2, a)
    beta2 = 4 * k2
    a2 = a * a
    u = -beta2 * a2                         # the series variable (-beta^2 a^2)
    small = np.abs(u) < 0.25
    with np.errstate(divide="ignore", invalid="ignore"):
        sb = so * c                          # sin(beta a)/beta (sinh(B a)/B for beta^2 < 0)
        cz = 2 * c * c - 1                   # cos(beta a) (cosh)
        inverse = 1 / np.where(small, 1.0, beta2)
        S = 2 * (sb - a * cz) * inverse
        c2 = a2 * sb + 2 * (a * cz - sb) * inverse
        Kq = 4 * (2 * c2 - (2 / 3) * a2 * sb) * inverse
    if small.any():                          # the series where the closed forms cancel (only there)
        us, as_ = u[small], a[small]
        total_s = np.zeros(us.shape)
        for coefficient in reversed(_S_SERIES):
            total_s = total_s * us + coefficient
        total_k = np.zeros(us.shape)
        for coefficient in reversed(_K_SERIES):
            total_k = total_k * us + coefficient
        S[small] = total_s * as_ ** 3
        Kq[small] = total_k * as_ ** 5
    return S, Kq


def tortoise_points(region, r_lo, r_hi, offsets):
    """r at given tortoise-coordinate offsets from each step's start (Newton on int_{r_lo}^{r} dr*/dr dr,
    10-point Gauss); offsets has shape (steps, points)."""
    span = r_hi - r_lo
    total = np.sum(GAUSS_WEIGHTS[None, :] * region.dtortoise_dr(
        (r_lo + r_hi)[:, None] / 2 + span[:, None] / 2 * GAUSS_NODES[None, :]), axis=1) * span / 2
    r = r_lo[:, None] + offsets * (span / np.where(total > 0, total, 1.0))[:, None]
    for _ in range(4):
        half = (r - r_lo[:, None]) / 2
        points = (r + r_lo[:, None])[..., None] / 2 + half[..., None] * GAUSS_NODES
        reached = half * np.sum(GAUSS_WEIGHTS * region.dtortoise_dr(points), axis=-1)
        r = r - (reached - offsets) / region.dtortoise_dr(r)
    return r


def corrected_matrices(region, l, omegas, grid: Grid) -> np.ndarray:
    """The step matrices, (steps, omegas, 2, 2).  Fourth-order steps: the exact frozen-potential propagator
    with a first-order (interaction-picture Magnus) correction for the potential's variation over the step,
    integrated in closed form.

    On a step of length h in r* (x measured from its middle), V = V0 + b x + c (x^2 - h^2/12) + O(h^3) from
    three Gauss points (V0 is the step average).  With E(x) the exact propagator for V0 and
    Omega = int E(-x) [[0, 0], [dV, 0]] E(x) dx (traceless):

        Omega = [[-I_sc/k, -I_ss/k^2], [I_cc, I_sc/k]],   step = E(h/2) exp(Omega) E(h/2),

    I_sc = int dV sin(kx) cos(kx) dx,  I_ss = int dV sin^2(kx) dx,  I_cc = int dV cos^2(kx) dx.

    Because the variation enters only through oscillatory integrals, the error does not grow with omega."""
    h = grid.steps
    gauss = np.sqrt(3.0 / 5.0) / 2
    r_points = grid.gauss_points if grid.gauss_points is not None else _gauss_points(region, grid)
    V = np.broadcast_to(np.asarray(region.potential(r_points, l, 0.0), dtype=float), r_points.shape)
    xg = gauss * h
    b = (V[:, 2] - V[:, 0]) / (2 * xg)
    c_coef = (V[:, 2] + V[:, 0] - 2 * V[:, 1]) / (2 * xg * xg)
    V0 = V[:, 1] + c_coef * h * h / 12
    out = []
    for start in range(0, len(omegas), CHUNK):
        w2 = omegas[start:start + CHUNK][None, :] ** 2
        k2 = w2 - V0[:, None]
        c, so = _trig_pair(k2, (h / 2)[:, None])
        S, Kq = step_integrals(k2, h[:, None], c, so)
        # Omega = [[A, B], [C, -A]]: A = -I_sc/k = -b S, B = -I_ss/k^2 = c Kq/2, C = I_cc = c Kq k^2/2
        A = -b[:, None] * S
        B = c_coef[:, None] * Kq / 2
        C = B * k2
        theta2 = A * A + B * C
        big = np.abs(theta2) > 1e-4
        cosh = 1 + theta2 / 2 * (1 + theta2 / 12 * (1 + theta2 / 30))
        sinhc = 1 + theta2 / 6 * (1 + theta2 / 20 * (1 + theta2 / 42))
        if np.any(big):
            t = np.sqrt(theta2[big].astype(complex))
            cosh[big] = np.cosh(t).real
            sinhc[big] = (np.sinh(t) / t).real
        x00, x01, x10, x11 = cosh + sinhc * A, sinhc * B, sinhc * C, cosh - sinhc * A
        e10 = -k2 * so                        # E(h/2) = [[c, so], [-k^2 so, c]]
        # E X E, written out
        y00, y01 = x00 * c + x01 * e10, x00 * so + x01 * c
        y10, y11 = x10 * c + x11 * e10, x10 * so + x11 * c
        m = np.empty(k2.shape + (2, 2))
        m[..., 0, 0] = c * y00 + so * y10
        m[..., 0, 1] = c * y01 + so * y11
        m[..., 1, 0] = e10 * y00 + c * y10
        m[..., 1, 1] = e10 * y01 + c * y11
        out.append(m)
    return np.concatenate(out, axis=1)


_PROPAGATORS: dict = {}   # everything that fixes a propagator -> (region, product, log scale)
_PROPAGATOR_LIMIT = 1024


def region_propagator(region, l: int, omegas: np.ndarray, lower: float, upper: float, count: int,
                      geometric: bool) -> tuple[np.ndarray, np.ndarray]:
    """The propagator across [lower, upper] on ``count`` steps for every omega: (2, 2) per omega, log scale.

    Kept for reuse, keyed on everything that fixes it (the region object, l, the exact frequencies, the piece,
    the step count and spacing): refinements and the error checks (a moved start, a farther end) march many
    pieces again exactly.  Callers get copies, so the kept arrays cannot be changed."""
    omegas = np.asarray(omegas, dtype=float)
    key = (id(region), int(l), omegas.tobytes(), float(lower), float(upper), int(count), bool(geometric))
    hit = _PROPAGATORS.get(key)
    if hit is not None and hit[0] is region:
        return hit[1].copy(), hit[2].copy()
    product, log_scale = _propagate(region, l, omegas, lower, upper, count, geometric)
    if len(_PROPAGATORS) >= _PROPAGATOR_LIMIT:
        _PROPAGATORS.clear()
    _PROPAGATORS[key] = (region, product, log_scale)
    return product.copy(), log_scale.copy()


def _propagate(region, l, omegas, lower, upper, count, geometric):
    results, scales = [], []
    grid = make_grid(region, lower, upper, count, geometric)
    for start in range(0, len(omegas), CHUNK):
        matrices = corrected_matrices(region, l, omegas[start:start + CHUNK], grid)
        product, log_scale = ordered_product(matrices)
        results.append(product)
        scales.append(log_scale)
    return np.concatenate(results, axis=0), np.concatenate(scales, axis=0)


def outer_pieces(lower: float, far: float, steps: int, scale: float,
                 decade: bool = False) -> list[tuple[float, float, int, bool]]:
    """Split [lower, far] of an outermost region into a near piece (up to 10^3 length scales, ``steps`` steps;
    with ``decade`` its first decade with ``steps``, the rest with half) and a far piece (a quarter as many
    steps: the potential there is small and smooth), all geometric, so that moving the far radius leaves the
    near grid unchanged.  Each piece is (a, b, steps, whether it is the far piece)."""
    middle = min(far, max(lower * 10.0, 1e3 * scale))
    # with ``decade`` (a region that starts at a horizon's neighbourhood), the decade above the start holds the
    # barrier and the turning points of the low l: it gets the full count, the rest of the near piece half of it
    # (measured outside a horizon: 4-50 times less error for l = 3-8 at a fifth more steps)
    top = min(middle, lower * 10.0) if decade else middle
    pieces = [(lower, top, steps, False)]
    if middle > top:
        pieces.append((top, middle, max(steps // 2, 4), False))
    if far > middle:
        pieces.append((middle, far, max(steps // 4, 16), True))
    return pieces


def first_spans(region, l, r_s, top, steps, highest):
    """The first region's pieces from the series start r_s to ``top``: uniform from the centre (l = 0 in 3+1);
    otherwise geometric in two parts split at a quarter of the innermost turning point r_t (where V = omega^2 at
    the highest frequency of the set): below it the solution is a deep power law that the steps follow closely
    (a quarter of the count), above it lie every frequency's turning point and its waves (the count times the
    decades spanned).  The error of a frozen-potential step peaks where k^2 = omega^2 - V crosses zero;
    measured: one geometric piece from r_s spent most of its steps where nothing happens (25-70 times the error
    at equal cost for l = 3 to 30), and fixed decades starved the turning points of the lower l."""
    if r_s == 0.0:
        return [(0.0, top, False, steps)]
    radii = np.geomspace(r_s, top, 400)
    V = np.broadcast_to(np.asarray(region.potential(radii, l, 0.0), dtype=float), radii.shape)
    below = np.nonzero(V <= highest ** 2)[0]
    turning = radii[below[0]] if len(below) else top
    cut = turning / 4
    full = int(round(steps * max(1.0, np.log10(top / max(cut, r_s)))))
    if cut <= r_s * 10:
        return [(r_s, top, True, full)]
    # below the cut the solution grows like r^(l+1) under the barrier: a step of gamma h = sqrt(l(l+1)) d ln r
    # e-folds makes the first-order (interaction-picture) correction of the step exponentially large, and past
    # gamma h ~ 10 it overflows (the term was then inf/nan on the coarse grids, and refinement went on to 8-16
    # times the steps everywhere for every l beyond ~20); so gamma h <= 6 at the coarsest grid (2x the base)
    evanescent = int(np.ceil(np.sqrt(l * (l + 1.0)) * np.log(cut / r_s) / 12))
    return [(r_s, cut, True, max(4, steps // 4, evanescent)), (cut, top, True, full)]
