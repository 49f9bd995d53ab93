"""Spectral density at a static point off the centre: the l-sum (PHYSICS.md section 7).

    density(omega; r0) = sum_l (2l+1)/(4 pi) |U_l|^2,   U_l = u_l(r0)/(r0 A_l sqrt(pi omega)),

with u_l the regular solution (u ~ r^{l+1} at the centre, started on the derived Frobenius series at a small
radius), A_l its amplitude far away.  Logarithmic scales are carried throughout (u ~ r^{l+1} underflows for
large l).  Each l is refined by grid doubling; the sum stops when the terms have fallen below a hundredth of the
tolerance for three successive l beyond omega r0* (they then fall faster than geometrically), and the last term
counts as the truncation error.  Check: in flat space the sum gives omega/(4 pi^2) at every r0 (addition
theorem, sum_l (2l+1) j_l(x)^2 = 1, DLMF 10.60.12).

Supported: r0 inside the innermost region (which has the regular centre); massless, asymptotically flat.
"""

from __future__ import annotations

import numpy as np

from derive.solve.centre import FAR, DensityResult, Unsupported, check_supported, rounding_floor
from derive.solve.propagation import outer_pieces, region_propagator

MAX_L = 400


def _log_u_at(problem, l, omegas, r0, steps, series):
    """log|u_l(r0)| - log A_l for every omega (u_l normalised arbitrarily; the ratio is what matters)."""
    first = problem.regions[0]
    n = len(omegas)
    if l == 0:
        r_s = 0.0
        state = np.tile([0.0, 1.0], (n, 1))
        log_scale = np.zeros(n)
    else:
        coefficients = np.asarray(series(l, omegas), dtype=float)
        s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients[:4])
        r_s = min(1e-3 * r0, 1e-3 / float(np.max(omegas)))
        F = 1.0 / float(np.asarray(first.dtortoise_dr(np.array([r_s])))[0])
        poly = a0 + a1 * r_s + a2 * r_s * r_s
        state = np.stack([poly, F * (s / r_s * poly + a1 + 2 * a2 * r_s)], axis=1)
        log_scale = s * np.log(r_s)
    pieces = [(r_s, r0, l > 0, "to r0")]
    upper = first.upper
    far = max(FAR * problem.length_scale, 1e3 / float(np.min(omegas)),
              1e6 * np.sqrt(l * (l + 1) + 1.0) / float(np.min(omegas)))
    log_u0 = None
    interfaces = {i.inner: i for i in problem.interfaces}
    for index, region in enumerate(problem.regions):
        if index == 0:
            pieces_here = pieces + ([(r0, upper, False, "")] if upper is not None else
                                    [(a, b, True, "") for a, b, _ in outer_pieces(r0, far, steps,
                                                                                 problem.length_scale)])
        elif region.upper is None:
            pieces_here = [(a, b, True, "") for a, b, _ in outer_pieces(region.lower, far, steps,
                                                                       problem.length_scale)]
        else:
            pieces_here = [(region.lower, region.upper, False, "")]
        for a, b, geometric, label in pieces_here:
            if b > a:
                matrix, scale = region_propagator(region, l, omegas, a, b, steps, geometric)
                state = np.einsum("nij,nj->ni", matrix, state)
                size = np.max(np.abs(state), axis=1)
                state = state / size[:, None]
                log_scale = log_scale + scale + np.log(size)
            if label == "to r0":
                log_u0 = np.log(np.abs(state[:, 0])) + log_scale
        if region.name in interfaces:
            transfer = np.broadcast_to(np.asarray(interfaces[region.name].transfer(l, omegas), dtype=float),
                                       (2, 2, n))
            state = np.einsum("ijn,nj->ni", transfer, state)
    last = problem.regions[-1]
    V = float(np.asarray(last.potential(np.array([far]), l, 0.0)).reshape(-1)[0])
    amplitude2 = state[:, 0] ** 2 + state[:, 1] ** 2 / (omegas ** 2 - V)
    log_amplitude = 0.5 * np.log(amplitude2) + log_scale
    return log_u0 - log_amplitude


def _term(problem, l, omegas, r0, steps, series, tolerance, max_steps=4096):
    """(2l+1)/(4 pi) |U_l|^2 and its error, refined by grid doubling."""
    coarse = _log_u_at(problem, l, omegas, r0, steps, series)
    count = steps
    while True:
        fine = _log_u_at(problem, l, omegas, r0, 2 * count, series)
        term = (2 * l + 1) / (4 * np.pi) * np.exp(2 * fine) / (r0 * r0 * np.pi * omegas)
        with np.errstate(over="ignore"):   # a very coarse first grid can be off by orders of magnitude
            relative = np.abs(np.expm1(2 * (fine - coarse)))
        if np.all(relative <= 0.5 * tolerance) or 2 * count >= max_steps:
            return term, term * (relative + rounding_floor(2 * count))
        count *= 2
        coarse = fine


def density_off_centre(problem, omegas, r0: float, tolerance: float = 1e-10, steps: int = 48,
                       series=None) -> DensityResult:
    """The l-summed density per unit omega at radius r0 (> 0) inside the innermost region."""
    check_supported(problem)
    first = problem.regions[0]
    if not (0 < r0 and (first.upper is None or r0 < first.upper)):
        raise Unsupported("the point must lie inside the innermost region (the one with the regular centre)")
    series = series or first.centre_series
    if series is None:
        raise Unsupported("the centre's series kernel is needed for l > 0")
    omegas = np.asarray(omegas, dtype=float)
    total = np.zeros(len(omegas))
    error = np.zeros(len(omegas))
    quiet = 0
    reach = float(np.max(omegas)) * r0 * float(np.max(first.dtortoise_dr(np.linspace(0, r0, 9))))
    for l in range(MAX_L + 1):
        term, term_error = _term(problem, l, omegas, r0, steps, series, tolerance)
        total += term
        error += term_error
        small = np.all(term <= 0.01 * tolerance * total)
        quiet = quiet + 1 if (small and l > reach) else 0
        if quiet >= 3:
            error += term   # the first neglected terms are smaller than the last one kept
            break
    else:
        raise Unsupported(f"the l-sum did not converge by l = {MAX_L}")
    return DensityResult(omegas, total, error, np.zeros_like(total), error / total, np.zeros_like(total), tolerance)
