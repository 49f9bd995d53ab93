"""The far form (derive.solve.farform): a multipole's flux far away as a quadratic form of its state at one radius,
interpolated in omega, against closed forms and against the march it replaces."""

import os

import mpmath
import numpy as np
import pytest
from scipy.interpolate import BarycentricInterpolator

import derive
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_problem
from derive.solve import farform, offcentre
from derive.solve.centre import far_amplitude2
from derive.solve.march import Piece, march
from test_solve import FLAT

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DUST = os.path.join(ROOT, "worked", "static_shell", "spec.toml")


def problem_of(path):
    return numeric_problem(KernelSet(derive.load(path)))


def flat_flux(l, omega, u, du):
    """a^2 k far away of the flat-space solution with u, du/dr = (u, du) at r = 1, from the Riccati-Bessel
    functions x j_l(x), x y_l(x) (DLMF 10.47.3, 10.49; their Wronskian is 1, DLMF 10.50.1): u = a jh(omega r) +
    b yh(omega r) tends to sqrt(a^2 + b^2) times a sine (DLMF 10.52.3), so a^2 k = omega (a^2 + b^2).  mpmath at
    30 digits."""
    with mpmath.workdps(30):
        w = mpmath.mpf(omega)
        jh = lambda x: x * mpmath.sqrt(mpmath.pi / (2 * x)) * mpmath.besselj(l + mpmath.mpf(1) / 2, x)
        yh = lambda x: x * mpmath.sqrt(mpmath.pi / (2 * x)) * mpmath.bessely(l + mpmath.mpf(1) / 2, x)
        j, y = jh(w), yh(w)
        dj, dy = mpmath.diff(jh, w), mpmath.diff(yh, w)
        a = u * dy - du / w * y
        b = du / w * j - u * dj
        return float(w * (a * a + b * b))


@pytest.mark.parametrize("l", [0, 3, 12])
def test_flat_form_against_riccati_bessel(write_spec, l):
    # Source: DLMF chapter 10 (Riccati-Bessel functions, via mpmath); flat space beyond r = 1.
    problem = problem_of(write_spec(FLAT))
    form = farform.far_form(problem, l, 1.0, 1e6, 0.05, 40.0, 1e-9)
    assert form.intervals and form.low == pytest.approx(max(0.05, np.sqrt(2 * l * (l + 1))), rel=1e-2)  # V: l(l+1)/r^2
    rng = np.random.default_rng(l)
    omegas = np.sort(rng.uniform(form.low, 40.0, 12))
    states = rng.normal(size=(12, 2))
    log_flux, error = form.log_flux(omegas, states)
    exact = np.array([flat_flux(l, w, u, du) for w, (u, du) in zip(omegas, states)])
    assert np.all(error <= 1e-9)
    assert np.all(np.abs(np.exp(log_flux) / exact - 1) <= error)


def test_form_against_the_march_it_replaces():
    # Consistency (derive against derive, no outside value): outside the static shell the form's flux of random
    # states at frequencies between its nodes agrees with the march to the far radius (Richardson-extrapolated at
    # 4096 and 8192 steps) within the error the form claims.
    problem = problem_of(DUST)
    last = len(problem.regions) - 1
    radius = problem.regions[-1].lower
    l = 10
    form = farform.far_form(problem, l, radius, 1e8, 0.05, 45.0, 1e-9)
    rng = np.random.default_rng(3)
    omegas = np.sort(rng.uniform(form.low, 45.0, 10))
    states = rng.normal(size=(10, 2))
    log_flux, error = form.log_flux(omegas, states)
    far = 1e8
    values = []
    for count in (4096, 8192):
        pieces = [Piece(last, radius, 1e3, count, "geometric"), Piece(last, 1e3, far, count // 4, "geometric")]
        marched = march(problem, l, omegas, pieces, states)
        values.append(far_amplitude2(problem.regions[-1], marched.state, omegas, far, l)
                      * np.exp(2 * marched.log_scale))
    reference = values[1] + (values[1] - values[0]) / 15
    assert np.all(np.abs(np.exp(log_flux) / reference - 1) <= error + 1e-11)


def test_form_range_and_fallback():
    # Below omega^2 = 2 max V beyond the radius a turning point is near and the form does not cover: those
    # frequencies are marched (offcentre._log_u_at).  The term there equals the term with the form switched off.
    problem = problem_of(DUST)
    radius = problem.regions[-1].lower
    form = farform.far_form(problem, 6, radius, 1e8, 0.05, 45.0, 1e-9)
    V = problem.regions[-1].potential(np.geomspace(radius, 1e3, 2000), 6, 0.0)
    assert form.low ** 2 == pytest.approx(2 * np.max(V), rel=1e-3)
    below = np.array([0.5 * form.low, 0.9 * form.low])
    assert not np.any(form.covers(below))
    series = problem.regions[0].centre_series
    with_form = offcentre._term_values(problem, 6, below, (0.5, 0.5), 1.0, 256, series, (0.05, 45.0), 1e-9)
    without = offcentre._term_values(problem, 6, below, (0.5, 0.5), 1.0, 256, series, (0.05, 45.0))
    np.testing.assert_array_equal(with_form[0], without[0])
    assert np.all(with_form[2] == 0)


@pytest.mark.slow
def test_density_off_centre_with_and_without_the_form(monkeypatch):
    # Consistency (derive against derive): at r = R/2 inside the static shell the l-summed density with the far
    # form agrees with the one marched to the far radius at every l, within their errors.
    problem = problem_of(DUST)
    omegas = np.linspace(2.0, 30.0, 12)
    monkeypatch.setattr(offcentre, "FORM_WORTH", 4)     # forms for these few frequencies too
    farform._FORMS.clear()
    with_form = offcentre.density_off_centre(problem, omegas, 0.5, 1e-9)
    assert farform._FORMS
    monkeypatch.setattr(offcentre, "FAR_FORM", False)
    without = offcentre.density_off_centre(problem, omegas, 0.5, 1e-9)
    assert with_form.ok and without.ok
    assert np.all(np.abs(with_form.density - without.density) <= with_form.error + without.error)


def test_worst_state_bound_against_a_search():
    # The bound on the relative error of s^T Q s for entry errors dQ over all states, against a dense search over
    # the unit circle (common practice: the generalized eigenvalue of a pair of 2x2 forms).
    rng = np.random.default_rng(7)
    for _ in range(20):
        q00, q11 = rng.uniform(0.2, 2.0, 2)
        q01 = rng.uniform(-0.9, 0.9) * np.sqrt(q00 * q11)
        d = rng.uniform(0, 1e-3, 3)
        angles = np.linspace(0, np.pi, 20001)
        u, v = np.cos(angles), np.sin(angles)
        ratio = (d[0] * u * u + 2 * d[1] * np.abs(u * v) + d[2] * v * v) / (q00 * u * u + 2 * q01 * u * v
                                                                             + q11 * v * v)
        bound = farform._worst(d[None, :], np.array([[q00, q01, q11]]))[0]
        assert np.max(ratio) <= bound * (1 + 1e-9)
        assert np.max(ratio) >= 0.5 * bound       # and not loose by much


@pytest.mark.parametrize("function", [np.exp, lambda x: 1 / (1 + 25 * x ** 2), lambda x: np.cos(12 * x),
                                      lambda x: np.log(2.5 + x)])
def test_chebyshev_tail_bounds_the_interpolation_error(function):
    # The error of the interpolant at n Chebyshev-Lobatto points is at most twice the sum of the coefficients
    # beyond its degree (Trefethen, Approximation Theory and Approximation Practice, 2013, Thm 4.2); the tail of
    # the interpolant's own coefficients, times the safety factor the far form uses, estimates it.  Checked
    # against the functions themselves (analytic on [-1, 1]: Runge's function converges slowly, e^x at once).
    x = np.linspace(-1, 1, 2001)
    for n in (17, 33, 65):
        nodes = -np.cos(np.pi * np.arange(n) / (n - 1))
        values = function(nodes)[:, None]
        interpolant = BarycentricInterpolator(nodes, values)(x)[:, 0]
        true = np.max(np.abs(interpolant - function(x)))
        estimate = farform.TAIL * farform.chebyshev_tail(values)[0]
        assert true <= max(estimate, 1e-14)


def test_resolved_forms_stop_at_33_nodes():
    # Where the coefficients show the interpolant resolved, no 65-node set is computed: outside the static shell
    # at l = 10 and 4.5e-11 (the share of a 1e-10 response; it took 65 nodes when only the nested spread
    # certified an interpolant), and the form's flux still agrees with the march within its error.
    problem = problem_of(DUST)
    radius = problem.regions[-1].lower
    form = farform.far_form(problem, 10, radius, 1e8, 0.05, 45.0, 4.5e-11)
    assert form.intervals and max(len(interval.nodes) for interval in form.intervals) == 33
    rng = np.random.default_rng(5)
    omegas = np.sort(rng.uniform(form.low, 45.0, 6))
    states = rng.normal(size=(6, 2))
    log_flux, error = form.log_flux(omegas, states)
    last, far = len(problem.regions) - 1, 1e8
    values = []
    for count in (4096, 8192):
        pieces = [Piece(last, radius, 1e3, count, "geometric"), Piece(last, 1e3, far, count // 4, "geometric")]
        marched = march(problem, 10, omegas, pieces, states)
        values.append(far_amplitude2(problem.regions[-1], marched.state, omegas, far, 10)
                      * np.exp(2 * marched.log_scale))
    reference = values[1] + (values[1] - values[0]) / 15
    assert np.all(np.abs(np.exp(log_flux) / reference - 1) <= error + 1e-11)
