"""The geometry of one region, as readable sympy results with physics names.

:class:`RegionGeometry` wraps the exact :class:`~derive.geometry.curvature.Curvature` computation: each
quantity is computed on first use, turned into a canonical readable form, and cached in memory and on disk
(keyed on the metric's exact representation and derive's version, :mod:`derive.cache`).
"""

from __future__ import annotations

from functools import cached_property

import sympy as sp

from derive.cache import DiskCache, key_of
from derive.geometry.curvature import Curvature
from derive.geometry.matter import energy_conditions


class RegionGeometry:
    """Curvature, stress-energy and energy conditions of one region of a spacetime.

    Attributes (each lazily computed, sympy objects in the spec's symbols)
    ----------------------------------------------------------------------
    metric, inverse_metric : Matrix
    christoffel : dict {(a, b, c): Gamma^a_bc}, nonzero, b <= c
    riemann : dict {(a, b, c, d): R_abcd}, nonzero independent components (a<b, c<d, (a,b)<=(c,d))
    ricci : Matrix R_ab;  ricci_scalar;  einstein : Matrix G^a_b (mixed);  einstein_lower : Matrix G_ab
    weyl : dict {(a, b, c, d): C_abcd} (D >= 4)
    kretschmann, ricci_squared, weyl_squared : Expr
    stress_energy : dict (mixed T^a_b; energy density and pressures for diagonal metrics)
    energy_conditions : dict {"null"|"weak"|"strong"|"dominant": {"verdict", "how", ...}}
    """

    def __init__(self, spacetime, region):
        self.spacetime = spacetime
        self.region = region
        self.name = region.name
        self.coordinates = spacetime.coordinates
        self.dimension = len(self.coordinates)
        self.metric = region.metric
        self.metric_display = region.metric_display
        self._memory: dict = {}
        self._disk = DiskCache(key_of(self.metric, sp.Tuple(*self.coordinates)))

    @cached_property
    def curvature(self) -> Curvature:
        """The exact computation behind the results (built on first use)."""
        return Curvature(self.metric, self.coordinates, name=self.name)

    def _result(self, name: str, compute):
        if name in self._memory:
            return self._memory[name]
        value = self._disk.get(name, expected=(dict, sp.Basic, sp.MatrixBase))
        if value is None:
            value = compute()
            self._disk.put(name, value)
        self._memory[name] = value
        return value

    def _matrix(self, rows):
        c = self.curvature
        return sp.Matrix(self.dimension, self.dimension, lambda a, b: c.show(rows[a][b]))

    # -- quantities ---------------------------------------------------------------------------------
    @property
    def inverse_metric(self) -> sp.Matrix:
        return self._result("inverse_metric", lambda: self._matrix(self.curvature.ginv))

    @property
    def christoffel(self) -> dict:
        def compute():
            c, n = self.curvature, self.dimension
            gamma = c.christoffel_second_kind
            return {(a, b, cc): c.show(gamma[a][b][cc]) for a in range(n) for b in range(n)
                    for cc in range(b, n) if gamma[a][b][cc] != 0}
        return self._result("christoffel", compute)

    @property
    def riemann(self) -> dict:
        def compute():
            c = self.curvature
            return {(a, b, cc, d): c.show(v) for ((a, b), (cc, d)), v in c.riemann_pairs.items() if v != 0}
        return self._result("riemann", compute)

    @property
    def ricci(self) -> sp.Matrix:
        return self._result("ricci", lambda: self._matrix(self.curvature.ricci_lower))

    @property
    def ricci_scalar(self) -> sp.Expr:
        return self._result("ricci_scalar", lambda: self.curvature.show(self.curvature.ricci_scalar))

    @property
    def einstein(self) -> sp.Matrix:
        """Mixed Einstein tensor G^a_b (rows a, columns b)."""
        return self._result("einstein", lambda: self._matrix(self.curvature.einstein_mixed))

    @property
    def einstein_lower(self) -> sp.Matrix:
        return self._result("einstein_lower", lambda: self._matrix(self.curvature.einstein_lower))

    @property
    def weyl(self) -> dict:
        def compute():
            c = self.curvature
            return {(a, b, cc, d): c.show(v) for ((a, b), (cc, d)), v in c.weyl_pairs.items() if v != 0}
        return self._result("weyl", compute)

    @property
    def kretschmann(self) -> sp.Expr:
        return self._result("kretschmann", lambda: self.curvature.show(self.curvature.kretschmann))

    @property
    def ricci_squared(self) -> sp.Expr:
        return self._result("ricci_squared", lambda: self.curvature.show(self.curvature.ricci_squared))

    @property
    def weyl_squared(self) -> sp.Expr:
        return self._result("weyl_squared", lambda: self.curvature.show(self.curvature.weyl_squared))

    @property
    def is_diagonal(self) -> bool:
        return self.metric.is_diagonal()

    @property
    def stress_energy(self) -> dict:
        """T^a_b = G^a_b/(8 pi); for a diagonal metric also rho = -T^t_t and p_i = T^i_i (first coordinate
        is time, static orthonormal frame; docs/conventions.md section 2)."""
        def compute():
            mixed = (self.einstein / (8 * sp.pi)).applyfunc(sp.factor)
            result = {"mixed": mixed, "frame": None, "energy_density": None, "pressures": None}
            if self.is_diagonal:
                result["frame"] = "static orthonormal (first coordinate is time)"
                result["energy_density"] = sp.factor(-mixed[0, 0])
                result["pressures"] = {self.coordinates[i].name: sp.factor(mixed[i, i])
                                       for i in range(1, self.dimension)}
            return result
        return self._result("stress_energy", compute)

    @property
    def energy_conditions(self) -> dict:
        """holds / fails / undecided for the null, weak, strong and dominant energy conditions."""
        if "energy_conditions" in self._memory:
            return self._memory["energy_conditions"]
        t = self.stress_energy
        if t["energy_density"] is None:
            result = {name: {"verdict": "undecided", "how": "metric is not diagonal: no static frame reading"}
                      for name in ("null", "weak", "strong", "dominant")}
        else:
            values = self.spacetime.parameter_values
            result = energy_conditions(t["energy_density"], list(t["pressures"].values()), self.region,
                                       self.coordinates, values)
        self._memory["energy_conditions"] = result
        return result

    def _repr_latex_(self) -> str:
        from derive.report.latex import region_summary_latex

        return region_summary_latex(self)

    def __repr__(self) -> str:
        return f"RegionGeometry({self.name!r}, D={self.dimension})"
