"""The march: the one loop that carries solutions of the radial equation across a spacetime.

Every solver in derive/solve is a *start condition*, a *layout* and an *end read-off* around :func:`march`:

* the start is a state (u, du/dr*) per frequency with a log scale, on a series at a regular centre
  (:func:`centre_start`), at a horizon (the horizon's Frobenius series), or at an outer end;
* the layout is a list of :class:`Piece` in march order, each on one region, with its own spacing and base step
  count; the solvers' layouts are nested under refinement (the counts are multiplied, so 2N steps refine N
  steps node for node);
* :func:`march` propagates the state piece by piece (derive.solve.propagation: the propagators are kept in a
  cache keyed on everything that fixes them), renormalises it with a log scale after each piece, applies the
  transfer matrix of each interface it passes, records the state at the requested *marks* (piece positions)
  and, if asked, the propagator from each mark to the end, which carries a solution given at the end back to
  the mark (its exact inverse is the adjugate over the interfaces' determinants: every step is unimodular);
* the end read-off turns the final state into the solver's quantity: an amplitude far away (the WKB flux
  invariant), a split into in and out waves, a Wronskian with the solution the outer end allows (decaying, or
  normalisable at an AdS boundary), or a matching to the wave leaving through a cosmological horizon.

What a new boundary condition provides: its start state (or its end solution), the pieces that reach it, and
a read-off.  Numerical failure is never an exception here: a grid too coarse for an evanescent stretch
overflows to inf/nan, which the refinement loops turn into a missed tolerance with a message.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from derive.solve.propagation import region_propagator

SPACINGS = ("uniform", "geometric", "from horizon", "to horizon")


class Piece(NamedTuple):
    """One stretch of the march on one region.

    ``a`` and ``b`` are in the piece's own variable: r for "uniform" and "geometric" spacing, x = r - shift for
    "from horizon" (geometric in the distance to a horizon at r = shift, above it), y = shift - r for "to
    horizon" (geometric in the distance to a horizon at r = shift, below it; the march then runs inward and
    du/dr* is taken along -r*).  ``count`` is the number of steps at the base resolution."""

    region: int
    a: float
    b: float
    count: int
    spacing: str = "uniform"
    shift: float = 0.0


class _FromHorizon:
    """A region seen in x = r - r_h (grids geometric in the distance to a horizon below)."""

    def __init__(self, region, shift):
        self.region, self.shift = region, shift

    def potential(self, x, l, omega):
        return self.region.potential(np.asarray(x) + self.shift, l, omega)

    def dtortoise_dr(self, x):
        return self.region.dtortoise_dr(np.asarray(x) + self.shift)


class _ToHorizon:
    """A region seen in y = r_c - r (grids geometric in the distance to a horizon above)."""

    def __init__(self, region, shift):
        self.region, self.shift = region, shift

    def potential(self, y, l, omega):
        return self.region.potential(self.shift - np.asarray(y), l, omega)

    def dtortoise_dr(self, y):
        return self.region.dtortoise_dr(self.shift - np.asarray(y))


_VIEWS: dict = {}    # (id(region), spacing, shift) -> view; the same view object for the same piece keeps the
                     # propagator and grid caches (keyed on the object) effective across l and refinements


def view(region, spacing: str, shift: float):
    """The object the propagator sees for a piece: the region itself, or one view of it per horizon."""
    if spacing in ("uniform", "geometric"):
        return region
    key = (id(region), spacing, float(shift))
    hit = _VIEWS.get(key)
    if hit is None or hit.region is not region:
        if len(_VIEWS) > 256:
            _VIEWS.clear()
        kind = _FromHorizon if spacing == "from horizon" else _ToHorizon
        hit = _VIEWS[key] = kind(region, float(shift))
    return hit


def propagator(problem, l, omegas, piece: Piece, multiple: int = 1):
    """The piece's propagator for every omega at ``multiple`` times its base step count: ((n, 2, 2), log scale)."""
    if piece.spacing not in SPACINGS:
        raise ValueError(f"unknown spacing {piece.spacing!r}")
    region = view(problem.regions[piece.region], piece.spacing, piece.shift)
    return region_propagator(region, l, omegas, piece.a, piece.b, piece.count * multiple,
                             piece.spacing != "uniform")


@dataclass
class Marched:
    """The end of a march: the state at unit size and its log scale, the product of the interfaces'
    determinants crossed, the state at each mark, and (when asked) the propagator from each mark to the end."""

    state: np.ndarray                 # (n, 2), max-norm 1 per frequency
    log_scale: np.ndarray             # (n,): the true state is state * exp(log_scale)
    det: np.ndarray                   # (n,)
    marks: list                       # per mark: (state (n, 2), log scale (n,))
    outer: list                       # per mark: (matrix (n, 2, 2) at unit size, log scale, determinant)

    def back(self, k: int, s0, s1):
        """The solution with (u, du/dr*) = (s0, s1) at the end, at mark k: (vector (n, 2), log scale), the vector
        times exp(log scale) being the true value (P^-1 = adj(P)/det P, det P = the interfaces' determinant)."""
        matrix, log, det = self.outer[k]
        vector = np.stack([matrix[:, 1, 1] * s0 - matrix[:, 0, 1] * s1,
                           -matrix[:, 1, 0] * s0 + matrix[:, 0, 0] * s1], axis=1) / det[:, None]
        return vector, log


def centre_start(problem, l, omegas, r_s, series=None):
    """The regular solution's start at a regular centre: (state (n, 2), log scale (n,)).

    At r_s = 0 (l = 0 in 3+1): u = 0, du/dr* = 1.  Otherwise on the derived Frobenius series at r_s,
    u = r^s (a_0 + a_1 r + a_2 r^2) with the centre's series kernel, s the exponent (l + 1 in 3+1), the power
    r_s^s kept in the log scale (``series``: another kernel of the same signature)."""
    n = len(omegas)
    if r_s == 0.0:
        return np.tile([0.0, 1.0], (n, 1)), np.zeros(n)
    first = problem.regions[0]
    series = series or first.centre_series
    if series is None:
        from derive.solve.centre import Unsupported

        raise Unsupported("the centre's series kernel is needed to start the solution off the centre")
    s, a0, a1, a2 = (np.broadcast_to(np.asarray(c, dtype=float), omegas.shape)
                     for c in np.asarray(series(l, omegas), dtype=float)[:4])
    F = 1.0 / float(np.asarray(first.dtortoise_dr(np.array([r_s]))).reshape(-1)[0])
    poly = a0 + a1 * r_s + a2 * r_s * r_s
    state = np.stack([poly, F * (s / r_s * poly + a1 + 2 * a2 * r_s)], axis=1)
    return state, s * np.log(r_s)


def interface_matrices(interface, l, omegas) -> np.ndarray:
    """The interface's transfer matrix on (u, du/dr*) at every omega, shape (n, 2, 2)."""
    omegas = np.asarray(omegas, dtype=float)
    return np.moveaxis(np.broadcast_to(np.asarray(interface.transfer(l, omegas), dtype=float),
                                       (2, 2, len(omegas))), -1, 0)


def march(problem, l, omegas, pieces, state, log_scale=None, marks=(), outer: bool = False,
          multiple: int = 1, cross_end: bool = False) -> Marched:
    """Carry ``state`` (n, 2) with ``log_scale`` across ``pieces`` for the angular label l at every omega.

    After the last piece of a region, unless it is the last piece of the march, the transfer matrix of the
    interface at that region's upper end (if there is one) is applied.  ``marks`` are piece positions: the state
    is recorded before the piece at each (a mark equal to len(pieces) records the end); with ``outer`` the
    propagator from each mark to the end is kept too (pieces and interfaces from the mark on).  With ``cross_end``
    the interface at the upper end of the last piece's region is applied too (a march that stops at an interface
    and is continued beyond it by other means)."""
    omegas = np.asarray(omegas, dtype=float)
    n = len(omegas)
    state = np.array(state)
    log_scale = np.zeros(n) if log_scale is None else np.array(log_scale, dtype=float)
    interfaces = {i.inner: i for i in problem.interfaces}
    recorded = [None] * len(marks)
    carried = [(np.broadcast_to(np.eye(2), (n, 2, 2)).copy(), np.zeros(n), np.ones(n)) for _ in marks] \
        if outer else []
    det = np.ones(n)

    def accumulate(matrix, scale, position, determinant=None):
        for k, mark in enumerate(marks):
            if position >= mark:
                product, log, d = carried[k]
                product = matrix @ product
                size = np.max(np.abs(product), axis=(1, 2))
                carried[k] = (product / size[:, None, None], log + scale + np.log(size),
                              d if determinant is None else d * determinant)

    for position, piece in enumerate(pieces):
        for k, mark in enumerate(marks):
            if mark == position:
                recorded[k] = (state.copy(), log_scale.copy())
        matrix, scale = propagator(problem, l, omegas, piece, multiple)
        state = np.einsum("nij,nj->ni", matrix, state)
        size = np.max(np.abs(state), axis=1)
        state = state / size[:, None]
        log_scale = log_scale + scale + np.log(size)
        if outer:
            accumulate(matrix, scale, position)
        region = problem.regions[piece.region]
        crossing = (pieces[position + 1].region != piece.region if position + 1 < len(pieces)
                    else cross_end)
        if crossing and region.name in interfaces:
            transfer = interface_matrices(interfaces[region.name], l, omegas)
            state = np.einsum("nij,nj->ni", transfer, state)
            determinant = np.linalg.det(transfer)
            det = det * determinant
            if outer:
                accumulate(transfer, np.zeros(n), position, determinant)
    for k, mark in enumerate(marks):
        if mark == len(pieces):
            recorded[k] = (state.copy(), log_scale.copy())
    return Marched(state, log_scale, det, recorded, carried)
