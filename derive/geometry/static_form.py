"""Recognise the static form ds^2 = -f(r) dt^2 + dr^2/h(r) + r^2 dSigma^2_{k,n} (docs/conventions.md section 4).

The coordinates must be ordered (t, r, angles...).  dSigma^2_{k,n} is the unit n-sphere (k = 1), flat n-space
(k = 0) or hyperbolic n-space (k = -1), told apart by its Ricci scalar n(n-1)k; for n = 1 (D = 3) it is the
circle, taken as k = 1 with eigenvalues l^2.
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from derive.errors import GeometryError


@dataclass(frozen=True)
class StaticForm:
    """The pieces of a static metric: f, h, the radial coordinate and the transverse space."""

    time: sp.Symbol
    radius: sp.Symbol
    angles: tuple[sp.Symbol, ...]
    f: sp.Expr
    h: sp.Expr
    n: int          # dimension of the transverse space; D = n + 2
    k: int          # 1 sphere, 0 plane, -1 hyperbolic space
    transverse_metric: sp.Matrix

    @property
    def dimension(self) -> int:
        return self.n + 2

    def eigenvalue(self, l):
        """lambda: minus the eigenvalue of the transverse Laplacian for label l.

        Sphere: l(l + n - 1).  Plane: l^2 (l is the transverse momentum).  Hyperbolic space: l^2 + (n-1)^2/4
        (l is the continuous label above the spectral gap)."""
        if self.k == 1:
            return l * (l + self.n - 1)
        if self.k == 0:
            return l ** 2
        return l ** 2 + sp.Rational(self.n - 1, 2) ** 2


def static_form(metric: sp.Matrix, coordinates, region_name: str = "region") -> StaticForm:
    """Read f, h, n and k off a metric, or raise GeometryError saying which requirement fails."""
    n_total = len(coordinates)
    where = f"region '{region_name}'"
    if n_total < 3:
        raise GeometryError(f"{where}: the static form needs at least three coordinates (t, r, angles)")
    if not metric.is_diagonal():
        raise GeometryError(f"{where}: the metric is not diagonal, so it is not of the static form "
                            "-f dt^2 + dr^2/h + r^2 dSigma^2 (coordinates ordered t, r, angles)")
    t, r, angles = coordinates[0], coordinates[1], tuple(coordinates[2:])
    f = min((-metric[0, 0], sp.cancel(-metric[0, 0])), key=sp.count_ops)
    h = min((1 / metric[1, 1], sp.cancel(1 / metric[1, 1])), key=sp.count_ops)
    for name, expr in (("g_tt", f), ("g_rr", h)):
        extra = expr.free_symbols & (set(coordinates) - {r})
        if extra:
            raise GeometryError(f"{where}: {name} depends on {', '.join(sorted(map(str, extra)))}; the static form "
                                f"needs it to depend on {r} alone")
    block = sp.Matrix(len(angles), len(angles), lambda i, j: sp.cancel(metric[2 + i, 2 + j] / r ** 2))
    if any(e.has(r) or e.has(t) for e in block):
        raise GeometryError(f"{where}: the transverse part is not r^2 times a metric on the angles alone")
    n = len(angles)
    if n == 1:
        if block[0, 0] != 1:
            raise GeometryError(f"{where}: for D = 3 the transverse part must be r^2 d{angles[0]}^2")
        return StaticForm(t, r, angles, f, h, 1, 1, block)
    scalar = _transverse_scalar(block, angles, region_name)
    k = sp.simplify(scalar / (n * (n - 1)))
    if k not in (1, 0, -1):
        raise GeometryError(f"{where}: the transverse space has Ricci scalar {scalar}, not that of a unit sphere, "
                            "flat space or unit hyperbolic space")
    return StaticForm(t, r, angles, f, h, n, int(k), block)


def _transverse_scalar(block, angles, region_name):
    from derive.geometry.curvature import Curvature

    c = Curvature(block, angles, name=f"{region_name} (transverse)")
    return c.show(c.ricci_scalar)
