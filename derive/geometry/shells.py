"""Thin shells: the first and second (Israel) junction conditions at a static hypersurface x = X.

Conventions (docs/conventions.md section 3; W. Israel, Nuovo Cimento B 44, 1 (1966); E. Poisson, A Relativist's
Toolkit (2004), ch. 3):

* The hypersurface Sigma is x = X for one coordinate x; its intrinsic coordinates are the others, with tangent
  vectors d/dy^i, so the induced metric is h_ij = g_ij at x = X.
* The unit normal n_a = s delta_a^x / sqrt(g^xx) points from region ``between[0]`` ("minus") to
  ``between[1]`` ("plus"); s = +1 when "plus" lies at larger x.
* Extrinsic curvature K_ij = nabla_i n_j = -Gamma^x_ij n_x (since n_j = 0 along Sigma), K = h^ij K_ij.
* First condition: [h_ij] = 0, solved for the regions' unknowns.
* Second condition: S^i_j = -(1/(8 pi)) ([K^i_j] - [K] delta^i_j), [X] = X(plus) - X(minus).
* The Ricci scalar carries -2 [K] delta(l), l the proper distance along n.
"""

from __future__ import annotations

from functools import cached_property

import sympy as sp

from derive.errors import GeometryError, JunctionError
from derive.geometry.checks import bounded, simplify_checked
from derive.geometry.matter import energy_conditions


def _clean(expr):
    """A short exact form: cancelled and factored, or rationalised and simplified when that is shorter."""
    expr = sp.cancel(sp.S(expr))
    if expr.count_ops() >= 150:
        return expr
    candidates = [sp.factor(expr)]
    radicals = {e.base for e in expr.atoms(sp.Pow) if not e.exp.is_Integer}
    if len(radicals) == 1:   # radsimp is fast and helpful with one radical, explosive with several
        candidates.append(sp.simplify(sp.radsimp(expr)))
    return min(candidates, key=sp.count_ops)


SOLVE_SECONDS = 30.0   # the first junction condition's solve; past it the user is told what to write instead


class Shell:
    """The junction at one interface of a spacetime.

    Parameters
    ----------
    spacetime : Spacetime
    interface : Interface
    """

    def __init__(self, spacetime, interface):
        self.spacetime = spacetime
        self.interface = interface
        self.minus, self.plus = interface.between
        self.coordinate = interface.coordinate
        self.position = interface.value
        self.coordinates = spacetime.coordinates
        self.index = self.coordinates.index(self.coordinate)
        self.tangential = [c for c in self.coordinates if c != self.coordinate]
        self.tangential_index = [i for i, c in enumerate(self.coordinates) if c != self.coordinate]

    def __repr__(self) -> str:
        # cheap on purpose: nothing is solved to print a shell in a notebook
        return (f"<Shell between {self.minus!r} and {self.plus!r} at {self.coordinate} = {self.position} "
                f"({self.spacetime.title!r})>")

    def _repr_latex_(self) -> str:
        """The shell's surface energy density and pressure (the junction is derived to show them): the closed
        forms where they fit a line, their values at the spec's parameters otherwise."""
        from derive.report.display import LINE_WIDTH_PT, tex, width

        parts = [rf"\text{{shell {self.minus} | {self.plus} at }}{tex(self.coordinate)} = {tex(self.position)}"]
        values = self.spacetime.parameter_values
        for name, expr in ((r"\sigma", self.surface_energy_density), ("p", self.surface_pressure)):
            if expr is None:
                continue
            shown = tex(expr, self.coordinates)
            number = sp.N(expr.subs(values), 12) if values else None
            if width(shown) > LINE_WIDTH_PT or not shown:
                shown = tex(number) if number is not None and number.is_number else r"\text{(long)}"
            elif number is not None and number.is_number:
                shown += rf" \approx {tex(number)}"
            parts.append(f"{name} = {shown}")
        return "$\\displaystyle " + r",\quad ".join(parts) + "$"

    # -- first junction condition ---------------------------------------------------------------------
    def _on_shell(self, expr):
        return expr.subs(self.coordinate, self.position)

    def induced_metric_of(self, side: str, solved: bool = True) -> sp.Matrix:
        """h_ij on Sigma as seen from one region (``side`` is a region name)."""
        g = self.spacetime.regions[side].metric
        idx = self.tangential_index
        h = sp.Matrix(len(idx), len(idx), lambda a, b: _clean(self._on_shell(g[idx[a], idx[b]])))
        return h.subs(self.solved) if solved else h

    @cached_property
    def unknowns(self) -> tuple:
        return tuple(self.spacetime.regions[self.minus].unknowns) + tuple(self.spacetime.regions[self.plus].unknowns)

    @cached_property
    def solved(self) -> dict:
        """{unknown: value} from the first junction condition [h_ij] = 0."""
        h_minus = self.induced_metric_of(self.minus, solved=False)
        h_plus = self.induced_metric_of(self.plus, solved=False)
        n = h_minus.shape[0]
        pairs = [(a, b) for a in range(n) for b in range(a, n)]
        equations = {(a, b): sp.cancel(h_plus[a, b] - h_minus[a, b]) for a, b in pairs}
        equations = {k: v for k, v in equations.items() if v != 0}
        solution: dict = {}
        if equations and self.unknowns:
            candidates = bounded(lambda: sp.solve(list(equations.values()), list(self.unknowns), dict=True),
                                 None, seconds=SOLVE_SECONDS)
            if candidates is None:
                raise JunctionError(
                    f"the first junction condition at {self.interface.text} was not solved for "
                    f"{', '.join(map(str, self.unknowns))} within {SOLVE_SECONDS:g} s (sympy's solve on "
                    f"{len(equations)} equation(s)); write the unknown's value into the line element (for "
                    "example as a [definitions] entry) so that the induced metrics agree as they stand",
                    file=self.spacetime.path, key=self._key())
            values = self.spacetime.parameter_values
            for candidate in candidates:
                ok = True
                for value in candidate.values():
                    number = value.subs(values)
                    if number.is_number and not (number.is_real and number > 0):
                        ok = False
                if ok:
                    solution = {k: _clean(simplify_checked(v, values)) for k, v in candidate.items()}
                    break
        free = [u for u in self.unknowns if u not in solution]
        remaining = {k: sp.simplify(v.subs(solution)) for k, v in equations.items()}
        remaining = {k: v for k, v in remaining.items() if v != 0}
        if remaining:
            raise JunctionError(self._mismatch(h_minus.subs(solution), h_plus.subs(solution), remaining),
                                file=self.spacetime.path, key=self._key())
        if free:
            needed = [u for u in free if any(e.has(u) for e in equations.values()) or
                      self.spacetime.regions[self.minus].metric.has(u) or
                      self.spacetime.regions[self.plus].metric.has(u)]
            if needed:
                raise JunctionError(f"the first junction condition at {self.interface.text} leaves the unknown(s) "
                                    f"{', '.join(map(str, needed))} free", file=self.spacetime.path, key=self._key())
        return solution

    def _key(self) -> str:
        return f"interface[{self.spacetime.interfaces.index(self.interface)}]"

    def _mismatch(self, h_minus, h_plus, remaining) -> str:
        values = self.spacetime.parameter_values
        parts = []
        for (a, b), diff in remaining.items():
            ya, yb = self.tangential[a], self.tangential[b]
            number = diff.subs(values)
            amount = f" (differ by {float(number):.6g} at the spec's values)" if number.is_number and number.is_real \
                else ""
            parts.append(f"h_{ya}{yb} is {h_minus[a, b]} on '{self.minus}' but {h_plus[a, b]} on "
                         f"'{self.plus}'{amount}")
        return f"the first junction condition fails at {self.interface.text}: " + "; ".join(parts)

    @property
    def induced_metric(self) -> sp.Matrix:
        """h_ij after the first junction condition (the same from both sides)."""
        return self.induced_metric_of(self.plus)

    # -- normal and extrinsic curvature ---------------------------------------------------------------
    @cached_property
    def orientation(self) -> int:
        """+1 when the 'plus' region lies at larger values of the coordinate, else -1."""
        regions = self.spacetime.regions
        X = self.position
        minus = regions[self.minus].domain_of(self.coordinate)
        plus = regions[self.plus].domain_of(self.coordinate)
        if (minus is not None and minus.upper == X) or (plus is not None and plus.lower == X):
            return 1
        if (minus is not None and minus.lower == X) or (plus is not None and plus.upper == X):
            return -1
        return 1

    def _geometry(self, side):
        return self.spacetime.geometry[side]

    def normal_covector(self, side: str) -> list:
        """n_a on Sigma from one side (components in all coordinates)."""
        geo = self._geometry(side)
        gxx = self._on_shell(geo.inverse_metric[self.index, self.index]).subs(self.solved)
        values = self.spacetime.parameter_values
        number = gxx.subs(values)
        if number.is_number and number <= 0:
            raise GeometryError(f"the hypersurface {self.interface.text} is not timelike as seen from '{side}' "
                                f"(g^xx = {gxx} is not positive there)",
                                file=self.spacetime.path, key=self._key())
        return [self.orientation / sp.sqrt(gxx) if i == self.index else sp.S(0)
                for i in range(len(self.coordinates))]

    def extrinsic_curvature_of(self, side: str) -> sp.Matrix:
        """K_ij = -Gamma^x_ij n_x on Sigma from one side (lower indices, intrinsic coordinates)."""
        geo = self._geometry(side)
        n_x = self.normal_covector(side)[self.index]
        idx = self.tangential_index
        gamma = geo.christoffel

        def component(a, b):
            i, j = sorted((idx[a], idx[b]))
            value = gamma.get((self.index, i, j), sp.S(0))
            return _clean(self._on_shell(-value).subs(self.solved) * n_x)
        return sp.Matrix(len(idx), len(idx), component)

    def mixed_extrinsic_curvature_of(self, side: str) -> sp.Matrix:
        """K^i_j = h^ik K_kj."""
        h_inverse = self.induced_metric.inv()
        return (h_inverse * self.extrinsic_curvature_of(side)).applyfunc(_clean)

    @cached_property
    def extrinsic_curvature(self) -> dict:
        """{"minus": K^i_j, "plus": K^i_j, "jump": [K^i_j], "trace_jump": [K]}."""
        minus = self.mixed_extrinsic_curvature_of(self.minus)
        plus = self.mixed_extrinsic_curvature_of(self.plus)
        jump = (plus - minus).applyfunc(_clean)
        return {"minus": minus, "plus": plus, "jump": jump, "trace_jump": _clean(jump.trace())}

    # -- second junction condition --------------------------------------------------------------------
    @cached_property
    def surface_stress(self) -> sp.Matrix:
        """S^i_j = -([K^i_j] - [K] delta^i_j)/(8 pi)."""
        k = self.extrinsic_curvature
        n = k["jump"].shape[0]
        return (-(k["jump"] - k["trace_jump"] * sp.eye(n)) / (8 * sp.pi)).applyfunc(_clean)

    @property
    def time_tangent(self) -> bool:
        return self.coordinates[0] in self.tangential

    @cached_property
    def surface_energy_density(self):
        """sigma = -S^t_t (the first coordinate is time)."""
        if not self.time_tangent:
            return None
        return _clean(-self.surface_stress[0, 0])

    @cached_property
    def surface_pressures(self) -> dict:
        """{coordinate: S^i_i} for the spatial intrinsic coordinates."""
        start = 1 if self.time_tangent else 0
        return {self.tangential[i].name: _clean(self.surface_stress[i, i])
                for i in range(start, len(self.tangential))}

    @property
    def surface_pressure(self):
        """The pressure S^i_i of the first spatial intrinsic direction (all equal on a spherical shell)."""
        pressures = list(self.surface_pressures.values())
        return pressures[0] if pressures else None

    @cached_property
    def ricci_delta(self):
        """Coefficient of delta(l) in the Ricci scalar: -2 [K]."""
        return _clean(-2 * self.extrinsic_curvature["trace_jump"])

    @cached_property
    def proper_mass(self):
        """m = sigma times the shell's area (static spherical shells in D = 4: m = 4 pi R^2 sigma)."""
        sigma = self.surface_energy_density
        if sigma is None or len(self.tangential) != 3:
            return None
        from derive.geometry.static_form import static_form

        try:
            form = static_form(self.spacetime.regions[self.plus].metric, self.coordinates, self.plus)
        except GeometryError:
            return None
        if form.radius != self.coordinate or form.k != 1:
            return None
        return _clean(4 * sp.pi * self.position ** 2 * sigma)

    @cached_property
    def energy_conditions(self) -> dict:
        sigma = self.surface_energy_density
        if sigma is None:
            return {name: {"verdict": "undecided", "how": "no time direction on the shell"}
                    for name in ("null", "weak", "strong", "dominant")}
        return energy_conditions(sigma, list(self.surface_pressures.values()), None, (),
                                 self.spacetime.parameter_values)
