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

from derive.solve.centre import FAR, Unsupported, rounding_floor
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
        relative = self.error / np.maximum(self.transmission, 1e-300)
        bad = relative > self.tolerance
        if not np.any(bad):
            return "ok"
        worst = int(np.argmax(relative))
        return (f"{int(np.sum(bad))} of {len(self.omega)} frequencies miss the relative tolerance "
                f"{self.tolerance:.0e}; worst at omega = {self.omega[worst]:.6g} ({relative[worst]:.2e})")


def check_supported(problem) -> None:
    first, last = problem.regions[0], problem.regions[-1]
    if first.lower_kind != "horizon" or first.horizon_series is None:
        raise Unsupported("transmission needs a non-degenerate horizon at the inner end (with its series)")
    if last.upper is not None or last.tail not in ("short-range", "centrifugal"):
        raise Unsupported("the outermost region must reach infinity with a short-range or centrifugal tail "
                          "(massless, asymptotically flat), so far")
    if problem.mass != 0.0:
        raise Unsupported("massive fields are not handled by the solver yet")


def _start_state(region, l, omegas, x0):
    coefficients = np.asarray(region.horizon_series(l, omegas), dtype=complex)   # (4, n)
    s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients)
    r0 = region.lower + x0
    power = np.exp(s * np.log(x0))
    u = power * (a0 + a1 * x0 + a2 * x0 * x0)
    du_dr = power * (s / x0 * (a0 + a1 * x0 + a2 * x0 * x0) + a1 + 2 * a2 * x0)
    F = 1.0 / float(np.asarray(region.dtortoise_dr(np.array([r0])))[0])
    return np.stack([u, F * du_dr], axis=1)


def _run(problem, l, omegas, steps, start, far_factor=1.0):
    horizon = problem.regions[0].lower
    # the series' coefficients grow like |s|^k (s = -i omega/(2 kappa)): keep |s| x0/r_h small so that the
    # truncated terms stay below 1e-12; and use the exactly representable x0 = (r_h + x) - r_h, so that the
    # kernels (which compute r - r_h) and the series see the same point
    s_max = float(np.max(np.abs(np.asarray(problem.regions[0].horizon_series(l, omegas), dtype=complex)[0])))
    x0 = start * horizon / max(1.0, s_max)
    x0 = (horizon + x0) - horizon
    state = _start_state(problem.regions[0], l, omegas, x0)
    # far enough that the centrifugal tail l(l+1)/(omega r)^2 is below 1e-12 of the wave (WKB split error)
    lowest = float(np.min(omegas))
    far = max(FAR * problem.length_scale, 1e3 / lowest, 1e6 * np.sqrt(l * (l + 1) + 1.0) / lowest) * far_factor
    log_scale = np.zeros(len(omegas))
    interfaces = {i.inner: i for i in problem.interfaces}
    for index, region in enumerate(problem.regions):
        pieces = []
        lower = region.lower
        if index == 0:
            middle = min(2 * horizon, region.upper) if region.upper is not None else 2 * horizon
            # a fixed number of steps per e-fold of (r - r_h), so that moving x0 only adds steps
            efolds = np.log((middle - horizon) / x0)
            pieces.append((horizon, x0, middle - horizon, "horizon", max(16, int(round(steps * efolds / 9.2)))))
            lower = middle
        if region.upper is None:
            for a, b, n in outer_pieces(lower, far, steps, problem.length_scale):
                pieces.append((0.0, a, b, "geometric", n))
        elif region.upper > lower:
            pieces.append((0.0, lower, region.upper, "uniform", steps))
        for shift, a, b, kind, *count in pieces:
            matrix, scale = _piece(region, l, omegas, shift, a, b, count[0] if count else steps, kind)
            state = np.einsum("nij,nj->ni", matrix, state)
            size = np.max(np.abs(state), axis=1)
            state = state / size[:, None]
            log_scale += scale + np.log(size)
        if region.name in interfaces:
            transfer = np.broadcast_to(np.asarray(interfaces[region.name].transfer(l, omegas), dtype=float),
                                       (2, 2, len(omegas)))
            state = np.einsum("ijn,nj->ni", transfer, state)
    last = problem.regions[-1]
    V = float(np.asarray(last.potential(np.array([far]), l, 0.0)).reshape(-1)[0])
    k = np.sqrt(omegas ** 2 - V)
    a_in = (state[:, 0] + 1j * state[:, 1] / k) / 2
    a_out = (state[:, 0] - 1j * state[:, 1] / k) / 2
    scale = np.exp(2 * log_scale) * k / omegas
    A_in2, A_out2 = np.abs(a_in) ** 2 * scale, np.abs(a_out) ** 2 * scale
    return 1.0 / A_in2, A_out2 / A_in2


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
    coarse = _run(problem, l, omegas, count, START)
    while len(active):
        fine = _run(problem, l, omegas[active], 2 * count, START)
        done = np.abs(fine[0] - coarse[0]) <= 0.5 * tolerance * fine[0]
        if 2 * count >= max_steps:
            done[:] = True
        if np.any(done):
            index = active[done]
            # the value from a grid twice finer again; the start point and the far radius are moved on that
            # same resolution, so their changes measure series truncation and the tail rather than the grid
            w = omegas[index]
            best = _run(problem, l, w, 4 * count, START)
            moved = _run(problem, l, w, 4 * count, START / 2)
            farther = _run(problem, l, w, 4 * count, START, far_factor=4.0)
            T[index], R[index] = best
            error[index] = (np.abs(best[0] - fine[0][done]) + np.abs(best[0] - moved[0])
                            + np.abs(best[0] - farther[0]) + rounding_floor(4 * count) * best[0])
            if 2 * count < max_steps:   # not there yet with every source of error counted: refine further
                done[np.nonzero(done)[0][error[index] > tolerance * best[0]]] = False
        active = active[~done]
        coarse = tuple(part[~done] for part in fine)
        count *= 2
    return Scattering(omegas, l, T, R, error, T + R - 1.0, tolerance)
