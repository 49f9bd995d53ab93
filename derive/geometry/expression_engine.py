"""Expression-level fallback with the same interface as :class:`~derive.geometry.algebra.RationalEngine`.

Used when a metric holds something the rational engine cannot represent (a non-algebraic atom whose
derivatives leave every finite set of generators, for instance).  Arithmetic is sympy's own; ``reduce`` is
``cancel`` after rewriting trigonometric squares; slower, but exact.
"""

from __future__ import annotations

import sympy as sp


class ExpressionEngine:
    """Plain sympy arithmetic on expressions, with cancel as the normal form."""

    zero = sp.Integer(0)
    one = sp.Integer(1)

    def __init__(self, expressions, coordinates):
        self.coordinates = tuple(coordinates)

    def to_field(self, expr):
        return sp.S(expr)

    def to_expr(self, element):
        return element

    def diff(self, element, x):
        return sp.diff(element, x)

    def reduce(self, element, eliminate_first: bool = True):
        expr = sp.cancel(sp.together(element))
        if expr.has(sp.sin, sp.cos):
            expr = sp.cancel(expr.replace(
                lambda e: e.is_Pow and isinstance(e.base, sp.sin) and e.exp.is_Integer and e.exp >= 2,
                lambda e: (1 - sp.cos(e.base.args[0]) ** 2) ** (e.exp // 2) * sp.sin(e.base.args[0]) ** (e.exp % 2)))
        return expr

    def canonical(self, element) -> sp.Expr:
        expr = self.reduce(element)
        if expr == 0:
            return sp.Integer(0)
        candidates = [expr, sp.factor(expr)]
        if expr.has(sp.sin, sp.cos):
            candidates.append(sp.trigsimp(expr))
        return min(candidates, key=sp.count_ops)
