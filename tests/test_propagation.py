"""The integrator's pieces against independent references: the step integrals against mpmath quadrature on both
sides of the series/closed-form switch, the ordered product against plain matrix products, and the fourth-order
convergence the Richardson factor 1/15 assumes, measured on a closed-form case."""

import mpmath
import numpy as np
import pytest

from derive.solve.propagation import ordered_product, step_integrals


def _reference(k2, h):
    """S = int_0^a x sin(beta x) dx / k and Kq = int_-a^a (x^2 - h^2/12) cos(beta x) dx / k^2 (a = h/2,
    beta = 2k), by mpmath quadrature at 30 digits, for k^2 of either sign (analytic in k^2)."""
    with mpmath.workdps(30):
        k = mpmath.sqrt(mpmath.mpf(k2))     # imaginary for k2 < 0: the integrals stay real
        a = mpmath.mpf(h) / 2
        S = mpmath.quad(lambda x: x * mpmath.sin(2 * k * x) / k, [0, a])
        Kq = mpmath.quad(lambda x: (x * x - mpmath.mpf(h) ** 2 / 12) * mpmath.cos(2 * k * x) / k ** 2, [-a, a])
        return float(mpmath.re(S)), float(mpmath.re(Kq))


# u = -beta^2 a^2 = -k2 h^2: the series serves |u| < 0.25, the closed forms the rest (both signs)
@pytest.mark.parametrize("u", [1e-6, 0.1, 0.2499, 0.2501, 0.5, 3.0, 40.0, -1e-6, -0.1, -0.2499, -0.2501, -0.5,
                               -3.0, -40.0])
def test_step_integrals_on_both_sides_of_the_switch(u):
    h = 0.37
    k2 = -u / h ** 2
    S, Kq = step_integrals(np.array([k2]), np.array([h]))
    S_ref, Kq_ref = _reference(k2, h)
    assert S[0] == pytest.approx(S_ref, rel=1e-12, abs=1e-17)
    assert Kq[0] == pytest.approx(Kq_ref, rel=1e-10, abs=1e-16)


def test_ordered_product_is_the_matrix_product():
    rng = np.random.default_rng(7)
    matrices = rng.normal(size=(37, 5, 2, 2))
    product, log_scale = ordered_product(matrices)
    expected = np.stack([np.linalg.multi_dot(list(matrices[::-1, j])) for j in range(5)])
    np.testing.assert_allclose(product * np.exp(log_scale)[:, None, None], expected, rtol=1e-12)


def test_the_march_is_fourth_order_on_a_closed_form_case():
    # V = l(l+1)/r^2 (flat space, l = 2): the regular solution is k r j_2(k r) (DLMF 10.49.3). The error of
    # the propagated solution at r = 3 falls by 2^4 = 16 per halving of the step (the 1/15 of Richardson).
    from types import SimpleNamespace

    from derive.solve.propagation import region_propagator

    region = SimpleNamespace(potential=lambda r, l, w: l * (l + 1) / r ** 2 + 0 * r,
                             dtortoise_dr=lambda r: np.ones_like(np.asarray(r, dtype=float)))
    k, l, a, b = 1.7, 2, 0.5, 3.0

    def exact(r):
        x = k * r
        j2 = (3 / x ** 3 - 1 / x) * np.sin(x) - 3 / x ** 2 * np.cos(x)
        dj2 = (-9 / x ** 4 + 1 / x ** 2) * np.sin(x) + (3 / x ** 3 - 1 / x) * np.cos(x) + 6 / x ** 3 * np.cos(x) \
            + 3 / x ** 2 * np.sin(x)
        return np.array([x * j2, k * j2 + x * k * dj2])

    errors = []
    for count in (16, 32, 64):
        matrix, scale = region_propagator(region, l, np.array([k]), a, b, count, False)
        state = (matrix[0] * np.exp(scale[0])) @ exact(a)
        errors.append(abs(state[0] - exact(b)[0]))
    ratios = [errors[0] / errors[1], errors[1] / errors[2]]
    assert all(12 < ratio < 20 for ratio in ratios), ratios
