"""The BTZ black hole with each condition at its AdS boundary, against the method of images.

A conformally coupled massless field in 2+1 (xi = 1/8) has m^2 L^2 = -3/4 in AdS3: nu = 1/2, both falloffs
r^-1/2 and r^-3/2 are normalisable, and the boundary condition is a choice (Dirichlet, Neumann, or transparent,
their average).  The Hartle-Hawking Wightman function of the non-rotating BTZ black hole is the image sum of
AdS3's (Lifschytz & Ortiz, Phys. Rev. D 49, 1929 (1994); in this form Hodgkinson & Louko, Phys. Rev. D 86,
064031 (2012), eq. (2.5)):

    W = 1/(4 pi sqrt(2) L) sum_n [ sigma_n^-1/2 - zeta (sigma_n + 2)^-1/2 ],
    sigma_n = (r r'/r_h^2) cosh(2 pi n r_h/L) - 1 - sqrt((r^2 - r_h^2)(r'^2 - r_h^2))/r_h^2 cosh(r_h (dt - i eps)/L^2),

zeta = 1 Dirichlet, 0 transparent, -1 Neumann (two points at the same r and angle).  The reference integrates it
against the Gaussian switching independently of derive: for a static detector
F = int ds g(s) e^{-i Omega s} W(s), g(s) = sqrt(pi) sigma e^{-s^2/(4 sigma^2)} (s in proper time), and the
contour is moved down by half the thermal period (W is analytic in the strip below the real axis up to the
whole period), where every sigma_n is real and positive and nothing is singular (derived here; common practice).
"""

import json
import os

import mpmath
import numpy as np
import pytest

from derive.cli import main

RH, L, R0, WIDTH = 1.0, 1.0, 2.0, 1.0
GAPS = [-1.0, 0.0, 1.0]
ZETA = {"dirichlet": 1, "neumann": -1, "transparent": 0}


def btz_spec(folder, boundary=None) -> str:
    line = f'\nboundary = "{boundary}"' if boundary else ""
    path = os.path.join(folder, f"btz_{boundary}.toml")
    with open(path, "w") as handle:
        handle.write(f"""format = 1
title = "BTZ"
[parameters]
L = {{ value = {L}, positive = true }}
rh = {{ value = {RH}, positive = true }}
[coordinates]
names = ["t", "r", "phi"]
positive = ["r"]
[definitions]
f = "(r**2 - rh**2)/L**2"
[[region]]
name = "outside"
where = "r > rh"
line_element = "-f*dt**2 + dr**2/f + r**2*dphi**2"
[field]
mass = "0"
coupling = "conformal"{line}
[detector]
at = "r = {R0}"
switching = {{ shape = "gaussian", width = "{WIDTH}" }}
gaps = {GAPS}
state = "hartle-hawking"
coupling = 0.01
""")
    return path


def _image_sum(gap, term, images, r0, rh, ell, width):
    """F(Omega) = int ds g(s) e^{-i Omega s} W(s) on the contour s = x - i pi alpha L^2/r_h (see the module
    docstring), W = sum over the images n of term(c_n), c_n = cosh of the n-th image's geodesic distance over L
    (real and > 1 on this contour)."""
    with mpmath.workdps(25):
        r, rh, ell, sigma = (mpmath.mpf(v) for v in (r0, rh, ell, width))
        alpha = mpmath.sqrt(r * r - rh * rh) / ell
        eta = mpmath.pi * alpha * ell ** 2 / rh
        B = (r * r - rh * rh) / rh ** 2
        A = [(r * r / rh ** 2) * mpmath.cosh(2 * mpmath.pi * n * rh / ell) for n in range(-images, images + 1)]

        def wightman(x):
            ch = mpmath.cosh(rh * x / (ell ** 2 * alpha))
            return sum(term(a + B * ch) for a in A) / (4 * mpmath.pi * ell)

        def integrand(x):
            s = x - 1j * eta
            return mpmath.sqrt(mpmath.pi) * sigma * mpmath.exp(-s * s / (4 * sigma ** 2) - 1j * gap * s) * wightman(x)

        value = mpmath.quad(integrand, [-mpmath.inf, -20, -5, 0, 5, 20, mpmath.inf])
        assert abs(value.imag) < 1e-20 * abs(value.real)
        return float(value.real)


def image_sum_response(gap, zeta, r0=R0, rh=RH, ell=L, width=WIDTH):
    """The conformal field's image sum (the module docstring's W, with sigma_n + 1 = c_n).  The n-th image's terms
    fall like e^{-pi |n| r_h/L} (like its cube where zeta = 1 and they cancel): images out to |n| = 37 L/(pi r_h)
    + 3 leave less than 1e-16 of the sum."""
    def term(c):
        return (1 / mpmath.sqrt(c - 1) - zeta / mpmath.sqrt(c + 1)) / mpmath.sqrt(2)
    return _image_sum(gap, term, int(37 * ell / (np.pi * rh)) + 3, r0, rh, ell, width)


def response(spec, capsys):
    assert main(["response", spec, "--json", "--tolerance", "1e-10"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("boundary", ["dirichlet", "neumann",
                                      pytest.param("transparent", marks=pytest.mark.slow)])
def test_btz_response_matches_the_image_sum(tmp_path, capsys, boundary):
    data = response(btz_spec(str(tmp_path), boundary), capsys)
    expected = np.array([image_sum_response(g, ZETA[boundary]) for g in GAPS])
    np.testing.assert_allclose(data["response"], expected, rtol=2e-11)
    assert np.all(np.abs(np.array(data["response"]) - expected) <= 10 * np.array(data["error"]) + 1e-14)


def test_dirichlet_is_the_default(tmp_path, capsys):
    default = response(btz_spec(str(tmp_path)), capsys)
    expected = np.array([image_sum_response(g, 1) for g in GAPS])
    np.testing.assert_allclose(default["response"], expected, rtol=2e-11)


@pytest.mark.parametrize("text, expected", [('"robin"', "expected one of"), ("3", "expected one of")])
def test_an_unknown_boundary_condition_is_refused(tmp_path, capsys, text, expected):
    path = btz_spec(str(tmp_path), "neumann")
    with open(path) as handle:
        spec = handle.read().replace('boundary = "neumann"', f"boundary = {text}")
    with open(path, "w") as handle:
        handle.write(spec)
    assert main(["check", path]) == 2
    err = capsys.readouterr().err
    assert "field.boundary" in err and expected in err


def test_neumann_needs_both_falloffs_normalisable(tmp_path, capsys):
    # A minimally coupled massless field in AdS3 has nu = 1 (Delta_- = 0 is not normalisable: Breitenlohner &
    # Freedman, Ann. Phys. 144, 249 (1982)); only the Dirichlet condition exists, and Neumann is refused.
    path = btz_spec(str(tmp_path), "neumann")
    with open(path) as handle:
        spec = handle.read().replace('coupling = "conformal"', 'coupling = "0"')
    with open(path, "w") as handle:
        handle.write(spec)
    assert main(["response", path, "--json"]) == 2
    err = capsys.readouterr().err
    assert "field.boundary" in err and "nu = 1" in err and "Traceback" not in err


def image_sum_any_delta(gap, delta, r0=R0, rh=RH, ell=L, width=WIDTH):
    """F(Omega) from the image sum of AdS3's Wightman function for a field of any conformal dimension Delta,
    W = e^{-(Delta - 1) d}/(4 pi L sinh d) with d the geodesic distance over L (the Green function of the
    hyperbolic space's Laplacian with m^2 L^2 = Delta (Delta - 2): Delta_H3 (g/sinh d) = (g'' - g)/sinh d, derived
    here; for Delta = 3/2 and 1/2 it is the conformal field's sigma^-1/2 -+ (sigma + 2)^-1/2 above, with
    cosh d = sigma + 1), on the same shifted contour.  The n-th image falls like e^{-2 pi |n| r_h Delta/L}."""
    exponent = mpmath.mpf(1) - mpmath.mpf(delta)

    def term(c):
        s = mpmath.sqrt(c * c - 1)
        return (c + s) ** exponent / s         # e^{-d} = c - s = 1/(c + s), without cancellation
    return _image_sum(gap, term, int(37 * ell / (2 * np.pi * delta * rh)) + 3, r0, rh, ell, width)


def test_image_sum_of_any_dimension_is_the_conformal_one_at_half_integers():
    # the general-Delta reference against the conformal field's closed form above (Hodgkinson & Louko 2012)
    for boundary, delta in (("dirichlet", 1.5), ("neumann", 0.5)):
        assert image_sum_any_delta(0.5, delta) == pytest.approx(image_sum_response(0.5, ZETA[boundary]), rel=1e-14)


@pytest.mark.slow
@pytest.mark.parametrize("boundary", ["neumann"])     # Dirichlet's series goes the same way (and the massive test)
def test_irrational_exponent_matches_the_image_sum(tmp_path, capsys, boundary):
    """xi = 1/10 in AdS3 (R = -6/L^2): m^2 L^2 = -3/5, nu = sqrt(2/5), irrational; both falloffs are
    normalisable (nu < 1, Breitenlohner & Freedman 1982) with Delta = 1 +- nu.  The falloff series carry the
    exponent as a symbol (no logarithm can enter: the exponents differ by 2 nu)."""
    path = btz_spec(str(tmp_path), boundary)
    with open(path) as handle:
        spec = handle.read().replace('coupling = "conformal"', 'coupling = "1/10"')
    with open(path, "w") as handle:
        handle.write(spec)
    assert main(["response", path, "--json", "--tolerance", "1e-8"]) == 0
    data = json.loads(capsys.readouterr().out)
    nu = np.sqrt(0.4)
    delta = 1 + nu if boundary == "dirichlet" else 1 - nu
    expected = np.array([image_sum_any_delta(g, delta) for g in GAPS])
    np.testing.assert_allclose(data["response"], expected, rtol=1e-8)
    assert np.all(np.abs(np.array(data["response"]) - expected) <= 10 * np.array(data["error"]) + 1e-14)


@pytest.mark.slow
def test_massive_field_matches_the_image_sum(tmp_path, capsys):
    """A massive, minimally coupled field (mu L = 1/2): Delta = 1 + sqrt(1 + mu^2 L^2), irrational; a reflecting
    boundary has no Coulomb-like well (the potential grows like r^2), so the response is computed, not refused as
    outside an asymptotically flat black hole."""
    path = btz_spec(str(tmp_path), "dirichlet")
    with open(path) as handle:
        spec = handle.read().replace('coupling = "conformal"', 'coupling = "0"').replace('mass = "0"', 'mass = "1/2"')
    with open(path, "w") as handle:
        handle.write(spec)
    assert main(["response", path, "--json", "--tolerance", "1e-8"]) == 0
    data = json.loads(capsys.readouterr().out)
    expected = np.array([image_sum_any_delta(g, 1 + np.sqrt(1.25)) for g in GAPS])
    np.testing.assert_allclose(data["response"], expected, rtol=1e-8)
    assert np.all(np.abs(np.array(data["response"]) - expected) <= 10 * np.array(data["error"]) + 1e-14)
