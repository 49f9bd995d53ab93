"""Curvature of one region: Christoffel symbols, Riemann, Ricci, Einstein, Weyl and the invariants.

Conventions (docs/conventions.md section 1; Misner, Thorne & Wheeler 1973; Wald 1984):

* Gamma^a_bc = 1/2 g^ad (d_b g_dc + d_c g_db - d_d g_bc)
* R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb
* R_bd = R^a_bad,  R = g^bd R_bd,  G_ab = R_ab - R g_ab / 2
* K = R_abcd R^abcd, R_ab R^ab, C_abcd C^abcd.

Lowered Riemann is computed without raising an index first, from the Christoffel symbols of the first kind
Gamma_abc = g_ad Gamma^d_bc:  R_abcd = d_c Gamma_adb - d_d Gamma_acb + Gamma_fad Gamma^f_cb - Gamma_fac Gamma^f_db.
Only the independent components (a < b, c < d, (a, b) <= (c, d)) are formed.

All work happens in an engine (:mod:`derive.geometry.algebra`): derivatives first, then exact cancellation
in a field of rational functions; canonical readable forms are made only for what is shown.
"""

from __future__ import annotations

import itertools
from functools import cached_property

import sympy as sp

from derive.errors import GeometryError
from derive.geometry.algebra import RationalEngine, Unrepresentable
from derive.geometry.expression_engine import ExpressionEngine


def pair_index(dimension: int) -> list[tuple[int, int]]:
    """The antisymmetric index pairs (a, b), a < b, in order."""
    return [(a, b) for a in range(dimension) for b in range(a + 1, dimension)]


class Curvature:
    """Exact curvature of a metric.  Every quantity is computed on first use and kept.

    Parameters
    ----------
    metric : sympy.Matrix, shape (D, D)
        Symmetric, non-degenerate, components in the coordinates and constant parameters.
    coordinates : sequence of sympy.Symbol, length D
    name : str
        Used in error messages (the region's name).
    """

    def __init__(self, metric: sp.Matrix, coordinates, name: str = "region"):
        self.metric = sp.Matrix(metric)
        self.coordinates = tuple(coordinates)
        self.name = name
        self.dimension = len(self.coordinates)
        if self.metric.shape != (self.dimension, self.dimension):
            raise GeometryError(f"region '{name}': metric is {self.metric.shape[0]}x{self.metric.shape[1]} "
                                f"but there are {self.dimension} coordinates")
        if self.metric != self.metric.T:
            bad = [(self.coordinates[i], self.coordinates[j]) for i in range(self.dimension)
                   for j in range(self.dimension) if sp.simplify(self.metric[i, j] - self.metric[j, i]) != 0]
            if bad:
                raise GeometryError(f"region '{name}': metric is not symmetric in components "
                                    + ", ".join(f"({a},{b})" for a, b in bad[:4]))
        try:
            self.engine = RationalEngine(list(self.metric), self.coordinates)
            self.g = [[self.engine.to_field(self.metric[i, j]) for j in range(self.dimension)]
                      for i in range(self.dimension)]
            self.backend = "rational"
        except Unrepresentable:
            self.engine = ExpressionEngine(list(self.metric), self.coordinates)
            self.g = [[self.metric[i, j] for j in range(self.dimension)] for i in range(self.dimension)]
            self.backend = "expression"
        self.pairs = pair_index(self.dimension)

    def _d(self, element, k: int):
        return self.engine.diff(element, self.coordinates[k])

    def _nonzero(self, x) -> bool:
        return not (x == 0)

    # -- metric ---------------------------------------------------------------------------------------
    @cached_property
    def blocks(self) -> list[list[int]]:
        """Index blocks of the metric (connected through nonzero off-diagonal components)."""
        n = self.dimension
        parent = list(range(n))

        def find(i):
            while parent[i] != i:
                i = parent[i]
            return i

        for i, j in itertools.combinations(range(n), 2):
            if self._nonzero(self.g[i][j]):
                parent[find(i)] = find(j)
        groups: dict[int, list[int]] = {}
        for i in range(n):
            groups.setdefault(find(i), []).append(i)
        return list(groups.values())

    @cached_property
    def _inverse_and_determinant(self):
        n = self.dimension
        inverse = [[self.engine.zero] * n for _ in range(n)]
        determinant = self.engine.one
        for block in self.blocks:
            m = len(block)
            rows = [[self.g[i][j] for j in block] + [self.engine.one if i == j else self.engine.zero
                                                     for j in block] for i in block]
            for col in range(m):
                pivot = next((r for r in range(col, m) if self._nonzero(self.engine.reduce(rows[r][col]))), None)
                if pivot is None:
                    names = ", ".join(str(self.coordinates[i]) for i in block)
                    raise GeometryError(f"region '{self.name}': the metric is degenerate (its determinant "
                                        f"vanishes identically in the block of {names})")
                if pivot != col:
                    rows[col], rows[pivot] = rows[pivot], rows[col]
                    determinant = -determinant
                p = rows[col][col]
                determinant *= p
                rows[col] = [x / p for x in rows[col]]
                for r in range(m):
                    if r != col and self._nonzero(rows[r][col]):
                        factor = rows[r][col]
                        rows[r] = [x - factor * y for x, y in zip(rows[r], rows[col])]
            for a, i in enumerate(block):
                for b, j in enumerate(block):
                    inverse[i][j] = self.engine.reduce(rows[a][m + b])
        return inverse, self.engine.reduce(determinant)

    @property
    def ginv(self):
        return self._inverse_and_determinant[0]

    @property
    def det(self):
        return self._inverse_and_determinant[1]

    @cached_property
    def metric_derivatives(self):
        """dg[k][i][j] = d_k g_ij."""
        n = self.dimension
        dg = [[[self.engine.zero] * n for _ in range(n)] for _ in range(n)]
        for k in range(n):
            for i in range(n):
                for j in range(i, n):
                    if self._nonzero(self.g[i][j]):
                        dg[k][i][j] = dg[k][j][i] = self._d(self.g[i][j], k)
        return dg

    # -- Christoffel --------------------------------------------------------------------------------
    @cached_property
    def christoffel_first_kind(self):
        """Gamma_abc = 1/2 (d_b g_ac + d_c g_ab - d_a g_bc), symmetric in b, c."""
        n, dg = self.dimension, self.metric_derivatives
        gamma = [[[self.engine.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            for b in range(n):
                for c in range(b, n):
                    value = (dg[b][a][c] + dg[c][a][b] - dg[a][b][c]) / 2
                    gamma[a][b][c] = gamma[a][c][b] = value
        return gamma

    @cached_property
    def christoffel_second_kind(self):
        """Gamma^a_bc = g^ad Gamma_dbc, reduced to normal form."""
        n, low, ginv = self.dimension, self.christoffel_first_kind, self.ginv
        gamma = [[[self.engine.zero] * n for _ in range(n)] for _ in range(n)]
        for a in range(n):
            partners = [d for d in range(n) if self._nonzero(ginv[a][d])]
            for b in range(n):
                for c in range(b, n):
                    value = self.engine.zero
                    for d in partners:
                        if self._nonzero(low[d][b][c]):
                            value += ginv[a][d] * low[d][b][c]
                    value = self.engine.reduce(value)
                    gamma[a][b][c] = gamma[a][c][b] = value
        return gamma

    # -- Riemann ------------------------------------------------------------------------------------
    @cached_property
    def riemann_pairs(self) -> dict:
        """Independent lowered Riemann components {((a, b), (c, d)): R_abcd}, a<b, c<d, (a,b) <= (c,d)."""
        low, up, n = self.christoffel_first_kind, self.christoffel_second_kind, self.dimension
        result = {}
        for p, (a, b) in enumerate(self.pairs):
            for (c, d) in self.pairs[p:]:
                value = self._d(low[a][d][b], c) - self._d(low[a][c][b], d)
                for f in range(n):
                    if self._nonzero(up[f][c][b]) and self._nonzero(low[f][a][d]):
                        value += low[f][a][d] * up[f][c][b]
                    if self._nonzero(up[f][d][b]) and self._nonzero(low[f][a][c]):
                        value -= low[f][a][c] * up[f][d][b]
                result[((a, b), (c, d))] = self.engine.reduce(value)
        return result

    def riemann_lower(self, a: int, b: int, c: int, d: int):
        """R_abcd from the independent components, by the pair symmetries."""
        if a == b or c == d:
            return self.engine.zero
        sign = 1
        if a > b:
            a, b, sign = b, a, -sign
        if c > d:
            c, d, sign = d, c, -sign
        key = ((a, b), (c, d)) if (a, b) <= (c, d) else ((c, d), (a, b))
        value = self.riemann_pairs[key]
        return value if sign == 1 else -value

    @cached_property
    def _pair_matrix(self):
        """R[P][Q] = R_{P Q} over index pairs, and the pair-space inverse metric."""
        pairs, ginv = self.pairs, self.ginv
        m = len(pairs)
        lowered = [[self.riemann_lower(*pairs[p], *pairs[q]) for q in range(m)] for p in range(m)]
        raise2 = [[self.engine.zero] * m for _ in range(m)]
        for p, (a, b) in enumerate(pairs):
            for q, (e, f) in enumerate(pairs):
                raise2[p][q] = ginv[a][e] * ginv[b][f] - ginv[a][f] * ginv[b][e]
        return lowered, raise2

    @cached_property
    def riemann_mixed_pairs(self):
        """R^{P}_{Q} = (g^ae g^bf - g^af g^be) R_{(ef) Q} over pairs: R^ab_cd with a<b, c<d."""
        lowered, raise2 = self._pair_matrix
        m = len(self.pairs)
        mixed = [[self.engine.zero] * m for _ in range(m)]
        for p in range(m):
            nonzero = [e for e in range(m) if self._nonzero(raise2[p][e])]
            for q in range(m):
                value = self.engine.zero
                for e in nonzero:
                    if self._nonzero(lowered[e][q]):
                        value += raise2[p][e] * lowered[e][q]
                mixed[p][q] = value
        return mixed

    # -- Ricci, Einstein ----------------------------------------------------------------------------
    @cached_property
    def ricci_lower(self):
        """R_bd = g^ac R_abcd."""
        n, ginv = self.dimension, self.ginv
        entries = [(a, c) for a in range(n) for c in range(n) if self._nonzero(ginv[a][c])]
        ricci = [[self.engine.zero] * n for _ in range(n)]
        for b in range(n):
            for d in range(b, n):
                value = self.engine.zero
                for a, c in entries:
                    r = self.riemann_lower(a, b, c, d)
                    if self._nonzero(r):
                        value += ginv[a][c] * r
                ricci[b][d] = ricci[d][b] = self.engine.reduce(value)
        return ricci

    @cached_property
    def ricci_mixed(self):
        """R^a_b = g^ac R_cb."""
        n, ginv, ric = self.dimension, self.ginv, self.ricci_lower
        return [[self.engine.reduce(sum((ginv[a][c] * ric[c][b] for c in range(n)
                                         if self._nonzero(ginv[a][c])), self.engine.zero))
                 for b in range(n)] for a in range(n)]

    @cached_property
    def ricci_scalar(self):
        return self.engine.reduce(sum((self.ricci_mixed[a][a] for a in range(self.dimension)), self.engine.zero))

    @cached_property
    def einstein_mixed(self):
        """G^a_b = R^a_b - delta^a_b R / 2."""
        n, mixed, scalar = self.dimension, self.ricci_mixed, self.ricci_scalar
        return [[self.engine.reduce(mixed[a][b] - (scalar / 2 if a == b else self.engine.zero))
                 for b in range(n)] for a in range(n)]

    @cached_property
    def einstein_lower(self):
        """G_ab = R_ab - g_ab R / 2."""
        n = self.dimension
        return [[self.engine.reduce(self.ricci_lower[a][b] - self.g[a][b] * self.ricci_scalar / 2)
                 for b in range(n)] for a in range(n)]

    # -- invariants ---------------------------------------------------------------------------------
    @cached_property
    def kretschmann(self):
        """K = R_abcd R^abcd = 4 sum over pairs P, Q of R^P_Q R^Q_P."""
        mixed = self.riemann_mixed_pairs
        m = len(self.pairs)
        total = self.engine.zero
        for p in range(m):
            for q in range(m):
                if self._nonzero(mixed[p][q]) and self._nonzero(mixed[q][p]):
                    total += mixed[p][q] * mixed[q][p]
        return self.engine.reduce(4 * total)

    @cached_property
    def ricci_squared(self):
        """R_ab R^ab = R^a_b R^b_a."""
        n, mixed = self.dimension, self.ricci_mixed
        total = self.engine.zero
        for a in range(n):
            for b in range(n):
                if self._nonzero(mixed[a][b]) and self._nonzero(mixed[b][a]):
                    total += mixed[a][b] * mixed[b][a]
        return self.engine.reduce(total)

    @cached_property
    def weyl_squared(self):
        """C_abcd C^abcd = K - 4/(D-2) R_ab R^ab + 2/((D-1)(D-2)) R^2, defined for D >= 4."""
        n = self.dimension
        if n < 4:
            return self.engine.zero
        four = self.engine.to_field(sp.Rational(4, n - 2))
        two = self.engine.to_field(sp.Rational(2, (n - 1) * (n - 2)))
        value = self.kretschmann - four * self.ricci_squared + two * self.ricci_scalar ** 2
        return self.engine.reduce(value)

    def weyl_lower(self, a: int, b: int, c: int, d: int):
        """C_abcd = R_abcd - (g_ac R_bd - g_ad R_bc - g_bc R_ad + g_bd R_ac)/(D-2)
        + R (g_ac g_bd - g_ad g_bc)/((D-1)(D-2))."""
        n, g, ric, scalar = self.dimension, self.g, self.ricci_lower, self.ricci_scalar
        value = (self.riemann_lower(a, b, c, d)
                 - (g[a][c] * ric[b][d] - g[a][d] * ric[b][c] - g[b][c] * ric[a][d] + g[b][d] * ric[a][c])
                 / (n - 2)
                 + scalar * (g[a][c] * g[b][d] - g[a][d] * g[b][c]) / ((n - 1) * (n - 2)))
        return self.engine.reduce(value)

    @cached_property
    def weyl_pairs(self) -> dict:
        """Independent Weyl components {((a, b), (c, d)): C_abcd} (D >= 4)."""
        if self.dimension < 4:
            return {}
        return {((a, b), (c, d)): self.weyl_lower(a, b, c, d)
                for p, (a, b) in enumerate(self.pairs) for (c, d) in self.pairs[p:]}

    # -- readable output ----------------------------------------------------------------------------
    def show(self, element) -> sp.Expr:
        """Canonical readable sympy form of an element."""
        return self.engine.canonical(element)
