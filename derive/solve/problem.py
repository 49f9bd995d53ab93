"""The numeric description of a radial problem: what the solver sees (no sympy here or below).

The code generator fills these records from verified kernels (derive/codegen/problem.py); the solver and the
detector read them.  Every callable takes numpy arrays and broadcasts; parameters are already bound.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable


@dataclass(frozen=True)
class NumericRegion:
    """One region between two radii, in order from the centre outward.

    potential(r, l, omega) -> V;  dtortoise_dr(r) -> 1/F;  metric_f(r) -> f = -g_tt.
    ``lower_kind`` / ``upper_kind``: "regular centre", "horizon", "interface", "infinity", ...
    ``tail``: the class of the potential's tail at infinity ("short-range", "centrifugal", ...) or None.
    """

    name: str
    lower: float
    upper: float | None
    lower_kind: str
    upper_kind: str
    tail: str | None
    potential: Callable
    dtortoise_dr: Callable
    metric_f: Callable
    horizon_series: Callable | None = None    # (l, omega) -> [exponent, a_0, a_1, a_2] at a lower horizon
    surface_gravity: float | None = None
    centre_series: Callable | None = None     # (l, omega) -> [exponent, a_0, a_1, a_2] at a regular centre
    outer_series: Callable | None = None      # (l, omega) -> [exponent, a_0, a_1, a_2] in y = r_c - r at an
                                              # upper (cosmological) horizon r_c = ``upper``
    outer_surface_gravity: float | None = None
    boundary_series: dict | None = None       # at an AdS boundary: {"dirichlet" | "neumann": (l, omega) ->
                                              # [exponent, a_0, a_1, ...]}, u = z^s sum a_k z^k in z = 1/r
    flat_lapse: float | None = None           # alpha of a flat region -alpha^2 dt^2 + dr^2 + r^2 dOmega^2 (its
                                              # radial equation is Bessel's: derive.solve.flat), else None


@dataclass(frozen=True)
class NumericInterface:
    """transfer(l, omega) -> array (2, 2, ...) acting on (u, du/dr*) from the inner to the outer region."""

    radius: float
    inner: str
    outer: str
    transfer: Callable


@dataclass(frozen=True)
class NumericProblem:
    """Regions ordered outward from the innermost end, and the interfaces between them."""

    title: str
    regions: tuple[NumericRegion, ...]
    interfaces: tuple[NumericInterface, ...]
    mass: float
    length_scale: float
    dimension: int = 4          # spacetime dimension D
    boundary: str = "dirichlet"  # the condition at an AdS boundary: "dirichlet", "neumann" or "transparent"


@dataclass(frozen=True)
class NumericDetector:
    """The [detector] and [compare] sections as numbers (filled at the symbolic boundary)."""

    radius: float
    shape: str
    switching: dict            # numeric values of the switching keys (width, tail, ...)
    gaps: tuple[float, ...]
    state: str
    coupling: float | None
    compare_with: str | None   # "minkowski", a path, or None
    sigmas: float
    profile: Callable | None = None   # chi(tau) for a switching given as an expression (a lowered kernel)
