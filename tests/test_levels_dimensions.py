"""Bound levels in 4+1 and 2+1 (derive.solve.bound, derive.solve.levels).  In 4+1 a massive field inside and around a thin shell,
whose exterior (Schwarzschild-Tangherlini, g_tt = -(1 - M/r^2)) gives the potential an inverse-square tail
V -> mu^2 + c/r^2, c = 3/4 - mu^2 M for l = 0.  With mu^2 M > 1 it is supercritical (c < -1/4): infinitely many
levels in a geometric series below the mass, summed into the response with their series' tail; the continuum's
density then oscillates in log k down to the threshold, integrated there in log k."""

import json

import mpmath
import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq
from scipy.special import iv, jv
from test_solve import SHELL_5D

import derive
from derive.cli import main
from derive.detector.response import _panels
from derive.detector.switching import switching_from_spec
from derive.solve.bound import bound_states
from derive.solve.centre import efimov_exponent, inverse_square_strength

M, MU = 0.5, 2.0       # mu^2 M = 2: c = 3/4 - 2 = -5/4, s = sqrt(-c - 1/4) = 1

SPEC = SHELL_5D.format(mass=M, mu=MU).replace('title = "Thin shell in 4+1"',
                                              'title = "A thin shell in 4+1 binding a massive field"') + """
[detector]
at = "r = 0"
switching = { shape = "gaussian", width = "2" }
gaps = [-1.0, 0.0, 1.0]
state = "vacuum"
coupling = 0.01
[numerics]
tolerance = 1e-8
"""


def reference_level(bracket, radii=(0.0, 0.5)):
    """An l = 0 level and its weights at ``radii``, independently of derive: inside, the regular solution
    psi = 2 J_1(q r)/(q r) (flat 4+1 with lapse alpha, q^2 = omega^2/alpha^2 - mu^2; I_1 below); outside,
    (r^3 f psi')' = -r^3 (omega^2/f - mu^2) psi integrated inward by scipy's DOP853 from 60 decay lengths out (the
    decaying solution grows inward, anything else dies); at the shell psi and its proper radial derivative are
    continuous (no surface term for a minimally coupled field; common practice).  The level is brentq's zero of
    the mismatch of psi'/psi, its weight psi(r0)^2/(2 pi^2 2 omega int r^3 psi^2/N dr/sqrt(B)) (Klein-Gordon
    norm on -N^2 dt^2 + dr^2/B + r^2 dOmega_3^2; 2 pi^2 the 3-sphere's area; common practice)."""
    alpha = np.sqrt(1 - M)

    def inside(omega, r):
        q2 = omega ** 2 / alpha ** 2 - MU ** 2
        q = np.sqrt(abs(q2))
        z, (first, zeroth) = q * r, ((jv(1, q * r), jv(0, q * r)) if q2 > 0 else (iv(1, q * r), iv(0, q * r)))
        return 2 * first / z, 2 * (q * zeroth / z - 2 * first / (z * r))

    def outside(omega):
        kappa = np.sqrt(MU ** 2 - omega ** 2)
        far = 1 + 60 / kappa
        f = lambda r: 1 - M / r ** 2

        def rhs(r, y):
            psi, P, _ = y
            return [P / (r ** 3 * f(r)), -r ** 3 * (omega ** 2 / f(r) - MU ** 2) * psi, -r ** 3 * psi ** 2 / f(r)]
        start = [1.0, far ** 3 * f(far) * (-kappa / f(far) - 1.5 / far), 0.0]
        solution = solve_ivp(rhs, [far, 1.0], start, method="DOP853", rtol=1e-13, atol=1e-12)
        psi, P, norm = solution.y[:, -1]
        return psi, P / (1 - M), norm

    def mismatch(omega):
        psi_in, slope_in = inside(omega, 1.0)
        psi_out, slope_out, _ = outside(omega)
        return slope_in / psi_in - alpha * slope_out / psi_out

    omega = brentq(mismatch, *bracket, xtol=1e-15, rtol=1e-15)
    psi_in = inside(omega, 1.0)[0]
    psi_out, _, norm_out = outside(omega)
    norm_in = quad(lambda r: r ** 3 * inside(omega, r)[0] ** 2 / alpha, 0, 1, epsabs=0, epsrel=1e-13, limit=200)[0]
    norm = 2 * omega * (norm_in + (psi_in / psi_out) ** 2 * norm_out)
    return omega, [(1.0 if r == 0 else inside(omega, r)[0]) ** 2 / (2 * np.pi ** 2 * norm) for r in radii]


@pytest.fixture(scope="module")
def shell(tmp_path_factory):
    path = tmp_path_factory.mktemp("shell5d") / "shell5d.toml"
    path.write_text(SPEC)
    return str(path)


@pytest.fixture(scope="module")
def levels(shell):
    problem = derive.load(shell).numeric_problem
    return problem, {r0: bound_states(problem, 0, r0, 1e-9, count=3) for r0 in (0.0, 0.5)}


@pytest.fixture(scope="module")
def references():
    brackets = [(1.9, 1.95), (1.9997, 1.9999), (1.9999996, 1.99999965)]
    return [reference_level(bracket) for bracket in brackets]


def test_levels_and_weights_against_an_independent_solution(levels, references):
    for k, r0 in enumerate((0.0, 0.5)):
        states = levels[1][r0]
        assert states.truncated
        omega = np.array([reference[0] for reference in references])
        weight = np.array([reference[1][k] for reference in references])
        np.testing.assert_allclose(states.omega, omega, rtol=1e-11)
        assert np.all(np.abs(states.omega - omega) <= states.omega_error)
        # each weight within its error, 1e-9 for the two deeper levels; the third (kappa = 1.2e-3 mu) carries the
        # rounding of omega^2 - V against kappa^2 (measured 6e-8 off, its error 1.6e-7; it weighs 6e-6 of the first)
        np.testing.assert_allclose(states.weight[:2], weight[:2], rtol=1e-9)
        assert np.all(np.abs(states.weight - weight) <= states.weight_error)
        assert np.all(states.weight_error[:2] <= 2e-9 * weight[:2]) and states.weight_error[2] <= 1e-6 * weight[2]


def test_the_levels_follow_the_inverse_square_series(levels):
    # V -> mu^2 + c/r^2 with c = (l + 1)^2 - 1/4 - mu^2 M in 4+1 outside g_tt = -(1 - M/r^2) (derived: the
    # centrifugal term of the 3-sphere, (l(l+2) + 3/4)/r^2, and f mu^2); below c = -1/4 the attractive
    # inverse-square potential has levels kappa_{n+1}/kappa_n -> exp(-pi/s), s = sqrt(-c - 1/4) (K. M. Case,
    # Phys. Rev. 80, 797 (1950); the "fall to the centre" of L. D. Landau and E. M. Lifshitz, Quantum Mechanics,
    # section 35; from memory), approached as (kappa R)^2 falls
    problem, found = levels
    assert abs(inverse_square_strength(problem, 0) - (0.75 - MU ** 2 * M)) < 1e-7
    assert abs(inverse_square_strength(problem, 1) - (3.75 - MU ** 2 * M)) < 1e-7
    s = efimov_exponent(problem, 0)
    assert abs(s - 1.0) < 1e-7 and efimov_exponent(problem, 1) is None
    kappa = np.sqrt(MU ** 2 - found[0.0].omega ** 2)
    ratios = kappa[1:] / kappa[:-1] / np.exp(-np.pi / s) - 1
    assert abs(ratios[-1]) < 3e-3 and abs(ratios[-1]) < abs(ratios[0]) / 5


def test_log_periodic_threshold_quadrature_against_mpmath():
    # A density finite at the threshold nu = 2 and oscillating in log k (period pi), as the continuum's at a
    # supercritical threshold, times a Gaussian window: the rule in log k against mpmath's quadrature
    def density(k):
        return 1 + 0.5 * np.cos(2 * np.log(k))
    nodes, fine, coarse = _panels(3.0, 0.25, 2.0, log_period=np.pi)
    values = density(np.sqrt(nodes ** 2 - 4)) * np.exp(-(nodes - 2.5) ** 2)
    mpmath.mp.dps = 30
    top = mpmath.sqrt(mpmath.mpf(2.125) ** 2 - 4)

    def in_log_k(t):
        k, nu = mpmath.e ** t, mpmath.sqrt(4 + mpmath.e ** (2 * t))
        return (1 + mpmath.cos(2 * t) / 2) * mpmath.exp(-(nu - 2.5) ** 2) * k ** 2 / nu
    exact = (mpmath.quad(in_log_k, mpmath.linspace(-60, mpmath.log(top), 80))
             + mpmath.quad(lambda nu: (1 + mpmath.cos(mpmath.log(nu ** 2 - 4)) / 2) * mpmath.exp(-(nu - 2.5) ** 2),
                           mpmath.linspace(2.125, 3.125, 9)))
    mpmath.mp.dps = 15
    error = abs(float(fine @ values) - float(exact))
    assert error < 2e-8 * float(exact)
    assert error <= abs(float((coarse - fine) @ values))


def test_response_sums_the_geometric_series(shell, references, tmp_path, capsys):
    assert main(["response", shell, "--json", "--out", str(tmp_path / "out")]) == 0
    data = json.loads(capsys.readouterr().out)
    levels = data["bound_levels"]
    assert levels["series"] == "geometric"
    share = np.array(levels["share"])
    # the share against the independent levels: sum_n w_n |chi_hat(Omega + nu_n)|^2, nu_n = omega_n/alpha
    # (the fourth level and beyond weigh ~1e-8 of the first)
    switching = switching_from_spec({"shape": "gaussian"}, {"width": 2.0})
    gaps = np.array(data["gaps"])
    alpha = np.sqrt(1 - M)
    expected = sum(w[0] * switching.power(gaps + omega / alpha) for omega, w in references)
    np.testing.assert_allclose(share, expected, rtol=2e-8)
    response = np.array(data["response"])
    assert np.all(np.array(data["error"]) <= 1e-8 * response)
    assert np.all(share < response)


def test_spectrum_lists_the_levels_at_the_centre(shell, references, capsys):
    # (in 4+1 the centre's weights come from the centre's series, psi(0) = a_0)
    assert main(["spectrum", shell, "--omega", "2.5", "--json"]) == 0
    levels = json.loads(capsys.readouterr().out)["bound_states"]
    assert levels["ok"] and levels["truncated"] and levels["l"] == 0
    np.testing.assert_allclose(levels["weight"][:2], [w[0] for _, w in references[:2]], rtol=1e-9)


@pytest.mark.slow
def test_a_pair_of_detectors_with_the_geometric_levels(shell, tmp_path, capsys):
    # The centre and r = 1/2: the levels between the two points plus the continuum, whose pair integrals run in
    # log k next to the threshold (M is dominated by the lowest frequencies there: uniform panels had left 2.5e-5)
    text = open(shell).read().replace("[numerics]", """[[detectors]]
name = "centre"
at = "r = 0"
gap = 1.0
switching = { shape = "gaussian", width = "2" }

[[detectors]]
name = "off"
at = "r = 1/2, a = pi/2, b = pi/2, c = 0"
gap = 1.0
switching = { shape = "gaussian", width = "2" }

[numerics]""")
    path = tmp_path / "pair.toml"
    path.write_text(text)
    assert main(["correlations", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    pair = data["pairs"][0]
    assert pair["bound_levels"]["found"] >= 3
    # Cauchy-Schwarz in the positive spectral measure, |L_AB|^2 <= L_AA L_BB (common practice): at a gap of 1 the
    # lowest level dominates both detectors, a rank-one measure, so the bound is all but met (3.6e-5 below it)
    ratio = abs(complex(*pair["L"])) ** 2 / (data["detectors"]["centre"]["probability"]
                                             * data["detectors"]["off"]["probability"])
    assert 0.999 < ratio <= 1 + 1e-8
    assert pair["error"]["M"] <= 1e-8 * abs(complex(*pair["M"]))


LUMP_2D = """
format = 1
title = "A 2+1 lump binding a massive field"
[parameters]
a = { value = 0.5, positive = true }
[coordinates]
names = ["t", "r", "p"]
positive = ["r"]
[[region]]
name = "all"
where = "r >= 0"
line_element = "-(1 - a/(1 + r**2))*dt**2 + dr**2 + r**2*dp**2"
[field]
mass = "2"
coupling = "0"
"""


def test_levels_of_a_lump_in_two_plus_one(tmp_path):
    # In 2+1 the centrifugal term is (l^2 - 1/4)/r^2, so any lapse 1 - a/r^2 far out makes l = 0 supercritical:
    # c = -1/4 - a mu^2 (derived as in 4+1), s = sqrt(a) mu, and the levels follow kappa_{n+1}/kappa_n ->
    # exp(-pi/s) (Case 1950, as above); their weights fall by exp(-2 pi/s) (the norm growing like 1/kappa^2)
    path = tmp_path / "lump.toml"
    path.write_text(LUMP_2D)
    problem = derive.load(str(path)).numeric_problem
    assert abs(inverse_square_strength(problem, 0) - (-0.25 - 0.5 * 4)) < 1e-7
    s = efimov_exponent(problem, 0)
    assert abs(s - np.sqrt(2.0)) < 1e-7
    states = bound_states(problem, 0, 0.0, 1e-9, count=4)
    assert states.truncated and np.all(states.weight_error[:2] <= 1e-9 * states.weight[:2])
    kappa = np.sqrt(4 - states.omega ** 2)
    ratios = kappa[1:] / kappa[:-1] / np.exp(-np.pi / s) - 1
    assert abs(ratios[-1]) < 1e-3 and abs(ratios[-1]) < abs(ratios[0]) / 10
    weights = states.weight[1:] / states.weight[:-1] / np.exp(-2 * np.pi / s) - 1
    assert abs(weights[-1]) < 1e-2
