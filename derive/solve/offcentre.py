"""Spectral density at a static point off the centre: the l-sum (docs/conventions.md section 7).

    density(omega; r0) = sum_l (2l+1)/(4 pi) |U_l|^2,   U_l = u_l(r0)/(r0 A_l sqrt(pi k)),
    k = sqrt(omega^2 - mu^2) (omega when massless),

with u_l the regular solution (u ~ r^{l+1} at the centre, started on the derived Frobenius series at a small
radius), A_l its amplitude far away.  Logarithmic scales are carried throughout (u ~ r^{l+1} underflows for
large l).  The point may lie in any region (the march passes through it, crossing interfaces on the way).

Each l is refined frequency by frequency on nested grids (N, 2N, 4N steps in every piece), extrapolated
(Richardson, fourth order) and accepted when the extrapolations of two successive pairs agree to the tolerance
of the term itself or of the sum so far, whichever is larger (a term far below the sum needs only absolute
accuracy).  The sum stops when three successive terms beyond the classical reach omega r0* are below a
hundredth of the tolerance of the total, and the last term kept counts as the truncation error.  Check: in
flat space the sum gives omega/(4 pi^2) at every r0 (addition theorem, sum_l (2l+1) j_l(x)^2 = 1, DLMF 10.60.12).
In D dimensions (2l+1)/(4 pi) becomes the weight of the degree-l harmonics on the (D-2)-sphere and r0^2 becomes
r0^(D-2); l = 0 then also starts on the series (u ~ r^((D-2)/2)).

Supported: a regular centre, asymptotically flat, massless or massive (the continuum above the mass).
"""

from __future__ import annotations

import numpy as np

from derive.solve.centre import (FAR, DensityResult, Unsupported, check_supported, continuum_threshold,
                                 harmonic_weight, merge, rounding_floor)
from derive.parallel import split_map
from derive.solve.propagation import outer_pieces, region_propagator

MAX_L = 400
SPLIT_FROM = 64     # frequencies from which the set is split in two halves (one per core)


def _pieces(problem, l, r0, steps, lowest, highest):
    """(region index, a, b, geometric, steps) from the series start to the far radius, cut at r0; the index of
    the first piece beyond r0; the series start r_s and the far radius."""
    r_s = 0.0 if (l == 0 and problem.dimension == 4) else min(1e-3 * r0, 1e-3 / highest)
    far = max(FAR * problem.length_scale, 1e3 / lowest, 1e6 * np.sqrt(l * (l + 1) + 1.0) / lowest)
    pieces = []
    for index, region in enumerate(problem.regions):
        spans = []
        lower = region.lower
        if index == 0:   # from the series start: geometric in r when it starts off the centre (l > 0)
            top = region.upper if region.upper is not None else 2 * max(r0, problem.length_scale)
            spans.append((r_s, top, r_s > 0, steps))
            lower = top
        if region.upper is None:
            spans += [(a, b, True, n) for a, b, n in outer_pieces(lower, far, steps, problem.length_scale)]
        elif index > 0:
            spans.append((lower, region.upper, False, steps))
        for a, b, geometric, n in spans:
            if b <= a:
                continue
            if a < r0 < b:
                fraction = np.log(r0 / a) / np.log(b / a) if geometric else (r0 - a) / (b - a)
                first = max(2, int(round(n * fraction)))
                pieces.append((index, a, r0, geometric, first))
                pieces.append((index, r0, b, geometric, max(2, n - first)))
            else:
                pieces.append((index, a, b, geometric, n))
    after = next(i for i, piece in enumerate(pieces) if piece[1] >= r0)
    return pieces, after, r_s, far


def _log_u_at(problem, l, omegas, r0, steps, series, fixed):
    """log|u_l(r0)| - log A_l for every omega (u_l normalised arbitrarily; the ratio is what matters).
    ``fixed`` = (lowest, highest) frequency of the whole set: the grid is the same for every subset."""
    n = len(omegas)
    multiple = max(1, steps // 16)
    pieces, after, r_s, far = _pieces(problem, l, r0, 16, *fixed)
    if r_s == 0.0:
        state = np.tile([0.0, 1.0], (n, 1))
        log_scale = np.zeros(n)
    else:
        first = problem.regions[0]
        coefficients = np.asarray(series(l, omegas), dtype=float)
        s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients[:4])
        F = 1.0 / float(np.asarray(first.dtortoise_dr(np.array([r_s])))[0])
        poly = a0 + a1 * r_s + a2 * r_s * r_s
        state = np.stack([poly, F * (s / r_s * poly + a1 + 2 * a2 * r_s)], axis=1)
        log_scale = s * np.log(r_s)
    log_u0 = None
    interfaces = {i.inner: i for i in problem.interfaces}
    for position, (index, a, b, geometric, count) in enumerate(pieces):
        region = problem.regions[index]
        if position == after:
            log_u0 = np.log(np.abs(state[:, 0])) + log_scale
        matrix, scale = region_propagator(region, l, omegas, a, b, count * multiple, geometric)
        state = np.einsum("nij,nj->ni", matrix, state)
        size = np.max(np.abs(state), axis=1)
        state = state / size[:, None]
        log_scale = log_scale + scale + np.log(size)
        last_of_region = position + 1 == len(pieces) or pieces[position + 1][0] != index
        if last_of_region and region.name in interfaces:
            transfer = np.broadcast_to(np.asarray(interfaces[region.name].transfer(l, omegas), dtype=float),
                                       (2, 2, n))
            state = np.einsum("ijn,nj->ni", transfer, state)
    last = problem.regions[-1]
    V = float(np.asarray(last.potential(np.array([far]), l, 0.0)).reshape(-1)[0])
    q = omegas ** 2 - V          # the local wave number squared: the flux a^2 k normalises (centre.py)
    amplitude2 = (state[:, 0] ** 2 + state[:, 1] ** 2 / q) * np.sqrt(q)
    log_amplitude = 0.5 * np.log(amplitude2) + log_scale
    return log_u0 - log_amplitude


def _term_values(problem, l, omegas, r0, steps, series, fixed):
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        log_u = _log_u_at(problem, l, omegas, r0, steps, series, fixed)
        n = problem.dimension - 2
        return harmonic_weight(l, n) * np.exp(2 * log_u) / (r0 ** n * np.pi)


def _term(problem, l, omegas, r0, series, tolerance, floor, fixed, steps=32, max_steps=8192):
    """(2l+1)/(4 pi) |U_l|^2 and its error, refined per frequency (see the module docstring).

    ``tolerance`` may be an array (one per frequency); ``fixed`` = (lowest, highest) frequency of the whole set,
    so that the grids do not depend on which frequencies are still summing.  Returns also the step count at
    which most frequencies converged (the next l starts near it)."""
    n = len(omegas)
    tolerance = np.broadcast_to(np.asarray(tolerance, dtype=float), (n,))
    value, error = np.zeros(n), np.zeros(n)
    active = np.arange(n)
    count = steps
    converged_at = []
    coarse = _term_values(problem, l, omegas, r0, count, series, fixed)
    fine = _term_values(problem, l, omegas, r0, 2 * count, series, fixed)
    while len(active):
        finest = _term_values(problem, l, omegas[active], r0, 4 * count, series, fixed)
        with np.errstate(invalid="ignore", over="ignore"):
            before = fine + (fine - coarse) / 15
            after = finest + (finest - fine) / 15
            change = np.abs(after - before)
        scale = np.maximum(np.abs(after), floor[active])
        done = change <= tolerance[active] * scale
        if 4 * count >= max_steps:
            done[:] = True
        index = active[done]
        value[index] = after[done]
        error[index] = change[done] + rounding_floor(4 * count) * np.abs(after[done])
        bad = ~np.isfinite(value[index] + error[index])
        error[index[bad]] = np.inf
        converged_at += [count] * int(np.sum(done))
        active = active[~done]
        coarse, fine = fine[~done], finest[~done]
        count *= 2
    return value, error, int(np.median(converged_at)) if converged_at else steps


def density_off_centre(problem, omegas, r0: float, tolerance: float = 1e-10, series=None,
                       progress=None) -> DensityResult:
    """The l-summed density per unit omega at radius r0 (> 0), in any region of a spacetime with a centre.

    Each frequency sums its own l: its reach omega r0* (the tortoise distance from the centre) sets how many
    terms count, its terms are refined to tolerance/(4 + reach) of its sum, and it stops after three quiet terms
    beyond its reach, while the others go on.  The step count of the next l starts from where most frequencies
    of this l converged (nested grids: a start that is high only means finer levels are compared)."""
    check_supported(problem, any_dimension=True)
    first = problem.regions[0]
    if not r0 > 0:
        raise Unsupported("the point must lie off the centre (r0 > 0); at r0 = 0 use the centre density")
    series = series or first.centre_series
    if series is None:
        raise Unsupported("the centre's series kernel is needed for l > 0")
    omegas = np.asarray(omegas, dtype=float)
    threshold = continuum_threshold(problem)
    if threshold > 0 and np.any(omegas <= threshold):   # no continuum below the mass (see centre.py)
        above = np.nonzero(omegas > threshold)[0]
        parts = [(above, density_off_centre(problem, omegas[above], r0, tolerance, series, progress))
                 ] if len(above) else []
        return merge(omegas, tolerance, parts)
    distance = 0.0      # the tortoise distance from the centre to r0
    for region in problem.regions:
        top = min(r0, region.upper) if region.upper is not None else r0
        if top > region.lower:
            nodes, weights = np.polynomial.legendre.leggauss(20)
            half = (top - region.lower) / 2
            distance += float(np.sum(weights * region.dtortoise_dr(region.lower + (nodes + 1) * half)) * half)
    fixed = (float(np.min(np.sqrt(omegas ** 2 - threshold ** 2))), float(np.max(omegas)))
    # two fixed halves (every other frequency), on both cores where there are two: the same result either way
    halves = [np.arange(len(omegas))] if len(omegas) < SPLIT_FROM else [np.arange(0, len(omegas), 2),
                                                                           np.arange(1, len(omegas), 2)]
    parts = split_map(_l_sum, [(problem, omegas[index], r0, tolerance, series, fixed, distance,
                                progress if i == 0 else None) for i, index in enumerate(halves)])
    total, error = np.zeros(len(omegas)), np.zeros(len(omegas))
    for index, (part_total, part_error) in zip(halves, parts):
        total[index], error[index] = part_total, part_error
    return DensityResult(omegas, total, error, np.zeros_like(total), error / total, np.zeros_like(total), tolerance)


def _l_sum(problem, omegas, r0, tolerance, series, fixed, distance, progress=None):
    """The sum over l for each frequency (see :func:`density_off_centre`): (total, error).  ``progress(l,
    share)`` is told the l reached and the share of frequencies done."""
    n = len(omegas)
    total = np.zeros(n)
    error = np.zeros(n)
    quiet = np.zeros(n, dtype=int)
    reach = omegas * distance
    summing = np.arange(n)
    steps = 32
    for l in range(MAX_L + 1):
        # each term to a share of the tolerance (of itself or of the sum so far): about reach + 1 terms count
        term, term_error, converged = _term(problem, l, omegas[summing], r0, series,
                                            tolerance / (4 + reach[summing]), total[summing], fixed,
                                            steps=steps)
        steps = max(32, converged // 2)
        total[summing] += term
        error[summing] += term_error
        small = term <= 0.01 * tolerance * total[summing]
        quiet[summing] = np.where(small & (l > reach[summing]), quiet[summing] + 1, 0)
        finished = quiet[summing] >= 3
        error[summing[finished]] += term[finished]   # the first neglected terms are smaller than the last kept
        summing = summing[~finished]
        if progress is not None:
            progress(l, 1.0 - len(summing) / n)
        if not len(summing):
            return total, error
    raise Unsupported(f"the l-sum did not converge by l = {MAX_L}")
