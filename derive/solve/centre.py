"""Spectral density of the field at a regular centre (docs/conventions.md sections 4 and 7).

At r0 = 0 only l = 0 contributes.  The regular solution starts as u = 0, du/dr* = 1 at r = 0, is carried
outward through every region (propagation.py) and every interface (the transfer matrices), and is normalised
by its amplitude far away: u -> A sin(omega r* + delta), normalised u = u/(A sqrt(pi omega)) (half line,
delta-normalised).  Then, with U = du/dr at the centre,

    density(omega) = (1/(4 pi)) |U|^2 = (dr*/dr(0))^2 / (4 pi^2 omega A^2)      (flat space: omega/(4 pi^2)),

per unit omega of the spec's time coordinate.  The amplitude is read from the WKB invariant
A^2 = u^2 + u'^2/(omega^2 - V) at a far radius (10^6 length scales, or 10^3 wavelengths if that is farther)
and again at four times that radius; their difference is the tail error.  Each value carries an error estimate
(Richardson correction of the propagation plus the tail).

Supported: a regular centre at r = 0, asymptotically flat; massless or massive (the continuum above the mass:
k = sqrt(omega^2 - mu^2) replaces omega in the normalisation; below it the density of scattering states is zero).
Other cases raise ``Unsupported`` with a message.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.solve.propagation import first_spans, outer_pieces
from derive.solve.summation import rounding_floor, settled

DEFAULT_STEPS = 48
FAR = 1.0e6          # far radius in units of the problem's length scale


class Unsupported(Exception):
    """A problem the solver does not handle yet (the message says which part)."""


class Divergent(Unsupported):
    """A quantity that is infinite for this input (an infrared or ultraviolet divergence): refused, not 'yet'."""


@dataclass
class DensityResult:
    """Spectral density per unit omega of the spec's time at the centre, with its error estimate."""

    omega: np.ndarray
    density: np.ndarray
    error: np.ndarray
    amplitude: np.ndarray
    propagation_error: np.ndarray
    tail_error: np.ndarray
    tolerance: float

    @property
    def ok(self) -> bool:
        return bool(np.all(self.error <= self.tolerance * np.abs(self.density)))

    def message(self) -> str:
        return shortfall(self.omega, np.abs(self.density), self.error, self.tolerance)


def shortfall(omega, value, error, tolerance) -> str:
    """"ok", or how many frequencies miss the relative tolerance and the worst of them (a non-finite error
    counts as missing it)."""
    relative = error / np.maximum(value, 1e-300)
    bad = ~(relative <= tolerance)
    if not np.any(bad):
        return "ok"
    worst = int(np.argmax(np.where(np.isnan(relative), np.inf, relative)))
    return (f"{int(np.sum(bad))} of {len(omega)} frequencies miss the relative tolerance "
            f"{tolerance:.0e}; worst at omega = {omega[worst]:.6g} (relative error {relative[worst]:.2e})")


def tortoise_distance(problem, a: float, b: float, nodes: int = 60) -> float:
    """int_a^b dr*/dr dr across every region between a <= b (Gauss-Legendre on each region's part; dr*/dr is
    smooth inside a region): the tortoise (radial light-travel) distance."""
    x, w = np.polynomial.legendre.leggauss(nodes)
    total = 0.0
    for region in problem.regions:
        lo = max(a, region.lower)
        hi = min(b, region.upper) if region.upper is not None else b
        if hi > lo:
            half = (hi - lo) / 2
            total += float(np.sum(w * region.dtortoise_dr(lo + (x + 1) * half)) * half)
    return total


def region_at(problem, r: float):
    """The region that holds radius r (regions are ordered outward)."""
    return next(region for region in problem.regions if region.upper is None or r < region.upper)


def merge(omegas, tolerance, parts) -> DensityResult:
    """One result from (indices, DensityResult) parts over subsets of ``omegas``; the rest stays zero (no
    continuum there)."""
    merged = DensityResult(omegas, *(np.zeros(len(omegas)) for _ in range(5)), tolerance)
    for index, part in parts:
        for name in ("density", "error", "amplitude", "propagation_error", "tail_error"):
            getattr(merged, name)[index] = getattr(part, name)
    return merged


def check_supported(problem, any_dimension: bool = False) -> None:
    first, last = problem.regions[0], problem.regions[-1]
    if problem.dimension != 4 and not any_dimension:
        raise Unsupported(f"l-summed spectral densities are implemented in 3+1 dimensions (this spacetime has "
                          f"D = {problem.dimension}); the density at a centre and greybody factors work in any D")
    if first.lower_kind != "regular centre" or first.lower != 0.0:
        raise Unsupported("the spectral density needs a regular centre at r = 0 or a horizon at the inner end")
    from derive.solve.cosmological import has_cosmological_horizon

    if has_cosmological_horizon(problem):
        return
    if last.upper is not None or last.tail not in TAILS:
        raise Unsupported("the outermost region must reach infinity (asymptotically flat) or end at a "
                          "cosmological horizon, so far")


TAILS = ("short-range", "centrifugal", "massive, short-range", "Coulomb-like (massive)")


def bound_states_possible(problem) -> bool:
    """Whether a massive field may have bound states (omega below the mass): V(r, l = 0) dips below its value
    at infinity somewhere (sampled on every region; a Coulomb-like attractive tail always does)."""
    threshold2 = continuum_threshold(problem) ** 2
    if threshold2 == 0.0:
        return False
    for region in problem.regions:
        upper = region.upper if region.upper is not None else 1e6 * problem.length_scale
        lower = region.lower if region.lower > 0 else 1e-6 * problem.length_scale
        r = np.geomspace(lower, upper, 2001)[1:-1]
        V = np.asarray(region.potential(r, 0, 0.0), dtype=float) * np.ones_like(r)
        if np.any(V < threshold2 * (1 - 1e-12)):
            return True
    return False


def continuum_threshold(problem) -> float:
    """The lowest frequency of the continuum: sqrt(V(infinity)), the field's mass times the lapse there."""
    from derive.solve.cosmological import has_cosmological_horizon

    if problem.mass == 0.0 or has_cosmological_horizon(problem):   # V -> 0 at a horizon, massive or not
        return 0.0
    last = problem.regions[-1]
    far = FAR * problem.length_scale
    V = np.asarray(last.potential(np.array([far, 2 * far, 4 * far]), 0, 0.0), dtype=float) * np.ones(3)
    # V = V_inf - C/r + c/r^2 + O(r^-3): the value at infinity extrapolated from three radii, both the C/r and the
    # c/r^2 terms eliminated (with C/r alone eliminated, c/(2 far^2) ~ 1e-12 was left in 4+1, where c/r^2 is the
    # leading term: enough, times the radius, to read as a Coulomb-like tail that is not there)
    return float(np.sqrt(max(0.0, (8 * V[2] - 6 * V[1] + V[0]) / 3)))


def centre_density(problem, omegas, tolerance: float = 1e-10, steps: int = DEFAULT_STEPS,
                   max_steps: int | None = None) -> DensityResult:
    """The l = 0 spectral density at r = 0 for every omega (> 0), each with an error estimate.

    The density is computed on grids of N and 2N steps per region; the error estimate is their difference or
    the difference before it (N/2 and N) over FALL = 16, whichever is larger, plus the tail error, and N is
    doubled until it meets ``tolerance`` or ``max_steps`` is reached.  (The last difference alone can fall
    below the true error by accident where the error stalls for one doubling: measured over 200 frequencies of
    the static and the charged shell at 1e-8, 15 understated up to 580-fold and three beyond the tolerance; see
    derive.solve.summation.)  The result says whether the tolerance was met (``ok``) and, if not, where it fell
    short (``message``)."""
    check_supported(problem, any_dimension=True)
    if problem.dimension != 4 and problem.regions[0].centre_series is None:
        raise Unsupported("the centre's series kernel is needed to start the solution in D != 4")
    omegas = np.asarray(omegas, dtype=float)
    if omegas.ndim != 1 or np.any(~np.isfinite(omegas)) or np.any(omegas <= 0):
        raise ValueError("frequencies must be positive and finite")
    threshold = continuum_threshold(problem)
    if max_steps is None:
        # a massive field's frequencies near the mass need the far radius of a Coulomb-like tail (C/(k^4 r^3)),
        # geometric out to 10^6-10^7 length scales: up to 32768 steps (only those frequencies go that far)
        # (and a start on the series at 1e-4 length scales in D != 4, geometric over seven decades out to 10^3
        # length scales when the first region is unbounded, as in flat space: 1e-10 at omega = 0.01 in 2+1
        # takes 24576 steps)
        max_steps = 32768 if threshold > 0 or problem.dimension != 4 else 8192
    if threshold > 0 and np.any(omegas <= threshold):
        # below the mass there is no continuum: the density of scattering states is zero there (bound states,
        # where the spacetime has them, are discrete and not part of this density)
        above = np.nonzero(omegas > threshold)[0]
        parts = [(above, centre_density(problem, omegas[above], tolerance, steps, max_steps))] if len(above) else []
        return merge(omegas, tolerance, parts)
    # frequencies so low (or, above a mass, so near it) that the far radius must grow are solved in their own
    # decades of the wave number k far away (the far radius of a batch is set by its lowest k, and a batch that
    # reaches 10^6 length scales for k ~ 1e-2 left 7e-10 in the density at k ~ 2, unseen by the refinement, where
    # its own far radius of 10^4 gave 2e-11)
    wave = np.sqrt(omegas ** 2 - threshold ** 2)
    low_k = 1e3 / (FAR * problem.length_scale) if threshold == 0 else 1.0 / problem.length_scale
    low = wave < low_k
    if np.any(low) and not np.all(low):
        decade = np.where(low, np.floor(np.log10(wave / low_k)), 1.0)
        parts = []
        for value in np.unique(decade):
            index = np.nonzero(decade == value)[0]
            parts.append((index, centre_density(problem, omegas[index], tolerance, steps, max_steps)))
        return merge(omegas, tolerance, parts)
    n = len(omegas)
    density, error = np.zeros(n), np.full(n, np.inf)
    amplitude, propagation, tail = np.zeros(n), np.zeros(n), np.zeros(n)
    active = np.arange(n)
    count = steps
    coarse = _run(problem, omegas, count)
    half = _run(problem, omegas, count // 2)[0]
    # above a mass with a Coulomb-like tail the far piece converges erratically (the geometric steps there
    # carry an error of every step's size, not fourth order: changes of 2e-8, 1e-8, 3e-9 on successive
    # doublings, and a difference of two grids could fall below the tolerance by accident, measured 2.6e-7 off
    # where it claimed 9e-9); there a value is taken only when two successive changes are within the tolerance,
    # elsewhere when the last change is and the one before within FALL times it (see the docstring)
    two_changes = threshold > 0
    earlier = np.abs(coarse[0] - half)
    while len(active):
        fine = _run(problem, omegas[active], 2 * count)
        change = np.abs(fine[0] - coarse[0])
        error_of_grids = settled(change, earlier, 1.0) if two_changes else settled(change, earlier)
        earlier = change
        estimate = error_of_grids + (fine[2] + rounding_floor(2 * count)) * np.abs(fine[0])
        density[active], error[active] = fine[0], estimate
        amplitude[active], propagation[active], tail[active] = np.sqrt(fine[1]), change / np.abs(fine[0]), fine[2]
        done = estimate <= tolerance * np.abs(fine[0])
        if 2 * count >= max_steps:
            break
        # frequencies that met the tolerance keep their values; the rest go to the next grid
        keep = ~done
        active = active[keep]
        earlier = earlier[keep]
        coarse = tuple(part[keep] for part in fine)
        count *= 2
    return DensityResult(omegas, density, error, amplitude, propagation, tail, tolerance)


def _run(problem, omegas, steps):
    """(density, amplitude^2, relative tail error) on a grid of ``steps`` steps per region."""
    from derive.solve.march import Piece, centre_start, march, propagator

    start = 0.0
    if problem.dimension != 4:
        # u = r^s (1 + a_1 r + a_2 r^2), s = (D-2)/2: psi = r^-s u -> 1 at the centre; start on the series
        start = min(1e-4 * problem.length_scale, 1e-4 / float(np.max(omegas)))
    from derive.solve.flat import closed_form_interior, start_outside

    # a flat first region is crossed in closed form (derive.solve.flat): the march starts beyond its interface
    closed = start_outside(problem, 0, omegas) if closed_form_interior(problem) else None
    state, log_scale = closed if closed is not None else centre_start(problem, 0, omegas, start)
    if start > 0:
        a0 = np.broadcast_to(np.asarray(problem.regions[0].centre_series(0, omegas), dtype=float)[1], omegas.shape)
        state = state / a0[:, None]
    # the far radius must lie many wavelengths out for the amplitude invariant; the geometric grid makes
    # its cost logarithmic in the radius
    threshold = continuum_threshold(problem)
    k = float(np.min(np.sqrt(omegas ** 2 - threshold ** 2)))
    far = max(FAR * problem.length_scale, 1e3 / k)
    if threshold > 0:    # a Coulomb-like tail C/r: the split's error C/(k^4 r^3) below ~1e-13 (as horizon.py)
        far = max(far, coulomb_far_radius(problem, k))
    from derive.solve.cosmological import flux_at_horizon, has_cosmological_horizon, matching_radius

    cosmological = has_cosmological_horizon(problem)
    r_m = matching_radius(problem) if cosmological else None
    pieces = []
    for index, region in enumerate(problem.regions):
        lower = max(region.lower, start)
        if index == 0 and closed is not None:
            continue
        if cosmological and region is problem.regions[-1]:
            pieces.append(Piece(index, lower, r_m, steps))
        elif region.upper is None:
            pieces += [Piece(index, a, b, count, "geometric") for a, b, count, _ in
                       outer_pieces(max(lower, 1e-12), far, steps, problem.length_scale)]
        elif index == 0 and start > 0:
            # started on the series off the centre (D != 4): the potential's (D-2)(D-4)/(4 r^2) needs steps
            # geometric in r there (uniform steps from r = 1e-4 to a shell at r = 1 were 10^7 times off in 4+1)
            pieces += [Piece(index, a, b, count, "geometric" if geometric else "uniform") for a, b, geometric, count
                       in first_spans(region, 0, start, region.upper, steps, float(np.max(omegas)))]
        else:
            pieces.append(Piece(index, lower, region.upper, steps))
    marched = march(problem, 0, omegas, pieces, state, log_scale)
    state, log_scale = marched.state, marched.log_scale
    last = problem.regions[-1]
    if cosmological:
        log_flux, tail_error = flux_at_horizon(problem, 0, omegas, state, r_m, steps)
        amplitude2 = np.exp(log_flux + 2 * log_scale)
    else:
        near = far_amplitude2(last, state, omegas, far)
        tail = Piece(len(problem.regions) - 1, far, 4 * far, max(steps // 8, 8), "geometric")
        matrix, scale = propagator(problem, 0, omegas, tail)
        farther = far_amplitude2(last, np.einsum("nij,nj->ni", matrix, state), omegas, 4 * far) * np.exp(2 * scale)
        tail_error = np.abs(farther - near) / farther
        amplitude2 = farther * np.exp(2 * log_scale)
    if problem.dimension == 4:   # u = 0, du/dr* = 1 at the centre: psi(0) = du/dr = dr*/dr
        centre_value = problem.regions[0].dtortoise_dr(np.array([0.0]))[0]
    else:                        # psi(0) = 1 (the series' normalisation)
        centre_value = 1.0
    # |psi(0)|^2 |Y_0|^2 / (pi a^2 k), |Y_0|^2 = 1/(area of the unit (D-2)-sphere)
    density = centre_value ** 2 / (sphere_area(problem.dimension - 2) * np.pi * amplitude2)
    return density, amplitude2, tail_error


def harmonic_weight(l: int, n: int) -> float:
    """sum_m |Y_lm|^2 on the unit n-sphere (addition theorem): the number of harmonics of degree l,
    (2l + n - 1)(l + n - 2)!/(l! (n - 1)!), over the sphere's area; (2l + 1)/(4 pi) for n = 2."""
    from math import factorial

    count = 1 if l == 0 else (2 * l + n - 1) * factorial(l + n - 2) // (factorial(l) * factorial(n - 1))
    return count / sphere_area(n)


def sphere_area(n: int) -> float:
    """Area of the unit n-sphere, 2 pi^((n+1)/2)/Gamma((n+1)/2): 2 pi (n = 1), 4 pi (n = 2)."""
    from math import gamma

    return 2 * np.pi ** ((n + 1) / 2) / gamma((n + 1) / 2)


def far_amplitude2(region, state, omegas, radius, l: int = 0):
    """a^2 k with a^2 = u^2 + w^2/k^2 the amplitude invariant and k^2 = omega^2 - V the local wave number:
    the flux, which far away is k_inf A^2 for u -> A sin(k_inf r* + delta).  The half-line normalisation is then
    1/sqrt(pi k_inf) (delta(omega - omega') in the Klein-Gordon product, dk/domega = omega/k), so the density is
    (dr*/dr at 0)^2/(4 pi^2 a^2 k); massless, k_inf = omega.  w = u' + g u with g = -V'/(4 k^2) (' = d/dr*): the
    corrected Liouville-Green split of the horizon's far end (horizon.py), whose amplitude error is of order
    V''/k^4 rather than V'/k^3 (it matters on a Coulomb-like tail near the mass, where k is small)."""
    G = far_form_matrix(region, omegas, radius, l)
    return np.einsum("ni,nij,nj->n", state, G, state)


def far_form_matrix(region, omegas, radius, l: int = 0) -> np.ndarray:
    """The matrix G (n, 2, 2) of :func:`far_amplitude2` as a quadratic form of the state (u, du/dr*):
    a^2 k = s^T G s, G = sqrt(q) [[1 + g^2/q, -g/q], [-g/q, 1/q]] with g = dV/(4 q)."""
    omegas = np.asarray(omegas, dtype=float)
    V, dV = far_potential(region, l, radius)
    q = omegas ** 2 - V
    g = dV / (4 * q)
    root = np.sqrt(q)
    G = np.empty((len(omegas), 2, 2))
    G[:, 0, 0] = root * (1 + g * g / q)
    G[:, 0, 1] = G[:, 1, 0] = -root * g / q
    G[:, 1, 1] = root / q
    return G


def minkowski_density(omegas) -> np.ndarray:
    """Flat 3+1, massless: omega/(4 pi^2) (docs/conventions.md section 7; Birrell & Davies 1982, ch. 3)."""
    return np.asarray(omegas, dtype=float) / (4 * np.pi ** 2)


def coulomb_strength(problem) -> float:
    """C in V -> threshold^2 - C/r far away (l = 0; 2 M mu^2 outside a mass M, about 0 when massless), from
    R (threshold^2 - V(R)) at R and 2R (1e5 length scales) with the next order, D/R, eliminated (Richardson): the
    bound levels' spacing in x = 1/sqrt(mu^2 - omega^2) is 2/C, and an error in C would grow linearly along
    their series (derive.solve.levels)."""
    threshold2 = continuum_threshold(problem) ** 2
    radii = 1e5 * problem.length_scale * np.array([1.0, 2.0])
    V = np.asarray(problem.regions[-1].potential(radii, 0, 0.0), dtype=float) * np.ones(2)
    first, second = radii * (threshold2 - V)
    return float(2 * second - first)


def coulomb_far_radius(problem, k: float) -> float:
    """Far enough out that the corrected Liouville-Green split's amplitude error on a Coulomb-like tail,
    C/(k^4 r^3), is below ~1e-13 (k the wave number far away); shared by every far end above a mass."""
    return (abs(coulomb_strength(problem)) * 1e13 / k ** 4) ** (1 / 3)


def has_coulomb_tail(problem) -> bool:
    """Whether V -> mu^2 - C/r with an attractive C of any size (infinitely many levels below the mass)."""
    threshold = continuum_threshold(problem)
    # the estimate's rounding is ~1e5 eps threshold^2 (R times V's rounding at R = 1e5 length scales): a strength
    # below 1e-8 of threshold^2 L is no tail (such a well's levels would lie beyond 1e8 length scales anyway)
    return threshold > 0 and coulomb_strength(problem) > 1e-8 * problem.length_scale * threshold ** 2


def inverse_square_strength(problem, l: int) -> float:
    """c in V -> threshold^2 + c/r^2 far away, for the angular label l (where no Coulomb-like tail C/r leads):
    r^2 (V - threshold^2) at R, 2R and 4R (1e3 length scales) with the next two orders, d/R and e/R^2, eliminated
    (error ~1e-9).  In D dimensions c = (l + (D-3)/2)^2 - 1/4 plus the mass's share (-m mu^2 where
    g_tt = -(1 - m/r^2) in 4+1)."""
    threshold2 = continuum_threshold(problem) ** 2
    radii = 1e3 * problem.length_scale * np.array([1.0, 2.0, 4.0])
    V = np.asarray(problem.regions[-1].potential(radii, l, 0.0), dtype=float) * np.ones(3)
    first, second, third = radii ** 2 * (V - threshold2)
    return float((8 * third - 6 * second + first) / 3)


def traps_below_threshold(problem, l_max: int = 4) -> bool:
    """Whether waves below the continuum's threshold can be trapped outside a horizon (quasi-bound resonances):
    a Coulomb-like tail (a well out to infinity), or, for some l <= l_max (the centrifugal term only lifts
    higher l), an inverse-square tail approaching the threshold from below, or a dip below the threshold beyond
    the potential's outermost maximum (a well outside a barrier).  Sampled from 1e-6 to 1e6 length scales beyond
    the first region's lower end."""
    if continuum_threshold(problem) == 0.0:
        return False
    if has_coulomb_tail(problem):
        return True
    threshold2 = continuum_threshold(problem) ** 2
    L = problem.length_scale
    for l in range(l_max + 1):
        if inverse_square_strength(problem, l) < 0:
            return True
        values = []
        for region in problem.regions:
            lower = region.lower + 1e-6 * L
            upper = region.upper if region.upper is not None else 1e6 * L
            if upper <= lower:
                continue
            r = region.lower + np.geomspace(1e-6 * L, upper - region.lower, 2001)
            values.append(np.asarray(region.potential(r, l, 0.0), dtype=float) * np.ones_like(r))
        V = np.concatenate(values)
        peaks = np.nonzero((V[1:-1] > V[:-2]) & (V[1:-1] >= V[2:]))[0]
        if len(peaks) and np.min(V[peaks[-1] + 1:]) < threshold2 * (1 - 1e-12):
            return True
    return False


def finite_at_threshold(problem) -> bool:
    """Whether a massive field's continuum density stays finite down to the threshold wherever the modes reach:
    a Coulomb-like tail (the Sommerfeld factor) or a supercritical inverse-square tail (l = 0 is the most
    attractive; the density oscillates in log k there, k the wave number far away, without falling off).  The
    response's frequency panels then stop their grading short of the threshold, where neither can be solved to
    the tolerance (derive.detector.response)."""
    return has_coulomb_tail(problem) or efimov_exponent(problem, 0) is not None


def threshold_log_period(problem) -> float | None:
    """The period in log k (k the wave number far away) of the continuum density's oscillation at the threshold
    of a supercritical inverse-square tail, pi/s with l = 0's s (the shortest: l = 0 is the most attractive), or
    None where there is no such tail."""
    s = efimov_exponent(problem, 0)
    return None if s is None else float(np.pi / s)


def efimov_exponent(problem, l: int) -> float | None:
    """s where V -> threshold^2 + c/r^2 with c < -1/4 (a supercritical inverse-square tail, no Coulomb-like tail
    before it): s = sqrt(-c - 1/4).  Such an l holds infinitely many levels below the threshold, in a geometric
    series, kappa_{n+1}/kappa_n -> exp(-pi/s) with kappa = sqrt(threshold^2 - omega^2) (the spectrum of the
    attractive inverse-square potential; K. M. Case, Phys. Rev. 80, 797 (1950), from memory).  None otherwise."""
    if continuum_threshold(problem) == 0.0 or has_coulomb_tail(problem):
        return None
    c = inverse_square_strength(problem, l)
    # c within 1e-6 of -1/4 is taken as critical (no levels accumulate; the spacing exp(pi/s) would be astronomic)
    return float(np.sqrt(-c - 0.25)) if c < -0.25 - 1e-6 else None


def outer_turning_point(problem, l, omega, start) -> float:
    """The largest radius (from ``start`` outward) where omega^2 >= V, sampled finely and rounded up to the next
    sample."""
    turning = start
    for region in problem.regions:
        lower = max(region.lower, start)
        upper = region.upper if region.upper is not None else 1e12 * problem.length_scale
        if upper <= lower:
            continue
        r = np.geomspace(lower, upper, 8001)
        V = np.asarray(region.potential(r, l, 0.0), dtype=float) * np.ones_like(r)
        allowed = np.nonzero(V <= omega ** 2)[0]
        if len(allowed):
            turning = float(r[min(allowed[-1] + 1, len(r) - 1)])
    return turning


def far_potential(region, l, far):
    """V and dV/dr* at the far radius (dV/dr by a central difference: it only enters a correction)."""
    r = far * np.array([1.0, 1.0 - 1e-3, 1.0 + 1e-3])
    V = np.asarray(region.potential(r, l, 0.0), dtype=float) * np.ones(3)
    F = 1.0 / float(np.asarray(region.dtortoise_dr(np.array([far]))).reshape(-1)[0])
    return float(V[0]), F * float(V[2] - V[1]) / (2e-3 * far)
