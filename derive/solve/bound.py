"""Bound states of a massive field with a regular centre: the discrete spectrum below the mass (docs/conventions.md
sections 4 and 6).

Where V dips below mu^2 (around any gravitating body: the tail V -> mu^2 - C/r is attractive) the field has
normalisable modes at discrete omega_n < mu.  For each l they are the zeros of

    D(omega) = W[u_reg, u_dec] = u_reg u_dec' - u_reg' u_dec,

u_reg the solution regular at the centre (marched outward, as in derive.solve.offcentre) and u_dec the solution
decaying far away (started as kappa^-1/2 e^{-int kappa} 40 decay lengths beyond the outermost turning point,
where any admixture of the growing solution has died by e^-80 on the way in).  The zeros are bracketed on a
grid uniform in x = 1/sqrt(mu^2 - omega^2) (hydrogen-like levels are evenly spaced in x, by 2/C), or, without a
Coulomb-like tail, uniform in omega over the well and geometric in x towards the threshold (the levels of a
supercritical inverse-square tail are evenly spaced in log x, by pi/s), and refined by false position.

Normalisation without integrating u^2: for solutions of u'' + (omega^2 - V) u = 0,
(u' d_omega u - u d_omega u')' = 2 omega u^2, from which (common practice; e.g. the derivative formula for the
norm of a bound state) the eigenfunction u_n = b u_dec = u_reg has

    2 omega_n int u_n^2 dr* = b D'(omega_n),   b = u_reg / u_dec  (any radius),

so its weight in the Wightman function at r0 (per unit omega of t, a delta function at omega_n) is

    w_n = (weight of the degree-l harmonics) u_reg(r0) u_dec(r0) / (r0^(D-2) D'(omega_n))

(at the centre in 3+1, l = 0: (1/4 pi) (du_reg/dr)(du_dec/dr) / D').  D' comes from fourth-order central
differences in omega of D/u_dec(r_m), at steps h and 2h (their difference is its error).  Every level is computed
on grids of N, 2N and 4N steps; the changes are its error.

A Coulomb-like or a supercritical inverse-square tail has infinitely many levels accumulating at the mass; the
first ``count`` of each l are returned, and the caller is told that the list is truncated (derive.solve.levels
sums the rest).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from derive.solve.centre import (Unsupported, check_supported, continuum_threshold, coulomb_strength, far_potential,
                                 efimov_exponent, harmonic_weight, has_coulomb_tail, outer_turning_point,
                                 region_at)
from derive.solve.march import Piece, centre_start, march

BISECTIONS = 60
EFIMOV_REACH = 1e4  # levels of a geometric series are found out to x = 1/sqrt(threshold^2 - omega^2) = this/threshold
LEVELS = 4         # levels per l listed by derive spectrum


@dataclass
class BoundStates:
    """The lowest bound states of one l: frequencies (of t) and weights at r0, each with its error."""

    l: int
    radius: float
    omega: np.ndarray
    omega_error: np.ndarray
    weight: np.ndarray
    weight_error: np.ndarray
    truncated: bool           # more levels exist (a Coulomb-like tail: infinitely many)
    tolerance: float
    scale: np.ndarray | None = None   # between two points: the mean of the two diagonal weights (the tolerance's)

    @property
    def size(self) -> np.ndarray:
        """What each weight's tolerance refers to: the weight (between two points, the mean diagonal weight), at
        least 1e-3 of the largest (a mode with a node at the point has a weight of zero, known to rounding; a level
        next to a threshold, ~1e-6 of the first, is known only to ~1e-7 of itself, the rounding of
        omega^2 - V against kappa^2, and it counts in any sum at its share)."""
        size = np.abs(self.weight) if self.scale is None else self.scale
        return np.maximum(size, 1e-3 * float(np.max(size))) if len(size) else size

    @property
    def ok(self) -> bool:
        return bool(np.all(self.omega_error <= self.tolerance * self.omega)
                    and np.all(self.weight_error <= self.tolerance * self.size))

    def message(self) -> str:
        if self.ok:
            return "ok"
        size = self.size
        worst = int(np.argmax(np.maximum(self.omega_error / self.omega,
                                         self.weight_error / np.maximum(size, 1e-300))))
        return (f"bound state l = {self.l}, omega = {self.omega[worst]:.12g}: relative errors "
                f"{self.omega_error[worst] / self.omega[worst]:.1e} (omega), "
                f"{self.weight_error[worst] / max(size[worst], 1e-300):.1e} (weight) miss the "
                f"tolerance {self.tolerance:.0e}")


def is_ads(problem) -> bool:
    return problem.regions[-1].upper is None and problem.regions[-1].tail == "AdS-like"


def ads_boundary(problem) -> tuple[float, float]:
    """(L, Delta) of an asymptotically AdS end: f -> r^2/L^2, and the normalisable falloff psi ~ r^-Delta with
    Delta = (D-1)/2 + sqrt((D-1)^2/4 + m^2 L^2) (Breitenlohner & Freedman, Ann. Phys. 144, 249 (1982); the
    reflecting, 'Dirichlet' choice), the effective mass from the potential itself: with n = D - 2 and F = f,
    V/f -> m^2 + (n/2)(1 + n/2)/L^2 far out (docs/conventions.md section 4)."""
    last = problem.regions[-1]
    R = 1e6 * problem.length_scale
    f = float(np.asarray(last.metric_f(np.array([R]))).reshape(-1)[0])
    L2 = R * R / f
    n = problem.dimension - 2
    V = float(np.asarray(last.potential(np.array([R]), 0, 0.0)).reshape(-1)[0])
    m2L2 = V / f * L2 - (n / 2) * (1 + n / 2)
    root = (n + 1) ** 2 / 4 + m2L2
    if root < 0:
        raise Unsupported(f"the field's effective mass squared m^2 L^2 = {m2L2:.6g} is below the "
                          f"Breitenlohner-Freedman bound -(D-1)^2/4: the field is unstable in this AdS")
    return float(np.sqrt(L2)), (n + 1) / 2 + float(np.sqrt(root))


def tortoise_extent(problem, start: float = 0.0) -> float:
    """r* from the centre (or from the radius ``start``) to the AdS boundary (finite)."""
    nodes, weights = np.polynomial.legendre.leggauss(20)
    total = 0.0
    for region in problem.regions:
        if region.upper is not None and region.upper <= start:
            continue
        lower = max(region.lower, start, 1e-9 * problem.length_scale)
        upper = region.upper if region.upper is not None else 1e9 * problem.length_scale
        edges = np.geomspace(lower, upper, int(np.ceil(np.log10(upper / lower))) * 4 + 2)
        for a, b in zip(edges[:-1], edges[1:]):
            x = (a + b) / 2 + (b - a) / 2 * nodes
            total += float(np.sum(weights * region.dtortoise_dr(x)) * (b - a) / 2)
    return total


def _lowest_potential(problem, l) -> float:
    lowest = np.inf
    for region in problem.regions:
        lower = max(region.lower, 1e-6 * problem.length_scale)
        upper = region.upper if region.upper is not None else 1e8 * problem.length_scale
        r = np.geomspace(lower, upper, 4001)
        lowest = min(lowest, float(np.min(np.asarray(region.potential(r, l, 0.0), dtype=float) * np.ones_like(r))))
    return lowest


def _well_bottom(problem, l, omega) -> float:
    """The radius where omega^2 - V is largest (the deepest point of the allowed zone, 0 at a centre where V is
    lowest): both solutions are reliable there, so the ratio b = u_reg/u_dec is read there."""
    best, where = -np.inf, 0.0
    for region in problem.regions:
        lower = max(region.lower, 1e-6 * problem.length_scale)
        upper = region.upper if region.upper is not None else 1e8 * problem.length_scale
        r = np.geomspace(lower, upper, 4001)
        gap = omega ** 2 - np.asarray(region.potential(r, l, 0.0), dtype=float) * np.ones_like(r)
        i = int(np.argmax(gap))
        if gap[i] > best:
            best, where = float(gap[i]), float(r[i])
    return where


def _layout(problem, l, omega_top, points=()):
    """Pieces (region index, a, b, geometric, base steps) from the start to the far radius, cut at each of
    ``points`` (the pieces' start index of each point: the first piece beyond it), the series start and the far
    radius, for frequencies up to omega_top."""
    L = problem.length_scale
    if is_ads(problem):
        # the normalisable solution starts on its leading power far out: the next term is (L/r)^2 ~ 1e-12 of it
        far = max([boundary_radius(problem, l, omega_top)] + list(points))
        scale = 1.0 / max(omega_top, 1e-300)
    else:
        threshold = continuum_threshold(problem)
        kappa = np.sqrt(threshold ** 2 - omega_top ** 2)
        far = max([outer_turning_point(problem, l, omega_top, 1e-6 * L)] + list(points)) + 40.0 / kappa
        scale = 1 / threshold
    inner = [p for p in points if p > 0]
    r_s = 0.0 if (l == 0 and problem.dimension == 4) else 1e-3 * min([L, scale] + inner)
    cuts = sorted(set(p for p in points if p > r_s))
    pieces = []
    for index, region in enumerate(problem.regions):
        a = max(region.lower, r_s)
        b = min(region.upper, far) if region.upper is not None else far
        if b <= a:
            continue
        edges = [a, b]
        if a == 0 and b > L:      # from the centre: uniform out to one length scale, geometric beyond
            edges = [0.0] + list(np.geomspace(L, b, int(np.ceil(np.log10(b / L))) + 1))
        elif a > 0 and b / a > 10:
            edges = list(np.geomspace(a, b, int(np.ceil(np.log10(b / a))) + 1))
        edges = sorted(set(edges + [c for c in cuts if a < c < b]))
        pieces += [Piece(index, x, y, 16, "geometric" if x > 0 else "uniform") for x, y in zip(edges[:-1], edges[1:])]
    starts = [next((i for i, piece in enumerate(pieces) if piece.a >= p), len(pieces)) for p in points]
    return pieces, starts, r_s, far


def _march(problem, l, omegas, steps, layout):
    """D(omega) and, at each point of the layout, the regular and the decaying states, all as (value, log scale)
    pairs: the arrays times e^(log scale).  u_reg's normalisation is common to D and its states."""
    pieces, starts, r_s, far = layout
    state, log_scale = centre_start(problem, l, omegas, r_s)
    marched = march(problem, l, omegas, pieces, state, log_scale, marks=starts, outer=True,
                    multiple=max(1, steps // 16))
    state, log_scale, regular = marched.state, marched.log_scale, marched.marks
    s0, s1 = _outer_solution(problem, l, omegas, far)
    D = (state[:, 0] * s1 - state[:, 1] * s0, log_scale)
    # u_dec at each point through the inverse propagator (adjugate over determinant: the steps are unimodular)
    decaying = [marched.back(k, s0, s1) for k in range(len(starts))]
    return D, regular, decaying


BOUNDARY_REACH = 40.0   # the march starts on the boundary series this many length scales out


def boundary_radius(problem, l: int = 0, omega_top: float = 0.0) -> float:
    """Where the series at an AdS boundary starts the march: 40 times the largest of L, the last region's lower
    end and the length scale (the series in z = 1/r converges out to the nearest singular radius: the horizon,
    or f's complex roots, of size L), and of omega L^2 and (l + 1) L (its terms grow like (omega L^2 z)^k/k!
    and (l L z)^k/k! before they fall), so that the 12 terms gain about 40 each."""
    L_ads, _ = ads_boundary(problem)
    if _boundary_series(problem) is None:     # the leading power alone: far enough that the next term is 1e-12
        return 1e6 * L_ads
    scale = max(L_ads, problem.regions[-1].lower, problem.length_scale, omega_top * L_ads ** 2, (l + 1) * L_ads)
    return BOUNDARY_REACH * scale


def check_boundary(problem, which: str) -> None:
    """Neumann (and transparent, their average) needs both falloffs normalisable: 0 < nu < 1 with
    nu = Delta_+ - (D - 1)/2 (Breitenlohner & Freedman 1982; Ishibashi & Wald, Class. Quantum Grav. 21, 2981
    (2004)); and the series of the slower falloff must exist (no logarithm)."""
    from derive.errors import InputError

    _, delta = ads_boundary(problem)
    nu = delta - (problem.dimension - 1) / 2
    if which != "dirichlet" and not 0 < nu < 1:
        raise InputError(f"boundary = {which!r} needs both falloffs at the AdS boundary normalisable, 0 < nu < 1 "
                         f"with nu = sqrt((D-1)^2/4 + m^2 L^2); here nu = {nu:.6g}, and only the faster falloff "
                         "(dirichlet) is normalisable", key="field.boundary")
    if which != "dirichlet" and _boundary_series(problem, "neumann") is None:
        raise Unsupported(f"boundary = {which!r}: the series of the slower falloff at the AdS boundary is derived "
                          "where the exponents are rational in the parameters (a conformally coupled field, for "
                          "example) and no logarithm enters; here it is missing or did not verify")


def _boundary_series(problem, which: str | None = None):
    which = which or ("dirichlet" if problem.boundary == "dirichlet" else "neumann")
    return (problem.regions[-1].boundary_series or {}).get(which)


def boundary_solution(problem, l, omegas, far, which: str | None = None):
    """(u, du/dr*) at ``far`` of the solution the AdS boundary condition selects, from its series in z = 1/r:
    u = z^s sum_k a_k z^k, scaled by z^-s (the scale cancels in every Wronskian).  'dirichlet' (the faster
    falloff, the default) or 'neumann' (the slower; with 0 < nu < 1 only)."""
    omegas = np.asarray(omegas, dtype=float)
    series = _boundary_series(problem, which)
    F = 1.0 / float(np.asarray(problem.regions[-1].dtortoise_dr(np.array([far]))).reshape(-1)[0])
    if series is None:     # no series (an irrational exponent; Dirichlet only): the leading power
        _, delta = ads_boundary(problem)
        return np.ones(len(omegas)), np.full(len(omegas), F * ((problem.dimension - 2) / 2 - delta) / far)
    rows = [np.broadcast_to(np.asarray(c, dtype=float), omegas.shape) for c in series(l, omegas)]
    s, terms = rows[0], rows[1:]
    z = 1.0 / far
    value = sum(a * z ** k for k, a in enumerate(terms))
    slope = sum(k * a * z ** (k - 1) for k, a in enumerate(terms) if k > 0)
    # du/dz = z^s (s S/z + S'), du/dr = -z^2 du/dz
    return value, -F * z * z * (s * value / z + slope)


def _outer_solution(problem, l, omegas, far):
    """(u, du/dr*) at the far radius of the solution that the outer end allows: at an AdS boundary the one the
    boundary condition selects (:func:`boundary_solution`); otherwise the one decaying below the mass, u'/u =
    -kappa - kappa'/(2 kappa) (corrected Liouville-Green)."""
    region = problem.regions[-1]
    if is_ads(problem):
        return boundary_solution(problem, l, omegas, far)
    V, dV = far_potential(region, l, far)
    kappa = np.sqrt(V - omegas ** 2)
    return np.ones(len(omegas)), -kappa - dV / (4 * kappa * kappa)


def _d_value(problem, l, omegas, steps, layout):
    """The sign-carrying mismatch D(omega) at unit scale (its sign is what a scan for brackets needs)."""
    return _d_scaled(problem, l, omegas, steps, layout)[0]


def _levels(problem, l, steps, count, r0, brackets=None):
    """The lowest ``count`` zeros of D on a grid of ``steps``; returns (omegas, truncated, brackets)."""
    if brackets is None and is_ads(problem):
        # normal modes: spaced by about pi/r*_boundary (2/L in pure AdS), the lowest near Delta/L; scanned
        # 16 points per spacing up to Delta + l + 2 count + 4 spacings' worth
        L_ads, delta = ads_boundary(problem)
        spacing = np.pi / tortoise_extent(problem)
        top = (delta + l + 2 * count + 4) * spacing / 2
        omegas = np.arange(spacing / 16, top, spacing / 16)
        layout = _layout(problem, l, float(omegas[-1]))
        signs = np.sign(_d_value(problem, l, omegas, steps, layout))
        change = np.nonzero(signs[:-1] * signs[1:] < 0)[0]
        brackets = [(float(omegas[i]), float(omegas[i + 1])) for i in change[:count]]
        truncated = True
    elif brackets is not None:
        truncated = None
    threshold = continuum_threshold(problem)
    C = coulomb_strength(problem)
    if brackets is None:
        V_min = _lowest_potential(problem, l)
        if not V_min < threshold ** 2 * (1 - 1e-12):     # (a tail approaching it from above rounds to it far out)
            return np.zeros(0), False, []
        x_low = 1.0 / np.sqrt(threshold ** 2 - max(V_min, 0.0))
        coulomb = has_coulomb_tail(problem)
        s = efimov_exponent(problem, l)
        if coulomb:
            x_high = 2.0 * (count + l + 1.5) / C
            spacing = (2.0 / C) / 16
            xs = np.arange(x_low, x_high + spacing, spacing)
        else:
            # no Coulomb-like tail: a finite set of levels, or (a supercritical inverse-square tail, s) a geometric
            # series, spaced by pi/s in log x.  Scanned uniformly in omega over the well and geometrically in x
            # towards the threshold (16 points per level spacing), out to x_max: beyond it a level's omega is too
            # close to the threshold to be told from it (kappa^2 within 1e-8 of threshold^2) and the series'
            # model (derive.solve.levels) carries the rest
            x_max = EFIMOV_REACH / threshold
            if x_low >= x_max:      # too shallow a well to hold a level with kappa above 1/x_max
                return np.zeros(0), s is not None, []
            if s is not None:
                x_high = min(x_low * np.exp((count + 2) * np.pi / s), x_max)
                points = max(400, int(16 * s * np.log(x_high / x_low) / np.pi))
            else:
                x_high, points = min(max(1e3 * problem.length_scale, 10 * x_low), x_max), 400
            # omega^2 = V_min + u (threshold^2 - V_min), u uniform over the well (x from its depth: no cancellation)
            depth = threshold ** 2 - max(V_min, 0.0)
            over_well = 1.0 / np.sqrt(depth * (1.0 - np.linspace(0.0, 1.0, 201)[1:-1]))
            xs = np.union1d(over_well, np.geomspace(x_low, x_high, points))
            xs = xs[xs <= x_high]
        omegas = np.sqrt(threshold ** 2 - 1.0 / xs ** 2)
        signs = np.zeros(len(omegas))
        # batches by octave of x: each with a far radius that suits it (see _layout)
        octave = np.floor(np.log2(xs / x_low)).astype(int)
        for value in np.unique(octave):
            index = np.nonzero(octave == value)[0]
            layout = _layout(problem, l, float(omegas[index[-1]]))
            signs[index] = np.sign(_d_value(problem, l, omegas[index], steps, layout))
        change = np.nonzero(signs[:-1] * signs[1:] < 0)[0]
        brackets = [(float(omegas[i]), float(omegas[i + 1])) for i in change[:count]]
        truncated = coulomb or s is not None or len(change) > count
    if not brackets:
        return np.zeros(0), truncated, brackets
    low, high = (np.array(side, dtype=float) for side in zip(*brackets))
    if is_ads(problem):
        groups = [np.arange(len(low))]
    else:
        # by octave of x = 1/sqrt(threshold^2 - omega^2), as the scan: a far radius 40 decay lengths beyond the
        # highest level of a dozen would leave the lowest levels on a layout far too long for their grid (the
        # lowest of fourteen came out 1e-3 off, or lost, at 128 steps)
        x = 1.0 / np.sqrt(np.maximum(threshold ** 2 - high ** 2, 1e-300))
        octave = np.floor(np.log2(x / np.min(x))).astype(int)
        groups = [np.nonzero(octave == value)[0] for value in np.unique(octave)]
    found = np.zeros(len(low))
    for group in groups:
        found[group] = _bracketed_zeros(problem, l, steps, low[group], high[group])
    return found, truncated, brackets


def _bracketed_zeros(problem, l, steps, low, high):
    """The zero of D in each bracket, bisected together on the layout of the highest (its far radius suits every
    lower level of the batch too: they only decay faster beyond it); nan where no sign change is found."""
    layout = _layout(problem, l, float(np.max(high)))
    d_low = _d_value(problem, l, low, steps, layout)
    # a bracket from another grid (the scan's, or a coarser one) may have lost its sign change by a hair (the
    # level sits at its edge): widen it by its own width, a few times (levels are 16 widths apart, or more);
    # a level still not bracketed is reported as not found
    width = high - low
    for _ in range(4):
        lost = ~(np.sign(d_low) * np.sign(_d_value(problem, l, high, steps, layout)) < 0)
        if not np.any(lost):
            break
        low, high = np.where(lost, low - width, low), np.where(lost, high + width, high)
        d_low = _d_value(problem, l, low, steps, layout)
    found = _zeros(lambda x: _d_scaled(problem, l, x, steps, layout), low, high)
    return np.where(lost, np.nan, found)


def _d_scaled(problem, l, omegas, steps, layout):
    """D(omega) as (value at unit scale, log scale): D = value e^(log scale)."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _march(problem, l, omegas, steps, layout)[0]


def _zeros(evaluate, low, high):
    """The zero of D in each bracket [low, high] (sign change), to the last bits: false position with the
    Illinois modification, every fourth step a bisection (so that each bracket at least halves every four
    steps whatever D does), all brackets together; a bracket is done when its estimate stops moving or its
    width reaches rounding.  D is compared across evaluations on one scale per bracket (its log scale at the
    lower end), so that the interpolation sees the function and not the marcher's rescaling.  About ten
    evaluations where bisection took fifty."""
    low, high = low.astype(float).copy(), high.astype(float).copy()
    value, scale = evaluate(low)
    reference = scale
    f_low = value
    value, scale = evaluate(high)
    f_high = value * np.exp(scale - reference)
    estimate = 0.5 * (low + high)
    active = np.isfinite(f_low) & np.isfinite(f_high) & (np.sign(f_low) * np.sign(f_high) < 0)
    kept = np.zeros(len(low), dtype=int)        # +1: the high end was kept last time, -1: the low end
    for step in range(4 * BISECTIONS):
        index = np.nonzero(active)[0]
        if not len(index):
            break
        a, b, fa, fb = low[index], high[index], f_low[index], f_high[index]
        with np.errstate(divide="ignore", invalid="ignore"):
            x = b - fb * (b - a) / (fb - fa)
        bisect = ~np.isfinite(x) | (x <= a) | (x >= b) | (step % 4 == 3)
        x = np.where(bisect, 0.5 * (a + b), x)
        value, scale = evaluate(x)
        fx = value * np.exp(scale - reference[index])
        moved = np.abs(x - estimate[index])
        estimate[index] = x
        same = np.sign(fx) == np.sign(fa)
        # Illinois: the end kept twice running has its value halved, so that the next step moves it
        halve_high = same & (kept[index] == 1)
        halve_low = ~same & (kept[index] == -1)
        low[index] = np.where(same, x, a)
        f_low[index] = np.where(same, fx, np.where(halve_low, fa / 2, fa))
        high[index] = np.where(same, b, x)
        f_high[index] = np.where(same, np.where(halve_high, fb / 2, fb), fx)
        kept[index] = np.where(same, 1, -1)
        tiny = 4 * np.finfo(float).eps * np.abs(x)
        done = (fx == 0) | (high[index] - low[index] <= tiny) | (~bisect & (moved <= tiny))
        active[index[done]] = False
    return estimate


WEIGHT_FLOOR = 1e-11    # relative accuracy floor of a mode's weight (see bound_states)
ROUNDING = 256          # a level's weight's rounding error near a threshold: this times eps threshold^2/kappa^2
STENCIL = np.array([-4.0, -2.0, -1.0, 0.0, 1.0, 2.0, 4.0])   # D' at the middle from +-h, +-2h and from +-2h, +-4h
MIDDLE, INNER, OUTER = 3, [1, 2, 3, 4, 5], [0, 1, 3, 5, 6]


def _norm_slope(problem, l, omega, h, steps, layout):
    """The slope at omega whose product with ``base`` is the norm b D' (see :func:`_amplitudes`), its relative
    error, and the march's (D, log_D, regular, decaying, base, b, log_b_ratio) at omega (the stencil's middle).

    Below a threshold the norm is b D' = u_reg(r_m) (D/u_dec(r_m))' at the level (D = 0 there): u_dec, set to 1
    far out, grows inward like e^(kappa far), and D with it, on a scale 40 times finer than the level spacing,
    which the stencil would have to resolve (it left 2e-8 in the weights of a 4+1 shell's levels); D/u_dec(r_m)
    is free of it.  (At an AdS boundary u_dec starts on the boundary series and D is the smoother: b D' as it
    stands.)  The slope from the four points at h and at 2h (offsets as represented: differences of nearby
    floats are exact, and near the threshold h is only ~1e4 roundings of omega), their difference / 15 the
    slope's error (truncation ~h^4, and rounding)."""
    stencil = omega + h * STENCIL
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        (D, log_D), regular, decaying = _march(problem, l, stencil, steps, layout)
    reg_m, reg_m_log = regular[-1]
    dec_m, dec_m_log = decaying[-1]
    c = MIDDLE
    j = int(np.argmax(np.abs(dec_m[c])))          # b from u (or from u' where u vanishes)
    log_b_ratio = reg_m_log[c] - dec_m_log[c]
    b = reg_m[c, j] / dec_m[c, j]                 # times e^(log_b_ratio)
    if is_ads(problem):
        values, base = D * np.exp(log_D - log_D[c]), b
    else:
        values, base = D / dec_m[:, j] * np.exp(log_D - dec_m_log - (log_D[c] - dec_m_log[c])), reg_m[c, j]
    offsets = (stencil - stencil[c]) / h
    slopes = []
    for pick in (INNER, OUTER):
        coefficients = np.linalg.solve(np.vander(offsets[pick], len(pick), increasing=True).T,
                                       np.eye(len(pick))[1])
        slopes.append(coefficients @ values[pick] / h)
    error = abs(slopes[0] - slopes[1]) / 15 / abs(slopes[0])
    return slopes[0], error, (D, log_D, regular, decaying, base, b, log_b_ratio)


def _amplitudes(problem, l, omegas, steps, radii, precision=1e-12):
    """For each eigenfrequency, the normalised mode at each of ``radii`` (signed), and the sign of its norm:
    (A of shape (len(omegas), len(radii)), sign, the relative error of the norm's slope), so that the weight
    between radii i and j is sign h_l A_i A_j.  The norm is 2 omega_n int u_n^2 dr* = b D'(omega_n), b = u_reg/u_dec
    read at the bottom of the well r_m; u_n = u_reg inside r_m (marched outward: stable there) and b u_dec outside
    it (marched inward); A = u_n(r)/(r^(n/2) sqrt|b D'|) off the centre, (dr*/dr) du_n/dr*/sqrt|b D'| at it in 3+1
    and a_0/sqrt|b D'| (the centre series' leading coefficient) in other dimensions (l = 0 only).  The slope is
    refined until its relative error is below ``precision`` (or three steps were tried)."""
    out = np.zeros((len(omegas), len(radii)))
    signs, stencil_error = np.ones(len(omegas)), np.zeros(len(omegas))
    dimension = problem.dimension - 2
    highest = float(np.max(omegas)) if len(omegas) else 0.0
    for i, omega in enumerate(omegas):
        r_m = _well_bottom(problem, l, omega)
        # the layout for a frequency a little above the level (a far radius that suits its stencil), kept below
        # the threshold (a level of a geometric series lies within 1e-8 of it)
        # (in AdS one top for every level of the list: the boundary radius, and with it every piece but the one cut
        # at r_m, is then the same for all, and their grids are built once rather than per level)
        top = highest * (1 + 1e-6) if is_ads(problem) else min(omega * (1 + 1e-6),
                                                                omega + 0.1 * (continuum_threshold(problem) - omega))
        layout = _layout(problem, l, top, tuple(radii) + (r_m,))
        # the stencil's step: D/u_dec(r_m) varies on the scale of the level spacing (pi over the well's tortoise
        # extent in AdS), and 1e-3 of it balances rounding (eps/h) against truncation (h^4) near 1e-12; below a mass
        # threshold the levels crowd towards it, and the distance to it sets the scale (hydrogen-like levels are
        # spaced by ~(threshold - omega)/n: 1e-4 of the distance there, measured best on a gravitational atom
        # (1e-5: 2e-7 of rounding; 1e-3: 1e-8 of truncation); a geometric series' by about the distance: 1e-3).
        # Where the slope's error estimate is above the precision asked (1e-12 at the default tolerance) the step
        # is quartered (up to twice) and the best kept (a 2+1 lump's deepest level: 1.7e-8 at 1e-3, 5e-12 at 1e-4)
        if is_ads(problem):
            h = 1e-3 * min(omega, np.pi / tortoise_extent(problem))
        else:
            h = (1e-4 if has_coulomb_tail(problem) else 1e-3) * (continuum_threshold(problem) - omega)
        best = None
        for _ in range(3):
            slope, slope_error, marched = _norm_slope(problem, l, omega, h, steps, layout)
            if best is None or slope_error < best[1]:
                best = (slope, slope_error, marched)
            if slope_error <= precision:
                break
            h /= 4
        derivative, stencil_error[i], (D, log_D, regular, decaying, base, b, log_b_ratio) = best
        c = MIDDLE
        norm = base * derivative                     # times e^(log_b_ratio + log_D[c])
        signs[i] = np.sign(norm)
        for k, r0 in enumerate(radii):
            (reg, reg_log), (dec, dec_log) = regular[k], decaying[k]
            if r0 == 0.0:
                if l != 0:
                    continue
                if problem.dimension == 4:   # psi(0) = du/dr at the centre = (dr*/dr) du/dr*
                    factor = float(np.asarray(problem.regions[0].dtortoise_dr(np.array([0.0]))).reshape(-1)[0])
                    value, log = reg[c, 1], reg_log[c]
                else:                        # u_reg = r^s (a_0 + a_1 r + ...) from the centre's series: psi(0) = a_0
                    factor, log = 1.0, 0.0
                    value = float(np.asarray(problem.regions[0].centre_series(0, np.array([omega])), dtype=float)[1]
                                  .reshape(-1)[0])
            elif r0 <= r_m:
                factor, value, log = r0 ** (-dimension / 2), reg[c, 0], reg_log[c]
            else:
                factor, value, log = r0 ** (-dimension / 2), b * dec[c, 0], dec_log[c] + log_b_ratio
            out[i, k] = factor * value * np.exp(log - (log_b_ratio + log_D[c]) / 2) / np.sqrt(abs(norm))
    return out, signs, stencil_error


def _weights(problem, l, omegas, steps, r0, r1=None, precision=1e-12):
    """w_n at r0 for each eigenfrequency: h_l u_n(r0)^2 / (2 omega_n int u_n^2 dr* r0^(D-2)) (with r1, the weight
    between r0 and r1, h_l psi_n(r0) psi_n(r1)/(2 omega_n int u_n^2 dr*), and the mean of the two diagonal weights
    as its scale: (weights, scales, the weights' relative error from the norm's slope; the scales None at one
    point))."""
    radii = (r0,) if r1 is None else (r0, r1)
    amplitudes, signs, slope_error = _amplitudes(problem, l, omegas, steps, radii, precision)
    h = harmonic_weight(l, problem.dimension - 2)    # at the centre only l = 0 reaches: 1/(the sphere's area)
    if r1 is None:
        return signs * h * amplitudes[:, 0] ** 2, None, slope_error
    return (signs * h * amplitudes[:, 0] * amplitudes[:, 1],
            h * (amplitudes[:, 0] ** 2 + amplitudes[:, 1] ** 2) / 2, slope_error)


def bound_states(problem, l: int = 0, r0: float = 0.0, tolerance: float = 1e-10, count: int = 6,
                 steps: int = 64, max_steps: int = 16384, r1: float | None = None) -> BoundStates:
    """The lowest ``count`` bound states of angular label l, with weights at r0 (see the module docstring); with
    ``r1``, the weights between r0 and r1 (signed; times G_l(cos gamma) they are the modes' share of the
    two-point function between points at r0 and r1 an angle gamma apart), ``scale`` the mean diagonal weight."""
    if not is_ads(problem):
        check_supported(problem, any_dimension=True)
    elif problem.regions[0].lower_kind != "regular centre":
        raise Unsupported("normal modes of an AdS spacetime need a regular centre, so far")
    else:
        check_boundary(problem, problem.boundary)
        if problem.boundary == "transparent":
            # the average of the two two-point functions: both sets of normal modes, each with half its weight
            both = [bound_states(replace(problem, boundary=b), l, r0, tolerance, count, steps, max_steps, r1)
                    for b in ("dirichlet", "neumann")]
            # every level up to the lower of the two lists' tops (each list is complete up to its own)
            top = min(float(np.max(b.omega)) if len(b.omega) else np.inf for b in both)
            omegas = np.concatenate([b.omega for b in both])
            order = np.argsort(omegas)[:max(count, int(np.sum(omegas <= top)))]
            merged = [np.concatenate([getattr(b, key) for b in both])[order] * factor
                      for key, factor in (("omega", 1), ("omega_error", 1), ("weight", 0.5), ("weight_error", 0.5))]
            scale = None if r1 is None else 0.5 * np.concatenate([b.scale for b in both])[order]
            return BoundStates(l, r0, *merged, any(b.truncated for b in both), tolerance, scale)
    if 0.0 in (r0, r1) and problem.dimension != 4 and problem.regions[0].centre_series is None:
        raise Unsupported("bound-state weights at the centre need the centre's series kernel in D != 4")
    if not is_ads(problem) and continuum_threshold(problem) == 0.0:
        return BoundStates(l, r0, *(np.zeros(0) for _ in range(4)), False, tolerance)
    region_at(problem, r0)
    if r1 is not None:
        region_at(problem, r1)
    omegas, truncated, brackets = _levels(problem, l, steps, count, r0)
    empty = None if r1 is None else np.zeros(0)
    if not len(omegas):
        return BoundStates(l, r0, *(np.zeros(0) for _ in range(4)), truncated, tolerance, empty)

    # the norm's slope to a hundredth of the tolerance (at 1e-6 the second stencil of most AdS modes had taken a
    # third of a pair's time for digits nobody asked for), never looser than needed at the default
    precision = max(1e-12, 1e-2 * tolerance)

    def weighed(frequencies, steps):
        return _weights(problem, l, frequencies, steps, r0, r1, precision)
    weights, scale, _ = weighed(omegas, steps)
    while True:
        # each level re-bracketed around its last value (the scan's bracket may sit beside the converged level:
        # the coarse grid's error moved it in)
        # (kept below the continuum's threshold: a level within half a bracket of it would be bracketed above it)
        top = continuum_threshold(problem) if not is_ads(problem) else np.inf
        brackets = [(w - (high - low) / 2, min(w + (high - low) / 2, (w + top) / 2))
                    for w, (low, high) in zip(omegas, brackets)]
        finer, _, _ = _levels(problem, l, 2 * steps, count, r0, brackets)
        finer_weights, scale, slope_error = weighed(finer, 2 * steps)
        omega_error = np.abs(finer - omegas) + 16 * steps * np.finfo(float).eps * finer   # rounding in D's zero
        size = np.abs(finer_weights) if scale is None else scale
        # the floor: AdS weights against their closed forms (the conformal field's, tests/test_ads.py) show a
        # systematic 3e-12 that refining the march does not move
        # near a mass threshold omega^2 - V = -kappa^2 is a difference of two numbers near threshold^2, rounded
        # to eps threshold^2: a bias of eps threshold^2/kappa^2 in the decay rate over the ~100 decay lengths the
        # norm spans, which no grid refinement shows (measured: 6e-8 of a 4+1 level's weight at kappa = 1.2e-3 mu
        # against an independent solution, where grids and stencils agreed to 7e-9)
        rounding = 0.0 if is_ads(problem) else (ROUNDING * np.finfo(float).eps * continuum_threshold(problem) ** 2
                                               / np.maximum(continuum_threshold(problem) ** 2 - finer ** 2, 1e-300))
        grid_error = np.abs(finer_weights - weights) + WEIGHT_FLOOR * size
        weight_error = grid_error + (slope_error + rounding) * size
        omegas, weights, steps = finer, finer_weights, 2 * steps
        result = BoundStates(l, r0, omegas, omega_error, weights, weight_error, truncated, tolerance, scale)
        # (finer grids take neither the rounding nor the stencil's error away: the refinement stops when the grid's
        # part meets the tolerance)
        refined = replace(result, weight_error=grid_error).ok
        if refined or steps >= max_steps or not np.all(np.isfinite(omegas)):
            return result


@dataclass
class ModeList:
    """The normal modes of every l below a frequency, with their weights at a point or between two (times
    G_l(cos gamma)), each with its error; ``beyond``: (omega, weight) of each l's first mode above it (what is
    left out is bounded through them)."""

    omega: np.ndarray
    omega_error: np.ndarray
    weight: np.ndarray
    weight_error: np.ndarray
    l: np.ndarray
    beyond: tuple


def normal_modes_below(problem, cutoff: float, tolerance: float, r0: float, r1: float | None = None,
                       cos_gamma: float = 1.0, progress=None) -> ModeList:
    """Every normal mode with omega <= cutoff, l = 0, 1, ... until an l has none there (the centrifugal barrier
    only raises the modes with l); only l = 0 reaches a point at the centre.  Each l's list must reach past the
    cutoff (else nothing below it is known to be missing) and meet the tolerance, or AccuracyError."""
    from derive.errors import AccuracyError
    from derive.solve.offcentre import angular_factor

    count = int(np.ceil(cutoff * tortoise_extent(problem) / np.pi)) + 2          # modes are ~pi/r*_b apart
    centre = r0 == 0.0 or r1 == 0.0
    parts, beyond, l = [], [], 0
    while True:
        modes = bound_states(problem, l, r0, tolerance, count=count, r1=r1)
        if not modes.ok:
            raise AccuracyError("the normal modes did not reach their tolerance: " + modes.message(),
                                {"tolerance": tolerance})
        inside = modes.omega <= cutoff
        if np.any(inside) and np.all(inside):   # the list must reach past the cutoff: nothing below it missed
            raise AccuracyError(f"fewer normal modes of l = {l} than needed below omega = {cutoff:.6g} were "
                                "found", {})
        angular = angular_factor(l, problem.dimension - 2, cos_gamma)
        if len(modes.omega):
            first_out = np.nonzero(~inside)[0][0]
            beyond.append((modes.omega[first_out], angular * modes.weight[first_out]))
        if not np.any(inside) and not centre:     # this l and every higher one lie beyond the cutoff
            break
        count = int(np.sum(inside)) + 2     # the next l's modes lie above this l's: as many below at most
        parts.append((modes.omega[inside], modes.omega_error[inside], angular * modes.weight[inside],
                      abs(angular) * modes.weight_error[inside], np.full(int(np.sum(inside)), l)))
        if progress is not None:
            progress({"stage": "normal modes", "l": l, "modes": int(np.sum(inside))})
        if centre:
            break
        l += 1
    joined = [np.concatenate([part[k] for part in parts]) if parts else np.zeros(0) for k in range(5)]
    return ModeList(*joined, tuple(beyond))
