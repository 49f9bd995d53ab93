"""The Spacetime: what a spec file describes, as frozen records of sympy objects.

These records are the first stage of the pipeline (DEVELOPERS.md).  They hold no derived quantities; later
stages (geometry, shells, fields) are reached through :attr:`Spacetime.geometry` and the functions of
:mod:`derive.api`, computed lazily and cached there.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dataclass_field
from functools import cached_property
from typing import Mapping

import sympy as sp


@dataclass(frozen=True)
class Parameter:
    """A named constant of the spacetime: a sympy Symbol with assumptions, and a value for numerics."""

    name: str
    symbol: sp.Symbol
    value: float | None
    assumptions: Mapping[str, bool]


@dataclass(frozen=True)
class Domain:
    """Bounds of one coordinate inside a region: lower < x < upper (None where unbounded)."""

    coordinate: sp.Symbol
    lower: sp.Expr | None = None
    upper: sp.Expr | None = None
    lower_closed: bool = False
    upper_closed: bool = False


@dataclass(frozen=True)
class Region:
    """One region of spacetime with its own metric.

    ``metric`` has the definitions substituted (what is computed with); ``metric_display`` keeps the
    definitions as names (what is shown).  ``unknowns`` are constants of this region fixed by junction
    conditions.
    """

    name: str
    metric: sp.Matrix
    metric_display: sp.Matrix
    line_element_text: str | None
    where: object | None
    where_text: str | None
    domains: tuple[Domain, ...]
    unknowns: tuple[sp.Symbol, ...]

    def domain_of(self, coordinate: sp.Symbol) -> Domain | None:
        for domain in self.domains:
            if domain.coordinate == coordinate:
                return domain
        return None


@dataclass(frozen=True)
class Interface:
    """A static hypersurface coordinate = value between two regions; the normal points from
    ``between[0]`` to ``between[1]``."""

    between: tuple[str, str]
    coordinate: sp.Symbol
    value: sp.Expr
    text: str


@dataclass(frozen=True)
class FieldSpec:
    """The scalar field: mass mu and curvature coupling xi (sympy expressions; "conformal" resolved)."""

    mass: sp.Expr
    coupling: sp.Expr
    coupling_text: str
    boundary: str = "dirichlet"    # at an AdS boundary: "dirichlet", "neumann" or "transparent"


@dataclass(frozen=True)
class DetectorSpec:
    """A static Unruh-DeWitt detector."""

    coordinate: sp.Symbol | None
    position: sp.Expr | None
    switching: Mapping[str, object]
    gaps: tuple[float, ...]
    state: str
    coupling: float | None


@dataclass(frozen=True)
class ArrayDetectorSpec:
    """One of several static detectors ([[detectors]]): its name, its position as written (parsed by
    derive.spec.positions), one gap, and its switching (``centre``: the time of the peak in the spec's time
    coordinate; widths in the detector's proper time)."""

    name: str
    at: object
    gap: float
    switching: Mapping[str, object]


@dataclass(frozen=True)
class CompareSpec:
    """What the response is compared with: "minkowski" or the path of another spec."""

    with_: str
    sigmas: float


@dataclass(frozen=True)
class DesignSpec:
    """[design]: what derive design searches (every key optional; None means "from the detector and the
    locality budget")."""

    gaps: tuple[float, float] | None = None
    shapes: tuple[str, ...] = ("gaussian",)
    locality: float = 1.0
    shortest: float | None = None
    longest: float | None = None
    radii: tuple[float, float] | None = None
    positions: int = 5
    region: str | None = None          # search the radius over this region (instead of radii)
    delays: tuple[float, float] | None = None   # a pair's search: the second detector's peak minus the first's


@dataclass(frozen=True)
class Spacetime:
    """Everything a spec file says, parsed and validated."""

    path: str
    title: str
    source_hash: str
    parameters: Mapping[str, Parameter]
    coordinates: tuple[sp.Symbol, ...]
    definitions: Mapping[sp.Symbol, sp.Expr]
    functions: Mapping[str, object]
    regions: Mapping[str, Region]
    interfaces: tuple[Interface, ...]
    field: FieldSpec | None = None
    detector: DetectorSpec | None = None
    compare: CompareSpec | None = None
    numerics: Mapping[str, float] = dataclass_field(default_factory=dict)
    detectors: tuple = ()      # [[detectors]]: ArrayDetectorSpec entries, for correlations
    design_settings: DesignSpec | None = None   # [design]: the probe search of derive design

    @property
    def dimension(self) -> int:
        return len(self.coordinates)

    @property
    def parameter_values(self) -> dict[sp.Symbol, float]:
        """{symbol: value} for every parameter that has a numeric value."""
        return {p.symbol: p.value for p in self.parameters.values() if p.value is not None}

    def symbol(self, name: str) -> sp.Symbol:
        """The sympy symbol of a parameter or coordinate, by name."""
        if name in self.parameters:
            return self.parameters[name].symbol
        for c in self.coordinates:
            if c.name == name:
                return c
        raise KeyError(name)

    @cached_property
    def geometry(self):
        """{region name: RegionGeometry}, each computed lazily on first use of a quantity."""
        from derive.geometry.region import RegionGeometry

        return {name: RegionGeometry(self, region) for name, region in self.regions.items()}

    @cached_property
    def shells(self) -> list:
        """One :class:`~derive.geometry.shells.Shell` per interface, in spec order."""
        from derive.geometry.shells import Shell

        return [Shell(self, interface) for interface in self.interfaces]

    @cached_property
    def field_problem(self):
        """The :class:`~derive.fields.radial.FieldProblem`: radial equations and matching across shells."""
        from derive.fields.radial import FieldProblem

        return FieldProblem(self)

    @cached_property
    def kernels(self):
        """The :class:`~derive.codegen.catalog.KernelSet`: numeric kernels generated from the field problem."""
        from derive.codegen.catalog import KernelSet

        return KernelSet(self)

    @cached_property
    def numeric_problem(self):
        """What the solver reads: the verified kernels bound to the parameters' values."""
        from derive.codegen.problem import numeric_problem

        return numeric_problem(self.kernels)

    def spectrum(self, omega, at: float | None = None, l: int = 0, tolerance: float | None = None, progress=None):
        """The spectral density at a static point: see :func:`derive.pipeline.spectrum`."""
        from derive.pipeline import spectrum

        return spectrum(self, omega, at, l, tolerance, progress)

    def two_point(self, omega, between, tolerance: float | None = None, progress=None):
        """The spectral two-point (Wightman) function between two static points: see
        :func:`derive.pipeline.two_point`."""
        from derive.pipeline import two_point

        return two_point(self, omega, between, tolerance, progress)

    def correlations(self, tolerance: float | None = None, progress=None):
        """Several detectors ([[detectors]]): probabilities, every pair's joint state, entanglement and signalling;
        see :func:`derive.pipeline.correlations`."""
        from derive.pipeline import correlations

        return correlations(self, tolerance, progress)

    def design(self, tolerance: float | None = None, progress=None):
        """The local probe that tells this spacetime from its [compare] reference in the fewest runs, the
        trade-off against the switching's duration, and the quantum limit: see :func:`derive.pipeline.design`."""
        from derive.pipeline import design

        return design(self, tolerance, progress)

    def response(self, gaps=None, tolerance: float | None = None, switching: dict | None = None, compare=None,
                 progress=None):
        """The static detector's response, comparison, locality, runs: see :func:`derive.pipeline.response`."""
        from derive.pipeline import response

        return response(self, gaps, tolerance, switching, compare, progress)

    def __repr__(self) -> str:
        regions = ", ".join(self.regions)
        return (f"<Spacetime {self.title!r}: {self.dimension} dimensions, regions {regions}; "
                f"{len(self.interfaces)} interface(s); from {self.path}>")

    def _repr_html_(self) -> str:
        """The spec as a notebook shows it: regions with their line elements and domains, interfaces,
        parameters, field and detector, all in the spec's own words (nothing is derived to show it)."""
        import html

        def cell(text):
            return f"<td>{html.escape(str(text))}</td>"

        rows = "".join(f"<tr>{cell(name)}{cell(region.where_text or 'everywhere')}"
                       f"<td><code>{html.escape(region.line_element_text or '(metric components)')}</code></td></tr>"
                       for name, region in self.regions.items())
        lines = [f"<p><b>{html.escape(self.title)}</b> ({self.dimension} dimensions, from "
                 f"<code>{html.escape(str(self.path))}</code>)</p>",
                 f"<table><tr><th>region</th><th>where</th><th>line element</th></tr>{rows}</table>"]
        if self.interfaces:
            lines.append("<p>interfaces: " + "; ".join(
                html.escape(f"{' | '.join(i.between)} at {i.text}") for i in self.interfaces) + "</p>")
        if self.parameters:
            lines.append("<p>parameters: " + ", ".join(
                html.escape(f"{p.name} = {p.value:g}" if p.value is not None else p.name)
                for p in self.parameters.values()) + "</p>")
        if self.field is not None:
            lines.append(html.escape(f"field: mass {self.field.mass}, coupling {self.field.coupling}")
                         .join(("<p>", "</p>")))
        if self.detector is not None and self.detector.gaps:
            detector = self.detector
            gaps = ", ".join(f"{g:g}" for g in detector.gaps)
            lines.append("<p>" + html.escape(f"detector at {detector.coordinate} = {detector.position}, state "
                                             f"{detector.state}, gaps {gaps}") + "</p>")
        if self.detectors:
            lines.append("<p>detectors: " + "; ".join(html.escape(f"{d.name} at {d.at}, gap {d.gap:g}")
                                                      for d in self.detectors) + "</p>")
        return "".join(lines)
