"""Quasi-bound resonances of a massive field outside a horizon (docs/conventions.md section 14).

Outside a black hole a massive field feels V -> mu^2 - C/r far away: below the mass the Coulomb-like well holds
hydrogen-like levels, but the horizon lets each leak away.  They are resonances: complex frequencies
z_n = omega_n - i Gamma_n/2 where the solution decaying far away is purely ingoing at the horizon.  On the real
axis, with u_dec the solution decaying far away and

    u_dec -> A(omega) e^{+i omega r*} + conj(A(omega)) e^{-i omega r*}     at the horizon,

A is analytic in omega and vanishes at each z_n; the up modes' density below the mass is proportional to
1/|A|^2, a Lorentzian peak of half width Gamma_n/2 at each omega_n (Gamma_n can lie many orders of magnitude
below the level spacing: a frequency quadrature would step over it).

Method (all on the real axis, no complex march):
* scan: A on a grid in x = 1/kappa (kappa = sqrt(mu^2 - omega^2), the levels are nearly evenly spaced in x,
  x_n ~ n/(C/2)), thirty-two points per level, refined until its phase has settled; across each resonance the
  phase of A falls by pi (arg(omega - z_n) goes from pi to 0), elsewhere it drifts slowly; a run of intervals
  each falling by more than pi/16 is one resonance (resonances wider than about a sixth of the level spacing
  merge into the drift: the density there is smooth on the spacing, and none is listed);
* each drop is located and refined by fitting A (a polynomial of degree four through five points) and taking the
  root nearest the real axis, three times with the points closing in on it;
* errors: the change of the root with the march's grid doubled and with the fit's points twice as close.
A width below its error is reported as a bound (the real-axis value of A carries an absolute error of about the
march's relative error times its typical size, which limits the width resolved to that times the spacing).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.solve.centre import Unsupported, continuum_threshold, coulomb_strength

LEVELS = 6           # resonances listed by derive spectrum
PER_LEVEL = 32       # scan points per level spacing
FIT = np.arange(-2.0, 3.0)   # the fit's points, in units of its half spacing h
STEPS = (32, 1024)   # the march's base and largest step counts


@dataclass
class Resonances:
    """Quasi-bound resonances of one l: omega_n (of t) and the width Gamma_n (the decay rate of the mode's
    energy, twice -Im z_n), each with its error; ``truncated``: infinitely many more accumulate at the mass."""

    l: int
    omega: np.ndarray
    omega_error: np.ndarray
    width: np.ndarray
    width_error: np.ndarray
    truncated: bool
    threshold: float

    def resolved(self) -> np.ndarray:
        """Whether each width is larger than its error (else it is only bounded by it)."""
        return self.width > self.width_error

    def describe(self, digits: int = 10) -> str:
        if not len(self.omega):
            return ("none narrower than about a sixth of the level spacing (the up modes' density below the mass "
                    "is smooth on that scale)")
        parts = []
        for w, width, error, ok in zip(self.omega, self.width, self.width_error, self.resolved()):
            parts.append(f"{w:.{digits}g} (width {width:.3e})" if ok else f"{w:.{digits}g} (width below {error:.1e})")
        text = ", ".join(parts)
        if self.truncated:
            text += f", and infinitely many more accumulating at omega = {self.threshold:.{digits}g}"
        return text


def _amplitude(problem, l, omegas, steps, fixed, reference):
    """A(omega)/u_dec(reference) for frequencies below the mass: analytic in omega, without zeros of its own
    when ``reference`` lies beyond every outer turning point (u_dec has no node there)."""
    from derive.solve.horizon import START, _run

    return _run(problem, l, omegas, steps, START, probe=reference, fixed=fixed).amplitude[0]


def _reference(problem, l, omegas) -> float:
    """A radius beyond the outer turning point of the highest frequency (V > omega^2 from there on)."""
    from derive.solve.centre import outer_turning_point

    return 1.25 * outer_turning_point(problem, l, float(np.max(omegas)), problem.regions[0].lower * (1 + 1e-9))


def _settled(problem, l, omegas, relative: bool, agreement: float):
    """(A/u_dec at ``omegas``, the step count) on the grids STEPS[0], 2 STEPS[0], ... until two successive ones
    agree to ``agreement`` at every frequency, of each value (``relative``) or of their median size (or the grid
    reaches STEPS[1]); also (the layout, the reference radius) on which it settled."""
    from derive.solve.horizon import layout

    reference = _reference(problem, l, omegas)
    fixed = layout(problem, l, omegas, probe=reference)
    steps = STEPS[0]
    coarse = _amplitude(problem, l, omegas, steps, fixed, reference)
    while True:
        fine = _amplitude(problem, l, omegas, 2 * steps, fixed, reference)
        steps *= 2
        finite = np.isfinite(fine)
        size = np.abs(fine) if relative else (np.median(np.abs(fine[finite])) if np.any(finite) else np.inf)
        if np.all(finite) and np.all(np.abs(fine - coarse) <= agreement * size) or steps >= STEPS[1]:
            return fine, steps, fixed, reference
        coarse = fine


def quasi_bound(problem, l: int = 0, count: int = 4) -> Resonances:
    """The lowest ``count`` quasi-bound resonances of angular label l outside a horizon (see the module
    docstring)."""
    from derive.solve.exterior import _batches

    threshold = continuum_threshold(problem)
    if problem.regions[0].lower_kind != "horizon" or threshold == 0.0:
        raise Unsupported("quasi-bound resonances need a massive field outside a horizon")
    spacing = coulomb_strength(problem) / 2     # levels ~ n/spacing in x
    if spacing <= 0:
        raise Unsupported("no attractive Coulomb-like tail: the resonances are not scanned for")
    x_low = 1.0 / threshold * (1 + 1e-6)
    x_high = (l + count + 1.0) / spacing
    x = np.linspace(x_low, x_high, int(np.ceil((x_high - x_low) * spacing * PER_LEVEL)) + 1)
    omegas = np.sqrt(threshold ** 2 - 1.0 / x ** 2)
    phase = np.zeros(len(x))
    groups = _batches(problem, omegas)
    for group in np.unique(groups):
        index = np.nonzero(groups == group)[0]
        phase[index] = np.angle(_settled(problem, l, omegas[index], relative=False, agreement=1e-9)[0])
    # increments wrapped into (-3 pi/2, pi/2]: a resonance narrower than the grid drops the phase by pi within
    # one interval, which plain unwrapping could read as +pi
    step = np.mod(np.diff(phase) + 1.5 * np.pi, 2 * np.pi) - 1.5 * np.pi
    drops = np.nonzero(step < -np.pi / 16)[0]
    found = []
    start = None
    for k, i in enumerate(drops):    # runs of consecutive falling intervals: one resonance each
        start = i if start is None else start
        if k + 1 == len(drops) or drops[k + 1] != i + 1:
            found.append((start, i + 1))
            start = None
    # a run holds one resonance when it drops by more than pi/3 (a wide one spreads part of its pi beyond the
    # run) and less than 3 pi/2 (more: several the scan could not separate); a run dropping less is the wing of
    # a resonance too wide to list
    total = [float(np.sum(step[a:b])) for a, b in found]
    if any(t <= -1.5 * np.pi for t in total):
        raise Unsupported(f"l = {l}: the resonances could not be separated on the scan (phase drops "
                          + ", ".join(f"{t / np.pi:.2f} pi" for t in total) + ")")
    found = [run for run, t in zip(found, total) if t < -np.pi / 3]
    if not found:
        return Resonances(l, *(np.zeros(0) for _ in range(4)), spacing > 0, threshold)
    found = found[:count]
    results = [_refine(problem, l, omegas[a], omegas[b]) for a, b in found]
    values = np.array(results).T
    return Resonances(l, values[0], values[1], values[2], values[3], True, threshold)


def _root(problem, l, centre, h, steps, fixed, reference):
    """The root nearest ``centre`` of the polynomial through A/u_dec at centre + h FIT."""
    values = _amplitude(problem, l, centre + h * FIT, steps, fixed, reference)
    roots = centre + h * np.roots(np.polyfit(FIT, values, len(FIT) - 1))
    return roots[np.argmin(np.abs(roots - centre))]


def _refine(problem, l, low, high) -> tuple[float, float, float, float]:
    """(omega_n, its error, Gamma_n, its error) for the resonance whose phase drop lies in [low, high]."""
    # a grid on which A/u_dec has settled at both ends of the (widened) bracket
    ends = np.array([low - (high - low), high + (high - low)])
    _, steps, fixed, reference = _settled(problem, l, ends, relative=True, agreement=1e-10)
    h = (high - low) / 2
    z = _root(problem, l, (low + high) / 2, h, steps, fixed, reference)
    for _ in range(3):
        # the points close in on the root, but stay about as far apart as the root lies from the real axis (closer
        # points would extrapolate the polynomial far beyond them) and above 1/256 of the bracket (the real-axis
        # value of A has an absolute error of the march's relative error times its size a level spacing away)
        h = max(min(h / 8, 2 * abs(z.imag)), (high - low) / 256)
        z = _root(problem, l, z.real, h, steps, fixed, reference)
    closer = _root(problem, l, z.real, h / 2, steps, fixed, reference)
    finer = _root(problem, l, z.real, h, 2 * steps, fixed, reference)
    error = abs(closer - z) + abs(finer - z) + 4 * np.finfo(float).eps * abs(z)
    return float(z.real), float(error), float(-2 * z.imag), float(2 * error)
