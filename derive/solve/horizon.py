"""Scattering off a black hole: transmission (greybody factors) and reflection (docs/conventions.md sections 4 and 6).

The solution that is purely ingoing at the horizon, u -> e^{-i omega r*} (unit amplitude), starts from the
derived Frobenius series u = x^s (1 + a_1 x + a_2 x^2), x = r - r_h, s = -i omega/(2 kappa), at a small x_0;
it is carried outward (propagation.py, complex state) to a far radius and split there into incoming and
outgoing waves with the local wave number k = sqrt(omega^2 - V) (a corrected Liouville-Green split, g = k'/2k):

    a_in = (u + i (u' + g u)/k)/2,   a_out = (u - i (u' + g u)/k)/2,   |A|^2 = |a|^2 k/omega   (unit flux),

so that u -> A_in e^{-i omega r*} + A_out e^{i omega r*}.  Then |T|^2 = 1/|A_in|^2 and |R|^2 = |A_out|^2/|A_in|^2;
|R|^2 + |T|^2 = 1 (flux conservation) is reported as a check, not imposed.  Errors: grid doubling, moving the
start point x_0 (series truncation) and the far radius (tail), and rounding.

Massive fields: far away V -> mu^2 - C/r (Coulomb-like).  Above the mass the far radius grows with 1/k so that
the split's error C/(k^4 r^3) is negligible (the geometric grid makes that cost logarithmic), and the far piece
is refined in proportion to the tail's strength; a frequency so close to the mass that the far radius would pass
10^14 length scales is refused (Coulomb wave functions would be needed there).  Below the mass nothing reaches
infinity (|T|^2 = 0, |R|^2 = 1 exactly) and the up modes are totally reflected (see _evanescent).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.solve.centre import (FAR, Unsupported, continuum_threshold, coulomb_far_radius, coulomb_strength,
                                 far_potential, outer_turning_point, rounding_floor, shortfall)
from derive.solve.cosmological import has_cosmological_horizon, horizon_solution, matching_radius
from derive.solve.cosmological import START as OUTER_START
from derive.solve.march import Piece, march
from derive.solve.propagation import outer_pieces

START = 1e-5          # x_0 / r_h
BASE_STEPS = 16       # steps of the coarsest grid's pieces; finer grids multiply every count (nested grids)
LARGEST = 1e14        # the farthest far radius, in length scales (beyond it: too close to the mass threshold)
TAILS = ("short-range", "centrifugal", "Coulomb-like", "massive, short-range", "Coulomb-like (massive)")


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
    if has_cosmological_horizon(problem):
        if last.outer_series is None:
            raise Unsupported("the cosmological horizon's series kernel is missing or did not verify")
        return
    if _ads(problem):
        return
    if last.upper is not None or last.tail not in TAILS:
        raise Unsupported(f"the outermost region must reach infinity, asymptotically flat (its tail here: "
                          f"{last.tail}); a reflecting (AdS-like) boundary is not handled yet")


def _ads(problem) -> bool:
    """A black hole in AdS: a reflecting conformal boundary at the outer end (the condition: [field] boundary)."""
    from derive.solve.bound import is_ads

    return is_ads(problem)


def tail(problem) -> tuple[float, float]:
    """(threshold, |C|): the continuum starts at omega = threshold = sqrt(V(infinity)), and far away
    V -> threshold^2 - C/r (C = 2 M mu^2 for a massive field outside mass M; about 0 when massless)."""
    return continuum_threshold(problem), abs(coulomb_strength(problem))


def threshold_rounding(problem, omegas) -> np.ndarray:
    """Relative error of the far wave number k^2 = omega^2 - V(far) from rounding V ~ threshold^2: it grows like
    threshold^2/k^2 as omega approaches the mass, and is added to every error estimate there."""
    threshold = continuum_threshold(problem)
    return 4 * np.finfo(float).eps * threshold ** 2 / np.maximum(np.abs(omegas ** 2 - threshold ** 2), 1e-300)


def far_radius(problem, l, omegas, probe=None) -> float:
    """Where the march stops and the solution is split into the asymptotic ones.

    Massless: 10^6 length scales, 10^3 wavelengths, and far enough that the centrifugal tail
    l(l+1)/(omega r)^2 is below 1e-12.  Above the mass the same with the wave number k = sqrt(omega^2 - mu^2),
    and far enough that the corrected Liouville-Green split (see _far_split) is exact to ~1e-13 on the
    Coulomb-like tail C/r: its amplitude error is of order V''/k^4 ~ C/(k^4 r^3).  Below the mass (every omega
    of the batch): 40 decay lengths beyond the outermost turning point (and the probe), where the decaying
    solution starts; any admixture of the growing one then dies as e^-80 on the way in."""
    if has_cosmological_horizon(problem):   # the matching radius, where the cosmological horizon's wave meets
        return matching_radius(problem, [] if probe is None else [probe])
    if _ads(problem):     # the boundary's series starts the march there
        from derive.solve.bound import boundary_radius

        return max(boundary_radius(problem, l, float(np.max(omegas))), 2 * (probe or 0.0))
    L = problem.length_scale
    threshold, C = tail(problem)
    omegas = np.asarray(omegas, dtype=float)
    if np.all(omegas < threshold):
        kappa = np.sqrt(threshold ** 2 - float(np.max(omegas)) ** 2)
        start = problem.regions[0].lower * (1 + 1e-9)
        turning = max(outer_turning_point(problem, l, float(np.max(omegas)), start), probe or 0.0)
        far = max(turning + 40.0 / kappa, 4 * problem.regions[0].lower)
    else:
        k = float(np.sqrt(np.min(omegas) ** 2 - threshold ** 2)) if threshold > 0 else float(np.min(omegas))
        far = max(FAR * L, 1e3 / k, 1e6 * np.sqrt(l * (l + 1) + 1.0) / k)
        if threshold > 0 or C > 1e-9 * L:
            far = max(far, coulomb_far_radius(problem, k))
    if threshold > 0 and not far <= LARGEST * L:
        raise Unsupported(f"omega = {float(np.min(np.abs(omegas))):.10g} is too close to the mass threshold "
                          f"{threshold:.10g} (the far radius would be {far:.3g}): Coulomb wave functions would be "
                          "needed there")
    return far


def _start_state(region, l, omegas, x0):
    coefficients = np.asarray(region.horizon_series(l, omegas), dtype=complex)   # (4, n)
    s, a0, a1, a2 = (np.broadcast_to(c, omegas.shape) for c in coefficients)
    r0 = region.lower + x0
    power = np.exp(s * np.log(x0))
    u = power * (a0 + a1 * x0 + a2 * x0 * x0)
    du_dr = power * (s / x0 * (a0 + a1 * x0 + a2 * x0 * x0) + a1 + 2 * a2 * x0)
    F = 1.0 / float(np.asarray(region.dtortoise_dr(np.array([r0])))[0])
    return np.stack([u, F * du_dr], axis=1)


@dataclass
class Layout:
    """What the grid depends on besides the resolution, fixed from the whole frequency set so that every
    refinement pass over a shrinking set of frequencies still refines the same grid: the largest series exponent
    |s|, the far radius, the far piece's steps per decade (see _far_density), and the end and base step count of the
    extension that checks the tail (four times the far radius; below the mass, 20 more decay lengths, with
    steps short enough that no step spans more than a few decay lengths)."""

    s_max: float
    far: float
    density: float
    farther: float
    farther_steps: int


def layout(problem, l, omegas, probe=None) -> Layout:
    omegas = np.asarray(omegas, dtype=float)
    s_max = float(np.max(np.abs(np.asarray(problem.regions[0].horizon_series(l, omegas), dtype=complex)[0])))
    far = far_radius(problem, l, omegas, probe)
    if has_cosmological_horizon(problem):
        return Layout(s_max, far, 0.0, far, 0)
    if _ads(problem):     # the tail check starts the normalisable solution four times farther out
        return Layout(s_max, far, 0.0, 4 * far, BASE_STEPS // 2)
    threshold = continuum_threshold(problem)
    if np.all(omegas < threshold):
        kappa_min = np.sqrt(threshold ** 2 - float(np.max(omegas)) ** 2)
        kappa_max = np.sqrt(threshold ** 2 - float(np.min(omegas)) ** 2)
        extra = 20.0 / kappa_min
        return Layout(s_max, far, 1.0, far + extra, max(BASE_STEPS // 2, int(np.ceil(kappa_max * extra / 2))))
    return Layout(s_max, far, _far_density(problem, omegas), 4 * far, BASE_STEPS // 2)


def _far_density(problem, omegas) -> float:
    """Steps per decade of the far piece, in units of a quarter of the base count, on a Coulomb-like tail; 0 means
    a quarter of the base count for the whole far piece (massless: the potential falls like r^-2 there).

    The quadratic fit of V on a geometric step of ratio q leaves spurious reflections of order
    (C/r)(q - 1)^3/k^2 on a tail C/r (largest at the start of the far piece, r ~ 10^3 length scales); a factor
    (1600 C/(r k^2))^(1/3), at least 1, per decade keeps the error falling cleanly with refinement (measured:
    fourfold for C/(r k^2) = 0.04, where one quarter per decade gave erratic changes of 1e-8)."""
    threshold, C = tail(problem)
    k2 = float(np.min(omegas)) ** 2 - threshold ** 2
    if threshold == 0.0 or k2 <= 0:
        return 0.0
    return max(1.0, (1600 * C / (1e3 * problem.length_scale * k2)) ** (1 / 3))


def _pieces(problem, l, omegas, steps, start, far_factor, fixed=None, modes=True):
    """The march from the horizon to the far radius (with far_factor > 1, on to the layout's farther radius):
    the pieces (derive.solve.march.Piece: near the horizon geometric in r - r_h), the
    start offset x0 and the far radius."""
    horizon = problem.regions[0].lower
    fixed = fixed if fixed is not None else layout(problem, l, omegas)
    s_max, far, density = fixed.s_max, fixed.far, fixed.density
    # the series' coefficients grow like |s|^k (s = -i omega/(2 kappa)): keep |s| x0/r_h small so that the
    # truncated terms stay below 1e-12; and use the exactly representable x0 = (r_h + x) - r_h, so that the
    # kernels (which compute r - r_h) and the series see the same point

    def offset(fraction):
        x = fraction * horizon / max(1.0, s_max)
        return (horizon + x) - horizon
    x0 = offset(START)
    pieces = []
    # the checks on series truncation (an earlier start) and on the tail (a farther end) add a piece at that
    # end and leave every other piece's grid as it was, so that the change they make measures only what they
    # claim to measure
    x_start = offset(start) if start < START else x0
    if x_start < x0:
        pieces.append(Piece(0, x_start, x0, max(2, int(round(steps * np.log(x0 / x_start) / 9.2))), "from horizon",
                            horizon))
    cosmological = has_cosmological_horizon(problem)
    for index, region in enumerate(problem.regions):
        lower = region.lower
        # a cosmological horizon's region is marched to the matching radius only (the far radius here)
        top = far if cosmological and index + 1 == len(problem.regions) else region.upper
        if index == 0:
            middle = min(2 * horizon, top) if top is not None else 2 * horizon
            # a fixed number of steps per e-fold of (r - r_h)
            efolds = np.log((middle - horizon) / x0)
            pieces.append(Piece(index, x0, middle - horizon, max(4, int(round(steps * efolds / 9.2))),
                                "from horizon", horizon))
            lower = middle
        if region.upper is None:
            for a, b, n, is_far in outer_pieces(lower, far, steps, problem.length_scale, decade=True):
                # the far piece: for the modes at a point (l-sums, Richardson-extrapolated) the base count (a
                # quarter of it made the transmission converge erratically, its error's coefficients oscillating
                # with omega h on the long steps: Richardson's agreement test then forced four to eight times the
                # steps elsewhere); for the transmission alone (compared between resolutions, not extrapolated) a
                # quarter, which is cheaper there; or a quarter per decade times the density on a Coulomb-like
                # tail (see _far_density)
                plain = 1.0 if modes else 0.25
                share = max(1.0, np.log10(b / a)) * density / 4 if density > 0 else plain
                pieces.append(Piece(index, a, b, max(4, int(round(steps * share))) if is_far else n, "geometric"))
            if far_factor > 1:
                pieces.append(Piece(index, far, fixed.farther, max(4, fixed.farther_steps * steps // BASE_STEPS),
                                    "geometric"))
        elif top > lower:
            pieces.append(Piece(index, lower, top, steps))
    return pieces, x_start, fixed.farther if far_factor > 1 else far


def _split(pieces, probes):
    """Cut the pieces holding the radii ``probes`` (increasing; steps shared in proportion to the grid
    parameter), so that the march passes through each exactly; returns the pieces and, per probe, the index of
    the first piece after it."""
    out, afters = list(pieces), []
    for probe in probes:      # a later (larger) probe is cut at or after every earlier one: their indices hold
        cut, after = [], None
        for piece in out:
            p = probe - piece.shift
            a, b = piece.a, piece.b
            if after is None and a < p <= b:
                fraction = np.log(p / a) / np.log(b / a) if piece.spacing != "uniform" else (p - a) / (b - a)
                first = max(2, int(round(piece.count * fraction)))
                cut.append(piece._replace(b=p, count=first))
                after = len(cut)
                if p < b:
                    cut.append(piece._replace(a=p, count=max(2, piece.count - first)))
            else:
                cut.append(piece)
        if after is None:
            raise Unsupported(f"the point r = {probe:g} is not outside the horizon")
        out = cut
        afters.append(after)
    return out, afters


@dataclass
class March:
    """One march from the horizon outward: |T|^2, |R|^2 and, at each probe radius r_k, the in and up modes
    u_in = T u_H and u_up = T u_inf (u_H -> e^{-i omega r*} at the horizon, unit amplitude; u_inf -> unit-flux
    outgoing wave e^{+i omega r*} far away) as logarithms of their moduli and their phases, shape (probes, n)
    (the phase of T is left out: it cancels in every product u(r_1) conj(u(r_2)))."""

    transmission: np.ndarray
    reflection: np.ndarray
    log_in: np.ndarray | None = None
    phase_in: np.ndarray | None = None
    log_up: np.ndarray | None = None
    phase_up: np.ndarray | None = None
    # below the mass, per probe r_k: A/u_dec(r_k), A from u_dec -> A e^{+i omega r*} + conj(A) e^{-i omega r*} at
    # the horizon; analytic in omega, independent of u_dec's normalisation (derive.solve.resonances)
    amplitude: np.ndarray | None = None



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
    pieces, x0, far = _pieces(problem, l, omegas, BASE_STEPS, start, far_factor, fixed, modes=probe is not None)
    probes = () if probe is None else tuple(np.atleast_1d(probe).astype(float))
    afters = []
    if probes:
        pieces, afters = _split(pieces, probes)
    state = _start_state(problem.regions[0], l, omegas, x0)
    n = len(omegas)
    # per probe, the state there and the propagator from the probe to the far radius (unit size with its log
    # scale and the interfaces' determinant), which carries the solution coming from infinity back to it
    marched = march(problem, l, omegas, pieces, state, marks=afters, outer=bool(probes), multiple=multiple)
    state, log_scale, total_det = marched.state, marched.log_scale, marched.det
    probe_u = [u[:, 0].copy() for u, _ in marched.marks]
    probe_log = [lg for _, lg in marched.marks]
    outer = [o for o, _, _ in marched.outer]
    outer_log = [lg for _, lg, _ in marched.outer]
    outer_det = [d for _, _, d in marched.outer]
    if has_cosmological_horizon(problem):
        # far_factor > 1 asks for the tail check: here the series at the cosmological horizon starts 4x closer
        u_c, du_c, c_scale = horizon_solution(problem, l, omegas, far, 16 * multiple,
                                              OUTER_START / 4 if far_factor > 1 else OUTER_START)
        return _cosmological_end(omegas, state, log_scale, u_c, du_c, c_scale, probe_u, probe_log, outer,
                                 outer_log, outer_det)
    if _ads(problem):
        # a reflecting boundary: nothing is transmitted, the only modes are up modes totally reflected, split
        # against the normalisable solution exactly as below the mass against the decaying one
        from derive.solve.bound import _outer_solution

        s0, s1 = _outer_solution(problem, l, omegas, far)
        return _evanescent(omegas, s0, s1, state, log_scale, total_det, probe_u, outer, outer_log, outer_det)
    below = omegas < continuum_threshold(problem)
    if np.any(below) and not np.all(below):
        raise ValueError("one march takes frequencies all above or all below the mass threshold")
    V, dV = far_potential(problem.regions[-1], l, far)
    if np.all(below):
        kappa = np.sqrt(V - omegas ** 2)
        s0, s1 = np.ones(n), -kappa - dV / (4 * kappa * kappa)
        return _evanescent(omegas, s0, s1, state, log_scale, total_det, probe_u, outer, outer_log, outer_det)
    k = np.sqrt(omegas ** 2 - V)
    # the corrected Liouville-Green split: with g = k'/(2k) = -V'/(4k^2) (' = d/dr*), the waves are
    # k^-1/2 e^{-+i int k} with u'/u = -+ i k - g, so u' + g u carries the split; its amplitude error is then of
    # order V''/k^4 rather than V'/k^3
    g = -dV / (4 * k * k)
    w = state[:, 1] + g * state[:, 0]
    a_in = (state[:, 0] + 1j * w / k) / 2
    a_out = (state[:, 0] - 1j * w / k) / 2
    scale = np.exp(2 * log_scale) * k / omegas
    A_in2, A_out2 = np.abs(a_in) ** 2 * scale, np.abs(a_out) ** 2 * scale
    result = March(1.0 / A_in2, A_out2 / A_in2)
    if probes:
        log_T = -(log_scale + 0.5 * np.log(np.abs(a_in) ** 2 * k / omegas))
        # u_inf(r0) = (P^-1 s)[0], s = sqrt(omega/k) (1, i k - g) the unit-flux outgoing wave at the far radius,
        # P = outer exp(outer_log): P^-1 = adj(outer) exp(-outer_log) / det(outer)
        s0, s1 = np.sqrt(omegas / k), np.sqrt(omegas / k) * (1j * k - g)
        u_inf = [o[:, 1, 1] * s0 - o[:, 0, 1] * s1 for o in outer]
        result.log_in = np.array([np.log(np.abs(u)) + lg + log_T for u, lg in zip(probe_u, probe_log)])
        result.phase_in = np.array([np.angle(u) for u in probe_u])
        result.log_up = np.array([np.log(np.abs(u)) + lg - np.log(np.abs(d)) + log_T
                                  for u, lg, d in zip(u_inf, outer_log, outer_det)])
        result.phase_up = np.array([np.angle(u / d) for u, d in zip(u_inf, outer_det)])
    return result


def _evanescent(omegas, s0, s1, state, log_scale, total_det, probe_u, outer, outer_log, outer_det) -> March:
    """Below the mass nothing reaches infinity: |T|^2 = 0, |R|^2 = 1, and the only modes are up modes, totally
    reflected.  With u_dec the solution decaying far away (started there as kappa^-1/2 e^{-int kappa}:
    u'/u = -kappa - kappa'/(2 kappa)) and u_H the ingoing solution from the horizon (unit amplitude), the
    Wronskian W[u_H, u_dec] = 2 i omega A at the horizon, where u_dec -> A e^{+i omega r*} + conj(A)
    e^{-i omega r*}; so u_up = u_dec / A.  W is evaluated at the far radius (where u_H is the growing solution
    and no digits cancel) and carried back by the interfaces' determinants; u_dec(r0) comes from the inverse of
    the propagator beyond r0, growing toward r0, as u_inf does above the mass.  (s0, s1) is u_dec's
    (u, du/dr*) at the far radius; at an AdS boundary the normalisable solution takes its place."""
    n = len(omegas)
    result = March(np.zeros(n), np.ones(n))
    if not probe_u:
        return result
    wronskian = state[:, 0] * s1 - state[:, 1] * s0
    log_A = np.log(np.abs(wronskian)) + log_scale - np.log(np.abs(total_det)) - np.log(2 * omegas)
    # u_up = u_dec / A: u_dec is real, so its phase is that of 1/A (W's phase, the interfaces' determinants are
    # real); the phase is common to every probe and cancels in u_up(r1) conj(u_up(r2)), only signs remain
    u_dec = [o[:, 1, 1] * s0 - o[:, 0, 1] * s1 for o in outer]
    # A = W/(2 i omega) over u_dec at each probe: the normalisation of u_dec far away (which varies like
    # e^{int kappa dr*}, steeply in omega) cancels
    result.amplitude = np.array([wronskian / (2j * omegas * total_det) * d / u * np.exp(log_scale - lg)
                                 for u, lg, d in zip(u_dec, outer_log, outer_det)])
    result.log_in = np.full((len(probe_u), n), -np.inf)
    result.phase_in = np.zeros((len(probe_u), n))
    result.log_up = np.array([np.log(np.abs(u)) + lg - np.log(np.abs(d)) - log_A
                              for u, lg, d in zip(u_dec, outer_log, outer_det)])
    result.phase_up = np.array([np.angle(u / d) for u, d in zip(u_dec, outer_det)])
    return result


def _cosmological_end(omegas, state, log_scale, u_c, du_c, c_scale, probe_u, probe_log, outer, outer_log,
                      outer_det) -> March:
    """The split at the matching radius in front of a cosmological horizon: with u_c -> e^{+i omega r*} the unit
    wave leaving through it (derive.solve.cosmological), u = a_in e^{-i omega r*} + a_out e^{+i omega r*} there,
    a_in = W[u, u_c]/(2 i omega) and a_out = -W[u, conj u_c]/(2 i omega) (W in r*; V = 0 at the horizon, so unit
    amplitude is unit flux).  The in modes come from the past cosmological horizon; the up modes' outgoing
    wave is u_c itself, carried back to each probe by the inverse propagator as u_inf is from far away."""
    a_in = (state[:, 0] * du_c - state[:, 1] * u_c) / (2j * omegas)
    a_out = -(state[:, 0] * np.conj(du_c) - state[:, 1] * np.conj(u_c)) / (2j * omegas)
    log_a_in = np.log(np.abs(a_in)) + log_scale + c_scale
    result = March(np.exp(-2 * log_a_in), np.abs(a_out) ** 2 / np.abs(a_in) ** 2)
    if probe_u:
        log_T = -log_a_in
        u_inf = [o[:, 1, 1] * u_c - o[:, 0, 1] * du_c for o in outer]
        result.log_in = np.array([np.log(np.abs(u)) + lg + log_T for u, lg in zip(probe_u, probe_log)])
        result.phase_in = np.array([np.angle(u) for u in probe_u])
        result.log_up = np.array([np.log(np.abs(u)) + lg + c_scale - np.log(np.abs(d)) + log_T
                                  for u, lg, d in zip(u_inf, outer_log, outer_det)])
        result.phase_up = np.array([np.angle(u / d) for u, d in zip(u_inf, outer_det)])
    return result


def transmission(problem, l: int, omegas, tolerance: float = 1e-10, steps: int = 64,
                 max_steps: int = 16384) -> Scattering:
    """|T|^2 and |R|^2 for the angular label l at every omega (> 0), with error estimates."""
    check_supported(problem)
    omegas = np.asarray(omegas, dtype=float)
    if omegas.ndim != 1 or np.any(~np.isfinite(omegas)) or np.any(omegas <= 0):
        raise ValueError("frequencies must be positive and finite")
    n = len(omegas)
    below = omegas < continuum_threshold(problem) if not _ads(problem) else np.ones(n, dtype=bool)
    if np.any(below) and _ads(problem):
        # a reflecting boundary: nothing is transmitted, |T|^2 = 0 and |R|^2 = 1 exactly
        return Scattering(omegas, l, np.zeros(n), np.ones(n), np.zeros(n), np.zeros(n), tolerance)
    if np.any(below):
        # below the mass nothing reaches infinity: |T|^2 = 0 and |R|^2 = 1 exactly
        T, R, error = np.zeros(n), np.ones(n), np.zeros(n)
        above = np.nonzero(~below)[0]
        if len(above):
            part = transmission(problem, l, omegas[above], tolerance, steps, max_steps)
            T[above], R[above], error[above] = part.transmission, part.reflection, part.error
        return Scattering(omegas, l, T, R, error, T + R - 1.0, tolerance)
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
                            + (rounding_floor(4 * count) + threshold_rounding(problem, w)) * best.transmission)
            if 2 * count < max_steps:   # not there yet with every source of error counted: refine further
                done[np.nonzero(done)[0][error[index] > tolerance * best.transmission]] = False
        active = active[~done]
        coarse = March(fine.transmission[~done], fine.reflection[~done])
        count *= 2
    return Scattering(omegas, l, T, R, error, T + R - 1.0, tolerance)
