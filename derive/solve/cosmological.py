"""An outer end at a cosmological horizon: how the regular solution is normalised there (numeric only).

In a static patch bounded by a cosmological horizon r_c (de Sitter, Schwarzschild-de Sitter) the tortoise
coordinate runs to +infinity at r_c and V -> 0 there like f ~ e^{-2 kappa r*}, for every l and every mass: the
waves are free near the horizon and a mode's amplitude is read off there, as it is far away in an
asymptotically flat spacetime.  Reading it from the WKB invariant would need r_c - r ~ 1e-12 (V/omega^2
below the tolerance), which a double cannot resolve next to r_c; instead the unit-amplitude solution that leaves
through the horizon,

    u_c = y^s (1 + a_1 y + a_2 y^2 + ...),   y = r_c - r,   s = -i omega/(2 kappa_c)   (u_c ~ e^{+i omega r*}),

starts on the derived Frobenius series at a small y_0 and is marched inward, in the variable y (geometric
steps, the equation unchanged since d^2/dr*^2 = d^2/d(-r*)^2), to a matching radius r_m, where the outward
solution meets it.  A real solution u = A u_c + conj(A) conj(u_c) ~ 2|A| cos(omega r* + delta) is a standing
wave of amplitude 2|A| = |W[u, u_c]|/omega (W the Wronskian in r*; |W[u_c, conj u_c]| = 2 omega), so the
normalisation a^2 k of centre.py (k = omega: V vanishes at the horizon) is |W|^2/omega.  The series truncation
is checked by starting again at y_0/4 (on the same grid beyond y_0) and taking the change as the error.
"""

from __future__ import annotations

import numpy as np

from derive.solve.march import Piece, march

START = 1e-4          # y_0 = START * r_c / max(1, |s|): the truncated series terms ~ (|s| y_0/r_c)^3 stay small
EFOLD_STEPS = 9.2     # steps are counted per ln(10^4) of y, as at a black hole's horizon (horizon.py)


def has_cosmological_horizon(problem) -> bool:
    last = problem.regions[-1]
    return last.upper_kind == "horizon" and last.upper is not None


def temperature(problem) -> float | None:
    """kappa_c/(2 pi) of the cosmological horizon at the outer end, in the spec's time; None without one."""
    last = problem.regions[-1]
    if not has_cosmological_horizon(problem) or last.outer_surface_gravity is None:
        return None
    return float(last.outer_surface_gravity) / (2 * np.pi)


def matching_radius(problem, radii=()) -> float:
    """r_m: halfway between the last region's lower end (or the outermost requested radius) and r_c."""
    last = problem.regions[-1]
    inner = max([last.lower] + [r for r in radii if r < last.upper])
    return last.upper - (last.upper - inner) / 2


def _offset(top: float, y: float) -> float:
    """A y for which top - y is computed exactly (so the kernels' r - r_c and the series' y agree)."""
    return top - (top - y)


def horizon_solution(problem, l, omegas, r_m, steps, start=START):
    """(u_c, du_c/dr*) at r_m for every omega: the unit-amplitude wave leaving through the cosmological horizon,
    with its log scale (arrays of shape (n,), (n,), (n,)).  ``steps`` per 9.2 e-folds of y."""
    last = problem.regions[-1]
    if last.outer_series is None or last.outer_surface_gravity is None:
        from derive.solve.centre import Unsupported

        raise Unsupported("the cosmological horizon's series kernel is missing or did not verify")
    top = last.upper
    coefficients = np.asarray(last.outer_series(l, omegas), dtype=complex)
    s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients[:4])
    s_max = max(1.0, float(np.max(np.abs(s))))
    y_m = top - r_m
    y0 = _offset(top, START * top / s_max)
    index = len(problem.regions) - 1
    pieces = []
    if start < START:
        y_start = _offset(top, start * top / s_max)
        pieces.append(Piece(index, y_start, y0, max(2, int(round(steps * np.log(y0 / y_start) / EFOLD_STEPS))),
                            "to horizon", top))
    else:
        y_start = y0
    pieces.append(Piece(index, y0, y_m, max(4, int(round(steps * np.log(y_m / y0) / EFOLD_STEPS))), "to horizon",
                        top))
    power = np.exp(s * np.log(y_start))
    poly = a0 + a1 * y_start + a2 * y_start * y_start
    F = 1.0 / float(np.asarray(last.dtortoise_dr(np.array([top - y_start]))).reshape(-1)[0])
    # state (u, du/d rho*) with rho* = -r*, increasing inward like y: d rho*/dy = 1/F
    state = np.stack([power * poly, F * power * (s / y_start * poly + a1 + 2 * a2 * y_start)], axis=1)
    marched = march(problem, l, omegas, pieces, state)
    return marched.state[:, 0], -marched.state[:, 1], marched.log_scale


def flux_at_horizon(problem, l, omegas, state, r_m, steps, check: bool = True):
    """log(a^2 k) of the real solution whose (u, du/dr*) at r_m is ``state`` (its own scale not included), and
    the relative change when the series starts four times closer to the horizon (the truncation error; zeros
    without ``check``)."""
    values = []
    for start in ((START, START / 4) if check else (START,)):
        u_c, du_c, scale = horizon_solution(problem, l, omegas, r_m, steps, start)
        wronskian = state[:, 0] * du_c - state[:, 1] * u_c
        values.append(2 * (np.log(np.abs(wronskian)) + scale) - np.log(omegas))
    change = np.abs(np.expm1(values[1] - values[0])) if check else np.zeros(len(omegas))
    return values[0], change


def constant_zero_mode(problem) -> bool:
    """Whether psi = const solves the l = 0 equation at omega = 0 (a massless field without curvature coupling,
    or with R = 0): u = r^(n/2) with d^2u/dr*^2 = V u, checked at a few radii of every region to 1e-6.  Inside a
    cosmological horizon that mode is bounded at both ends, so the l = 0 density grows like 1/omega at low
    frequency (the static patch's infrared problem) and every response diverges in the infrared."""
    n = problem.dimension - 2
    for region in problem.regions:
        top = region.upper if region.upper is not None else 10 * max(region.lower, problem.length_scale)
        bottom = region.lower if region.lower > 0 else 1e-3 * top
        radii = bottom + (top - bottom) * np.array([0.2, 0.45, 0.7])
        h = 1e-4 * (top - bottom)

        def F(r, region=region):
            return 1.0 / np.asarray(region.dtortoise_dr(np.asarray(r, dtype=float)), dtype=float)

        def flux(r, F=F):     # F du/dr for u = r^(n/2)
            return F(r) * (n / 2) * np.asarray(r, dtype=float) ** (n / 2 - 1)
        second = F(radii) * (flux(radii + h) - flux(radii - h)) / (2 * h)
        V = np.asarray(region.potential(radii, 0, 0.0), dtype=float) * np.ones_like(radii)
        expected = V * radii ** (n / 2)
        if np.any(np.abs(second - expected) > 1e-6 * (np.abs(expected) + np.abs(second) + 1e-300)):
            return False
    return True
