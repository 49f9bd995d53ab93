"""Line elements to metric matrices.

A line element is an expression quadratic in the differentials ``d<coordinate>``:
``-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)``.  A term ``c*dx*dy`` with x != y
gives g_xy = g_yx = c/2 (README.md).  A term that is not quadratic in the differentials is an error
naming the term.
"""

from __future__ import annotations

import sympy as sp

from derive.errors import ExpressionError


def differential_name(coordinate: sp.Symbol) -> str:
    return "d" + coordinate.name


def metric_from_line_element(expr: sp.Expr, coordinates, differentials, text: str = "") -> sp.Matrix:
    """Read g_ab off ``expr`` = g_ab dx^a dx^b.

    Parameters
    ----------
    expr : sympy.Expr
        The parsed line element.
    coordinates : sequence of sympy.Symbol
    differentials : sequence of sympy.Symbol
        The symbols standing for d<coordinate>, in the same order.
    """
    n = len(coordinates)
    try:
        poly = sp.Poly(expr, *differentials)
    except sp.PolynomialError:
        bad = [t for t in sp.Add.make_args(sp.expand(expr)) if not _polynomial_in(t, differentials)]
        shown = str(bad[0]) if bad else str(expr)
        raise ExpressionError(f"the line element is not a polynomial in the differentials; term {shown!r}",
                              text=text) from None
    metric = sp.zeros(n, n)
    for monomial, coefficient in poly.terms():
        if sum(monomial) != 2:
            term = coefficient * sp.Mul(*[d ** k for d, k in zip(differentials, monomial)])
            raise ExpressionError(f"term {str(term)!r} is not quadratic in the differentials "
                                  f"({', '.join(map(str, differentials))})", text=text)
        touched = [i for i, k in enumerate(monomial) for _ in range(k)]
        i, j = touched
        if i == j:
            metric[i, i] += coefficient
        else:
            metric[i, j] += coefficient / 2
            metric[j, i] += coefficient / 2
    return metric


def _polynomial_in(term, symbols) -> bool:
    try:
        sp.Poly(term, *symbols)
        return True
    except sp.PolynomialError:
        return False
