"""Real roots of a metric function at the parameters' values, to 40 digits (no sympy decision on radicals).

Used by the loader (a region bound written as ``horizon``) and by the field stage (derive/fields/horizons.py),
which finds and classifies the horizons at the regions' ends.
"""

from __future__ import annotations

import mpmath
import sympy as sp

DIGITS = 40
MAX_DEGREE = 60          # numerators of higher degree in r are treated as not polynomial


def _numerator_poly(expr, r):
    """(numerator, denominator) of a rational function of r, the numerator a Poly in r; None otherwise."""
    expr = sp.cancel(sp.together(expr))
    if not expr.is_rational_function(r):
        return None
    numer, denom = sp.fraction(expr)
    try:
        poly = sp.Poly(numer, r)
    except sp.PolynomialError:
        return None
    if poly.degree() > MAX_DEGREE or poly.degree() < 1:
        return None
    return poly, denom


def _number(expr, values) -> mpmath.mpf | None:
    try:
        value = sp.N(sp.S(expr).subs(values), DIGITS)
    except (TypeError, ValueError):
        return None
    if not value.is_number or not value.is_real:
        return None
    return mpmath.mpf(str(value))


def exact_values(values: dict) -> dict:
    """The parameters' double values as exact rationals, so that 40 digits mean 40 digits."""
    return {k: sp.Rational(repr(float(v))) for k, v in values.items()}


def real_roots(expr, r, values) -> list[mpmath.mpf] | None:
    """The real roots of a rational function's numerator at the parameters' values (40 digits), or None."""
    split = _numerator_poly(expr, r)
    if split is None:
        return None
    poly, _ = split
    exact = exact_values(values)
    coefficients = []
    for c in poly.all_coeffs():
        number = _number(c, exact)
        if number is None:
            return None
        coefficients.append(number)
    while coefficients and coefficients[0] == 0:
        coefficients.pop(0)
    if len(coefficients) < 2:
        return []
    with mpmath.workdps(DIGITS):
        try:
            roots = mpmath.polyroots(coefficients, maxsteps=400, extraprec=4 * DIGITS)
        except mpmath.libmp.NoConvergence:
            return None
        scale = max(abs(z) for z in roots) if roots else 1
        return sorted(mpmath.re(z) for z in roots if abs(mpmath.im(z)) <= mpmath.mpf(10) ** (-25) * (1 + scale))




def horizon_bounds(f, r, values, lower, upper):
    """Resolve region bounds written as ``horizon``: ``lower`` and ``upper`` are each "horizon", a number (the
    other bound's value) or None.  The region is the interval where f > 0 whose ends are the given numbers or
    simple roots of f: returns (lower, upper) with every "horizon" replaced by its root (an mpf at 40 digits).
    Raises ValueError saying why when there is no such interval or more than one."""
    with mpmath.workdps(DIGITS):
        roots = real_roots(f, r, values)
        if roots is None:
            raise ValueError("a bound written as 'horizon' needs f = -g_tt rational in r with numeric coefficients "
                             "at the parameters' values")
        positive = sorted(z for z in roots if z > 0)
        edges = [mpmath.mpf(0)] + positive + [mpmath.inf]
        exact = exact_values(values)

        def f_at(x):
            return _number(sp.S(f).subs(exact).subs(r, sp.Float(x, DIGITS)), {})
        candidates = []
        for a, b in zip(edges[:-1], edges[1:]):
            middle = (a + b) / 2 if b != mpmath.inf else a + 1 + abs(a)
            value = f_at(middle)
            if value is None or value <= 0:
                continue
            # a bound left out means the interval reaches r = 0 or infinity: f must stay positive there
            ok_lower = (a > 0 and a in positive) if lower == "horizon" else (a == 0 if lower is None else
                                                                            a <= lower < b)
            ok_upper = (b != mpmath.inf) if upper == "horizon" else (b == mpmath.inf if upper is None else
                                                                    a < upper <= b)
            if ok_lower and ok_upper:
                candidates.append((a, b))
        listed = ", ".join(mpmath.nstr(z, 12) for z in positive) or "none"
        if not candidates:
            raise ValueError(f"no interval where f > 0 ends at a root of f as written (positive roots of f: {listed})")
        if len(candidates) > 1:
            raise ValueError(f"several intervals where f > 0 end at roots of f (positive roots: {listed}); give the "
                             "other bound as a number to choose one")
        a, b = candidates[0]
        return (a if lower == "horizon" else None), (b if upper == "horizon" else None)
