"""Horizons found, not assumed: the roots of f at a region's ends, and f and h with each root divided out.

A region's end is a horizon when f and h both vanish there.  derive does not take the user's word for it, nor
ask sympy to decide it with radicals (which can run for many minutes): it evaluates the end at the parameters'
values to 40 digits and compares it with the real roots of f's numerator, found numerically (mpmath's
polynomial root finder) when f is rational in r, or checks f there and refines the root (mpmath's findroot)
otherwise.  Roots strictly inside a region are refused: the region would not be static throughout.

Each horizon gets a symbol of its own (r_h for a black hole, r_c for a cosmological horizon, numbered when
there are several) whose value is the root rounded once to a double.  Where f is rational in r, its numerator
is divided by (r - r_h) with r_h kept as a symbol: f = (r - r_h) g(r) exactly, with the remainder N(r_h),
which vanishes at the root, left out.  Everything near the horizon (the Frobenius series, the potential, dr*/dr
and their kernels) is derived from this factored form, so

* the Frobenius recursion is rational in r_h and the parameters (no radicals such as M + sqrt(M^2 - Q^2) for
  sympy to cancel), and
* a kernel evaluated at r close to r_h computes r - r_h exactly (Sterbenz), whether the horizon was written with
  a parameter (r = 2M), with numbers (r = 3/5, which no double represents) or has no closed form at all.

The factored f is the spacetime whose horizon sits exactly at the double r_h: it differs from the spec's by
the remainder, a relative change of about 1e-16 of the mass, far below every tolerance derive accepts.
"""

from __future__ import annotations

from dataclasses import dataclass

import mpmath
import sympy as sp

from derive.errors import GeometryError
from derive.spec.roots import DIGITS, _number, _numerator_poly, exact_values, real_roots



@dataclass(frozen=True)
class Horizon:
    """One simple root of f (and h) at an end of a region."""

    symbol: sp.Expr              # r_h, r_c, ... (a new positive symbol whose value is ``value``), or the
                                 # spec's own bound when a double holds it exactly (a parameter, 2*M, 3)
    value: float                 # the root rounded to a double
    digits: str                  # the root to 30 significant digits
    exact: sp.Expr | None        # a closed form, when the spec's bound gives one
    side: str                    # "lower" or "upper" end of the region
    kind: str                    # "black hole" (lower end) or "cosmological" (upper end)
    surface_gravity: float       # kappa = sqrt(f'(r_h) h'(r_h))/2 at the parameters' values

    @property
    def is_new(self) -> bool:
        """True when ``symbol`` is a symbol of its own (an extra parameter of the kernels)."""
        return self.symbol.is_Symbol and self.exact != self.symbol

    @property
    def hawking_temperature(self) -> float:
        return self.surface_gravity / (2 * float(mpmath.pi))


def _value_at(expr, r, point, values):
    with mpmath.workdps(DIGITS):
        return _number(sp.S(expr).subs(exact_values(values)).subs(r, sp.Float(point, DIGITS)), {})


def _fresh_symbol(base: str, taken: set[str]) -> sp.Symbol:
    name, count = base, 1
    while name in taken:
        count += 1
        name = f"{base}{count}"
    taken.add(name)
    return sp.Symbol(name, positive=True)


def find_horizons(field, taken: set[str]) -> list[Horizon]:
    """The horizons at the ends of one region (RegionField), each a simple root of f and h there.

    ``taken`` holds the names in use (parameters, coordinates, horizons of other regions); new names are added.
    Raises GeometryError when f vanishes strictly inside the region."""
    with mpmath.workdps(DIGITS):
        return _find_horizons(field, taken)


def _find_horizons(field, taken: set[str]) -> list[Horizon]:
    r, f, h, values = field.r, field.f, field.h, field.values
    domain = field.region.domain_of(r)
    ends = {"lower": domain.lower if domain is not None else None,
            "upper": domain.upper if domain is not None else None}
    roots = real_roots(f, r, values)
    found = []
    bounds = {}
    for side, bound in ends.items():
        bounds[side] = None if bound is None else _number(bound, exact_values(values))
    if roots is not None:
        lo, hi = bounds["lower"], bounds["upper"]
        lo_v = lo if lo is not None else mpmath.mpf(0)

        def inside(root):
            tolerance = mpmath.mpf(10) ** (-25) * (1 + abs(root))
            return root > 0 and root > lo_v + tolerance and (hi is None or root < hi - tolerance)
        within = [root for root in roots if inside(root)]
        if within:
            index = list(field.spacetime.regions).index(field.name)
            positive = ", ".join(mpmath.nstr(z, 15) for z in roots if z > 0)
            raise GeometryError(
                f"region '{field.name}': f = -g_tt vanishes at {field.r} = {mpmath.nstr(within[0], 15)}, inside the "
                f"region, so the region is not static throughout (the positive roots of f: {positive}); bound the "
                "region by the horizon, written exactly (e.g. where = \"r > 2*M\"; a bound that only approximates a "
                "root is not a horizon), or split it there",
                file=field.spacetime.path, key=f"region[{index}].where")
    for side, bound in ends.items():
        point = bounds[side]
        if point is None or point <= 0:
            continue
        root = None
        if roots is not None:
            close = [z for z in roots if abs(z - point) <= mpmath.mpf(10) ** (-25) * (1 + abs(point))]
            root = close[0] if close else None
        else:
            f_end = _value_at(f, r, point, values)
            if f_end is not None and abs(f_end) <= mpmath.mpf(10) ** (-25):
                with mpmath.workdps(DIGITS):
                    try:
                        root = mpmath.findroot(lambda x: _value_at(f, r, x, values), point)
                    except (ValueError, ZeroDivisionError, mpmath.libmp.NoConvergence):
                        root = None
        if root is None:
            continue
        h_end = _value_at(h, r, root, values)
        if h_end is None or abs(h_end) > mpmath.mpf(10) ** (-20):
            continue     # f vanishes but h does not: not a horizon (left to the ends' classification)
        fp = _value_at(sp.diff(f, r), r, root, values)
        hp = _value_at(sp.diff(h, r), r, root, values)
        if fp is None or hp is None or abs(fp * hp) < mpmath.mpf(10) ** (-30):
            continue     # a degenerate (extremal) horizon: not a simple root
        kappa = float(mpmath.sqrt(abs(fp * hp)) / 2)
        kind = "black hole" if side == "lower" else "cosmological"
        exact = sp.S(bound) if bound is not None and not sp.S(bound).is_Float else None
        if exact is not None and _exact_in_binary(exact) and _is_root(f, r, exact):
            symbol = exact
        else:
            symbol = _fresh_symbol("r_h" if side == "lower" else "r_c", taken)
        found.append(Horizon(symbol, float(root), mpmath.nstr(root, 30), exact, side, kind, kappa))
    return found


def _exact_in_binary(expr) -> bool:
    """A bound that a double holds exactly once the parameters are doubles: a parameter, a power of two times
    one, or a dyadic number.  r - r_h is then computed exactly near the horizon with no symbol of its own."""
    def dyadic(number):
        return number.is_Rational and abs(number.q) & (abs(number.q) - 1) == 0 and abs(number.p) < 2 ** 52
    if expr.is_Symbol or (expr.is_Number and dyadic(expr)):
        return True
    if expr.is_Mul and len(expr.args) == 2:
        number, symbol = expr.as_coeff_Mul()
        return symbol.is_Symbol and dyadic(number) and abs(number.p) & (abs(number.p) - 1) == 0
    return False


def _is_root(f, r, exact) -> bool:
    try:
        return sp.cancel(sp.together(f).subs(r, exact)) == 0
    except (TypeError, ValueError):
        return False


def divide_out(expr, r, horizons) -> sp.Expr:
    """expr (rational in r) with (r - r_h) divided out of its numerator for every horizon: exact polynomial
    division with r_h a symbol, the remainder (zero at the root) dropped.  Returned unchanged when expr is not
    rational in r."""
    split = _numerator_poly(expr, r)
    if split is None:
        return expr
    numer, denom = split
    numer = numer.as_expr()
    factors = []
    for horizon in horizons:
        numer, _remainder = sp.div(numer, r - horizon.symbol, r)
        factors.append(r - horizon.symbol)
    return sp.Mul(*factors) * sp.expand(numer) / denom


def values_of(horizons) -> dict:
    """{symbol: value} of the horizons that have a symbol of their own."""
    return {h.symbol: h.value for h in horizons if h.is_new}
