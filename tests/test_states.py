"""Modes and states outside a horizon (docs/conventions.md sections 4 and 7; sources named beside each check)."""

import os

import mpmath
import numpy as np
import pytest

import derive
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_detector, numeric_problem
from derive.detector.study import detector_response
from derive.solve.exterior import exterior_density, mode_term

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SCHWARZSCHILD = os.path.join(ROOT, "worked", "schwarzschild", "spec.toml")
M = 1.0


@pytest.fixture(scope="module")
def schwarzschild():
    st = derive.load(SCHWARZSCHILD)
    return numeric_problem(KernelSet(st)), numeric_detector(st)


def reference_modes(l, omega, r0, R=60.0, dps=20):
    """|u_in(r0)|^2 and |u_up(r0)|^2 (unit incident amplitude) for Schwarzschild, independently of derive
    (see reference_mode_values)."""
    (u_in, u_up), = reference_mode_values(l, omega, [r0], R, dps)
    return abs(u_in) ** 2, abs(u_up) ** 2


def reference_mode_values(l, omega, radii, R=60.0, dps=20):
    """[(u_in(r), u_up(r)) for r in radii] (complex, unit incident amplitude, up to a common phase of each) for
    Schwarzschild, independently of derive:
    the Regge-Wheeler potential (Regge & Wheeler 1957, scalar case) integrated by mpmath's Taylor-series ODE
    solver in y = ln(r - 2M) (smooth at the horizon), from u = e^{-i omega r*} near the horizon, and split at
    r = R into the asymptotic solutions e^{+-i omega r*} sum_k c_k r^-k, whose coefficients follow from the
    radial equation: 2 i omega (k+1) c_{k+1} = [k(k+1) - l(l+1)] c_k - 2M k^2 c_{k-1} (derived here; the
    standard large-r expansion, common practice)."""
    with mpmath.workdps(dps):
        w, L, mass = mpmath.mpf(omega), l * (l + 1), mpmath.mpf(M)

        def rhs(y, s):
            r = 2 * mass + mpmath.exp(y)
            V = (1 - 2 * mass / r) * (L / r ** 2 + 2 * mass / r ** 3)
            return [r * s[1], -r * (w ** 2 - V) * s[0]]

        y0 = mpmath.mpf(-30)
        x0 = mpmath.exp(y0)
        s = -2j * w * mass
        u0 = mpmath.exp(s * y0)
        state = [u0, s * u0 / (2 * mass + x0)]          # du/dr* = f du/dr = (x/r) s x^(s-1)
        outward = mpmath.odefun(rhs, y0, state)
        y_far = mpmath.log(R - 2 * mass)
        u_h = [outward(mpmath.log(r0 - 2 * mass))[0] for r0 in radii]
        u_far, v_far = outward(y_far)

        def asymptotic(sign):
            r = mpmath.mpf(R)
            c = [mpmath.mpc(1)]
            for k in range(40):
                c.append(((k * (k + 1) - L) * c[k] - 2 * mass * k * k * (c[k - 1] if k else 0))
                         / (sign * 2j * w * (k + 1)))
            g = sum(ck * r ** -k for k, ck in enumerate(c))
            dg = sum(-k * ck * r ** (-k - 1) for k, ck in enumerate(c))
            phase = mpmath.exp(sign * 1j * w * (r + 2 * mass * mpmath.log(r / (2 * mass) - 1)))
            return phase * g, phase * (sign * 1j * w * g + (1 - 2 * mass / r) * dg)

        out_u, out_v = asymptotic(1)
        in_u, in_v = asymptotic(-1)
        A = (u_far * out_v - out_u * v_far) / (in_u * out_v - out_u * in_v)   # u_H = A (in) + B (out)
        inward = mpmath.odefun(lambda z, st: [-v for v in rhs(-z, st)], -y_far, [out_u, out_v])
        u_inf = [inward(-mpmath.log(r0 - 2 * mass))[0] for r0 in radii]
        return [(complex(h / A), complex(i / A)) for h, i in zip(u_h, u_inf)]


@pytest.mark.slow
def test_in_and_up_modes_against_an_independent_mpmath_solution(schwarzschild):
    # Issue 5 check: |u_in(r0)|^2 and |u_up(r0)|^2 from derive's propagator agree with an independent
    # 20-digit solution (reference_modes above) to 1e-10.
    problem, _ = schwarzschild
    l, omega, r0 = 0, 0.3, 6.0
    t_in, t_up, _, _, e_in, e_up = mode_term(problem, l, np.array([omega]), (r0, r0), 1.0,
                                             1e-11)
    t_in, t_up = t_in.real, t_up.real
    weight = (2 * l + 1) / (4 * np.pi) / (4 * np.pi * omega * r0 * r0)
    expected_in, expected_up = reference_modes(l, omega, r0)
    assert t_in[0] / weight == pytest.approx(expected_in, rel=1e-10)
    assert t_up[0] / weight == pytest.approx(expected_up, rel=1e-10)
    assert e_in[0] < 1e-10 * t_in[0] and e_up[0] < 1e-10 * t_up[0]


def test_thermal_states_obey_the_kms_condition(schwarzschild):
    # docs/conventions.md section 7: a thermal mode contributes (1 + n) at +omega and n at -omega, n = 1/(e^{omega/T_H}-1)
    # with T_H = 1/(8 pi M) (Hawking, Commun. Math. Phys. 43, 199 (1975)); so in Hartle-Hawking
    # S(-omega)/S(omega) = e^{-omega/T_H}, and in Unruh only the up modes are thermal.
    problem, _ = schwarzschild
    omegas = np.array([0.02, 0.05, 0.1])
    result = exterior_density(problem, omegas, 6.0, tolerance=1e-8)
    assert result.ok, result.message()
    assert result.temperature == pytest.approx(1 / (8 * np.pi * M), rel=1e-12)
    plus, _, minus, _ = result.state("hartle-hawking")
    np.testing.assert_allclose(minus / plus, np.exp(-omegas / result.temperature), rtol=1e-12)
    plus_u, _, minus_u, _ = result.state("unruh")
    n = 1 / np.expm1(omegas / result.temperature)
    np.testing.assert_allclose(minus_u, n * result.outward, rtol=1e-14)
    np.testing.assert_allclose(plus_u - result.inward, (1 + n) * result.outward, rtol=1e-12)
    boulware, _, nothing, _ = result.state("boulware")
    assert np.all(nothing == 0) and np.all(boulware < plus_u) and np.all(plus_u < plus)


@pytest.mark.slow
def test_hartle_hawking_detailed_balance_at_the_tolman_temperature(schwarzschild):
    # Hawking 1975; Tolman, Phys. Rev. 35, 904 (1930): for long switching a static detector in the
    # Hartle-Hawking state satisfies F(-Omega)/F(Omega) -> e^{Omega/T_loc}, T_loc = 1/(8 pi M sqrt(1 - 2M/r)).
    # With Gaussian switching the approach is like e^{-1/(4 sigma^2 T_loc^2)} (KMS algebra, common practice),
    # so the deviation must shrink about fourfold when sigma doubles.
    problem, detector = schwarzschild
    r0 = 6.0
    T_loc = 1 / (8 * np.pi * M * np.sqrt(1 - 2 * M / r0))
    gap = 0.1
    deviations = []
    for sigma in (100.0, 200.0):
        d = detector.__class__(**{**detector.__dict__, "switching": {"width": sigma}, "radius": r0})
        result, _, _ = detector_response(problem, d, 1e-8, gaps=[-gap, gap], state="hartle-hawking")
        ratio = result.response[0] / result.response[1]
        deviations.append(abs(np.log(ratio) - gap / T_loc))
    assert deviations[1] < 0.01
    assert deviations[1] < deviations[0] / 3


def test_boulware_density_approaches_the_local_flat_one_in_five_dimensions():
    # Equivalence principle (common practice): at frequencies far above the curvature scale the Boulware density
    # per unit proper frequency approaches Minkowski's, nu^2/(16 pi^2) in 4+1 (from W = int d^4k/((2pi)^4 2k)
    # e^{-ikt}). Tangherlini (f = 1 - m/r^2, m = 1) at r0 = 2: within a few per cent at nu = 3.5-7 and closer at
    # the higher frequency -- a check on the weights of the 3-sphere's harmonics, (l+1)^2/(2 pi^2), and r0^3.
    problem = numeric_problem(KernelSet(derive.load(os.path.join(ROOT, "worked", "tangherlini_5d", "spec.toml"))))
    omegas = np.array([3.0, 6.0])
    result = exterior_density(problem, omegas, 2.0, tolerance=1e-7)
    assert result.ok, result.message()
    sqrt_f0 = np.sqrt(1 - 1 / 4.0)
    ratio = sqrt_f0 * result.density / ((omegas / sqrt_f0) ** 2 / (16 * np.pi ** 2))
    assert np.all(np.abs(ratio - 1) < 0.03)
    assert abs(ratio[1] - 1) < abs(ratio[0] - 1)
    assert result.temperature == pytest.approx(1 / (2 * np.pi), rel=1e-12)   # kappa = f'(1)/2 = 1
