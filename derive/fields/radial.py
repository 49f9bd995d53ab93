"""The Klein-Gordon field on a static region, reduced to a radial Schrodinger problem.

Field equation (docs/conventions.md section 4): (Box - mu^2 - xi R) phi = 0.  For ds^2 = -f dt^2 + dr^2/h + r^2 dSigma^2
separate phi = e^{-i omega t} Y r^{-n/2} u(r), with Delta_Sigma Y = -lambda Y.  The code *derives* the
Schrodinger form from the metric rather than copying a formula:

1. the radial part of Box is (1/W) d/dr (W h dpsi/dr) with W = sqrt(-g)/sqrt(det gamma) = sqrt(f/h) r^n,
   so (Box - mu^2 - xi R) phi = 0 becomes
   h psi'' + h (log(W h))' psi' + (omega^2/f - lambda/r^2 - mu^2 - xi R) psi = 0;
2. psi = r^{-n/2} u is substituted and the equation multiplied by f;
3. with d/dr* = F d/dr, F = sqrt(f h), the part F^2 u'' + F F' u' is exactly d^2u/dr*^2, and what is left must be
   (omega^2 - V) u with no derivative of u; the code checks this and reads off V.

The result is checked in the tests against docs/conventions.md's V = f (lambda/r^2 + mu^2 + xi R) + (n/2) F F'/r
+ (n/2)(n/2 - 1) F^2/r^2 and the published potentials (Regge & Wheeler 1957 for Schwarzschild).
"""

from __future__ import annotations

import dataclasses
from functools import cached_property

import sympy as sp

from derive.errors import GeometryError
from derive.geometry.checks import tame_exponentials, vanishes
from derive.geometry.static_form import static_form

#: Symbols the field stage introduces (they stay symbols in potentials and matrices).
L_SYMBOL = sp.Symbol("l", nonnegative=True)
OMEGA = sp.Symbol("omega", positive=True)


def _tidy(expr):
    expr = sp.cancel(expr)
    if expr.count_ops() > 150:
        return expr
    candidates = [expr, sp.factor(expr)]
    return min(candidates, key=sp.count_ops)


def sample_radius(region, radius, values) -> float:
    """A radius well inside the region (numbers), for sign checks."""
    from derive.geometry.matter import sample_points

    column = sample_points(region, [radius], values, count=9)[0]
    return float(column[len(column) // 2])


def positive_root(square, radius, region, values):
    """sqrt(square) as a closed form positive inside the region (perfect squares are taken out)."""
    candidate = sp.powdenest(sp.sqrt(sp.factor(square)), force=True)
    # sqrt of a square of a real expression comes back as Abs(...): the sign is fixed below instead
    candidate = candidate.replace(sp.Abs, lambda arg: arg)
    candidate = sp.factor(candidate) if candidate.count_ops() < 100 else candidate
    point = sample_radius(region, radius, values)
    number = candidate.subs(values).subs(radius, point)
    if number.is_number and number.is_real and number < 0:
        candidate = -candidate
    return candidate


def rational_antiderivative(integrand, r, inside: float, values: dict):
    """int integrand dr for a rational integrand whose denominator has simple roots: polynomial part plus
    sum over the roots rho of Res(rho) log|r - rho|, the sign inside the log fixed at r = ``inside``.
    None when the integrand is not of that kind."""
    if not integrand.is_rational_function(r):
        return None
    numer, denom = sp.fraction(sp.cancel(integrand))
    quotient, remainder = sp.div(sp.Poly(numer, r), sp.Poly(denom, r))
    result = sp.integrate(quotient.as_expr(), r)
    if remainder.is_zero:
        return result
    roots = sp.roots(sp.Poly(denom, r))
    if sum(roots.values()) != sp.degree(denom, r) or any(m != 1 for m in roots.values()):
        return None
    derivative = sp.diff(denom, r)
    for root in roots:
        residue = sp.simplify((remainder.as_expr() / derivative).subs(r, root))
        argument = r - root
        try:
            sign = float(sp.re(sp.N(argument.subs(values).subs(r, inside))))
        except (TypeError, ValueError):
            sign = 1.0
        result += residue * sp.log(argument if sign >= 0 else -argument)
    return result


def antiderivative_through_roots(integrand, r, inside: float, values: dict):
    """The antiderivative of :func:`rational_antiderivative` written through named roots of the denominator, as a
    paper writes it: Res(rho_i) = P(rho_i)/(c prod_{j != i}(rho_i - rho_j)) for integrand P/Q, Q = c prod (r - rho_j)
    (r_* = r + r_+^2/(r_+ - r_-) log(r - r_+) - r_-^2/(r_+ - r_-) log(r - r_-) for Reissner-Nordstrom).  Returns
    (expression, {name: root}, Q) with the names r_+ > r_- (two real roots) or r_1, r_2, ... (by their real parts
    at ``values``, largest first), or None when the roots are plain numbers or symbols (nothing to name) or the
    form is not that of a rational integrand with simple poles.  The caller checks it against the explicit one."""
    if not integrand.is_rational_function(r):
        return None
    numer, denom = sp.fraction(sp.cancel(integrand))
    denom_poly = sp.Poly(denom, r)
    quotient, remainder = sp.div(sp.Poly(numer, r), denom_poly)
    if remainder.is_zero:
        return None
    roots = sp.roots(denom_poly)
    if sum(roots.values()) != denom_poly.degree() or any(m != 1 for m in roots.values()) or len(roots) < 2:
        return None
    radical = any(isinstance(node, sp.Pow) and not node.exp.is_integer
                  for root in roots for node in sp.preorder_traversal(root))
    if not radical:
        return None       # no radical in any root: the explicit form is as short
    try:
        located = sorted(roots, key=lambda root: -float(sp.re(sp.N(root.subs(values), 20))))
    except (TypeError, ValueError):
        return None
    real = all(abs(float(sp.im(sp.N(root.subs(values), 20)))) < 1e-12 for root in located)
    if len(located) == 2 and real:
        names = [sp.Symbol(f"r_{s}", real=True) for s in ("+", "-")]
    else:
        names = [sp.Symbol(f"r_{k}") for k in range(1, len(located) + 1)]
    lead = denom_poly.LC()
    result = sp.integrate(quotient.as_expr(), r)
    for i, (name, root) in enumerate(zip(names, located)):
        # every difference as the earlier name minus the later (positive for real roots), the sign in front
        others = sp.Mul(*[names[min(i, j)] - names[max(i, j)] for j in range(len(names)) if j != i])
        residue = (-1) ** i * numer.subs(r, name) / (lead * others)
        try:
            sign = float(sp.re(sp.N((r - root).subs(values).subs(r, inside))))
        except (TypeError, ValueError):
            sign = 1.0
        result += residue * sp.log(r - name if sign >= 0 else name - r)
    return result, dict(zip(names, located)), denom


def _same_values(first, second, r, region, values) -> bool:
    """first == second at 30 digits (to 1e-20 of their size) at three radii inside the region."""
    import mpmath

    from derive.geometry.checks import exact_values
    from derive.geometry.matter import sample_points

    exact = exact_values(values)
    with mpmath.workdps(30):
        for point in sample_points(region, [r], values, count=3)[0]:
            at = {**exact, r: sp.Rational(repr(float(point)))}
            a, b = sp.N(first.subs(at), 30), sp.N(second.subs(at), 30)
            if not (a.is_number and b.is_number) or abs(a - b) > 1e-20 * (abs(a) + abs(b) + 1e-30):
                return False
    return True


def derivative_matches(antiderivative, integrand, r, region, values) -> bool:
    """d(antiderivative)/dr == integrand: exactly when cancel shows it, else at 30 digits at five radii."""
    import mpmath

    from derive.geometry.matter import sample_points

    difference = sp.diff(antiderivative, r) - integrand
    if sp.cancel(difference) == 0:
        return True
    exact = {k: sp.Rational(repr(float(v))) for k, v in values.items()}   # so that 30 digits mean 30 digits
    numeric = difference.subs(exact)
    with mpmath.workdps(30):
        for point in sample_points(region, [r], values, count=5)[0]:
            point = sp.Rational(repr(float(point)))
            scale = abs(sp.N(integrand.subs(exact).subs(r, point), 30)) + 1e-30
            value = sp.N(numeric.subs(r, point), 30)
            if not value.is_number or abs(value) > 1e-20 * scale:
                return False
    return True


class RegionField:
    """The radial problem in one region (after the first junction conditions are applied)."""

    def __init__(self, spacetime, region_name: str, solved: dict | None = None):
        self.spacetime = spacetime
        self.name = region_name
        self.region = spacetime.regions[region_name]
        self.solved = dict(solved or {})
        metric = self.region.metric.subs(self.solved)
        try:
            self.form = static_form(metric, spacetime.coordinates, region_name)
        except GeometryError as exc:
            index = list(spacetime.regions).index(region_name)
            raise exc.located(spacetime.path, f"region[{index}]") from None
        if spacetime.field is None:
            from derive.errors import SpecError

            raise SpecError("no [field] section: mass and coupling are needed", file=spacetime.path, key="field")
        self.mass = spacetime.field.mass
        self.coupling = spacetime.field.coupling
        self.r = self.form.radius
        self.values = spacetime.parameter_values
        f, h = self.form.f, self.form.h
        at = sample_radius(self.region, self.r, self.values)
        for name, expr in (("f = -g_tt", f), ("h = 1/g_rr", h)):
            number = expr.subs(self.values).subs(self.r, at)
            if number.is_number and number.is_real and number <= 0:
                raise GeometryError(f"region '{region_name}': {name} is not positive at {self.r} = {at:g}, so "
                                    "the region is not static there", file=spacetime.path,
                                    key=f"region[{list(spacetime.regions).index(region_name)}]")

    # -- pieces --------------------------------------------------------------------------------------
    @property
    def f(self):
        return self.form.f

    @property
    def h(self):
        return self.form.h

    @cached_property
    def F(self):
        """F = sqrt(f h) = dr/dr*, positive in the region."""
        if sp.cancel(self.f - self.h) == 0:
            return positive_root(self.f ** 2, self.r, self.region, self.values)
        return positive_root(sp.cancel(self.f * self.h), self.r, self.region, self.values)

    @cached_property
    def flat_lapse(self):
        """alpha when the region is flat space with a constant lapse, -alpha^2 dt^2 + dr^2 + r^2 dOmega^2 (its radial
        equation is then Bessel's, solved in closed form by derive.solve.flat), as an expression in the
        parameters; else None."""
        if self.form.k != 1 or sp.cancel(self.h - 1) != 0 or sp.cancel(sp.diff(self.f, self.r)) != 0:
            return None     # (r^2 times flat or hyperbolic n-space is not flat space)
        return sp.sqrt(self.f)

    @cached_property
    def ricci_scalar(self):
        return sp.cancel(self.spacetime.geometry[self.name].ricci_scalar.subs(self.solved))

    @property
    def eigenvalue(self):
        return self.form.eigenvalue(L_SYMBOL)

    @cached_property
    def radial_coefficients(self) -> tuple:
        """(A, B, C) of the radial equation A psi'' + B psi' + C psi = 0 (step 1 above)."""
        f, h, r, n = self.f, self.h, self.r, self.form.n
        log_w_prime = (sp.diff(f, r) / f - sp.diff(h, r) / h) / 2 + sp.Integer(n) / r
        A = h
        B = sp.diff(h, r) + h * log_w_prime
        C = OMEGA ** 2 / f - self.eigenvalue / r ** 2 - self.mass ** 2 - self.coupling * self.ricci_scalar
        return A, B, C

    @property
    def radial_equation(self) -> sp.Expr:
        """The radial Klein-Gordon equation for psi(r) (= 0), derived from the metric."""
        psi = sp.Function("psi")(self.r)
        A, B, C = self.radial_coefficients
        return A * sp.diff(psi, self.r, 2) + B * sp.diff(psi, self.r) + C * psi

    @cached_property
    def potential(self) -> sp.Expr:
        """V(r; omega, l) of d^2u/dr*^2 + (omega^2 - V) u = 0, derived (steps 2 and 3 above).

        With psi = r^{-n/2} u:  psi' = r^{-n/2}(u' - n u/(2r)),  psi'' = r^{-n/2}(u'' - n u'/r + n(n+2) u/(4r^2)).
        Multiplying by f r^{n/2} gives c2 u'' + c1 u' + c0 u = 0; c2 = F^2 and c1 = (F^2)'/2 are checked
        (exactly, or at 30 digits where radicals defeat cancel), and V = omega^2 - c0."""
        r, n, f = self.r, sp.Integer(self.form.n), self.f
        A, B, C = self.radial_coefficients
        c2 = f * A
        c1 = f * (B - n * A / r)
        c0 = f * (C - n * B / (2 * r) + A * n * (n + 2) / (4 * r ** 2))
        F2 = sp.cancel(self.f * self.h)
        points = [{r: sample_radius(self.region, r, self.values) * k} for k in (1, 1.01)]
        values = {**self.values, OMEGA: 0.7, L_SYMBOL: 2}
        for label, expr in (("u''", c2 - F2), ("u'", c1 - sp.diff(F2, r) / 2)):
            if not vanishes(expr, values, points):
                raise GeometryError(f"region '{self.name}': the radial equation did not reduce to Schrodinger "
                                    f"form (coefficient of {label} is off by {expr})")
        return tame_exponentials(_tidy(OMEGA ** 2 - c0), r, self.values)

    @cached_property
    def dtortoise_dr(self):
        # (growing exponentials written through decaying ones, for the document, the ends and the kernels alike:
        # sympy's e^(r^2)/(e^(r^2) - a) overflows where the march still runs)
        return tame_exponentials(_tidy(1 / self.F), self.r, self.values)

    @cached_property
    def tortoise(self):
        """r*(r) in closed form (up to a constant) when 1/F is rational in r with simple poles, else None
        (left to quadrature).  Every closed form is checked by differentiating it back."""
        result = rational_antiderivative(sp.cancel(1 / self.F), self.r,
                                         sample_radius(self.region, self.r, self.values), self.values)
        if result is None:
            return None
        if not derivative_matches(result, 1 / self.F, self.r, self.region, self.values):
            return None
        return result

    @cached_property
    def tortoise_through_roots(self):
        """r*(r) written through the named roots of 1/F's denominator (the horizons among them), with their
        definitions: (expression, {symbol: root}, the polynomial whose roots they are), or None.  Accepted only
        when, with the roots put back, its derivative is 1/F (as :attr:`tortoise` is checked)."""
        if self.tortoise is None:
            return None
        named = antiderivative_through_roots(sp.cancel(1 / self.F), self.r,
                                             sample_radius(self.region, self.r, self.values), self.values)
        if named is None:
            return None
        form, roots, polynomial = named
        if not _same_values(form.subs(roots), self.tortoise, self.r, self.region, self.values):
            return None
        return form, roots, polynomial

    @cached_property
    def ends(self) -> dict:
        from derive.fields.ends import classify_ends

        return classify_ends(self)

    #: The horizons at this region's ends (derive.fields.horizons.Horizon), set by FieldProblem.regions.
    horizons: tuple = ()

    @cached_property
    def factored(self) -> "RegionField":
        """This region's radial problem with every horizon's root divided out of f and h (f = (r - r_h) g(r)
        exactly, r_h a symbol): the form from which the ends' series and the kernels are derived (see
        derive/fields/horizons.py).  The region itself when it has no horizon."""
        if not self.horizons:
            return self
        from derive.fields.horizons import divide_out, values_of

        keep = ("spacetime", "name", "region", "solved", "mass", "coupling", "r")
        twin = RegionField.__new__(RegionField)
        twin.__dict__.update({k: self.__dict__[k] for k in keep})
        f = divide_out(self.f, self.r, self.horizons)
        h = f if sp.cancel(self.f - self.h) == 0 else divide_out(self.h, self.r, self.horizons)
        twin.form = dataclasses.replace(self.form, f=f, h=h)
        twin.values = {**self.values, **values_of(self.horizons)}
        twin.horizons = self.horizons
        twin.__dict__["factored"] = twin
        twin.__dict__["ricci_scalar"] = self.ricci_scalar
        return twin

    def inner_product_weight(self):
        """(phi_1, phi_2) = (omega_1 + omega_2) int u_1 u_2 dr*, dr* = dr/F (docs/conventions.md section 4)."""
        return self.dtortoise_dr


class FieldProblem:
    """The radial problem of every region and the matching across every interface."""

    def __init__(self, spacetime):
        self.spacetime = spacetime

    def __repr__(self) -> str:
        # cheap on purpose: nothing is derived to print the problem in a notebook (horizons once found)
        found = self.__dict__.get("regions")
        horizons = ""
        if found is not None:
            listed = ", ".join(f"{h.symbol} = {float(h.value):.6g}" for h in self.horizons)
            horizons = f"; horizons {listed}" if listed else "; no horizons"
        return (f"<FieldProblem of {self.spacetime.title!r}: regions {', '.join(self.spacetime.regions)}; "
                f"{len(self.spacetime.interfaces)} interface(s){horizons}>")

    def _repr_latex_(self) -> str:
        """Each region's f and potential (where they fit a line), in the form of the derivation document."""
        from derive.report.display import LINE_WIDTH_PT, tex, width

        rows = []
        for name, region in self.regions.items():
            variables = (region.r,)
            row = rf"\text{{{name}: }} f = {tex(region.f, variables)}"
            potential = tex(region.potential, variables)
            if width(potential) <= LINE_WIDTH_PT:
                row += rf",\quad V = {potential}"
            rows.append(row)
        return "$\\displaystyle " + r" \\ ".join(rows) + "$" if len(rows) == 1 else (
            "$$\\begin{gathered}" + r" \\ ".join(rows) + "\\end{gathered}$$")

    @cached_property
    def shells(self):
        return self.spacetime.shells

    @cached_property
    def solved(self) -> dict:
        result = {}
        for shell in self.shells:
            result.update(shell.solved)
        return result

    @cached_property
    def regions(self) -> dict:
        from derive.fields.horizons import find_horizons

        regions = {name: RegionField(self.spacetime, name, self.solved) for name in self.spacetime.regions}
        taken = {p.name for p in self.spacetime.parameters.values()} | {c.name for c in self.spacetime.coordinates}
        for region in regions.values():
            region.horizons = tuple(find_horizons(region, taken))
        return regions

    @property
    def values(self) -> dict:
        """The parameters' values and every horizon radius r_h's (the symbols the ends' forms are written in)."""
        from derive.fields.horizons import values_of

        return {**self.spacetime.parameter_values, **values_of(self.horizons)}

    @property
    def horizons(self) -> list:
        """Every horizon of the spacetime, region by region (derive.fields.horizons.Horizon)."""
        return [h for region in self.regions.values() for h in region.horizons]

    @cached_property
    def interfaces(self) -> list:
        from derive.fields.matching import Matching

        return [Matching(self, shell) for shell in self.shells]
