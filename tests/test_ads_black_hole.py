"""A black hole in anti-de Sitter space with a reflecting boundary (sources named beside each check).

Written with its horizon radius: f = 1 - r_h (1 + r_h^2/L^2)/r + r^2/L^2 (Schwarzschild-AdS, 2M = r_h (1 + r_h^2/L^2)).
The boundary reflects (the normalisable falloff u ~ r^(1 - Delta), Delta = 3 for a massless field in 3+1,
Breitenlohner & Freedman 1982): nothing is transmitted, and the only modes are up modes from the past horizon.
"""

import mpmath
import numpy as np
import pytest

import derive
from derive.solve.exterior import mode_term

RH, L = 0.1, 1.0


def sads(state="hartle-hawking"):
    return f"""
format = 1
title = "Schwarzschild-AdS"
[parameters]
L = {{ value = {L}, positive = true }}
rh = {{ value = {RH}, positive = true }}
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[definitions]
f = "1 - rh*(1 + rh**2/L**2)/r + r**2/L**2"
[[region]]
name = "outside"
where = "r > rh"
line_element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "0"
coupling = "0"
[detector]
at = "r = 0.5"
switching = {{ shape = "gaussian", width = "2" }}
gaps = [-1.0, 0.0, 1.0]
state = "{state}"
coupling = 0.01
"""


def reference_up_mode(l, omega, r0, dps=25):
    """|u_up(r0)|^2 independently of derive: the radial equation with V = f (l(l+1)/r^2 + f'/r) integrated by
    mpmath's Taylor-series ODE solver (25 digits; 30 agree to 1e-14), outward in ln(r - r_h) from
    u_H = (r - r_h)^(-i omega/(2 kappa)) at r - r_h = e^-30, and inward in -ln r from the normalisable u = r^-2 (1 + c/r^2 + ...) at r = 10^8 L (the next
    term is 10^-16 of it); the real boundary solution is u_b = A u_H + conj(A) conj(u_H) near the horizon with
    |A| = |W[u_H, u_b]|/(2 omega), and u_up = u_b/A (unit amplitude from the past horizon; derived here)."""
    with mpmath.workdps(dps):
        rh, LL, w = mpmath.mpf(RH), mpmath.mpf(L), mpmath.mpf(omega)
        lam = l * (l + 1)

        def f(r):
            return 1 - rh * (1 + rh ** 2 / LL ** 2) / r + r ** 2 / LL ** 2

        def df(r):
            return rh * (1 + rh ** 2 / LL ** 2) / r ** 2 + 2 * r / LL ** 2

        def V(r):
            return f(r) * (lam / r ** 2 + df(r) / r)
        kappa = df(rh) / 2

        def outward_rhs(y, s):       # y = ln(r - r_h); state (u, du/dr*), du/dr = v/f
            x = mpmath.exp(y)
            r = rh + x
            return [x * s[1] / f(r), x * (V(r) - w * w) * s[0] / f(r)]

        def inward_rhs(t, s):        # t = -ln r: d/dt = -r d/dr
            r = mpmath.exp(-t)
            return [-r * s[1] / f(r), -r * (V(r) - w * w) * s[0] / f(r)]
        start = mpmath.mpf(-30)
        x0 = mpmath.exp(start)
        s_h = -1j * w / (2 * kappa)
        u0 = mpmath.exp(s_h * start)
        outward = mpmath.odefun(outward_rhs, start, [u0, f(rh + x0) * s_h * u0 / x0])
        R = mpmath.mpf(10) ** 8 * LL
        inward = mpmath.odefun(inward_rhs, -mpmath.log(R), [R ** -2, f(R) * (-2) * R ** -3])
        uh, vh = outward(mpmath.log(mpmath.mpf(r0) - rh))
        ub, vb = inward(-mpmath.log(mpmath.mpf(r0)))
        A = abs(uh * vb - vh * ub) / (2 * w)
        return float(abs(ub) ** 2 / A ** 2)


def test_horizon_and_boundary(write_spec):
    st = derive.load(write_spec(sads()))
    (horizon,) = st.field_problem.horizons
    assert horizon.value == RH
    # kappa = f'(r_h)/2 = (1 + 3 r_h^2/L^2)/(2 r_h) (Hawking & Page, Commun. Math. Phys. 87, 577 (1983))
    assert horizon.surface_gravity == pytest.approx((1 + 3 * RH ** 2 / L ** 2) / (2 * RH), rel=1e-14)
    result = st.spectrum(np.array([0.5, 3.0]), l=0)
    assert result.ok and np.all(np.asarray(result.transmission) == 0) and np.all(np.asarray(result.reflection) == 1)


@pytest.mark.slow
def test_up_modes_against_an_independent_mpmath_solution(write_spec):
    st = derive.load(write_spec(sads()))
    problem = st.numeric_problem
    for l, omega, r0 in ((0, 2.9, 0.5),):     # near the lowest quasinormal ringing (omega L ~ 3)
        t_in, t_up, _, _, e_in, e_up = mode_term(problem, l, np.array([omega]), (r0, r0), 1.0, 1e-11)
        weight = (2 * l + 1) / (4 * np.pi) / (4 * np.pi * omega * r0 * r0)
        assert abs(t_in[0]) == 0.0                                   # nothing comes in from the boundary
        assert t_up.real[0] / weight == pytest.approx(reference_up_mode(l, omega, r0), rel=1e-9)


def test_hartle_hawking_response_and_the_boulware_one(write_spec):
    # The thermal state's excess over the Boulware one at positive gaps (excitation by the bath, docs/
    # conventions.md section 7) and the local Tolman temperature kappa/(2 pi sqrt(f(r0))).
    st = derive.load(write_spec(sads()))
    result = st.response(tolerance=1e-8)
    assert result.ok, result.message
    F = {name: np.asarray(value["response"]) for name, value in result.states.items()}
    assert np.all(F["hartle-hawking"][1:] > F["boulware"][1:])
    f0 = 1 - RH * (1 + RH ** 2) / 0.5 + 0.25
    kappa = (1 + 3 * RH ** 2) / (2 * RH)
    assert result.local_temperature == pytest.approx(kappa / (2 * np.pi * np.sqrt(f0)), rel=1e-12)
    assert result.locality["round_trip"] is not None and result.locality["round_trip"] > 0
