"""Scattering off a black hole: transmission (greybody factors) and reflection (PHYSICS.md sections 4 and 6).

The solution that is purely ingoing at the horizon, u -> e^{-i omega r*} (unit amplitude), starts from the
derived Frobenius series u = x^s (1 + a_1 x + a_2 x^2), x = r - r_h, s = -i omega/(2 kappa), at a small x_0;
it is carried outward (propagation.py, complex state) to a far radius and split there into incoming and
outgoing waves with the local wave number k = sqrt(omega^2 - V):

    a_in = (u + i u'/k)/2,   a_out = (u - i u'/k)/2,   |A|^2 = |a|^2 k/omega   (WKB flux normalisation),

so that u -> A_in e^{-i omega r*} + A_out e^{i omega r*}.  Then |T|^2 = 1/|A_in|^2 and |R|^2 = |A_out|^2/|A_in|^2;
|R|^2 + |T|^2 = 1 (flux conservation) is reported as a check, not imposed.  Errors: grid doubling, moving the
start point x_0 (series truncation) and the far radius (tail), and rounding.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.solve.centre import FAR, Unsupported, rounding_floor, shortfall
from derive.solve.propagation import outer_pieces, region_propagator

START = 1e-5          # x_0 / r_h


@dataclass
class Scattering:
    omega: np.ndarray
    l: int
    transmission: np.ndarray
    reflection: np.ndarray
    error: np.ndarray              # of the transmission
    flux_defect: np.ndarray        # |R|^2 + |T|^2 - 1
    tolerance: float

    @property
    def ok(self) -> bool:
        return bool(np.all(self.error <= self.tolerance * np.maximum(self.transmission, 1e-300)))

    def message(self) -> str:
        return shortfall(self.omega, self.transmission, self.error, self.tolerance)


def check_supported(problem) -> None:
    first, last = problem.regions[0], problem.regions[-1]
    if first.lower_kind != "horizon" or first.horizon_series is None:
        raise Unsupported("transmission needs a non-degenerate horizon at the inner end (with its series)")
    if last.upper is not None or last.tail not in ("short-range", "centrifugal"):
        raise Unsupported("the outermost region must reach infinity with a short-range or centrifugal tail "
                          "(massless, asymptotically flat), so far")
    if problem.mass != 0.0:
        raise Unsupported("massive fields outside a horizon (Coulomb-like tail, up modes evanescent below the "
                          "mass) are not handled yet; with a regular centre they are")


def _start_state(region, l, omegas, x0):
    coefficients = np.asarray(region.horizon_series(l, omegas), dtype=complex)   # (4, n)
    s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients)
    r0 = region.lower + x0
    power = np.exp(s * np.log(x0))
    u = power * (a0 + a1 * x0 + a2 * x0 * x0)
    du_dr = power * (s / x0 * (a0 + a1 * x0 + a2 * x0 * x0) + a1 + 2 * a2 * x0)
    F = 1.0 / float(np.asarray(region.dtortoise_dr(np.array([r0])))[0])
    return np.stack([u, F * du_dr], axis=1)


def layout(problem, l, omegas):
    """What the grid depends on besides the resolution: the largest series exponent |s| and the lowest
    frequency.  Refinement passes fix it from the whole frequency set, so that every pass over a shrinking set
    of frequencies still refines the same grid."""
    s_max = float(np.max(np.abs(np.asarray(problem.regions[0].horizon_series(l, omegas), dtype=complex)[0])))
    return s_max, float(np.min(omegas))


def _pieces(problem, l, omegas, steps, start, far_factor, fixed=None):
    """The march from the horizon to the far radius: (region index, shift, a, b, kind, steps) per piece, the
    start offset x0 and the far radius."""
    horizon = problem.regions[0].lower
    s_max, lowest = fixed if fixed is not None else layout(problem, l, omegas)
    # the series' coefficients grow like |s|^k (s = -i omega/(2 kappa)): keep |s| x0/r_h small so that the
    # truncated terms stay below 1e-12; and use the exactly representable x0 = (r_h + x) - r_h, so that the
    # kernels (which compute r - r_h) and the series see the same point

    def offset(fraction):
        x = fraction * horizon / max(1.0, s_max)
        return (horizon + x) - horizon
    x0 = offset(START)
    # far enough that the centrifugal tail l(l+1)/(omega r)^2 is below 1e-12 of the wave (WKB split error)
    far = max(FAR * problem.length_scale, 1e3 / lowest, 1e6 * np.sqrt(l * (l + 1) + 1.0) / lowest)
    pieces = []
    # the checks on series truncation (an earlier start) and on the tail (a farther end) add a piece at that
    # end and leave every other piece's grid as it was, so that the change they make measures only what they
    # claim to measure
    x_start = offset(start) if start < START else x0
    if x_start < x0:
        pieces.append((0, horizon, x_start, x0, "horizon", max(2, int(round(steps * np.log(x0 / x_start) / 9.2)))))
    for index, region in enumerate(problem.regions):
        lower = region.lower
        if index == 0:
            middle = min(2 * horizon, region.upper) if region.upper is not None else 2 * horizon
            # a fixed number of steps per e-fold of (r - r_h)
            efolds = np.log((middle - horizon) / x0)
            pieces.append((index, horizon, x0, middle - horizon, "horizon",
                           max(4, int(round(steps * efolds / 9.2)))))
            lower = middle
        if region.upper is None:
            for a, b, n in outer_pieces(lower, far, steps, problem.length_scale):
                pieces.append((index, 0.0, a, b, "geometric", n if a == lower else max(4, steps // 4)))
            if far_factor > 1:
                pieces.append((index, 0.0, far, far * far_factor, "geometric", max(2, steps // 8)))
        elif region.upper > lower:
            pieces.append((index, 0.0, lower, region.upper, "uniform", steps))
    return pieces, x_start, far * far_factor


def _split(pieces, probe):
    """Cut the piece holding r = probe in two (steps shared in proportion to the grid parameter), so that the
    march passes through the probe exactly; returns the pieces and the index of the first piece after it."""
    out = []
    after = None
    for index, shift, a, b, kind, count in pieces:
        p = probe - shift
        if after is None and a < p <= b:
            fraction = np.log(p / a) / np.log(b / a) if kind != "uniform" else (p - a) / (b - a)
            first = max(2, int(round(count * fraction)))
            out.append((index, shift, a, p, kind, first))
            after = len(out)
            if p < b:
                out.append((index, shift, p, b, kind, max(2, count - first)))
        else:
            out.append((index, shift, a, b, kind, count))
    if after is None:
        raise Unsupported(f"the point r = {probe:g} is not outside the horizon")
    return out, after


@dataclass
class March:
    """One march from the horizon outward: |T|^2, |R|^2 and, with a probe radius r0, the logarithms of
    |u_H(r0)|^2 (u_H -> e^{-i omega r*} at the horizon, unit amplitude) and |u_inf(r0)|^2 (u_inf -> unit-flux
    outgoing wave e^{+i omega r*} far away)."""

    transmission: np.ndarray
    reflection: np.ndarray
    log_horizon2: np.ndarray | None = None
    log_infinity2: np.ndarray | None = None


BASE_STEPS = 16


def _run(problem, l, omegas, steps, start, far_factor=1.0, probe=None, fixed=None) -> March:
    # a grid too coarse for a deeply evanescent stretch overflows to inf/nan; refinement (or the error estimate,
    # which then stays non-finite and fails the tolerance) deals with it, so numpy's warnings are only noise here
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _march(problem, l, omegas, steps, start, far_factor, probe, fixed)


def _march(problem, l, omegas, steps, start, far_factor, probe, fixed) -> March:
    # the pieces and their step counts are laid out once at a base resolution and multiplied, so that the grid
    # of 2N steps refines the grid of N steps node for node: the error then falls cleanly as N^-4 and two
    # resolutions can be extrapolated (Richardson; see derive.solve.exterior)
    multiple = max(1, steps // BASE_STEPS)
    pieces, x0, far = _pieces(problem, l, omegas, BASE_STEPS, start, far_factor, fixed)
    after = None
    if probe is not None:
        pieces, after = _split(pieces, probe)
    pieces = [piece[:5] + (piece[5] * multiple,) for piece in pieces]
    state = _start_state(problem.regions[0], l, omegas, x0)
    n = len(omegas)
    log_scale = np.zeros(n)
    interfaces = {i.inner: i for i in problem.interfaces}
    probe_u, probe_log = None, None
    # the propagator from the probe to the far radius (kept at unit size with its log scale, and its
    # determinant from the interfaces: every Magnus step is unimodular), for the solution coming from infinity
    outer = np.broadcast_to(np.eye(2), (n, 2, 2)).copy()
    outer_log, outer_det = np.zeros(n), np.ones(n)
    for position, (index, shift, a, b, kind, count) in enumerate(pieces):
        region = problem.regions[index]
        if position == after:
            probe_u, probe_log = state[:, 0].copy(), log_scale.copy()
        matrix, scale = _piece(region, l, omegas, shift, a, b, count, kind)
        state = np.einsum("nij,nj->ni", matrix, state)
        size = np.max(np.abs(state), axis=1)
        state = state / size[:, None]
        log_scale += scale + np.log(size)
        if after is not None and position >= after:
            outer, outer_log = _accumulate(matrix, scale, outer, outer_log)
        last_of_region = position + 1 == len(pieces) or pieces[position + 1][0] != index
        if last_of_region and region.name in interfaces:
            transfer = np.broadcast_to(np.asarray(interfaces[region.name].transfer(l, omegas), dtype=float),
                                       (2, 2, n))
            state = np.einsum("ijn,nj->ni", transfer, state)
            if after is not None and position >= after:
                matrix = np.moveaxis(transfer, -1, 0)
                outer, outer_log = _accumulate(matrix, np.zeros(n), outer, outer_log)
                outer_det = outer_det * np.linalg.det(matrix)
    if after is not None and after == len(pieces):
        probe_u, probe_log = state[:, 0].copy(), log_scale.copy()
    last = problem.regions[-1]
    V = float(np.asarray(last.potential(np.array([far]), l, 0.0)).reshape(-1)[0])
    k = np.sqrt(omegas ** 2 - V)
    a_in = (state[:, 0] + 1j * state[:, 1] / k) / 2
    a_out = (state[:, 0] - 1j * state[:, 1] / k) / 2
    scale = np.exp(2 * log_scale) * k / omegas
    A_in2, A_out2 = np.abs(a_in) ** 2 * scale, np.abs(a_out) ** 2 * scale
    result = March(1.0 / A_in2, A_out2 / A_in2)
    if probe is not None:
        log_T2 = -(2 * log_scale + np.log(np.abs(a_in) ** 2 * k / omegas))
        result.log_horizon2 = 2 * (np.log(np.abs(probe_u)) + probe_log)
        # u_inf(r0) = (P^-1 s)[0], s = sqrt(omega/k) (1, i k) the unit-flux outgoing wave at the far radius,
        # P = outer exp(outer_log): P^-1 = adj(outer) exp(outer_log) / det P
        s0, s1 = np.sqrt(omegas / k), 1j * np.sqrt(omegas * k)
        u_inf = outer[:, 1, 1] * s0 - outer[:, 0, 1] * s1
        result.log_infinity2 = 2 * (np.log(np.abs(u_inf)) + outer_log - np.log(np.abs(outer_det)))
        result.log_horizon2 = result.log_horizon2 + log_T2
        result.log_infinity2 = result.log_infinity2 + log_T2
    return result


def _accumulate(matrix, scale, product, log):
    product = matrix @ product
    size = np.max(np.abs(product), axis=(1, 2))
    return product / size[:, None, None], log + scale + np.log(size)


class _Shifted:
    """A region seen in the variable x = r - shift (for grids geometric in the distance to the horizon)."""

    def __init__(self, region, shift):
        self.region, self.shift = region, shift

    def potential(self, x, l, omega):
        return self.region.potential(np.asarray(x) + self.shift, l, omega)

    def dtortoise_dr(self, x):
        return self.region.dtortoise_dr(np.asarray(x) + self.shift)


def _piece(region, l, omegas, shift, a, b, steps, kind):
    if kind == "horizon":
        return region_propagator(_Shifted(region, shift), l, omegas, a, b, steps, True)
    return region_propagator(region, l, omegas, a, b, steps, kind == "geometric")


def transmission(problem, l: int, omegas, tolerance: float = 1e-10, steps: int = 64,
                 max_steps: int = 16384) -> Scattering:
    """|T|^2 and |R|^2 for the angular label l at every omega (> 0), with error estimates."""
    check_supported(problem)
    omegas = np.asarray(omegas, dtype=float)
    if omegas.ndim != 1 or np.any(~np.isfinite(omegas)) or np.any(omegas <= 0):
        raise ValueError("frequencies must be positive and finite")
    n = len(omegas)
    T, R, error = np.zeros(n), np.zeros(n), np.zeros(n)
    active = np.arange(n)
    count = steps
    fixed = layout(problem, l, omegas)
    coarse = _run(problem, l, omegas, count, START, fixed=fixed)
    while len(active):
        fine = _run(problem, l, omegas[active], 2 * count, START, fixed=fixed)
        done = np.abs(fine.transmission - coarse.transmission) <= 0.5 * tolerance * fine.transmission
        if 2 * count >= max_steps:
            done[:] = True
        if np.any(done):
            index = active[done]
            # the value from a grid twice finer again; the start point and the far radius are moved on that
            # same resolution, so their changes measure series truncation and the tail rather than the grid
            w = omegas[index]
            best = _run(problem, l, w, 4 * count, START, fixed=fixed)
            moved = _run(problem, l, w, 4 * count, START / 2, fixed=fixed)
            farther = _run(problem, l, w, 4 * count, START, far_factor=4.0, fixed=fixed)
            T[index], R[index] = best.transmission, best.reflection
            error[index] = (np.abs(best.transmission - fine.transmission[done])
                            + np.abs(best.transmission - moved.transmission)
                            + np.abs(best.transmission - farther.transmission)
                            + rounding_floor(4 * count) * best.transmission)
            if 2 * count < max_steps:   # not there yet with every source of error counted: refine further
                done[np.nonzero(done)[0][error[index] > tolerance * best.transmission]] = False
        active = active[~done]
        coarse = March(fine.transmission[~done], fine.reflection[~done])
        count *= 2
    return Scattering(omegas, l, T, R, error, T + R - 1.0, tolerance)
