"""The regular solution inside a flat first region in closed form (docs/conventions.md section 4).

A region -alpha^2 dt^2 + dr^2 + r^2 dOmega_n^2 (n = D - 2; the flat interior of a shell or a bubble, with the lapse
alpha fixed by the junction) has the radial equation, for u = r^(n/2) psi in r* = r/alpha,

    d^2u/dr^2 + (k^2 - (nu^2 - 1/4)/r^2) u = 0,   k^2 = omega^2/alpha^2 - mu^2,   nu = l + (n - 1)/2,

Bessel's: the solution regular at r = 0 is u = c r^(1/2) J_nu(k r), with c = Gamma(nu + 1) (2/k)^nu a_0 so that
u -> a_0 r^(nu + 1/2), the normalisation of the march's start at a centre (derive.solve.march.centre_start:
a_0 from the centre's series kernel; in 3+1 at l = 0, u = 0 and du/dr* = 1 there, a_0 = dr*/dr).  The march then
starts at the region's outer end instead of the centre: the interior costs nothing, at every l, and its values
at detector radii inside are exact.  scipy's Bessel functions (Amos's algorithm) are checked against mpmath in
tests/test_flat.py.  Where k^2 <= 0 for some frequency, or J_nu underflows (an l whose term is far below any
tolerance there), the caller marches as before.
"""

from __future__ import annotations

import numpy as np
from scipy.special import gammaln, jv

TINY = 1e-280      # |J_nu| below this counts as underflow
ENABLED = True     # False marches through the flat region as before (benchmarks/targets.py compares the two)


def closed_form_interior(problem) -> bool:
    """Whether the first region is flat with a constant lapse, bounded, and starts at a regular centre."""
    first = problem.regions[0]
    return (ENABLED and first.flat_lapse is not None and first.upper is not None and first.lower == 0.0
            and first.lower_kind == "regular centre")


def _leading(problem, l, omegas, series):
    """a_0 of the march's start: dr*/dr at the centre for l = 0 in 3+1, else the series' a_0."""
    first = problem.regions[0]
    if problem.dimension == 4 and l == 0:
        return np.full(len(omegas), 1.0 / first.flat_lapse)
    series = series or first.centre_series
    return np.broadcast_to(np.asarray(series(l, omegas), dtype=float)[1], omegas.shape)


def regular_solution(problem, l, omegas, radii, series=None):
    """(u, du/dr*) of the regular solution at each radius of ``radii`` inside the flat first region, as (states
    (radii, n, 2) of max-norm 1, log scales (radii, n)), in the march's normalisation; or None where the closed
    form does not serve (k^2 <= 0, underflow)."""
    first = problem.regions[0]
    alpha = first.flat_lapse
    omegas = np.asarray(omegas, dtype=float)
    k2 = (omegas / alpha) ** 2 - problem.mass ** 2
    if np.any(k2 <= 0):
        return None
    k = np.sqrt(k2)
    nu = l + (problem.dimension - 3) / 2
    a0 = _leading(problem, l, omegas, series)
    if np.any(a0 == 0):
        return None
    log_c = gammaln(nu + 1) + nu * np.log(2 / k) + np.log(np.abs(a0))
    states, logs = [], []
    for r in radii:
        x = k * r
        J, J1 = jv(nu, x), jv(nu + 1, x)
        if np.any(np.abs(J) + np.abs(J1) < TINY) or not np.all(np.isfinite(J) & np.isfinite(J1)):
            return None
        # u = c r^(1/2) J_nu(k r); du/dr = c r^(1/2) ((nu + 1/2) J_nu/r - k J_(nu+1)); du/dr* = alpha du/dr
        state = np.stack([J, alpha * ((nu + 0.5) * J / r - k * J1)], axis=1) * np.sign(a0)[:, None]
        size = np.max(np.abs(state), axis=1)
        states.append(state / size[:, None])
        logs.append(log_c + 0.5 * np.log(r) + np.log(size))
    return np.array(states), np.array(logs)


def start_outside(problem, l, omegas, series=None):
    """The regular solution carried across the flat first region and its outer interface in closed form:
    (state (n, 2), log scale (n,)) just beyond the interface, or None (see :func:`regular_solution`)."""
    first = problem.regions[0]
    solved = regular_solution(problem, l, omegas, [first.upper], series)
    if solved is None:
        return None
    state, log_scale = solved[0][0], solved[1][0]
    interface = next((i for i in problem.interfaces if i.inner == first.name), None)
    if interface is not None:
        from derive.solve.march import interface_matrices

        state = np.einsum("nij,nj->ni", interface_matrices(interface, l, omegas), state)
        size = np.max(np.abs(state), axis=1)
        state, log_scale = state / size[:, None], log_scale + np.log(size)
    return state, log_scale
