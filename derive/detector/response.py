"""Response of a static Unruh-DeWitt detector (PHYSICS.md sections 7-9).  Numeric only: no sympy here.

F(Omega) = int_0^inf dnu S(nu) |chi_hat(Omega + nu)|^2 in the vacuum (positive frequencies only), where
S(nu) = sqrt(f(r0)) * density(omega = sqrt(f(r0)) nu) is the spectral density per unit proper frequency and
chi_hat(k) = int chi(tau) e^{-i k tau} dtau.  The transition probability at leading order is lambda^2 F.

Quadrature: Gauss-Legendre panels of width 1/(2 sigma) over [0, max(0, -Omega) + 10/sigma] (the switching
weight is below e^-100 beyond), the first graded toward nu = 0; the same integral on panels of half the width
gives the quadrature error, and
the density's own error is carried through the same quadrature.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from derive.detector.switching import Switching

PANEL_NODES = 12
NODES, WEIGHTS = np.polynomial.legendre.leggauss(PANEL_NODES)


@dataclass
class Response:
    """F(Omega) for each gap, with error estimates."""

    gaps: np.ndarray
    response: np.ndarray
    error: np.ndarray
    quadrature_error: np.ndarray
    density_error: np.ndarray


def _panels(upper: float, width: float):
    """Panels of the given width, the first one graded geometrically toward nu = 0 (the density can be
    non-analytic there, e.g. nu^3 log nu from a long-range exterior, which would slow Gauss-Legendre down)."""
    count = max(int(np.ceil(upper / width)), 1)
    edges = np.linspace(0.0, upper, count + 1)
    graded = edges[1] * 2.0 ** -np.arange(12, 0, -1)
    edges = np.concatenate([[0.0], graded, edges[1:]])
    a, b = edges[:-1], edges[1:]
    nodes = ((a + b)[:, None] + (b - a)[:, None] * NODES[None, :]) / 2
    weights = ((b - a)[:, None] / 2) * WEIGHTS[None, :]
    return nodes.ravel(), weights.ravel()


def frequency_nodes(gaps, switching: Switching):
    """The proper frequencies nu at which the density is needed (both quadrature levels)."""
    upper = max(0.0, -float(np.min(gaps))) + switching.reach
    coarse = _panels(upper, switching.panel_width)
    fine = _panels(upper, switching.panel_width / 2)
    return coarse, fine


def response(gaps, switching: Switching, density_at) -> Response:
    """F(Omega) for every gap.

    Parameters
    ----------
    gaps : array of Omega (detector's proper time)
    switching : Switching (its |chi_hat(k)|^2)
    density_at : callable(nu array) -> (S(nu), error of S(nu)), per unit proper frequency
    """
    gaps = np.asarray(gaps, dtype=float)
    (nu_c, w_c), (nu_f, w_f) = frequency_nodes(gaps, switching)
    nodes = np.concatenate([nu_c, nu_f])
    S, S_err = density_at(nodes)
    S_c, S_f = S[: len(nu_c)], S[len(nu_c):]
    E_f = S_err[len(nu_c):]
    weight_c = switching.power(gaps[:, None] + nu_c[None, :])
    weight_f = switching.power(gaps[:, None] + nu_f[None, :])
    F_c = weight_c @ (w_c * S_c)
    F_f = weight_f @ (w_f * S_f)
    density_error = weight_f @ (w_f * E_f)
    quadrature_error = np.abs(F_f - F_c)
    floor = 64 * np.finfo(float).eps * (np.abs(weight_f) @ (w_f * np.abs(S_f)))
    return Response(gaps, F_f, quadrature_error + density_error + floor, quadrature_error, density_error)


def trials_to_distinguish(p_a, p_b, sigmas: float):
    """N = z^2 (sqrt(P_A(1-P_A)) + sqrt(P_B(1-P_B)))^2 / (P_A - P_B)^2 (normal approximation to the binomial;
    common practice; PHYSICS.md section 9)."""
    p_a, p_b = np.asarray(p_a, dtype=float), np.asarray(p_b, dtype=float)
    spread = np.sqrt(p_a * (1 - p_a)) + np.sqrt(p_b * (1 - p_b))
    with np.errstate(divide="ignore"):
        return sigmas ** 2 * spread ** 2 / (p_a - p_b) ** 2


def round_trip(problem, sqrt_f0: float, r0: float = 0.0) -> float:
    """Radial light round trip from the detector at r0 out to the first structure (interface or horizon) and
    back, in the detector's proper time: 2 sqrt(f(r0)) int_{r0}^R dr*/dr dr (the way in, through the centre,
    is longer).  Infinite when nothing is there."""
    first = problem.regions[0]
    if first.upper is None:
        return float("inf")
    nodes, weights = np.polynomial.legendre.leggauss(60)
    half = (first.upper - r0) / 2
    r = r0 + (nodes + 1) * half
    travel = np.sum(weights * first.dtortoise_dr(r)) * half
    return float(2 * sqrt_f0 * travel)
