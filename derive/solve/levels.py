"""Bound levels that accumulate at the continuum's threshold, and their share of a detector's response
(docs/conventions.md section 14).

A massive field around a gravitating body feels V -> mu^2 - C/r far away (C = 2 M mu^2 outside a mass M, in the
tortoise coordinate), an attractive Coulomb-like tail: each l holds infinitely many bound levels below the mass,
hydrogen-like, crowding towards it.  In x = 1/sqrt(mu^2 - omega^2) they follow

    n = a x + delta(x),   a = C/2,      w_n = s(x_n)/x_n^3,

with the quantum defect delta and the reduced weight s smooth functions of the energy, so of 1/x (quantum defect
theory: M. J. Seaton, Rep. Prog. Phys. 46, 167 (1983), from memory).  The lowest levels are found and weighed by
:func:`derive.solve.bound.bound_states`; delta and s are fitted through the last ``TERMS`` of them as polynomials
in x_N/x, and every level beyond follows from the fit: the sum over them of w_n g(omega_n) is taken level by level
out to ``EXPLICIT`` model levels and, past those (where omega_n is within 1e-8 of the mass), as g(mu) times
s_0 a^3 zeta(3, n - delta_0), the Hurwitz zeta function.  Its error is the difference between the fits through
the last ``TERMS`` and the last ``TERMS - 1`` levels, plus the found levels' own errors carried through.

Without a Coulomb-like tail (in 4+1 a mass gives V an inverse-square tail, mu^2 + c/r^2) an l holds finitely many
levels, all found, or, where c < -1/4, a geometric series, kappa_{n+1}/kappa_n -> exp(-pi/s) with
s = sqrt(-c - 1/4) and w_{n+1}/w_n -> exp(-2 pi/s): summed from the last found level with those ratios
(:func:`_geometric_tail`; docs/conventions.md section 14).

A check of the whole (tests/test_levels.py): the density the levels make per unit omega near the threshold,
w_n dn/domega -> s(inf) a mu, is the continuum's density just above it, computed by another path (the mode's
amplitude far away): the spectral density is continuous across a Coulomb threshold.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import mpmath
import numpy as np

from derive.solve.bound import BoundStates, ModeList, bound_states
from derive.solve.centre import Unsupported, continuum_threshold, coulomb_strength, efimov_exponent

TERMS = 4          # the fits of delta and s: powers 0..3 of x_N/x, through the last four levels
FIRST_COUNT = 8    # levels found before the model takes over (the model's error then ~1e-6 of the tail)
MOST_COUNT = 20    # found levels at most, where the tail's error needs more
STEP_COUNT = 4
EXPLICIT = 4000    # model levels summed one by one beyond the found ones
MAX_L = 60         # the l at which an off-centre levels' sum that has not fallen below the tolerance gives up


@dataclass
class LevelModel:
    """delta(x) and s(x) as polynomials in y = x_ref/x (``defect``, ``strength``: coefficients of y^0, y^1, ...)."""

    threshold: float
    spacing: float        # a = C/2
    reference: float      # x_ref
    defect: np.ndarray
    strength: np.ndarray

    @classmethod
    def fitted(cls, states: BoundStates, threshold: float, spacing: float, terms: int) -> LevelModel:
        n = np.arange(1, len(states.omega) + 1, dtype=float)[-terms:]
        x = 1.0 / np.sqrt(threshold ** 2 - states.omega[-terms:] ** 2)
        reference = float(x[-1])
        powers = (reference / x)[:, None] ** np.arange(terms)[None, :]
        defect = np.linalg.solve(powers, n - spacing * x)
        strength = np.linalg.solve(powers, states.weight[-terms:] * x ** 3)
        return cls(threshold, spacing, reference, defect, strength)

    def _polynomial(self, coefficients, x):
        y = self.reference / x
        return sum(c * y ** k for k, c in enumerate(coefficients))

    def x_of(self, n: np.ndarray) -> np.ndarray:
        """x_n: the root of a x + delta(x) = n, by Newton's method from x = (n - delta_0)/a."""
        x = (n - self.defect[0]) / self.spacing
        slope_terms = [(k, c) for k, c in enumerate(self.defect) if k > 0]
        for _ in range(50):
            residual = self.spacing * x + self._polynomial(self.defect, x) - n
            slope = self.spacing - sum(k * c * (self.reference / x) ** k / x for k, c in slope_terms)
            step = residual / slope
            x = x - step
            if np.all(np.abs(step) <= 1e-15 * x):
                break
        return x

    def levels(self, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(omega_n, w_n) of the model for the level numbers n (counted from 1)."""
        x = self.x_of(np.asarray(n, dtype=float))
        omega = np.sqrt(self.threshold ** 2 - 1.0 / x ** 2)
        return omega, self._polynomial(self.strength, x) / x ** 3

    def remainder(self, first: int) -> float:
        """sum over n >= first of s_0/x_n^3 with x_n = (n - delta_0)/a: s_0 a^3 zeta(3, first - delta_0)."""
        return float(self.strength[0] * self.spacing ** 3 * mpmath.zeta(3, first - self.defect[0]))


@dataclass
class LevelSum:
    """The levels' share of a detector's response at each gap: the found levels' terms and the model's tail,
    each with its error."""

    states: BoundStates
    found: np.ndarray
    found_error: np.ndarray
    tail: np.ndarray
    tail_error: np.ndarray
    model: LevelModel | None

    @property
    def value(self) -> np.ndarray:
        return self.found + self.tail

    @property
    def error(self) -> np.ndarray:
        return self.found_error + self.tail_error

    def threshold_density(self) -> float | None:
        """The density per unit omega the levels make at the threshold, s(inf) a mu (the continuum's there)."""
        if self.model is None:
            return None
        return float(self.model.strength[0] * self.model.spacing * self.model.threshold)


def _spread(states: BoundStates, last: int) -> float:
    """The largest relative error of the last ``last`` found weights, each against itself (between two points
    against the mean diagonal weight), not against BoundStates.size's floor of 1e-3 of the largest: the fitted
    levels' errors carried into the tail in proportion."""
    own = np.abs(states.weight) if states.scale is None else states.scale
    return float(np.max(states.weight_error[-last:] / np.maximum(own[-last:], 1e-300)))


def _geometric_tail(states: BoundStates, threshold: float, s: float, power) -> tuple[np.ndarray, np.ndarray]:
    """The levels beyond the found ones of a geometric series, sum over them of w_n g(omega_n), and its error.

    Far beyond the well a level's mode is sqrt(r) K_is(kappa r) (the inverse-square tail's decaying solution): the
    levels follow kappa_{n+1} = rho kappa_n, rho = exp(-pi/s), and, the mode's shape inside fixed and its norm
    2 omega int u^2 dr* growing like 1/kappa^2, the weights w_{n+1} = rho^2 (omega_n/omega_{n+1}) w_n, both up to
    corrections of order (kappa L)^2 that die along the series.  The tail continues from the last found level
    with these ratios; its error is the difference from continuing it with the last found pair's own ratios
    (whose corrections are larger than any beyond), or the whole tail when only one level was found, plus the
    last two found weights' errors carried in proportion."""
    omega, weight = states.omega, states.weight
    kappa = np.sqrt(threshold ** 2 - omega ** 2)

    def continued(rho, ratio):
        # terms until rho^(2k) is below 1e-17 (a handful for strong tails; a few hundred at s ~ 10)
        k = np.arange(1, int(np.ceil(np.log(1e-17) / (2 * np.log(rho)))) + 1, dtype=float)
        omega_k = np.sqrt(threshold ** 2 - (kappa[-1] * rho ** k) ** 2)
        weight_k = weight[-1] * ratio ** k * omega[-1] / omega_k
        return np.sum(power(omega_k) * weight_k[None, :], axis=1)
    rho = np.exp(-np.pi / s)
    tail = continued(rho, rho ** 2)
    if len(omega) >= 2 and 0 < kappa[-1] < kappa[-2] and weight[-2] * weight[-1] > 0:
        measured = continued(kappa[-1] / kappa[-2], weight[-1] * omega[-1] / (weight[-2] * omega[-2]))
        error = np.abs(tail - measured)
    else:
        error = np.abs(tail)
    return tail, error + 10 * _spread(states, min(2, len(omega))) * np.abs(tail)


def _tail(model: LevelModel, first: int, power) -> tuple[np.ndarray, np.ndarray]:
    """sum over n >= first of w_n g(omega_n), g = ``power`` (a function of omega, one row per gap), and the error
    of its closed-form remainder."""
    n = np.arange(first, first + EXPLICIT, dtype=float)
    omega, weight = model.levels(n)
    explicit = np.sum(power(omega) * weight[None, :], axis=1)
    rest = model.remainder(first + EXPLICIT) * power(np.array([model.threshold]))[:, 0]
    return explicit + rest, np.abs(rest) * 10.0 / model.x_of(np.array([first + EXPLICIT], dtype=float))[0]


_STATES: dict = {}    # (id(problem), l, r0, r1, tolerance, count) -> (problem, BoundStates): the same levels are
                      # asked for again at every delay of a pair design and every gap set of a design


def _states(problem, l, r0, tolerance, count, r1):
    """bound_states(problem, l, r0, tolerance, count, r1=r1), kept (checked to belong to the same problem
    object; the store is emptied past a few hundred entries)."""
    key = (id(problem), l, r0, r1, tolerance, count)
    hit = _STATES.get(key)
    if hit is not None and hit[0] is problem:
        return hit[1]
    states = bound_states(problem, l, r0, tolerance, count=count, r1=r1)
    if len(_STATES) >= 256:
        _STATES.clear()
    _STATES[key] = (problem, states)
    return states


def level_sum(problem, power, terms_of, tolerance: float, scale: np.ndarray, l: int = 0, r0: float = 0.0,
              r1: float | None = None, angular: float = 1.0) -> LevelSum:
    """The share of the levels of one l at r0 (the centre: l = 0 only) in the response: sum over n of
    w_n g(omega_n) with its error.  With ``r1`` the weights are those between r0 and r1 (signed) times
    ``angular`` (the harmonics' G_l(cos gamma) between the two points): the levels' share of a pair's integrals.

    ``power(omega)`` is g at each gap (rows) for frequencies of t; ``terms_of(modes)`` the found levels' terms and
    their errors (gaps x levels, detector.response.normal_mode_terms); ``scale`` what the tolerance refers to
    at each gap (the response).  FIRST_COUNT levels are found, then STEP_COUNT more at a time, until the error is
    below a tenth of the tolerance of the scale, stops improving, or MOST_COUNT levels are reached.  The levels
    themselves are found to a tighter tolerance where their terms' errors need it (a steep switching spectrum
    carries a level's frequency error into its term 30 times over), down to 1e-13."""
    threshold = continuum_threshold(problem)
    spacing = coulomb_strength(problem) / 2
    count = FIRST_COUNT
    best = None
    precision = tolerance
    while True:
        states = _states(problem, l, r0, precision, count, r1)
        if angular != 1.0:
            states = replace(states, weight=angular * states.weight, weight_error=abs(angular) * states.weight_error,
                             scale=None if states.scale is None else abs(angular) * states.scale)
        modes = ModeList(states.omega, states.omega_error, states.weight, states.weight_error,
                         np.full(len(states.omega), l), ())
        if not np.all(np.isfinite(states.omega)) or not np.all(np.isfinite(states.weight)):
            raise Unsupported(f"a bound level of l = {l} was not found in its bracket (near omega = "
                              f"{float(np.nanmax(states.omega)):.10g}): the levels' share is not computed")
        terms, errors = terms_of(modes)
        found, found_error = np.sum(terms, axis=1), np.sum(errors, axis=1)
        if precision > 1e-13 and np.any(found_error > 0.3 * tolerance * (np.abs(scale) + np.abs(found))):
            precision = max(precision / 10, 1e-13)
            continue
        if not states.truncated:   # a finite set (no Coulomb-like tail), all of it found
            return LevelSum(states, found, found_error, np.zeros_like(found), np.zeros_like(found), None)
        s = efimov_exponent(problem, l)
        if s is not None:          # a geometric series (a supercritical inverse-square tail)
            tail, tail_error = _geometric_tail(states, threshold, s, power)
            result = LevelSum(states, found, found_error, tail, tail_error, None)
            worst = float(np.max(result.error / np.maximum(np.abs(scale), 1e-300)))
            if worst <= 0.1 * tolerance or count >= MOST_COUNT or len(states.omega) < count:
                return result      # (fewer than asked: the rest lie too close to the threshold to be found)
            count += STEP_COUNT
            continue
        if len(states.omega) < TERMS + 1 or spacing <= 0:
            if count >= MOST_COUNT:
                raise Unsupported(f"l = {l}: more than {MOST_COUNT} bound levels and no Coulomb-like series to sum "
                                  "the rest by: the levels' share is not computed")
            count += STEP_COUNT
            continue
        model = LevelModel.fitted(states, threshold, spacing, TERMS)
        rougher = LevelModel.fitted(states, threshold, spacing, TERMS - 1)
        first = len(states.omega) + 1
        tail, rest_error = _tail(model, first, power)
        other, _ = _tail(rougher, first, power)
        # the fitted levels' own errors, carried into the tail in proportion (the fit is an extrapolation)
        tail_error = np.abs(tail - other) + rest_error + 10 * _spread(states, TERMS) * np.abs(tail)
        result = LevelSum(states, found, found_error, tail, tail_error, model)
        worst = float(np.max(result.error / np.maximum(np.abs(scale), 1e-300)))
        if best is not None and worst >= best[0]:
            # more levels did not help (the higher levels' own errors, carried into the fit, grow): the fewer
            return best[1]
        if worst <= 0.1 * tolerance or count >= MOST_COUNT:
            return result
        best = (worst, result)
        count += STEP_COUNT


def over_l(visit, at_centre: bool) -> int:
    """Visit l = 0, 1, 2, ... (``visit(l)`` returns whether that l added nothing above its tolerance) until two in
    a row are quiet; only l = 0 ``at_centre`` (the only l that reaches a point at the centre).  Returns the last
    l; raises Unsupported past MAX_L."""
    l, quiet = 0, 0
    while True:
        small = visit(l)
        if at_centre:
            return l
        quiet = quiet + 1 if small else 0
        if quiet >= 2:
            return l
        if l >= MAX_L:
            raise Unsupported(f"the bound levels did not fall below the tolerance by l = {l}")
        l += 1


def sum_over_l(share_of, scale, tolerance: float, at_centre: bool) -> tuple[list[LevelSum], int]:
    """The levels' shares of l = 0, 1, 2, ... (``share_of(l)``: a LevelSum, or None for an l that cannot
    contribute) until two in a row add below 1e-2 of the tolerance of ``scale`` (:func:`over_l`).  Returns the
    shares and the last l."""
    sums = []

    def visit(l):
        levels = share_of(l)
        if levels is None:
            return True
        sums.append(levels)
        return bool(np.all(np.abs(levels.value) + levels.error <= 1e-2 * tolerance * np.abs(scale)))
    return sums, over_l(visit, at_centre)
