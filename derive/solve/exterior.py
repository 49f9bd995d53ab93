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

from dataclasses import dataclass, replace

import numpy as np

from derive.solve.centre import Unsupported, continuum_threshold, harmonic_weight, region_at, shortfall
from derive.solve.cosmological import temperature as cosmological_temperature
from derive.solve.horizon import START, _run, check_supported, layout, threshold_rounding
from derive.solve.summation import l_sum, on_both_cores, refine

MAX_L = 400
STATES = ("boulware", "hartle-hawking", "unruh")


def _values(problem, march, l, omegas, pair, cos_gamma):
    """The l-terms of the in and up parts between the radii ``pair`` (r1 <= r2; the probes of ``march`` are the
    distinct ones, increasing), and their sizes: (in, up, size_in, size_up), complex values and real sizes, each
    (n,).  With the harmonics' weight h_l and G_l(cos gamma) (derive.solve.offcentre.angular_factor):

        in = h_l G_l u_in(r1) conj(u_in(r2)) / (4 pi omega (r1 r2)^(n/2)),
        size_in = h_l (|u_in(r1)|^2/r1^n + |u_in(r2)|^2/r2^n) / (8 pi omega),

    and the same for up.  On the diagonal (r1 = r2, gamma = 0) the values are real and equal their sizes."""
    from derive.solve.offcentre import angular_factor

    n = problem.dimension - 2
    radii = sorted(set(pair))
    k1, k2 = radii.index(pair[0]), radii.index(pair[1])
    weight = harmonic_weight(l, n) / (4 * np.pi * omegas)
    angular = angular_factor(l, n, cos_gamma)
    out = []
    for logs, phases in ((march.log_in, march.phase_in), (march.log_up, march.phase_up)):
        first = logs[k1] - 0.5 * n * np.log(pair[0])
        second = logs[k2] - 0.5 * n * np.log(pair[1])
        if k1 == k2:
            value = weight * angular * np.exp(first + second) + 0j
        else:
            value = weight * angular * np.exp(first + second + 1j * (phases[k1] - phases[k2]))
        out.append((value, weight * (np.exp(2 * first) + np.exp(2 * second)) / 2))
    return out[0][0], out[1][0], out[0][1], out[1][1]


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


def mode_term(problem, l, omegas, pair, cos_gamma, tolerance, floor=None, steps=32, max_steps=16384):
    """The l-terms of the in and up parts between the radii ``pair`` (see :func:`_values`), their sizes and
    errors, refined until each is within the tolerance of its size or of ``floor`` (the size of the sum so far),
    whichever is larger (derive.solve.summation.refine, Richardson on nested grids): (in, up, size_in, size_up,
    error_in, error_up).  The errors count the changes from moving the series' start point and the far radius
    (series truncation and tail) and a rounding floor that grows near the mass threshold."""
    n = len(omegas)
    floor = np.zeros(n) if floor is None else floor
    tolerance = np.broadcast_to(np.asarray(tolerance, dtype=float), (n,))
    groups = _batches(problem, omegas)
    if len(np.unique(groups)) > 1:
        # frequencies above the mass and below it (up modes only, evanescent far away) are marched separately,
        # those below in half-decades of their decay rate, so that each batch's far radius suits all of it
        merged = (np.zeros(n, complex), np.zeros(n, complex)) + tuple(np.zeros(n) for _ in range(4))
        for group in np.unique(groups):
            index = groups == group
            part = mode_term(problem, l, omegas[index], pair, cos_gamma, tolerance[index], floor[index], steps,
                             max_steps)
            for whole, piece in zip(merged, part):
                whole[index] = piece
        return merged
    probes = tuple(sorted(set(pair)))
    fixed = layout(problem, l, omegas, probe=probes[-1])

    def values(w, count, start=START, far_factor=1.0):
        march = _run(problem, l, w, count, start, far_factor=far_factor, probe=probes, fixed=fixed)
        inward, outward, size_in, size_up = _values(problem, march, l, w, pair, cos_gamma)
        return (inward, outward), (size_in, size_up)

    def alternatives(w, count):   # series truncation (an earlier start) and the tail (a farther end)
        return [values(w, count, start=START / 2)[0], values(w, count, far_factor=4.0)[0]]

    (inward, outward), (size_in, size_up), (e_in, e_out), _ = refine(
        values, omegas, tolerance, floor, steps, max_steps, alternatives,
        rounding=lambda w: threshold_rounding(problem, w))
    return inward, outward, size_in, size_up, e_in, e_out


def _l_sum(problem, omegas, pair, cos_gamma, tolerance, reach, progress):
    """The sum over l for each frequency (derive.solve.summation.l_sum): (in, up, size_in, size_up, error_in,
    error_up, the largest l reached); the reach omega r/sqrt(f(r)) at the farther point."""

    def term(l, summing, share, floor):
        t_in, t_up, s_in, s_up, e_in, e_up = mode_term(problem, l, omegas[summing], pair, cos_gamma, share,
                                                       floor=floor)
        return (t_in, t_up), (s_in, s_up), (e_in, e_up)

    (inward, outward), (size_in, size_up), (e_in, e_up), l = l_sum(term, len(omegas), tolerance, reach, MAX_L,
                                                                   progress)
    return inward, outward, size_in, size_up, e_in, e_up, l


@dataclass
class ExteriorTwoPoint:
    """The in and up parts of the spectral two-point function per unit omega (of t) between two static points
    outside a horizon (complex; real on the diagonal, the densities), their errors (absolute) and sizes (the
    scale the tolerance refers to), and the states built from them.

    States (a thermal mode contributes (1 + n) at +omega and n conj(...) at -omega, n = 1/(e^{omega/T_H} - 1)):
    Boulware: in + up at omega > 0;  Hartle-Hawking: in and up thermal;  Unruh: only up thermal."""

    omega: np.ndarray
    radii: tuple
    cos_gamma: float
    inward: np.ndarray
    outward: np.ndarray
    size_in: np.ndarray
    size_up: np.ndarray
    inward_error: np.ndarray
    outward_error: np.ndarray
    temperature: float          # Hawking temperature kappa/(2 pi), in units of t
    tolerance: float
    l_max: int
    outer_temperature: float | None = None   # a cosmological horizon's kappa_c/(2 pi), when there is one

    @property
    def states(self) -> tuple:
        """The states defined here: with a cosmological horizon also 'bunch-davies' (see :meth:`state`)."""
        return STATES + (("bunch-davies",) if self.outer_temperature is not None else ())

    @property
    def value(self) -> np.ndarray:
        """The Boulware (vacuum) part at +omega: in + up."""
        return self.inward + self.outward

    density = value

    @property
    def error(self) -> np.ndarray:
        return self.inward_error + self.outward_error

    @property
    def scale(self) -> np.ndarray:
        return self.size_in + self.size_up

    @property
    def ok(self) -> bool:
        return bool(np.all(self.error <= self.tolerance * self.scale))

    def message(self) -> str:
        return shortfall(self.omega, self.scale, self.error, self.tolerance)

    def thermal_factor(self) -> np.ndarray:
        """n(omega) = 1/(e^{omega/T_H} - 1)."""
        with np.errstate(over="ignore"):      # far above the temperature the occupation is 0
            return 1.0 / np.expm1(self.omega / self.temperature)

    def state(self, name: str):
        """(S_+ at +omega, its error, S_- at -omega, its error) for the named state; S_- = n conj(mode sum).

        boulware: no thermal factor (the static vacuum).  hartle-hawking: in and up modes thermal at the black
        hole's T_H.  unruh: the up modes (from the past black-hole horizon) thermal at T_H; the in modes vacuum
        when they come from infinity, thermal at the cosmological T_c when they come from a past cosmological
        horizon (each horizon's modes at its own temperature).  bunch-davies (with a cosmological horizon): in
        and up modes thermal at T_c."""
        if name not in self.states:
            raise Unsupported(f"state {name!r} outside a horizon: one of {', '.join(self.states)}")
        n = self.thermal_factor()
        with np.errstate(over="ignore"):
            n_c = (np.zeros_like(n) if self.outer_temperature is None
                   else 1.0 / np.expm1(self.omega / self.outer_temperature))
        if name == "boulware":
            n_in, n_up = np.zeros_like(n), np.zeros_like(n)
        elif name == "hartle-hawking":
            n_in, n_up = n, n
        elif name == "unruh":
            n_in, n_up = n_c, n
        else:
            n_in, n_up = n_c, n_c
        return ((1 + n_in) * self.inward + (1 + n_up) * self.outward,
                (1 + n_in) * self.inward_error + (1 + n_up) * self.outward_error,
                n_in * np.conj(self.inward) + n_up * np.conj(self.outward),
                n_in * self.inward_error + n_up * self.outward_error)


def _summed(problem, omegas, pair, cos_gamma, tolerance, progress):
    """The l-sums of the in and up parts between the radii ``pair`` outside the horizon, on both cores.

    At an AdS boundary the field's condition there chooses the modes (derive.solve.bound.boundary_solution);
    'transparent' is the average of the Dirichlet and Neumann two-point functions (Avis, Isham & Storey,
    Phys. Rev. D 18, 3565 (1978); the zeta = 0 member of the image sums of Lifschytz & Ortiz, Phys. Rev. D 49,
    1929 (1994)), and its errors the average of theirs."""
    check_supported(problem)
    from derive.solve.bound import check_boundary, is_ads

    if is_ads(problem):
        check_boundary(problem, problem.boundary)
        if problem.boundary == "transparent":
            both = [_summed(replace(problem, boundary=b), omegas, pair, cos_gamma, tolerance, progress)
                    for b in ("dirichlet", "neumann")]
            merged = tuple((a + b) / 2 for a, b in zip(both[0][0], both[1][0]))
            return merged, max(both[0][1], both[1][1]), both[0][2]
    omegas = _checked(problem, pair, omegas)
    far = max(pair)
    f0 = float(np.asarray(region_at(problem, far).metric_f(np.array([far]))).reshape(-1)[0])
    reach = omegas * far / np.sqrt(f0)
    parts = on_both_cores(_l_sum, len(omegas), lambda index, first: (
        problem, omegas[index], pair, cos_gamma, tolerance, reach[index], progress if first else None))
    n = len(omegas)
    merged = (np.zeros(n, complex), np.zeros(n, complex)) + tuple(np.zeros(n) for _ in range(4))
    for index, part in parts:
        for whole, piece in zip(merged, part[:6]):
            whole[index] = piece
    kappa = problem.regions[0].surface_gravity
    return merged, max(part[6] for _, part in parts), float(kappa) / (2 * np.pi)


def _checked(problem, pair, omegas) -> np.ndarray:
    """The frequencies as an array, after checking them (positive, finite) and the points (between the horizons)."""
    first, last = problem.regions[0], problem.regions[-1]
    for r in pair:
        if not r > first.lower:
            raise Unsupported(f"the point r = {r:g} must lie outside the horizon r = {first.lower:g}")
        if last.upper_kind == "horizon" and not r < last.upper:
            raise Unsupported(f"the point r = {r:g} must lie inside the cosmological horizon r = {last.upper:g}")
    omegas = np.asarray(omegas, dtype=float)
    if omegas.ndim != 1 or np.any(~np.isfinite(omegas)) or np.any(omegas <= 0):
        raise ValueError("frequencies must be positive and finite")
    return omegas


def exterior_multipole(problem, omegas, r0: float, l: int, tolerance: float = 1e-10) -> ExteriorTwoPoint:
    """The l-th terms of the in and up densities at radius r0 outside the horizon (per unit omega, with the
    harmonics' weight): two points at r0 an angle gamma apart have in and up parts sum_l of these times
    G_l(cos gamma) (derive.solve.offcentre.angular_factor).  Refined to the tolerance relative to the term; with
    ``.state(name)`` each state's l-th term.  At an AdS boundary with the 'transparent' condition, the average of
    the Dirichlet and Neumann terms (as for the whole sum)."""
    check_supported(problem)
    from derive.solve.bound import check_boundary, is_ads

    if is_ads(problem):
        check_boundary(problem, problem.boundary)
        if problem.boundary == "transparent":
            both = [exterior_multipole(replace(problem, boundary=b), omegas, r0, l, tolerance)
                    for b in ("dirichlet", "neumann")]
            fields = ("inward", "outward", "size_in", "size_up", "inward_error", "outward_error")
            return replace(both[0], **{k: (getattr(both[0], k) + getattr(both[1], k)) / 2 for k in fields})
    omegas = _checked(problem, (r0, r0), omegas)
    t_in, t_up, s_in, s_up, e_in, e_up = mode_term(problem, l, omegas, (r0, r0), 1.0, tolerance)
    temperature = float(problem.regions[0].surface_gravity) / (2 * np.pi)
    return ExteriorTwoPoint(omegas, (r0, r0), 1.0, t_in.real, t_up.real, s_in, s_up, e_in, e_up, temperature,
                            tolerance, l, cosmological_temperature(problem))


def states_of(problem) -> tuple:
    """The states outside this black hole: STATES, and 'bunch-davies' inside a cosmological horizon."""
    return STATES + (("bunch-davies",) if cosmological_temperature(problem) is not None else ())


def exterior_density(problem, omegas, r0: float, tolerance: float = 1e-10, progress=None) -> ExteriorTwoPoint:
    """The in and up spectral densities at radius r0 outside the horizon, summed over l to the tolerance
    (each frequency to its own l; see :func:`_l_sum`): the diagonal of :func:`exterior_two_point` (real, with
    ``.density`` the Boulware density in + up)."""
    (inward, outward, size_in, size_up, e_in, e_out), l, temperature = _summed(problem, omegas, (r0, r0), 1.0,
                                                                                tolerance, progress)
    return ExteriorTwoPoint(np.asarray(omegas, dtype=float), (r0, r0), 1.0, inward.real, outward.real, size_in,
                            size_up, e_in, e_out, temperature, tolerance, l, cosmological_temperature(problem))


def exterior_two_point(problem, omegas, r1: float, r2: float, cos_gamma: float, tolerance: float = 1e-10,
                       progress=None) -> ExteriorTwoPoint:
    """The in and up parts of the spectral two-point function between static points at radii r1, r2 outside
    the horizon, an angle gamma apart (``cos_gamma``), summed over l; errors absolute, the tolerance relative to
    the scale (the sum of the terms' sizes, at most the mean of the two points' densities)."""
    pair = (min(r1, r2), max(r1, r2))
    (inward, outward, size_in, size_up, e_in, e_out), l, temperature = _summed(problem, omegas, pair,
                                                                                float(cos_gamma), tolerance,
                                                                                progress)
    if r1 > r2:      # the sum was taken with the points in increasing order: S(x2, x1) = conj(S(x1, x2))
        inward, outward = np.conj(inward), np.conj(outward)
    return ExteriorTwoPoint(np.asarray(omegas, dtype=float), (r1, r2), float(cos_gamma), inward, outward, size_in,
                            size_up, e_in, e_out, temperature, tolerance, l, cosmological_temperature(problem))
