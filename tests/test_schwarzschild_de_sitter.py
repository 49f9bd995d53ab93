"""Schwarzschild-de Sitter: a black hole inside a cosmological horizon (sources named beside each check).

Written with its two horizon radii a < b as parameters, f = (r - a)(b - r)(r + a + b)/(r (a^2 + a b + b^2)), which
is 1 - 2M/r - r^2/L^2 with L^2 = a^2 + a b + b^2 and 2M = a b (a + b)/L^2.
"""

import mpmath
import numpy as np
import pytest

import derive
from derive.solve.exterior import mode_term

A, B = 2.0, 9.0
LL = A * A + A * B + B * B


def sds(coupling="0", state="unruh", at="r = 4"):
    return f"""
format = 1
title = "Schwarzschild-de Sitter"
[parameters]
a = {{ value = {A}, positive = true }}
b = {{ value = {B}, positive = true }}
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[definitions]
f = "(r - a)*(b - r)*(r + a + b)/(r*(a**2 + a*b + b**2))"
[[region]]
name = "between"
where = "r > a and r < b"
line_element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "0"
coupling = "{coupling}"
[detector]
at = "{at}"
switching = {{ shape = "gaussian", width = "10" }}
gaps = [-0.5, 0.0, 0.5]
state = "{state}"
coupling = 0.01
"""


def f_sds(r):
    return (r - A) * (B - r) * (r + A + B) / (r * LL)


def df_sds(r):
    # d/dr of f, written out (product rule on the three factors over r LL)
    return ((B - r) * (r + A + B) - (r - A) * (r + A + B) + (r - A) * (B - r)) / (r * LL) - f_sds(r) / r


def reference_modes(l, omega, radii, dps=25, mu=0.0):
    """[(|u_in(r)|^2, |u_up(r)|^2)] and |T|^2 for Schwarzschild-de Sitter, minimal coupling, independently of
    derive: the radial equation with V = f (l(l+1)/r^2 + f'/r + mu^2) integrated by mpmath's Taylor-series ODE
    solver,
    outward in ln(r - a) from u_H = (r - a)^(-i omega/(2 kappa_h)) at r - a = e^-30 and inward in -ln(b - r)
    from u_c = (b - r)^(-i omega/(2 kappa_c)) at b - r = e^-30 (the leading Frobenius terms, unit amplitude; the
    next terms are e^-30 smaller), split by their Wronskians at the midpoint: u_H = a_in conj(u_c) + a_out u_c,
    a_in = W[u_H, u_c]/(2 i omega); u_in = u_H/a_in, u_up = u_c/a_in, |T|^2 = 1/|a_in|^2 (derived here).  At 20
    digits the start at e^-30 cost the solver 1e-8 of |T|^2; 25 digits agree with 30 to 1e-13."""
    with mpmath.workdps(dps):
        a, b, w = mpmath.mpf(A), mpmath.mpf(B), mpmath.mpf(omega)
        L = l * (l + 1)

        def f(r):
            return (r - a) * (b - r) * (r + a + b) / (r * (a * a + a * b + b * b))

        def V(r):
            return f(r) * (L / r ** 2 + mpmath.diff(f, r) / r + mpmath.mpf(mu) ** 2)
        kappa_h = mpmath.diff(f, a) / 2
        kappa_c = -mpmath.diff(f, b) / 2

        def outward_rhs(y, s):          # y = ln(r - a): d/dy = (r - a) d/dr, du/dr = v/f
            r = a + mpmath.exp(y)
            x = r - a
            return [x * s[1] / f(r), x * (V(r) - w * w) * s[0] / f(r)]

        def inward_rhs(t, s):           # t = ln(b - r), increasing away from the horizon: d/dt = -(b - r) d/dr
            y = mpmath.exp(t)
            r = b - y
            return [-y * s[1] / f(r), -y * (V(r) - w * w) * s[0] / f(r)]
        start = mpmath.mpf(-30)
        x0 = mpmath.exp(start)
        s_h = -1j * w / (2 * kappa_h)
        u0 = mpmath.exp(s_h * start)
        outward = mpmath.odefun(outward_rhs, start, [u0, f(a + x0) * s_h * u0 / x0])
        s_c = -1j * w / (2 * kappa_c)
        c0 = mpmath.exp(s_c * start)
        inward = mpmath.odefun(inward_rhs, start, [c0, -f(b - x0) * s_c * c0 / x0])   # state (u, du/dr*)
        middle = (a + b) / 2
        uh, vh = outward(mpmath.log(middle - a))
        uc, vc = inward(mpmath.log(b - middle))
        a_in = (uh * vc - vh * uc) / (2j * w)
        out = []
        for r0 in radii:
            u_h = outward(mpmath.log(mpmath.mpf(r0) - a))[0]
            u_c = inward(mpmath.log(b - mpmath.mpf(r0)))[0]
            out.append((float(abs(u_h / a_in) ** 2), float(abs(u_c / a_in) ** 2)))
        return out, float(1 / abs(a_in) ** 2)


def test_both_horizons_found_with_their_temperatures(write_spec):
    st = derive.load(write_spec(sds()))
    horizons = {h.kind: h for h in st.field_problem.horizons}
    assert horizons["black hole"].value == A and horizons["cosmological"].value == B
    # kappa = |f'(r_h)|/2 at each root (Gibbons & Hawking, Phys. Rev. D 15, 2738 (1977))
    assert horizons["black hole"].surface_gravity == pytest.approx(df_sds(A) / 2, rel=1e-13)
    assert horizons["cosmological"].surface_gravity == pytest.approx(-df_sds(B) / 2, rel=1e-13)


@pytest.mark.slow
def test_low_frequency_greybody_factor(write_spec):
    # l = 0, omega -> 0: |T|^2 -> 4 a^2 b^2/(a^2 + b^2)^2, the ratio of the horizon areas' harmonic and arithmetic
    # means (derived here by matching the zero-frequency solution psi = c1 + c2 int dr/(r^2 f) to the waves at
    # both horizons; the same limit as Kanti, Grain & Barrau, Phys. Rev. D 71, 104002 (2005), from memory).
    st = derive.load(write_spec(sds()))
    result = st.spectrum(np.array([1e-4, 1e-3]), l=0, tolerance=1e-10)
    assert result.ok, result.message()
    limit = 4 * A * A * B * B / (A * A + B * B) ** 2
    np.testing.assert_allclose(result.transmission, limit, rtol=3e-4)
    assert abs(result.transmission[0] / limit - 1) < abs(result.transmission[1] / limit - 1) / 10   # omega^2
    np.testing.assert_allclose(result.flux_defect, 0, atol=1e-11)


@pytest.mark.slow
def test_in_and_up_modes_against_an_independent_mpmath_solution(write_spec):
    st = derive.load(write_spec(sds()))
    problem = st.numeric_problem
    l, omega = 1, 0.3
    expected, transmission = reference_modes(l, omega, [4.0, 7.0])
    result = st.spectrum(np.array([omega]), l=l, tolerance=1e-11)
    assert result.transmission[0] == pytest.approx(transmission, rel=1e-10)
    for r0, (e_in, e_up) in zip((4.0, 7.0), expected):
        t_in, t_up, _, _, err_in, err_up = mode_term(problem, l, np.array([omega]), (r0, r0), 1.0, 1e-11)
        weight = (2 * l + 1) / (4 * np.pi) / (4 * np.pi * omega * r0 * r0)
        assert t_in.real[0] / weight == pytest.approx(e_in, rel=1e-9)
        assert t_up.real[0] / weight == pytest.approx(e_up, rel=1e-9)


@pytest.mark.slow
def test_a_massive_field_between_the_horizons(write_spec):
    # Between two horizons V -> 0 at both ends, mass or not: nothing is trapped below the mass, the modes reach
    # both horizons at every frequency, and the response is computed (it had been refused as if a Coulomb-like
    # well held resonances).  The modes at omega = 0.2 below mu = 0.3 against the independent mpmath solution
    # above (20 digits: 1e-8 of |T|^2).
    st = derive.load(write_spec(sds().replace('mass = "0"', 'mass = "0.3"')))
    problem = st.numeric_problem
    l, omega = 0, 0.2
    expected, transmission = reference_modes(l, omega, [4.0], dps=20, mu=0.3)
    result = st.spectrum(np.array([omega]), l=l, tolerance=1e-10)
    assert result.transmission[0] == pytest.approx(transmission, rel=1e-7)
    t_in, t_up, _, _, _, _ = mode_term(problem, l, np.array([omega]), (4.0, 4.0), 1.0, 1e-10)
    weight = 1 / (4 * np.pi) / (4 * np.pi * omega * 16.0)
    assert t_in.real[0] / weight == pytest.approx(expected[0][0], rel=1e-7)
    assert t_up.real[0] / weight == pytest.approx(expected[0][1], rel=1e-7)
    response = st.response(tolerance=1e-6)
    assert response.ok and np.all(response.error < 1e-5 * response.response)
