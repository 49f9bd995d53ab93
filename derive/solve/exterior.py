"""Spectral densities at a static point outside a horizon: in and up modes, and the Boulware, Hartle-Hawking
and Unruh states (docs/conventions.md sections 4 and 7).

Modes (full line, delta-normalised, prefactor 1/sqrt(4 pi omega)):
  in:  u_in -> e^{-i omega r*} + R e^{+i omega r*} far away,  T e^{-i omega r*} at the horizon;
  up:  u_up -> e^{+i omega r*} + R' e^{-i omega r*} at the horizon,  T e^{+i omega r*} far away.
With u_H the solution that is e^{-i omega r*} (unit amplitude) at the horizon and u_inf the unit-flux outgoing
wave far away, u_in = T u_H and u_up = T u_inf, so

    |u_in(r0)|^2 = |T|^2 |u_H(r0)|^2,   |u_up(r0)|^2 = |T|^2 |u_inf(r0)|^2.

u_H is marched outward from the horizon series, u_inf inward from the far radius with the inverse of the same
propagator (derive.solve.horizon); each is the solution that grows toward r0 from its own end, so neither is
obtained as a small difference of large numbers (writing u_up as a combination of u_H and its conjugate would
lose every digit under the barrier).  Per unit omega of the spec's time t, at radius r0,

    in(omega)  = sum_l (2l+1)/(4 pi) |u_in(r0)|^2 / (4 pi omega r0^2),  and the same for up

in 3+1 (in D dimensions the weight of the harmonics of degree l on the (D-2)-sphere, and r0^(D-2)).

States (a thermal mode contributes (1 + n) at +omega and n at -omega, n = 1/(e^{omega/T_H} - 1)):
  Boulware: in + up at omega > 0;  Hartle-Hawking: in and up thermal;  Unruh: only up thermal.
The Hartle-Hawking densities obey S(-omega)/S(omega) = e^{-omega/T_H} exactly, which in the detector's proper
time is detailed balance at the Tolman temperature T_H/sqrt(f(r0)).

Each l is refined by grid doubling as the transmission is (errors: grid, series start, far radius, rounding);
the sum over l stops when three successive terms beyond the classical reach omega r0/sqrt(f(r0)) are below a
hundredth of the tolerance of the total, and the last term kept counts as the truncation error.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.parallel import split_map

from derive.solve.centre import (Unsupported, continuum_threshold, harmonic_weight, region_at, rounding_floor,
                                 shortfall)
from derive.solve.horizon import START, _run, check_supported, layout, threshold_rounding

SPLIT_FROM = 64     # frequencies from which the set is split in two halves (one per core)
MAX_L = 400
STATES = ("boulware", "hartle-hawking", "unruh")


@dataclass
class ExteriorDensity:
    """The in and up parts of the spectral density per unit omega (of t) at radius r0, with errors."""

    omega: np.ndarray
    radius: float
    inward: np.ndarray
    inward_error: np.ndarray
    outward: np.ndarray
    outward_error: np.ndarray
    temperature: float          # Hawking temperature kappa/(2 pi), in units of t
    tolerance: float
    l_max: int

    def thermal_factor(self) -> np.ndarray:
        """n(omega) = 1/(e^{omega/T_H} - 1)."""
        return 1.0 / np.expm1(self.omega / self.temperature)

    def state(self, name: str):
        """(density at +omega, its error, density at -omega, its error) for the named state."""
        if name not in STATES:
            raise Unsupported(f"state {name!r} outside a horizon: one of {', '.join(STATES)}")
        n = self.thermal_factor()
        zero = np.zeros_like(self.omega)
        if name == "boulware":
            return (self.inward + self.outward, self.inward_error + self.outward_error, zero, zero)
        if name == "hartle-hawking":
            both, both_error = self.inward + self.outward, self.inward_error + self.outward_error
            return ((1 + n) * both, (1 + n) * both_error, n * both, n * both_error)
        return (self.inward + (1 + n) * self.outward, self.inward_error + (1 + n) * self.outward_error,
                n * self.outward, n * self.outward_error)

    @property
    def density(self) -> np.ndarray:
        """The Boulware (vacuum) density in + up at omega > 0."""
        return self.inward + self.outward

    @property
    def error(self) -> np.ndarray:
        return self.inward_error + self.outward_error

    @property
    def ok(self) -> bool:
        return bool(np.all(self.error <= self.tolerance * self.density))

    def message(self) -> str:
        return shortfall(self.omega, self.density, self.error, self.tolerance)


def _values(problem, march, l, omegas, r0):
    n = problem.dimension - 2
    weight = harmonic_weight(l, n) / (4 * np.pi * omegas * r0 ** n)
    return weight * np.exp(march.log_horizon2), weight * np.exp(march.log_infinity2)


def _batches(problem, omegas) -> np.ndarray:
    """A batch label per frequency: 1 above the mass; below it, -1 - (half-decades of kappa/threshold below 1),
    kappa = sqrt(threshold^2 - omega^2) the decay rate far away."""
    threshold = continuum_threshold(problem)
    labels = np.ones(len(omegas), dtype=int)
    below = omegas < threshold
    if np.any(below):
        kappa = np.sqrt(threshold ** 2 - omegas[below] ** 2) / threshold
        labels[below] = -1 - np.floor(-2 * np.log10(kappa)).astype(int)
    return labels


def mode_term(problem, l, omegas, r0, tolerance, floor=None, steps=64, max_steps=16384):
    """(2l+1)/(4 pi) |u_in(r0)|^2/(4 pi omega r0^2) and the same for up, with errors, refined by grid doubling
    until each is within the tolerance of itself or of ``floor`` (the sum so far), whichever is larger.

    The grids of N, 2N and 4N steps are nested (derive.solve.horizon), so the fourth-order error falls cleanly
    as N^-4 and each pair extrapolates (Richardson): e(2N) = v(2N) + (v(2N) - v(N))/15.  The value is e(4N);
    its error is |e(4N) - e(2N)| (the error of the less refined extrapolation, so conservative) plus the changes
    from moving the series' start point and the far radius on the N-step grid (series truncation and tail) and
    a rounding floor."""
    n = len(omegas)
    floor = np.zeros(n) if floor is None else floor
    tolerance = np.broadcast_to(np.asarray(tolerance, dtype=float), (n,))
    groups = _batches(problem, omegas)
    if len(np.unique(groups)) > 1:
        # frequencies above the mass and below it (up modes only, evanescent far away) are marched separately,
        # those below in half-decades of their decay rate, so that each batch's far radius suits all of it
        merged = tuple(np.zeros(n) for _ in range(4))
        for group in np.unique(groups):
            index = groups == group
            part = mode_term(problem, l, omegas[index], r0, tolerance[index], floor[index], steps, max_steps)
            for whole, piece in zip(merged, part):
                whole[index] = piece
        return merged
    inward, outward, e_in, e_out = (np.zeros(n) for _ in range(4))
    active = np.arange(n)
    count = steps
    fixed = layout(problem, l, omegas, probe=r0)
    coarse = _values(problem, _run(problem, l, omegas, count, START, probe=r0, fixed=fixed), l, omegas, r0)
    fine = _values(problem, _run(problem, l, omegas, 2 * count, START, probe=r0, fixed=fixed), l, omegas, r0)
    while len(active):
        w = omegas[active]
        finest = _values(problem, _run(problem, l, w, 4 * count, START, probe=r0, fixed=fixed), l, w, r0)
        with np.errstate(invalid="ignore", over="ignore"):
            before = [fine[p] + (fine[p] - coarse[p]) / 15 for p in (0, 1)]
            after = [finest[p] + (finest[p] - fine[p]) / 15 for p in (0, 1)]
            change = [np.abs(after[p] - before[p]) for p in (0, 1)]
        scale = np.maximum(np.abs(after[0]) + np.abs(after[1]), floor[active])
        done = change[0] + change[1] <= tolerance[active] * scale
        last = 4 * count >= max_steps
        if last:
            done[:] = True
        if np.any(done):
            index = active[done]
            wd = omegas[index]
            # series truncation and tail: measured on the coarsest of the three grids (they do not depend on the
            # resolution, and only the moved piece's grid differs between the two runs)
            moved = _values(problem, _run(problem, l, wd, count, START / 2, probe=r0, fixed=fixed),
                            l, wd, r0)
            farther = _values(problem, _run(problem, l, wd, count, START, far_factor=4.0, probe=r0, fixed=fixed),
                              l, wd, r0)
            for part, (value, error) in enumerate(((inward, e_in), (outward, e_out))):
                raw = coarse[part][done]
                value[index] = after[part][done]
                error[index] = (change[part][done] + np.abs(raw - moved[part]) + np.abs(raw - farther[part])
                                + (rounding_floor(4 * count) + threshold_rounding(problem, wd))
                                * np.abs(after[part][done]))
            if not last:   # not there yet with every source of error counted: refine further
                short = e_in[index] + e_out[index] > tolerance[index] * scale[done]
                done[np.nonzero(done)[0][short]] = False
        finished = active[done]
        bad = ~np.isfinite(e_in[finished] + e_out[finished] + inward[finished] + outward[finished])
        if np.any(bad):   # a grid too coarse for an evanescent stretch: say so rather than return a number
            e_in[finished[bad]] = np.inf
        active = active[~done]
        coarse = (fine[0][~done], fine[1][~done])
        fine = (finest[0][~done], finest[1][~done])
        count *= 2
    return inward, outward, e_in, e_out


def _l_sum(problem, omegas, r0, tolerance, f0, progress):
    """The sum over l for each frequency: (in, up, their errors, the largest l reached).  Each frequency sums
    its own l: its reach omega r0/sqrt(f(r0)) sets its share of the tolerance, and it stops after three quiet
    terms beyond its reach while the others go on."""
    n = len(omegas)
    reach = omegas * r0 / np.sqrt(f0)
    inward, outward, e_in, e_out = (np.zeros(n) for _ in range(4))
    quiet = np.zeros(n, dtype=int)
    summing = np.arange(n)
    for l in range(MAX_L + 1):
        # each term to a share of the tolerance (of itself, or of the sum so far): about reach + 1 terms count
        w = omegas[summing]
        t_in, t_out, te_in, te_out = mode_term(problem, l, w, r0, tolerance / (4 + reach[summing]),
                                               floor=inward[summing] + outward[summing])
        inward[summing] += t_in
        outward[summing] += t_out
        e_in[summing] += te_in
        e_out[summing] += te_out
        total = inward[summing] + outward[summing]
        small = t_in + t_out <= 0.01 * tolerance * total
        quiet[summing] = np.where(small & (l > reach[summing]), quiet[summing] + 1, 0)
        finished = quiet[summing] >= 3
        e_in[summing[finished]] += t_in[finished]     # the first neglected terms are smaller than the last kept
        e_out[summing[finished]] += t_out[finished]
        summing = summing[~finished]
        if progress is not None:
            progress(l, 1.0 - len(summing) / n)
        if not len(summing):
            return inward, outward, e_in, e_out, l
    raise Unsupported(f"the l-sum did not converge by l = {MAX_L}")


def exterior_density(problem, omegas, r0: float, tolerance: float = 1e-10, progress=None) -> ExteriorDensity:
    """The in and up spectral densities at radius r0 outside the horizon, summed over l to the tolerance
    (each frequency to its own l; see :func:`_l_sum`)."""
    check_supported(problem)
    first = problem.regions[0]
    if not r0 > first.lower:
        raise Unsupported(f"the point r = {r0:g} must lie outside the horizon r = {first.lower:g}")
    omegas = np.asarray(omegas, dtype=float)
    if omegas.ndim != 1 or np.any(~np.isfinite(omegas)) or np.any(omegas <= 0):
        raise ValueError("frequencies must be positive and finite")
    region = region_at(problem, r0)
    f0 = float(np.asarray(region.metric_f(np.array([r0]))).reshape(-1)[0])
    # two fixed halves (every other frequency), on both cores where there are two: the same result either way
    halves = [np.arange(len(omegas))] if len(omegas) < SPLIT_FROM else [np.arange(0, len(omegas), 2),
                                                                           np.arange(1, len(omegas), 2)]
    parts = split_map(_l_sum, [(problem, omegas[index], r0, tolerance, f0, progress if i == 0 else None)
                               for i, index in enumerate(halves)])
    n = len(omegas)
    inward, outward, e_in, e_out = (np.zeros(n) for _ in range(4))
    for index, part in zip(halves, parts):
        for whole, piece in zip((inward, outward, e_in, e_out), part[:4]):
            whole[index] = piece
    l = max(part[4] for part in parts)
    kappa = problem.regions[0].surface_gravity
    return ExteriorDensity(omegas, r0, inward, e_in, outward, e_out, float(kappa) / (2 * np.pi), tolerance, l)
