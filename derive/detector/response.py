"""Response of a static Unruh-DeWitt detector (docs/conventions.md sections 7-9).  Numeric only: no sympy here.

F(Omega) = int_0^inf dnu S(nu) |chi_hat(Omega + nu)|^2 in the vacuum (positive frequencies only), where
S(nu) = sqrt(f(r0)) * density(omega = sqrt(f(r0)) nu) is the spectral density per unit proper frequency and
chi_hat(k) = int chi(tau) e^{-i k tau} dtau.  The transition probability at leading order is lambda^2 F.

Quadrature: Gauss-Legendre panels of width 1/(4 sigma) over [0, K], the first graded toward nu = 0; the
polynomial through the nodes of each pair of neighbouring panels gives a coarser rule on the same nodes, whose
difference is the quadrature error (see :func:`_panels`), and the density's own error is carried through the
same weights.  K follows the tolerance for the Gaussian (see :func:`cutoff`; at most max(0, -Omega) + 10/sigma,
where the weight is below e^-100) and is the switching's reach for the other shapes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.detector.switching import Switching

PANEL_NODES = 12
NODES, WEIGHTS = np.polynomial.legendre.leggauss(PANEL_NODES)


@dataclass
class Response:
    """F(Omega) for each gap, with error estimates."""

    gaps: np.ndarray
    response: np.ndarray
    error: np.ndarray
    quadrature_error: np.ndarray
    density_error: np.ndarray
    levels: dict | None = None     # the bound levels' share, where they are summed (derive.solve.levels)


def _panels(upper: float, width: float, start: float = 0.0, graded: bool = True, log_period: float | None = None):
    """The quadrature of the frequency integral on [start, upper]: panels of half the given width from ``start``
    (0, or the continuum threshold of a massive field), the first one graded geometrically toward it (the density
    can be non-analytic there: nu^3 log nu from a long-range exterior, sqrt(nu - mu) at a threshold, which would
    slow Gauss-Legendre down), an even number of them, with 12 Gauss-Legendre nodes each.  Graded less deeply
    (six halvings, not twelve) where not ``graded``: at the threshold of an attractive Coulomb-like tail the
    Sommerfeld factor makes the density finite, smooth but for terms like e^(-pi C/k) (k the wave number far
    away), which fall below 1e-7 within the sixth halving, while the nodes of a deeper grading, within 1e-6 of
    the mass, need far radii beyond the solver's reach (measured: no grading left 6e-7 of F at a gap of 10,
    beside an estimate of 1e-7).

    With ``log_period`` (a supercritical inverse-square tail: the density oscillates with that period in log k
    without falling off, k = sqrt(nu^2 - start^2)) the first panel is instead integrated in t = log k, where the
    integrand S k^2/nu is smooth and falls like e^(2t): panels of half a period (at most one e-fold) down to
    k = 1e-5 start (:func:`_log_panels`).

    Returns (nodes, weights, coarse weights): the coarse rule integrates each pair of neighbouring panels with
    the polynomial through all 24 of their nodes (exact to degree 23 on the pair, as the Gauss rule is on each
    half), so that the two rules share every node and their difference estimates the error of the coarse one
    (a conservative bound for the fine one) at no extra density evaluation."""
    half = width / 2
    upper = max(upper, start + width)
    count = max(int(np.ceil((upper - start) / half)), 2)
    count += count % 2                       # with the 12 (or 6) graded panels: an even number in all
    edges = start + half * np.arange(count + 1)
    if log_period is not None and start > 0:
        return _log_panels(start, np.concatenate([edges[1:], [edges[-1] + half]]), log_period)
    inner = start + (edges[1] - start) * 2.0 ** -np.arange(12 if graded else 4, 0, -1)
    edges = np.concatenate([[start], inner, edges[1:]])
    a, b = edges[:-1], edges[1:]
    nodes, weights, coarse = _pair_rules(a, b)
    # at the start the integrand may be non-analytic (sqrt(nu - mu) at a threshold): there a rule through the
    # same nodes would share the fine rule's error, so the first pair's coarse rule is Gauss-Legendre on the
    # pair itself (12 more nodes, weight 0 in the fine rule), whose error there is 2^(3/2) times the fine one's
    lo, hi = a[0], b[1]
    extra = ((lo + hi) + (hi - lo) * NODES) / 2
    coarse[:2] = 0.0
    return (np.concatenate([nodes.ravel(), extra]), np.concatenate([weights.ravel(), np.zeros(PANEL_NODES)]),
            np.concatenate([coarse.ravel(), (hi - lo) / 2 * WEIGHTS]))


def _pair_rules(a, b):
    """Gauss-Legendre nodes and weights on the panels [a_i, b_i] (an even number of them, shape (panels, 12)),
    and the coarse rule of each pair of neighbours: the polynomial through all 24 of the pair's nodes."""
    nodes = ((a + b)[:, None] + (b - a)[:, None] * NODES[None, :]) / 2
    weights = ((b - a)[:, None] / 2) * WEIGHTS[None, :]
    coarse = np.empty_like(weights)
    solved: dict = {}      # the pair's rule on [-1, 1] depends only on how the pair is split (equal halves mostly)
    for i in range(0, len(a), 2):
        lo, hi = a[i], b[i + 1]
        split = round(float((b[i] - a[i]) / (hi - lo)), 12)
        if split not in solved:
            t = (2 * nodes[i:i + 2].ravel() - (lo + hi)) / (hi - lo)
            vander = np.polynomial.legendre.legvander(t, 2 * PANEL_NODES - 1).T
            moments = np.zeros(2 * PANEL_NODES)
            moments[0] = 2.0
            solved[split] = np.linalg.solve(vander, moments)
        coarse[i:i + 2] = (solved[split] * (hi - lo) / 2).reshape(2, PANEL_NODES)
    return nodes, weights, coarse


K_MIN = 1e-5       # the log-k rules stop at k = K_MIN start (nu then still holds k^2 to ~1e-6)


def log_k_edges(start: float, top: float, log_period: float, multiple: int = 1):
    """Panel edges in t = log k, k = sqrt(nu^2 - start^2), over [start, top] for a density that oscillates in
    log k with period ``log_period`` at the threshold ``start`` without falling off: an even number of panels of
    width at most min(log_period/2, 1) (``multiple`` times as many, for a doubled rule) from k_min = K_MIN start
    to k(top), where the integrand S k^2/nu is smooth and falls like e^(2t).  Returns (edges, the remainder
    weight k_min^2/start: about twice what lies below k_min, S k_min^2/(2 nu) for an S that oscillates about its
    mean)."""
    k_top, k_min = np.sqrt(top ** 2 - start ** 2), K_MIN * start
    count = max(int(np.ceil(np.log(k_top / k_min) / min(log_period / 2, 1.0))), 2) * multiple
    count += count % 2
    return np.linspace(np.log(k_min), np.log(k_top), count + 1), k_min ** 2 / start


def from_log_k(start: float, t):
    """(nu, dnu/dt) at t = log sqrt(nu^2 - start^2)."""
    k2 = np.exp(2 * t)
    nu = np.sqrt(start ** 2 + k2)
    return nu, k2 / nu


def _log_panels(start: float, edges, log_period: float):
    """The rule of :func:`_panels` with its first panel, [start, edges[0]], in t = log k (:func:`log_k_edges`),
    then ``edges`` (an even number of panels) in nu.  The part below k_min is left out of the fine rule and put
    into the coarse one at the lowest node's S: their difference, the error estimate, carries it."""
    t_edges, remainder = log_k_edges(start, edges[0], log_period)
    t, w_t, c_t = _pair_rules(t_edges[:-1], t_edges[1:])
    nu_t, jacobian = from_log_k(start, t)
    c_t = c_t * jacobian
    c_t[0, 0] += remainder
    nodes, weights, coarse = _pair_rules(edges[:-1], edges[1:])
    return (np.concatenate([nu_t.ravel(), nodes.ravel()]), np.concatenate([(w_t * jacobian).ravel(), weights.ravel()]),
            np.concatenate([c_t.ravel(), coarse.ravel()]))


MARGIN = 4.0        # the density bound used for the part beyond the cut-off: MARGIN times the local flat density
SHARE = 1e-3        # the share of the tolerance (relative to the flat response) that the cut-off may take


def cutoff(gaps, switching: Switching, thermal: bool = False, threshold: float = 0.0,
           tolerance: float | None = None, dimension: int = 4, temperature: float | None = None,
           vacuum_part_only: bool = False):
    """(upper, tail): where the frequency integral may stop, and a bound on what is left out, per gap.

    Without a tolerance, or for a switching whose |chi_hat|^2 is not in closed form, the switching's own reach
    (its weight below e^-100 of the peak, or its tail bound) is used.  For the Gaussian the cut-off follows the
    tolerance: the smallest K with int_K^inf MARGIN c_D nu^(D-3) w(Omega, nu) dnu at most SHARE x tolerance x
    int_0^inf c_D nu^(D-3) w(Omega, nu) dnu (the flat response) for every gap, with c_D nu^(D-3) the flat density
    (a factor MARGIN of margin: at high frequency every static density tends to the local flat one) and
    w = |chi_hat(Omega + nu)|^2 in a vacuum; in a thermal state at the local ``temperature`` (n = 1/(e^{nu/T} - 1))
    w = (1 + n)|chi_hat(Omega + nu)|^2 + n |chi_hat(Omega - nu)|^2, and K is the larger of the two forms so that
    every state outside a horizon shares the same frequencies (and one solve); without a temperature n <= 1.
    The tail of the state's own form (``vacuum_part_only``: the Boulware state, no negative part) at K is
    returned and counted in the response's error; the response fails its tolerance honestly if F turns out far
    below the flat response."""
    gaps = np.asarray(gaps, dtype=float)
    upper = max(0.0, -float(np.min(gaps))) + switching.reach
    if thermal:
        upper = max(upper, float(np.max(gaps)) + switching.reach)
    if tolerance is None or type(switching) is not Switching:
        return upper, np.zeros(len(gaps))
    from derive.solve.centre import sphere_area

    c = sphere_area(dimension - 2) / (2 * (2 * np.pi) ** (dimension - 1))
    nu = np.linspace(threshold, upper, 8001)
    flat = c * np.maximum(nu, 0.0) ** (dimension - 3)
    plus = switching.power(gaps[:, None] + nu[None, :])
    forms = [plus]
    if thermal:
        minus = switching.power(gaps[:, None] - nu[None, :])
        with np.errstate(over="ignore", divide="ignore"):
            n = np.ones_like(nu) if temperature is None else 1.0 / np.expm1(np.maximum(nu, 1e-300) / temperature)
        forms.append(plus * (1 + n)[None, :] + minus * n[None, :])
    index, tails = 0, []
    for weights in forms:
        integrand = flat[None, :] * weights
        pieces = (integrand[:, 1:] + integrand[:, :-1]) / 2 * np.diff(nu)[None, :]
        beyond = np.concatenate([np.cumsum(pieces[:, ::-1], axis=1)[:, ::-1], np.zeros((len(gaps), 1))], axis=1)
        fits = np.all(MARGIN * beyond <= SHARE * tolerance * beyond[:, :1], axis=0)
        # the trapezoid overestimates the convex tails of a Gaussian window; one grid step of margin is added
        index = max(index, min(int(np.argmax(fits)) + 1 if np.any(fits) else len(nu) - 1, len(nu) - 1))
        tails.append(beyond)
    own = tails[0] if (vacuum_part_only or not thermal) else tails[-1]
    return float(nu[index]), MARGIN * own[:, max(index - 1, 0)]


def frequency_nodes(gaps, switching: Switching, thermal: bool = False, threshold: float = 0.0, upper=None,
                    panel: float | None = None, graded: bool = True, log_period: float | None = None):
    """The proper frequencies nu > threshold at which the density is needed, with the fine and coarse weights of
    the frequency integral (:func:`_panels`), up to ``upper`` (default: the switching's reach beyond the largest
    -Omega).  A thermal state also needs its negative-frequency part, weighted by |chi_hat(Omega - nu)|^2, up to
    the largest gap.  ``panel``: a panel width below the switching's own (several switchings then share their
    nodes: derive.detector.design); never above it."""
    if upper is None:
        upper = cutoff(gaps, switching, thermal, threshold)[0]
    width = switching.panel_width if panel is None else min(panel, switching.panel_width)
    return _panels(upper, width, threshold, graded, log_period)


def response(gaps, switching: Switching, density_at, thermal: bool = False, threshold: float = 0.0,
             dimension: int = 4, tolerance: float | None = None, temperature: float | None = None,
             vacuum_part_only: bool = False, panel: float | None = None, graded: bool = True,
             log_period: float | None = None) -> Response:
    """F(Omega) for every gap.

    Parameters
    ----------
    gaps : array of Omega (detector's proper time)
    switching : Switching (its |chi_hat(k)|^2)
    density_at : callable(nu array, nu > 0) -> (S(nu), error) per unit proper frequency, or, for a thermal
        state (``thermal=True``), (S(nu), error, S(-nu), error of S(-nu))
    panel : float, optional
        A panel width below the switching's own, so that several switchings share their frequency nodes
        (:func:`frequency_nodes`).
    graded : bool
        Whether the first panel is graded toward the threshold (:func:`_panels`).
    log_period : float, optional
        The period in log k of a density that oscillates without falling off at the threshold: the first panel is
        then integrated in log k (:func:`_panels`).
    """
    gaps = np.asarray(gaps, dtype=float)
    upper, cut_tail = cutoff(gaps, switching, thermal, threshold, tolerance, dimension, temperature,
                             vacuum_part_only)
    nu, w_f, w_c = frequency_nodes(gaps, switching, thermal, threshold, upper, panel, graded, log_period)
    parts = density_at(nu)
    F_c = F_f = density_error = size = mass = 0.0
    for sign, S, S_err in ((1.0, parts[0], parts[1]),) + (((-1.0, parts[2], parts[3]),) if thermal else ()):
        weight = switching.power(gaps[:, None] + sign * nu[None, :])
        F_c = F_c + weight @ (w_c * S)
        F_f = F_f + weight @ (w_f * S)
        density_error = density_error + weight @ (w_f * S_err)
        size = size + np.abs(weight) @ (w_f * np.abs(S))
        mass = mass + float(w_f @ np.abs(S))
    # the transform's own error (absolute, on |chi_hat|^2) and the part of the integral beyond the reach
    quadrature_error = (np.abs(F_f - F_c) + switching.power_error * mass + switching.tail_error(gaps, dimension)
                        + cut_tail)
    floor = 64 * np.finfo(float).eps * size
    return Response(gaps, F_f, quadrature_error + density_error + floor, quadrature_error, density_error)


def trials_to_distinguish(p_a, p_b, sigmas: float):
    """N = z^2 (sqrt(P_A(1-P_A)) + sqrt(P_B(1-P_B)))^2 / (P_A - P_B)^2 (normal approximation to the binomial;
    common practice; docs/conventions.md section 9)."""
    p_a, p_b = np.asarray(p_a, dtype=float), np.asarray(p_b, dtype=float)
    spread = np.sqrt(p_a * (1 - p_a)) + np.sqrt(p_b * (1 - p_b))
    with np.errstate(divide="ignore"):
        return sigmas ** 2 * spread ** 2 / (p_a - p_b) ** 2


def round_trip(problem, sqrt_f0: float, r0: float = 0.0) -> float:
    """Radial light round trip from the detector at r0 to the nearest interface (inward or outward), or to a
    reflecting (AdS) boundary, and back, in the detector's proper time: 2 sqrt(f(r0)) |int_{r0}^{R} dr*/dr dr|
    (for a detector inside a centre region the way in, through the centre, is longer).  A horizon sends nothing
    back; with neither an interface nor a reflecting boundary the round trip is infinite."""
    from derive.solve.bound import is_ads, tortoise_extent
    from derive.solve.centre import tortoise_distance

    best = float("inf")
    if is_ads(problem):   # the way out to the boundary and back (from r0, not from the centre: a horizon may be there)
        best = tortoise_extent(problem, start=r0)
    for interface in problem.interfaces:
        best = min(best, tortoise_distance(problem, *sorted((r0, interface.radius))))
    return float(2 * sqrt_f0 * best)


def normal_mode_response(problem, gaps, switching: Switching, sqrt_f0: float, tolerance: float, r0: float = 0.0,
                         progress=None) -> Response:
    """F(Omega) = sum over the normal modes (n, l) of w_nl(r0) |chi_hat(Omega + nu_nl)|^2 for a static detector in
    a spacetime with a reflecting (AdS) boundary: the spectrum is discrete, so the frequency integral is a sum
    (nu = omega/sqrt(f(r0)); the weight per mode is invariant).  At the centre only l = 0 reaches; off it every
    l whose lowest mode lies below the switching's reach (plus the largest -Omega), l = 0, 1, ... until one has
    none there (the centrifugal barrier only raises the modes with l).  Modes beyond the reach contribute below
    e^-100 of the peak and are left out, with the first of them (times 10, for the rest of its slowly growing
    weights) counted in the error, for every l summed and for the first l left out."""
    from derive.solve.bound import normal_modes_below

    gaps = np.asarray(gaps, dtype=float)
    modes = normal_modes_below(problem, normal_mode_cutoff(gaps, switching, sqrt_f0), tolerance, r0,
                               progress=progress)
    terms, errors, beyond = normal_mode_terms(modes, gaps, switching, sqrt_f0)
    total = np.sum(terms, axis=1)
    error = np.sum(errors, axis=1) + np.sum(beyond, axis=1)
    return Response(gaps, total, error, np.zeros(len(gaps)), error)


def normal_mode_cutoff(gaps, switching: Switching, sqrt_f0: float) -> float:
    """The frequency (of t) beyond which the normal modes are left out: the switching's reach past the largest
    -Omega."""
    return (max(0.0, -float(np.min(gaps))) + switching.reach) * sqrt_f0


def normal_mode_terms(modes, gaps, switching: Switching, sqrt_f0: float):
    """Each mode's share w |chi_hat(Omega + nu)|^2 of the response (gaps x modes) with its error, and the bound on
    what each l leaves out (gaps x l): ten times its first mode beyond the cutoff, for the rest of its slowly
    growing weights.  A mode's error: its weight's, its frequency's through the slope of |chi_hat|^2 (a central
    difference), and the transform's own."""
    k = gaps[:, None] + modes.omega[None, :] / sqrt_f0
    power = switching.power(k)
    step = 1e-6 * normal_mode_cutoff(gaps, switching, sqrt_f0) / sqrt_f0
    slope = np.abs(switching.power(k + step) - switching.power(k - step)) / (2 * step)
    size = np.abs(modes.weight)[None, :]
    errors = (power * modes.weight_error[None, :] + slope * size * modes.omega_error[None, :] / sqrt_f0
              + getattr(switching, "power_error", 0.0) * size)
    beyond = np.array([10 * np.abs(weight) * switching.power(gaps + omega / sqrt_f0) for omega, weight in modes.beyond])
    return power * modes.weight[None, :], errors, (beyond.T if len(beyond) else np.zeros((len(gaps), 0)))
