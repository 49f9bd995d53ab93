"""The field's spectral two-point function between static points of a spacetime with a regular centre: the
l-sum (docs/conventions.md section 7).

For two static points at radii r1, r2 (either may be the centre) an angle gamma apart,

    W(omega; r1, r2, gamma) = sum_l w_l(gamma) U_l(r1) U_l(r2),   U_l(r) = u_l(r)/(r^(n/2) A_l sqrt(pi k)),
    w_l(gamma) = [sum over m of Y_lm(x1) Y_lm(x2)*] = h_l G_l(cos gamma),  n = D - 2,

per unit omega of the spec's time coordinate, with u_l the regular solution (u ~ r^{l+1} at the centre in
3+1, started on the derived Frobenius series at a small radius), A_l its amplitude far away, k = sqrt(omega^2 -
mu^2) (omega when massless), h_l the weight of the degree-l harmonics on the unit n-sphere ((2l+1)/(4 pi) in
3+1) and G_l the Gegenbauer polynomial of index (n-1)/2 normalised to G_l(1) = 1 (Legendre's P_l in 3+1,
cos(l gamma) in 2+1).  The modes are real, so W is real.  The density at one point is the diagonal,
W(omega; r0, r0, 0) = sum_l h_l U_l(r0)^2.  At the centre only l = 0 survives (u_0/r^(n/2) has a limit there).

Logarithmic scales are carried throughout (u ~ r^{l+1} underflows for large l), and the march records u at every
requested radius (it passes through them, crossing interfaces on the way).  Each term is refined frequency by
frequency on nested grids (N, 2N, 4N steps in every piece), extrapolated (Richardson, fourth order) and accepted
when the last two changes of the extrapolations (derive.solve.summation.refine) meet the tolerance of the term's
size or of the sum so far, whichever is larger.  A term's size is h_l (U_l(r1)^2 + U_l(r2)^2)/2, which bounds
|term| (and equals it on the diagonal); summed over l it is the mean of the two points' densities, (W(r1, r1) +
W(r2, r2))/2, the scale against which the tolerance of an off-diagonal value is measured (an off-diagonal value can
be much smaller than the scale, or zero, where its terms cancel).  The sum stops when three successive terms beyond
the classical reach omega r*_max are below a hundredth of the tolerance of the scale, and the size of the last term
kept counts as the truncation error.  Checks: in flat space the diagonal is omega/(4 pi^2) at every r0 and the
off-diagonal sin(omega d)/(4 pi^2 d) with d the distance (Gegenbauer's addition theorem, DLMF section 10.60).

Beyond the outermost region's start (or the farther point, if it lies there) each multipole's flux far away is
a quadratic form of its state, the same for every point inside (derive.solve.farform): where the form is smooth
in omega (omega^2 >= 2 max V beyond it) it is interpolated from a few dozen frequency nodes per l instead of
marched at every frequency, built once per l on both cores before the frequencies are split (for the l that
enough frequencies sum: FORM_WORTH), and each term's form error is counted and held to its share of the term's
tolerance (FORM_SHARE, ALONE_SHARE); elsewhere the march goes on to the far radius.  At r = R/2 of the static
shell this halves the response's cost (benchmarks/targets.py prints both paths).

Supported: a regular centre, asymptotically flat, massless or massive (the continuum above the mass).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.parallel import split_map
from derive.solve.centre import (FAR, DensityResult, Unsupported, check_supported, continuum_threshold,
                                 coulomb_far_radius, far_amplitude2, harmonic_weight, merge, tortoise_distance)
from derive.solve.cosmological import flux_at_horizon, has_cosmological_horizon, matching_radius
from derive.solve.farform import allowed_from, far_form, remember
from derive.solve.flat import closed_form_interior, regular_solution, start_outside
from derive.solve.march import Piece, centre_start, march
from derive.solve.propagation import first_spans, outer_pieces
from derive.solve.summation import SPLIT_FROM, TERM_SHARE, l_sum, on_both_cores, refine

MAX_L = 400
FAR_FORM = True
FORM_WORTH = 100     # frequencies expected to sum an l for which its far form is built ...
QUIET = 10           # ... counting those with a reach of l - QUIET or more
FORM_SHARE = 0.5     # the far form's share of an l-term's relative tolerance (the march inside it the rest) ...
ALONE_SHARE = 0.9    # ... and where nothing is marched inside it (a flat interior in closed form up to it)


def angular_factor(l: int, n: int, cos_gamma: float) -> float:
    """G_l(cos gamma): the Gegenbauer polynomial of index (n-1)/2 over its value at 1 (Legendre's P_l for n = 2,
    cos(l gamma) for n = 1), so that sum_m Y_lm(x1) Y_lm(x2)* = harmonic_weight(l, n) G_l(cos gamma) on the unit
    n-sphere.  By the three-term recurrence (stable for |x| <= 1)."""
    x = float(cos_gamma)
    if l == 0 or x == 1.0:
        return 1.0
    if n == 1:
        return float(np.cos(l * np.arccos(np.clip(x, -1.0, 1.0))))
    a = (n - 1) / 2.0
    previous, current = 1.0, 2 * a * x          # C_0, C_1 (unnormalised)
    at_one_previous, at_one = 1.0, 2 * a
    for m in range(1, l):
        previous, current = current, (2 * x * (m + a) * current - (m + 2 * a - 1) * previous) / (m + 1)
        at_one_previous, at_one = at_one, (2 * (m + a) * at_one - (m + 2 * a - 1) * at_one_previous) / (m + 1)
        if abs(at_one) > 1e200:     # keep the ratio and its denominator in range
            previous, current = previous / at_one, current / at_one
            at_one_previous, at_one = at_one_previous / at_one, 1.0
    return current / at_one


@dataclass
class TwoPointResult:
    """The spectral two-point function per unit omega between two static points, with its error; ``scale`` is
    the mean of the two points' densities, which bounds |value| and against which the tolerance is measured."""

    omega: np.ndarray
    value: np.ndarray
    error: np.ndarray
    scale: np.ndarray
    radii: tuple
    cos_gamma: float
    tolerance: float
    l_max: int

    @property
    def ok(self) -> bool:
        return bool(np.all(self.error <= self.tolerance * self.scale))

    def message(self) -> str:
        from derive.solve.centre import shortfall

        return shortfall(self.omega, self.scale, self.error, self.tolerance)


def _pieces(problem, l, radii, steps, lowest, highest):
    """(region index, a, b, geometric, steps) from the series start to the far radius, cut at every radius of
    ``radii`` (positive, increasing); the position of the first piece starting at each radius; the series start
    r_s and the far radius."""
    r_s = 0.0 if (l == 0 and problem.dimension == 4) else min(1e-3 * radii[0], 1e-3 / highest)
    far = max(FAR * problem.length_scale, 1e3 / lowest, 1e6 * np.sqrt(l * (l + 1) + 1.0) / lowest)
    if continuum_threshold(problem) > 0:   # a Coulomb-like tail C/r: the far split's error C/(k^4 r^3) (centre.py)
        far = max(far, coulomb_far_radius(problem, lowest))
    cosmological = has_cosmological_horizon(problem)
    if cosmological:   # the march ends at the matching radius, where the horizon's solution meets it
        far = matching_radius(problem, radii)
    pieces = []
    for index, region in enumerate(problem.regions):
        spans = []
        lower = region.lower
        last = index + 1 == len(problem.regions)
        if index == 0:   # from the series start: geometric in r when it starts off the centre (l > 0)
            top = region.upper if region.upper is not None else 2 * max(radii[-1], problem.length_scale)
            top = min(top, far) if cosmological and last else top
            spans += first_spans(region, l, r_s, top, steps, highest)
            lower = top
        if cosmological and last:
            if far > lower:
                spans.append((lower, far, False, steps))
        elif region.upper is None:
            spans += [(a, b, True, n) for a, b, n, _ in outer_pieces(lower, far, steps, problem.length_scale)]
        elif index > 0:
            spans.append((lower, region.upper, False, steps))
        for a, b, geometric, n in spans:
            if b <= a:
                continue
            cuts = [a] + [r for r in radii if a < r < b] + [b]
            given = 0
            for c, d in zip(cuts[:-1], cuts[1:]):
                # each cut piece gets its share of the span's steps (the last one the rest), at least 2
                fraction = np.log(d / c) / np.log(b / a) if geometric else (d - c) / (b - a)
                count = max(2, n - given) if d == b else max(2, int(round(n * fraction)))
                given += count
                pieces.append(Piece(index, c, d, count, "geometric" if geometric else "uniform"))
    at = [next(i for i, piece in enumerate(pieces) if piece.a >= r) for r in radii]
    return pieces, at, r_s, far


def _log_u_at(problem, l, omegas, radii, steps, series, fixed, accuracy=None):
    """(log|u_l(r)| - log A_l, sign of u_l(r)) at every radius of ``radii`` (positive, increasing), each of
    shape (len(radii), len(omegas)), log A_l (u_l normalised arbitrarily; the ratio is what matters) and the
    relative error of A_l^2 that the far form adds (zero where the march reaches the far radius).  ``fixed`` =
    (lowest, highest) frequency of the whole set: the grid is the same for every subset.  With ``accuracy``, the
    far form (derive.solve.farform) replaces the march beyond the outermost region's start (or the outer radius,
    if it lies there) at the frequencies it covers."""
    multiple = max(1, steps // 16)
    pieces, at, r_s, far = _pieces(problem, l, radii, 16, *fixed)
    form, split = _far_form(problem, l, radii, pieces, far, fixed, accuracy)
    inner = pieces[:split]
    closed = _closed_interior(problem, l, omegas, radii, series)
    if closed is None:
        state, log_scale = centre_start(problem, l, omegas, r_s, series)
        marched = march(problem, l, omegas, inner, state, log_scale, marks=at, multiple=multiple,
                        cross_end=split < len(pieces))
        recorded = marched.marks
    else:    # the flat first region in closed form: radii inside it exact, the march from its interface on
        (state, log_scale), inside = closed
        skip = sum(1 for piece in pieces if piece.region == 0)
        outside = [k - skip for k, r in zip(at, radii) if r >= problem.regions[0].upper]
        marched = march(problem, l, omegas, inner[skip:], state, log_scale, marks=outside, multiple=multiple,
                        cross_end=split < len(pieces))
        recorded = inside + list(marched.marks)
    log_u = np.array([np.log(np.abs(u[:, 0])) + lg for u, lg in recorded])
    sign = np.array([np.sign(u[:, 0]) for u, _ in recorded])
    state, log_scale = marched.state, marched.log_scale
    n = len(omegas)
    log_amplitude, form_error = np.zeros(n), np.zeros(n)
    covered = form.covers(omegas) if form is not None else np.zeros(n, dtype=bool)
    if np.any(covered):
        log_flux, form_error[covered] = form.log_flux(omegas[covered], state[covered])
        log_amplitude[covered] = 0.5 * log_flux + log_scale[covered]
    rest = np.nonzero(~covered)[0]
    if len(rest):
        w = omegas[rest]
        beyond = march(problem, l, w, pieces[split:], state[rest], log_scale[rest], multiple=multiple)
        end, end_scale = beyond.state, beyond.log_scale
        if has_cosmological_horizon(problem):
            log_flux, _ = flux_at_horizon(problem, l, w, end, far, 16 * multiple, check=False)
            log_amplitude[rest] = 0.5 * log_flux + end_scale
        else:   # the flux a^2 k through the corrected Liouville-Green split at the far radius (centre.py)
            log_amplitude[rest] = 0.5 * np.log(far_amplitude2(problem.regions[-1], end, w, far, l)) + end_scale
    return log_u - log_amplitude, sign, log_amplitude, form_error


def _form_share(problem, pair, fixed) -> float:
    """The far form's share of an l-term's relative tolerance: nearly all of it where nothing is marched before it
    (the layout has no piece between the flat interior, in closed form, and the form's radius), half otherwise."""
    if not closed_form_interior(problem):
        return FORM_SHARE
    radii = tuple(sorted({r for r in pair if r > 0})) or (problem.length_scale,)
    pieces, _, _, far = _pieces(problem, 0, radii, 16, *fixed)
    _, split = _far_form(problem, 0, radii, pieces, far, fixed, None)
    skip = sum(1 for piece in pieces if piece.region == 0)
    return ALONE_SHARE if split == skip < len(pieces) else FORM_SHARE


def _far_form(problem, l, radii, pieces, far, fixed, accuracy):
    """(the far form beyond the outermost region's start or the outer radius, whichever is farther, or None; the
    position of the first piece beyond it, len(pieces) where no form can be: the last region bounded or ending
    at a cosmological horizon).  With ``accuracy`` None, no form is built and the position is still given."""
    last = problem.regions[-1]
    if last.upper is not None or has_cosmological_horizon(problem):
        return None, len(pieces)
    radius = max(last.lower, radii[-1])
    split = next((i for i, piece in enumerate(pieces)
                  if piece.region == len(problem.regions) - 1 and piece.a >= radius), None)
    if split is None or split == 0:
        return None, len(pieces)
    if accuracy is None:
        return None, split
    return far_form(problem, l, pieces[split].a, far, fixed[0], fixed[1], accuracy), split


_INTERIORS: dict = {}      # (id(problem), l, radii, id(series)) -> (problem, series, {omega: its closed-form rows})
_INTERIOR_LIMIT = 2048


def _closed_interior(problem, l, omegas, radii, series):
    """With a flat first region (derive.solve.flat): ((state, log scale) just beyond its interface, [(state, log
    scale) at each radius of ``radii`` inside it]); else None.  The values do not depend on the grid, so each
    frequency's are kept for the refinement's later grids (every level of a term asks again); entries are checked
    to belong to the same problem and series objects."""
    if not closed_form_interior(problem):
        return None
    inner = [r for r in radii if r < problem.regions[0].upper]
    key = (id(problem), int(l), tuple(inner), id(series))
    hit = _INTERIORS.get(key)
    if hit is None or hit[0] is not problem or hit[1] is not series:
        if len(_INTERIORS) >= _INTERIOR_LIMIT:
            _INTERIORS.clear()
        hit = _INTERIORS[key] = (problem, series, {})
    table = hit[2]
    missing = np.array([w for w in omegas.tolist() if w not in table])
    if len(missing):
        start = start_outside(problem, l, missing, series)
        values = regular_solution(problem, l, missing, inner, series) if inner else ([], [])
        if start is None or values is None:
            return None
        for i, w in enumerate(missing.tolist()):
            table[w] = (start[0][i], start[1][i], [(state[i], log[i]) for state, log in zip(*values)])
    rows = [table[w] for w in omegas.tolist()]
    start = (np.array([row[0] for row in rows]).reshape(len(rows), 2), np.array([row[1] for row in rows]))
    inside = [(np.array([row[2][k][0] for row in rows]).reshape(len(rows), 2),
               np.array([row[2][k][1] for row in rows])) for k in range(len(inner))]
    return start, inside


def _centre_log_u(problem, omegas, series):
    """(log|lim u_0/r^(n/2)|, its sign) at the centre, in the march's own normalisation: the start state u = 0,
    du/dr* = 1 in 3+1 (so u/r -> dr*/dr there), the series' a_0 otherwise."""
    if problem.dimension == 4:
        slope = float(np.asarray(problem.regions[0].dtortoise_dr(np.array([0.0]))).reshape(-1)[0])
        return np.full(len(omegas), np.log(abs(slope))), np.full(len(omegas), np.sign(slope))
    a0 = np.broadcast_to(np.asarray(series(0, omegas), dtype=float)[1], omegas.shape)
    return np.log(np.abs(a0)), np.sign(a0)


def _term_values(problem, l, omegas, pair, cos_gamma, steps, series, fixed, accuracy=None, limit=None):
    """The l-term of the two-point function between the radii ``pair`` (r1 <= r2; r1 may be 0, the centre, where
    only l = 0 is asked for), its size h_l (U_l(r1)^2 + U_l(r2)^2)/2 (see the module docstring) and the relative
    error of both that the far form adds (``accuracy``: see :func:`_log_u_at`).  ``limit(omegas, sizes)``: the
    absolute error the form may add to each term; where it would add more, the term is marched to the far radius
    instead."""
    n = problem.dimension - 2
    radii = tuple(sorted({r for r in pair if r > 0})) or (problem.length_scale,)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        log_u, sign, log_amplitude, form_error = _log_u_at(problem, l, omegas, radii, steps, series, fixed,
                                                           accuracy)
        logs, signs = [], []
        for r in pair:
            if r > 0:
                k = radii.index(r)
                logs.append(log_u[k] - 0.5 * n * np.log(r))
                signs.append(sign[k])
            else:
                log_centre, sign_centre = _centre_log_u(problem, omegas, series)
                logs.append(log_centre - log_amplitude)
                signs.append(sign_centre)
        weight = harmonic_weight(l, n) / np.pi
        value = weight * angular_factor(l, n, cos_gamma) * signs[0] * signs[1] * np.exp(logs[0] + logs[1])
        size = weight * (np.exp(2 * logs[0]) + np.exp(2 * logs[1])) / 2
    if limit is not None:
        over = np.nonzero(~(form_error * size <= limit(omegas, size)))[0]
        if len(over):
            value[over], size[over], form_error[over] = _term_values(problem, l, omegas[over], pair, cos_gamma,
                                                                     steps, series, fixed)
    return value, size, form_error


def _term(problem, l, omegas, pair, cos_gamma, series, tolerance, floor, fixed, steps=32, max_steps=8192,
          form=False):
    """The l-term between the radii ``pair``, its size and its error, refined per frequency (see the module
    docstring).

    ``tolerance`` may be an array (one per frequency); ``floor`` is the size of the sum so far; ``fixed`` =
    (lowest, highest) frequency of the whole set, so that the grids do not depend on which frequencies are still
    summing; ``steps`` the first step count, one for all or one per frequency (32 times a power of two: the
    frequencies that start alike are refined together); ``form`` the far form's accuracy, or False for none (the
    l-sums decide: :func:`_worth_a_form`; one multipole alone is marched: its forms, built l by l on one core,
    cost more than they saved for an array's multipoles, 20 s against 13 s).  Returns also the step count at
    which each frequency converged (its next l starts near it)."""
    n = len(omegas)
    starts = np.broadcast_to(np.asarray(steps, dtype=int), (n,))
    tolerance = np.broadcast_to(np.asarray(tolerance, dtype=float), (n,))
    floor = np.broadcast_to(np.asarray(floor, dtype=float), (n,))
    if len(np.unique(starts)) > 1:
        out = tuple(np.zeros(n) for _ in range(3)) + (np.zeros(n, dtype=int),)
        for start in np.unique(starts):
            index = np.nonzero(starts == start)[0]
            part = _term(problem, l, omegas[index], pair, cos_gamma, series, tolerance[index], floor[index], fixed,
                         int(start), max_steps, form)
            for whole, piece in zip(out, part):
                whole[index] = piece
        return out
    # the far form (derive.solve.farform) gets a share of the term's tolerance (of its size or of the floor,
    # whichever is larger), the march inside it the rest; the form's error is counted where it is used
    share = _form_share(problem, pair, fixed)
    accuracy = float(form) if n and FAR_FORM and form else None
    form_errors = {}
    allowed = {x: (t, f) for x, t, f in zip(omegas.tolist(), tolerance.tolist(), floor.tolist())}

    def limit(w, size):
        t, f = np.array([allowed[x] for x in w.tolist()]).T
        return share * t * np.maximum(size, f)

    def values(w, count):
        value, size, form_error = _term_values(problem, l, w, pair, cos_gamma, count, series, fixed, accuracy,
                                               limit)
        form_errors.update(zip(w.tolist(), form_error.tolist()))
        return (value,), (size,)

    march_share = tolerance * (1 - share) if accuracy is not None else tolerance
    (value,), (size,), (error,), converged = refine(
        values, omegas, march_share, floor, int(starts[0]) if n else 32, max_steps,
        rounding=lambda w: np.array([form_errors.get(x, 0.0) for x in w.tolist()]))
    return value, size, error, converged


def _prepare(problem, omegas, series):
    """Checks shared by the density and the two-point function; the series kernel and the mass threshold."""
    check_supported(problem, any_dimension=True)
    series = series or problem.regions[0].centre_series
    if series is None:
        raise Unsupported("the centre's series kernel is needed for l > 0")
    return series, continuum_threshold(problem)


def _summed(problem, omegas, pair, cos_gamma, tolerance, series, threshold, progress):
    """The l-sum for every frequency above the threshold, on both cores: (value, size, error, l reached)."""
    fixed = (float(np.min(np.sqrt(omegas ** 2 - threshold ** 2))), float(np.max(omegas)))
    distance = tortoise_distance(problem, 0.0, max(pair))
    forms = _worth_a_form(problem, omegas, pair, tolerance, fixed, distance) if FAR_FORM else {}
    if len(omegas) >= SPLIT_FROM and forms:
        _far_forms_first(problem, pair, fixed, forms)
    parts = on_both_cores(_l_sum, len(omegas), lambda index, first: (
        problem, omegas[index], pair, cos_gamma, tolerance, series, fixed, distance, forms,
        progress if first else None))
    value, size, error = np.zeros(len(omegas)), np.zeros(len(omegas)), np.zeros(len(omegas))
    for index, part in parts:
        value[index], size[index], error[index] = part[:3]
    return value, size, error, max(part[3] for _, part in parts)


def _worth_a_form(problem, omegas, pair, tolerance, fixed, distance) -> dict:
    """{l: the accuracy of its far form} for the l whose form is worth building: a form costs about FORM_WORTH
    frequencies' marches, so it is built for the l that at least that many frequencies it covers are expected
    to sum (those whose reach is within QUIET of l).  None for a sum of one term (one point at the centre): its
    one form, held to the old share of a one-term sum (derive.solve.summation.l_sum), cost more than the marches
    it saved (a 4+1 pair next to a mass threshold: 16.5 s against 13.5 s).  The accuracy is the form's share of
    the terms' tolerance."""
    if pair[0] == 0:
        return {}
    reach = omegas * distance
    accuracy = _form_share(problem, pair, fixed) * TERM_SHARE * tolerance
    radii = tuple(sorted({r for r in pair if r > 0})) or (problem.length_scale,)
    forms = {}
    for l in range(min(int(np.max(reach)) + QUIET, MAX_L) + 1):
        summing = reach >= l - QUIET
        if np.count_nonzero(summing) < FORM_WORTH:
            continue
        pieces, _, _, far = _pieces(problem, l, radii, 16, *fixed)
        _, split = _far_form(problem, l, radii, pieces, far, fixed, None)
        if split < len(pieces):
            low = allowed_from(problem, l, pieces[split].a, far)
            if np.count_nonzero(summing & (omegas >= low)) >= FORM_WORTH:
                forms[l] = float(accuracy)
    return forms


def _far_forms_first(problem, pair, fixed, forms):
    """Build the far forms {l: accuracy} on both cores before the frequencies are split in two halves (each half
    would otherwise build every one of them); they are kept (derive.solve.farform) where the halves' worker
    processes find them."""
    radii = tuple(sorted({r for r in pair if r > 0})) or (problem.length_scale,)

    def build(labels):
        built = []
        for l in labels:
            pieces, _, _, far = _pieces(problem, l, radii, 16, *fixed)
            form, _ = _far_form(problem, l, radii, pieces, far, fixed, forms[l])
            built.append(form)
        return built
    labels = sorted(forms)
    for built in split_map(build, [(labels[0::2],), (labels[1::2],)]):
        for form in built:
            if form is not None:
                remember(problem, form)


def density_off_centre(problem, omegas, r0: float, tolerance: float = 1e-10, series=None,
                       progress=None) -> DensityResult:
    """The l-summed density per unit omega at radius r0 (> 0), in any region of a spacetime with a centre: the
    diagonal of the two-point function (:func:`two_point`).

    Each frequency sums its own l: its reach omega r0* (the tortoise distance from the centre) sets how many
    terms count and the error each term may carry (derive.solve.summation.l_sum), and it stops after three quiet
    terms beyond its reach, while the others go on.  Each frequency's next l starts at half the step count where its
    last term converged (nested grids: a start that is high only means finer levels are compared)."""
    if not r0 > 0:
        raise Unsupported("the point must lie off the centre (r0 > 0); at r0 = 0 use the centre density")
    series, threshold = _prepare(problem, omegas, series)
    omegas = np.asarray(omegas, dtype=float)
    if threshold > 0 and np.any(omegas <= threshold):   # no continuum below the mass (see centre.py)
        above = np.nonzero(omegas > threshold)[0]
        parts = [(above, density_off_centre(problem, omegas[above], r0, tolerance, series, progress))
                 ] if len(above) else []
        return merge(omegas, tolerance, parts)
    total, _, error, _ = _summed(problem, omegas, (r0, r0), 1.0, tolerance, series, threshold, progress)
    return DensityResult(omegas, total, error, np.zeros_like(total), error / total, np.zeros_like(total), tolerance)


def two_point(problem, omegas, r1: float, r2: float, cos_gamma: float, tolerance: float = 1e-10, series=None,
              progress=None) -> TwoPointResult:
    """The spectral two-point function per unit omega between static points at radii r1 and r2 (either may be 0,
    the centre) an angle gamma apart (``cos_gamma``), in a spacetime with a regular centre; zero below the mass
    of a massive field (no continuum there).  Errors are absolute; the tolerance is relative to the scale (the
    sum of the terms' sizes, at most the mean of the two points' densities)."""
    series, threshold = _prepare(problem, omegas, series)
    omegas = np.asarray(omegas, dtype=float)
    if not (r1 >= 0 and r2 >= 0 and -1.0 <= cos_gamma <= 1.0):
        raise Unsupported("radii must be >= 0 and cos(gamma) within [-1, 1]")
    pair = (min(r1, r2), max(r1, r2))
    n = len(omegas)
    value, size, error = np.zeros(n), np.zeros(n), np.zeros(n)
    l_max = 0
    above = np.nonzero(omegas > threshold)[0]
    if len(above):
        part = _summed(problem, omegas[above], pair, float(cos_gamma), tolerance, series, threshold, progress)
        value[above], size[above], error[above] = part[:3]
        l_max = part[3]
    return TwoPointResult(omegas, value, error, size, (r1, r2), float(cos_gamma), tolerance, l_max)


def _l_sum(problem, omegas, pair, cos_gamma, tolerance, series, fixed, distance, forms, progress=None):
    """The sum over l for each frequency (derive.solve.summation.l_sum): (value, size, error, the largest l
    reached).  With the centre as one point only l = 0 is summed (the others vanish there).  Each frequency's
    next l starts at half the step count where its last term converged: 32 times a power of two (never a mean
    of two counts: the grids of a refinement must stay nested)."""
    steps = np.full(len(omegas), 32)

    def term(l, summing, share, floor):
        value, size, error, converged = _term(problem, l, omegas[summing], pair, cos_gamma, series, share, floor,
                                              fixed, steps=steps[summing], form=forms.get(l, False))
        steps[summing] = np.maximum(32, converged // 2)
        return (value,), (size,), (error,)

    (total,), (size,), (error,), l = l_sum(term, len(omegas), tolerance, omegas * distance, MAX_L, progress,
                                           single=pair[0] == 0)
    return total, size, error, l


def multipole_density(problem, omegas, r0: float, l: int, tolerance: float = 1e-10, series=None) -> DensityResult:
    """The l-th term of the density at radius r0 > 0 (per unit omega): h_l |U_l(r0)|^2, so that the two-point
    function between two points at r0 an angle gamma apart is sum_l of it times G_l(cos gamma)
    (:func:`angular_factor`).  Refined to the tolerance relative to the term itself."""
    if not r0 > 0:
        raise Unsupported("a multipole of the density needs a point off the centre (r0 > 0)")
    series, threshold = _prepare(problem, omegas, series)
    omegas = np.asarray(omegas, dtype=float)
    value, error = np.zeros(len(omegas)), np.zeros(len(omegas))
    above = np.nonzero(omegas > threshold)[0]
    if len(above):
        w = omegas[above]
        fixed = (float(np.min(np.sqrt(w ** 2 - threshold ** 2))), float(np.max(w)))
        value[above], _, error[above], _ = _term(problem, l, w, (r0, r0), 1.0, series, tolerance, 0.0, fixed)
    return DensityResult(omegas, value, error, np.zeros_like(value), error / np.maximum(np.abs(value), 1e-300),
                         np.zeros_like(value), tolerance)
