"""The flat first region in closed form (derive.solve.flat; docs/conventions.md section 4)."""

import os

import mpmath
import numpy as np
import pytest
from scipy.special import jv

import derive
from derive.solve import flat
from derive.solve.march import Piece, centre_start, march
from derive.solve.offcentre import density_off_centre

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SHELL = os.path.join(ROOT, "worked", "static_shell", "spec.toml")


def test_scipy_bessel_functions_against_mpmath():
    # The closed form rests on scipy's J_nu (Amos's algorithm) for the orders it uses, l + (D - 3)/2 in D = 3, 4, 5,
    # from below the turning point (x < nu) to far above it: against mpmath's besselj at 30 digits, 1e-13 of the
    # local amplitude sqrt(2/(pi x)) (5e-13 at order 41) (an absolute measure: near a zero of J the relative error means nothing).
    for nu in (0.0, 0.5, 1.0, 1.5, 2.5, 7.0, 20.5, 41.0, 80.5):
        x = np.geomspace(max(1e-3, nu / 50), 400.0, 60)
        mine = jv(nu, x)
        with mpmath.workdps(30):
            exact = np.array([float(mpmath.besselj(nu, v)) for v in x])
        amplitude = np.maximum(np.sqrt(2 / (np.pi * x)), np.abs(exact))
        assert np.max(np.abs(mine - exact) / amplitude) < 5e-13, nu


@pytest.fixture(scope="module")
def shell():
    return derive.load(SHELL).numeric_problem


@pytest.mark.parametrize("l", [0, 1, 5, 12])
def test_closed_form_equals_the_march_across_the_interior(shell, l):
    # The regular solution at the shell, in the march's normalisation, from the closed form and from the march
    # itself on a fine grid (the series start and the propagator; derive's two ways, consistent to the march's
    # own accuracy, 1e-10).
    omegas = np.array([0.5, 2.0, 7.0, 30.0])
    R = shell.regions[0].upper
    r_s = 0.0 if l == 0 else 1e-5
    state, log_scale = centre_start(shell, l, omegas, r_s)
    marched = march(shell, l, omegas, [Piece(0, r_s, R, 16384, "uniform" if r_s == 0 else "geometric")], state,
                    log_scale)
    states, logs = flat.regular_solution(shell, l, omegas, [R])
    by_march = marched.state * np.exp(marched.log_scale - logs[0])[:, None]
    assert np.max(np.abs(by_march - states[0])) < 1e-9


def test_the_density_off_the_centre_with_and_without_the_closed_form(shell, monkeypatch):
    # The l-summed density at R/2: the closed-form interior and the march through it agree within their errors
    # (a regression of derive against itself; the physics is checked in test_two_point.py and test_solve.py).
    omegas = np.array([1.0, 5.0, 20.0])
    closed = density_off_centre(shell, omegas, 0.5, 1e-9)
    monkeypatch.setattr(flat, "ENABLED", False)
    marched = density_off_centre(shell, omegas, 0.5, 1e-9)
    assert closed.ok and marched.ok
    assert np.all(np.abs(closed.density - marched.density) <= closed.error + marched.error)
