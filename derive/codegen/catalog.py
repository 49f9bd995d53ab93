"""The kernels of a spacetime: what the solver needs, lowered, verified and ready to export.

Per region (static form): ``potential`` V(r, l, omega, params), ``dtortoise_dr`` and, when closed, ``tortoise``
(r, params), ``metric_f`` and ``metric_h`` (r, params), and at its ends the Frobenius exponent and first series
coefficients (``centre_series``, ``horizon_series``: l, omega, params) and the ``surface_gravity`` (params).
Per interface: ``transfer_matrix`` (l, omega, params).  Per region without free functions, ``kretschmann``
(coordinates, params).  Parameters come in spec order; ``l`` and ``omega`` are the field's labels.
"""

from __future__ import annotations

import re
import zlib
from dataclasses import dataclass, field as dataclass_field
from functools import cached_property

import numpy as np
import sympy as sp

from derive.codegen.kernel import Kernel, lower
from derive.codegen.printers import CodegenError
from derive.codegen.verify import (TOLERANCE, Verification, check_twin, condition_number, numpy_values,
                                   reference_values, relative_errors)
from derive.errors import AccuracyError, InputError
from derive.fields.radial import L_SYMBOL, OMEGA
from derive.geometry.checks import tame_exponentials

POINTS = 200


@dataclass
class KernelEntry:
    """One kernel: its numpy function, its mpmath twin, what it was made from, and its verification."""

    kernel: Kernel
    twin: Kernel
    expression: object
    arguments: tuple
    domain: dict
    verification: Verification | None = None
    notes: list = dataclass_field(default_factory=list)

    @property
    def name(self) -> str:
        return self.kernel.name


def factor_roots(expr, r, roots):
    """Divide the known roots (horizons) out of numerator and denominator: (r - r_h) Q(r) is evaluated without
    the cancellation that r^2 - r_h^2 suffers near r_h.  Exact (polynomial division with zero remainder)."""
    numer, denom = sp.fraction(sp.cancel(expr))

    def split(poly_expr):
        if not poly_expr.is_polynomial(r):
            return poly_expr
        factors = []
        rest = poly_expr
        for root in roots:
            for _ in range(4):
                quotient, remainder = sp.div(rest, r - root, r)
                if sp.simplify(remainder) != 0:
                    break
                factors.append(r - root)
                rest = sp.expand(quotient)
        return sp.Mul(*factors) * rest
    return split(numer) / split(denom)


def rationalise_differences(expr):
    """A + t with one radical term t (t^2 free of radicals) becomes (A^2 - t^2)/(A - t), the numerator cancelled
    exactly: sqrt(f) - f for f near 1 (a shell of small mass) then evaluates without losing digits."""
    def radical(e):
        return any(not p.exp.is_Integer for p in e.atoms(sp.Pow)) or e.has(sp.sqrt)

    def visit(e):
        if e.is_Atom:
            return e
        e = e.func(*[visit(a) for a in e.args])
        if not e.is_Add:
            return e
        with_root = [t for t in e.args if radical(t)]
        if len(with_root) != 1:
            return e
        t = with_root[0]
        rest = e - t
        square = sp.expand(t * t)
        if rest == 0 or radical(square) or radical(rest):
            return e
        numerator = sp.factor(sp.cancel(sp.expand(rest * rest) - square))
        return numerator / (rest - t)
    return visit(sp.S(expr))


def radial_bounds(region, values) -> tuple[float, float | None]:
    """(lower, upper) radius of a RegionField at the parameters' values; a horizon end is its root r_h as the
    kernels see it (the double r_h), never the bound's expression evaluated afresh."""
    domain = region.region.domain_of(region.r)
    at = {h.side: h.value for h in region.horizons}
    lo = at.get("lower", float(domain.lower.subs(values)) if domain is not None and domain.lower is not None else 0.0)
    hi = at.get("upper", float(domain.upper.subs(values)) if domain is not None and domain.upper is not None
                else None)
    return lo, hi


def _identifier(text: str) -> str:
    """A safe ASCII identifier made from a region's name (any text): letters and digits kept, the rest '_'."""
    name = re.sub(r"[^A-Za-z0-9]+", "_", text).strip("_")
    if not name or name[0].isdigit():
        name = "k_" + name
    return name


class KernelSet:
    """All kernels of one spacetime."""

    def __init__(self, spacetime, directory: str | None = None):
        self.spacetime = spacetime
        self.directory = directory
        missing = [p.name for p in spacetime.parameters.values() if p.value is None]
        if missing:
            raise InputError(f"parameter(s) {', '.join(missing)} have no value; kernels need numbers",
                             file=spacetime.path, key="parameters")
        self.spec_parameters = tuple(p.symbol for p in spacetime.parameters.values())

    def __repr__(self) -> str:
        # cheap on purpose: nothing is built to print the kernels in a notebook
        entries = self.__dict__.get("entries")
        built = "not built yet" if entries is None else f"{len(entries)} kernels"
        if entries is not None:
            checked = [e for e in entries if e.verification is not None]
            flagged = sum(e.verification.status != "verified" for e in checked)
            built += f", {len(checked) - flagged} verified"
            built += f", {flagged} flagged" if flagged else ""
            unchecked = len(entries) - len(checked)
            built += f", {unchecked} not verified yet (verified when first used)" if unchecked else ""
        return f"<KernelSet of {self.spacetime.title!r}: {built}>"

    def _repr_html_(self) -> str:
        """A table of the kernels built so far: name, arguments, status and largest relative error."""
        import html

        entries = self.__dict__.get("entries")
        if entries is None:
            return f"<p>{html.escape(repr(self))}</p>"
        rows = []
        for e in entries:
            v = e.verification
            status = "not verified yet" if v is None else v.status
            error = "" if v is None else f"{v.max_relative_error:.2e}"
            rows.append(f"<tr><td><code>{html.escape(e.name)}</code></td>"
                        f"<td>{html.escape(', '.join(str(a) for a in e.arguments))}</td>"
                        f"<td>{html.escape(status)}</td><td>{error}</td></tr>")
        return (f"<p>{html.escape(repr(self))}</p><table><tr><th>kernel</th><th>arguments</th><th>status</th>"
                f"<th>largest relative error</th></tr>{''.join(rows)}</table>")

    @cached_property
    def horizons(self) -> list:
        """The spacetime's horizons (derive.fields.horizons.Horizon): each root r_h is an argument of the kernels
        after the spec's parameters, its value the root rounded to a double."""
        return self.spacetime.field_problem.horizons if self.spacetime.field is not None else []

    @cached_property
    def parameters(self) -> tuple:
        """The kernels' parameter arguments: the spec's parameters in order, then the horizons' radii."""
        return self.spec_parameters + tuple(h.symbol for h in self.horizons if h.is_new)

    @cached_property
    def values(self) -> dict:
        """{symbol: number} for every parameter argument."""
        from derive.fields.horizons import values_of

        return {**self.spacetime.parameter_values, **values_of(self.horizons)}

    # -- building ------------------------------------------------------------------------------------
    def _entry(self, expression, arguments, name, quantity, owner, owner_kind, domain) -> KernelEntry:
        try:
            numeric = lower(expression, arguments, name, quantity, "numpy", owner, owner_kind, self.directory)
            twin = lower(expression, arguments, name + "_mp", quantity, "mpmath", owner, owner_kind, self.directory)
        except CodegenError as exc:
            raise InputError(f"cannot generate kernel {name}: {exc}", file=self.spacetime.path) from None
        return KernelEntry(numeric.kernel, twin.kernel, expression, tuple(arguments), domain)

    @cached_property
    def entries(self) -> list[KernelEntry]:
        st = self.spacetime
        params = self.parameters
        out: list[KernelEntry] = []
        if st.field is not None:
            problem = st.field_problem
            for name, original in problem.regions.items():
                region = original.factored   # horizons divided out of f and h (derive/fields/horizons.py)
                r = region.r
                # (V and dr*/dr come tamed from the field stage; f, h and r* stand as the spec and sympy wrote them)
                tame = (lambda e, r=r: tame_exponentials(e, r, self.values))
                domain = {"region": name, "r": self._radial_domain(original)}
                tag = _identifier(name)
                out.append(self._entry(region.potential, (r, L_SYMBOL, OMEGA) + params, f"potential_{tag}",
                                       "potential", name, "region", domain))
                out.append(self._entry(region.dtortoise_dr, (r,) + params, f"dtortoise_dr_{tag}",
                                       "dtortoise_dr", name, "region", domain))
                if region.tortoise is not None:
                    out.append(self._entry(tame(region.tortoise), (r,) + params, f"tortoise_{tag}", "tortoise", name,
                                           "region", domain))
                out.append(self._entry(tame(region.f), (r,) + params, f"metric_f_{tag}", "metric_f", name, "region",
                                       domain))
                out.append(self._entry(tame(region.h), (r,) + params, f"metric_h_{tag}", "metric_h", name, "region",
                                       domain))
                for side, end in original.ends.items():
                    if end["kind"] == "regular centre" and end.get("series"):
                        coefficients = [end["regular_exponent"]] + list(end["series"])
                        out.append(self._entry(coefficients, (L_SYMBOL, OMEGA) + params, f"centre_series_{tag}",
                                               "centre_series", name, "region", domain))
                    for condition in ("dirichlet", "neumann"):
                        if end.get(f"series_{condition}"):
                            coefficients = [end["boundary_exponents"][condition]] + list(end[f"series_{condition}"])
                            out.append(self._entry(coefficients, (L_SYMBOL, OMEGA) + params,
                                                   f"boundary_series_{condition}_{tag}", f"boundary_series_{condition}",
                                                   name, "region", domain))
                    if end["kind"] == "horizon":
                        if side == "lower":
                            out.append(self._entry(end["surface_gravity"], params, f"surface_gravity_{tag}",
                                                   "surface_gravity", name, "region", domain))
                        if end.get("series_ingoing"):
                            coefficients = [end["exponents"][0]] + list(end["series_ingoing"])
                            out.append(self._entry(coefficients, (L_SYMBOL, OMEGA) + params,
                                                   f"horizon_series_{tag}", "horizon_series", name, "region", domain))
                        if side == "upper":
                            out.append(self._entry(end["surface_gravity"], params, f"outer_surface_gravity_{tag}",
                                                   "outer_surface_gravity", name, "region", domain))
                        if end.get("series_outgoing"):
                            coefficients = [end["exponents"][0]] + list(end["series_outgoing"])
                            out.append(self._entry(coefficients, (L_SYMBOL, OMEGA) + params,
                                                   f"outer_series_{tag}", "outer_series", name, "region", domain))
            for matching in problem.interfaces:
                first, second = matching.between
                label = f"{first}|{second}"
                domain = {"interface": label}
                out.append(self._entry(matching.transfer_matrix, (L_SYMBOL, OMEGA) + params,
                                       f"transfer_matrix_{_identifier(first)}_{_identifier(second)}",
                                       "transfer_matrix", label, "interface", domain))
        for name, geo in st.geometry.items():
            if any(a.atoms(sp.core.function.AppliedUndef) for a in geo.metric):
                continue   # free functions have no numeric value
            k = geo.kretschmann
            if k.atoms(sp.core.function.AppliedUndef) or k.has(sp.Derivative):
                continue
            domain = {"region": name, "r": None}
            k = tame_exponentials(k, st.coordinates[1], self.values)
            out.append(self._entry(k, tuple(st.coordinates) + params, f"kretschmann_{_identifier(name)}",
                                   "kretschmann", name, "region", domain))
        names = [e.name for e in out]
        clash = sorted({n for n in names if names.count(n) > 1})
        if clash:
            raise InputError(f"region names give clashing kernel names ({', '.join(clash)}); rename the regions so "
                             "they differ in letters and digits", file=st.path, key="region")
        return out

    def _radial_domain(self, region) -> tuple[float, float, bool]:
        """(lower, upper, lower end is a horizon, upper end is a horizon) at the spec's values."""
        lo, hi = radial_bounds(region, self.spacetime.parameter_values)
        horizon = region.ends["lower"]["kind"] == "horizon"
        top_horizon = region.ends["upper"]["kind"] == "horizon"
        return (lo, hi, horizon, top_horizon)

    # -- points --------------------------------------------------------------------------------------
    def points(self, entry: KernelEntry, count: int = POINTS) -> list[np.ndarray]:
        """Sample columns, one per argument, spread over the kernel's domain."""
        values = self.values
        rng = np.random.default_rng(zlib.crc32(entry.name.encode()))
        scale = self._length_scale()
        columns = []
        for a in entry.arguments:
            if a in values:
                columns.append(np.full(count, values[a]))
            elif a == L_SYMBOL:
                columns.append(rng.choice(np.array([0, 1, 2, 3, 4, 5, 8, 12, 20], dtype=float), count))
            elif a == OMEGA:
                columns.append(np.exp(rng.uniform(np.log(1e-3), np.log(50.0), count)) / scale)
            elif entry.domain.get("r") is not None and a == self._radius():
                columns.append(self._radii(entry.domain["r"], count, rng, scale))
            else:
                columns.append(self._coordinate_samples(a, count, rng, entry, scale))
        return columns

    def _length_scale(self) -> float:
        values = [abs(v) for v in self.spacetime.parameter_values.values() if v]
        return float(np.median(values)) if values else 1.0

    def _radius(self):
        return self.spacetime.coordinates[1]

    @staticmethod
    def _radii(domain, count, rng, scale):
        lo, hi, horizon, top_horizon = domain
        if hi is None:
            hi = max(lo, scale) * 200.0
        lo_eff = lo if lo > 0 else hi * 1e-4
        u = rng.uniform(0.0, 1.0, count)
        radii = lo_eff * (hi / lo_eff) ** u if hi / lo_eff > 20 else lo_eff + (hi - lo_eff) * u
        if horizon:   # crowd the horizon: cancellation there is the classic failure
            near = lo * (1 + 10.0 ** -np.arange(1, 11))
            radii[: len(near)] = near
        if top_horizon:
            near = hi * (1 - 10.0 ** -np.arange(1, 11))
            radii[len(radii) // 2: len(radii) // 2 + len(near)] = near
        radii = np.clip(radii, np.nextafter(lo, np.inf) if lo > 0 else 1e-300, np.nextafter(hi, -np.inf))
        return radii

    def _coordinate_samples(self, symbol, count, rng, entry, scale):
        name = symbol.name
        if entry.domain.get("region"):
            region = self.spacetime.regions[entry.domain["region"]]
            d = region.domain_of(symbol)
            values = self.spacetime.parameter_values
            if d is not None:
                lo = float(d.lower.subs(values)) if d.lower is not None else 0.0
                hi = float(d.upper.subs(values)) if d.upper is not None else lo + 100 * scale
                return lo + (hi - lo) * rng.uniform(0.02, 0.98, count)
        if name in ("theta", "chi", "vartheta"):
            return rng.uniform(0.01, np.pi - 0.01, count)
        if name in ("phi", "psi", "varphi"):
            return rng.uniform(0.0, 2 * np.pi, count)
        if name == "t":
            return rng.uniform(-10 * scale, 10 * scale, count)
        return rng.uniform(0.05 * scale, 50 * scale, count)

    # -- verification ----------------------------------------------------------------------------------
    def verify(self, entry: KernelEntry, tolerance: float = TOLERANCE) -> Verification:
        columns = self.points(entry)
        shape = entry.kernel.shape
        components = list(entry.expression) if isinstance(entry.expression, (sp.MatrixBase, list, tuple)) \
            else [sp.S(entry.expression)]
        twin_checked = check_twin(entry.twin.function, components, entry.arguments, columns)
        reference = reference_values(entry.twin.function, columns, shape)
        result = self._measure(entry.kernel, columns, shape, reference, entry.arguments)
        form = "as derived"
        rewrites = [("radical differences rationalised", rationalise_differences), ("factored", sp.factor),
                    ("cancelled", sp.cancel), ("expanded", sp.expand)]
        roots = self._horizons(entry)
        if roots:
            radius = self._radius()
            rewrites.insert(0, ("horizon roots factored out", lambda e: factor_roots(e, radius, roots)))
        series = entry.kernel.quantity.startswith("boundary_series")
        if result[0] > tolerance and not series:     # (a series' coefficients are judged normwise, below)
            for label, rewrite in rewrites:
                try:
                    alternative = [rewrite(c) for c in components]
                except Exception:   # a rewrite sympy cannot do is just not a candidate
                    continue
                expression = (sp.Matrix(shape[0], shape[1], alternative) if len(shape) == 2 else
                              alternative if shape else alternative[0])
                candidate = lower(expression, entry.arguments, entry.kernel.name, entry.kernel.quantity, "numpy",
                                  entry.kernel.owner, entry.kernel.owner_kind, self.directory).kernel
                measured = self._measure(candidate, columns, shape, reference, entry.arguments)
                if measured[0] < result[0]:
                    result, form = measured, label
                    entry.kernel = candidate
                if result[0] <= tolerance:
                    break
        if result[0] > tolerance and series:
            # coefficients of a series summed far out: what matters is the error against the size of the terms
            # (a coefficient near one of its zeros in omega or l is small, and so is its share of the sum)
            normwise = self._normwise(entry, columns, shape, reference, components, tolerance)
            if normwise is not None:
                result, form = normwise, "as derived; normwise (error within the tolerance of sum |terms|)"
        error, worst_index, worst_component = result
        worst = {a.name: float(c[worst_index]) for a, c in zip(entry.arguments, columns)}
        verification = Verification(error, len(columns[0]) if columns else 1, worst,
                                    "verified" if error <= tolerance else "flagged", form=form,
                                    twin_checked=twin_checked)
        if error > tolerance:
            point = [c[worst_index] for c in columns]
            cond = condition_number(components[worst_component], entry.arguments, point)
            verification.condition_number = cond
            verification.reason = (f"relative error {error:.2e} above {tolerance:.0e} at {worst}; condition number "
                                   f"{cond:.3g} (double precision cannot do better than about {cond * 1.1e-16:.1e} "
                                   "with this form)")
        entry.verification = verification
        return verification

    def _horizons(self, entry) -> list:
        name = entry.domain.get("region")
        if name is None or self.spacetime.field is None or entry.domain.get("r") is None:
            return []
        region = self.spacetime.field_problem.regions[name]
        return [end["at"] for end in region.ends.values() if end["kind"] == "horizon"]

    @staticmethod
    def _normwise(entry, columns, shape, reference, components, tolerance):
        """(error, index, component) measured against sum |terms| of the expanded form (the backward error) where
        the plain relative error misses the tolerance, or None when even that misses it."""
        with np.errstate(all="ignore"):
            values = numpy_values(entry.kernel.function, columns, shape)
        errors = relative_errors(values, reference)
        worst = (0.0, 0, 0)
        for component in sorted(set(np.nonzero(~(errors <= tolerance))[1])):
            terms = sp.Add.make_args(sp.expand(components[component]))
            size = sp.lambdify(entry.arguments, sp.Add(*[sp.Abs(t) for t in terms]), "numpy")
            with np.errstate(all="ignore"):
                sizes = np.abs(np.broadcast_to(np.asarray(size(*columns), dtype=complex), errors[:, 0].shape))
            magnitude = np.abs(np.asarray(reference, dtype=complex).reshape(len(errors), -1)[:, component])
            scaled = errors[:, component] * magnitude / sizes
            if not np.all(scaled <= tolerance):
                return None
            index = int(np.argmax(scaled))
            worst = max(worst, (float(scaled[index]), index, int(component)))
        return worst

    @staticmethod
    def _measure(kernel, columns, shape, reference, arguments):
        with np.errstate(all="ignore"):
            values = numpy_values(kernel.function, columns, shape)
        errors = relative_errors(values, reference)
        errors = np.where(np.isfinite(errors), errors, np.inf)
        index = np.unravel_index(int(np.argmax(errors)), errors.shape)
        return float(errors[index]), int(index[0]), int(index[1])

    def verify_all(self, tolerance: float = TOLERANCE) -> list[KernelEntry]:
        for entry in self.entries:
            if entry.verification is None:
                self.verify(entry, tolerance)
        return self.entries

    def require_verified(self) -> None:
        """Raise AccuracyError (exit 1) unless every kernel is verified: the solver calls this first."""
        self.verify_all()
        bad = [e for e in self.entries if e.verification.status != "verified"]
        if bad:
            raise AccuracyError("kernels not verified: " + ", ".join(e.name for e in bad),
                                {e.name: e.verification.reason for e in bad})

    def get(self, quantity: str, owner: str) -> KernelEntry:
        for entry in self.entries:
            if entry.kernel.quantity == quantity and entry.kernel.owner == owner:
                return entry
        raise KeyError(f"{quantity} of {owner}")
