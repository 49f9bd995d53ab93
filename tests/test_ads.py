"""A reflecting AdS boundary: normal modes, their weights, and a detector at the centre (docs/conventions.md section 6:
the spectrum is discrete)."""

import json
import os

import numpy as np
import pytest

from derive.cli import main

L = 1.0
ADS = """# Anti-de Sitter space in global coordinates
format = 1
title = "AdS4"

[parameters]
L = {{ value = {L}, positive = true }}

[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]

[definitions]
f = "1 + r**2/L**2"

[[region]]
name = "all"
where = "r >= 0"
line_element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"

[field]
mass = "{mass}"
coupling = "{coupling}"

[detector]
at = "r = 0"
switching = {{ shape = "gaussian", width = "{width}" }}
gaps = [0.0]
state = "vacuum"

[compare]
with = "minkowski"
"""


def ads_spec(folder, mass="0", coupling="0", width="0.04") -> str:
    path = os.path.join(folder, f"ads_{mass}_{coupling.replace('/', '_')}.toml")
    with open(path, "w") as handle:
        handle.write(ADS.format(L=L, mass=mass, coupling=coupling, width=width))
    return path


def normal_modes(spec, l, capsys, at=None):
    argv = ["spectrum", spec, "--l", str(l), "--omega", "1.0", "--json"] + (["--at", str(at)] if at else [])
    assert main(argv) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["density"] == [0.0]            # discrete spectrum: nothing between the modes
    return data["normal_modes"]


def delta(mass, coupling):
    """Delta = 3/2 + sqrt(9/4 + m^2 L^2), m^2 = mu^2 + xi R, R = -12/L^2 (Breitenlohner & Freedman 1982)."""
    return 1.5 + np.sqrt(2.25 + (mass ** 2 - 12 * coupling / L ** 2) * L ** 2)


def test_normal_modes_and_weights_of_ads(tmp_path, capsys):
    # Normal modes of a scalar in global AdS4 with reflecting (normalisable, Delta_+) boundary conditions:
    # omega L = Delta + l + 2n (Avis, Isham & Storey, Phys. Rev. D 18, 3565 (1978); Breitenlohner & Freedman,
    # Ann. Phys. 144, 249 (1982)).  Conformal coupling: Delta = 2 (minimal and massive: the slow test below).
    # Conformal, l = 0: V = 0 and u = sin(omega r*) on 0 < r* < pi L/2, so 2 omega int u^2 dr* = 1 gives the
    # weight at the centre (1/4 pi)|u'(0)|^2 = omega/(2 pi^2 L) (derived here; common practice).
    conformal = normal_modes(ads_spec(str(tmp_path), coupling="1/6"), 0, capsys)
    n = np.arange(len(conformal["omega"]))
    np.testing.assert_allclose(conformal["omega"], (2 + 2 * n) / L, rtol=1e-11)
    np.testing.assert_allclose(conformal["weight"], np.array(conformal["omega"]) / (2 * np.pi ** 2 * L), rtol=1e-10)
    assert conformal["ok"] and conformal["truncated"]
    assert all(e <= 1e-10 * w for e, w in zip(conformal["error"]["weight"], conformal["weight"]))


@pytest.mark.slow
# (mass 1.2, l = 0) left out: 30 s of CI for the machinery that (1.2, 2) exercises with the same irrational Delta
@pytest.mark.parametrize("mass, l", [("0", 0), ("0", 1), ("1.2", 2)])
def test_normal_modes_for_other_l_and_masses(tmp_path, capsys, mass, l):
    modes = normal_modes(ads_spec(str(tmp_path), mass=mass), l, capsys, at=0.5)
    n = np.arange(len(modes["omega"]))
    np.testing.assert_allclose(modes["omega"], (delta(float(mass), 0.0) + l + 2 * n) / L, rtol=1e-11)
    assert modes["ok"] and all(w > 0 for w in modes["weight"])


@pytest.mark.slow
def test_a_short_detector_at_the_centre_of_ads_sees_flat_space_plus_curvature(tmp_path, capsys):
    # Conformal coupling: the Wightman function at the centre is the mode sum sum_k (2k/L)/(2 pi^2 L) e^{-2ik u/L}
    # = -1/(4 pi^2 L^2 sin^2(u/L)) = -1/(4 pi^2 u^2) - 1/(12 pi^2 L^2) + O(u^2) (summed here in closed form;
    # common practice).  The constant shifts F(0) by -|chi_hat(0)|^2/(12 pi^2 L^2) = -sigma^2/(6 pi L^2) for the
    # Gaussian exp(-tau^2/2 sigma^2), i.e. by -2 sigma^2/(3 L^2) relative to Minkowski's 1/(4 pi); the next order
    # is ~sigma^2/L^2 of that.  Light comes back from the boundary after pi L.
    spec = ads_spec(str(tmp_path), coupling="1/6", width="0.04")
    assert main(["response", spec, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    sigma = 0.04
    assert data["relative_difference"][0] == pytest.approx(-2 * sigma ** 2 / (3 * L ** 2), rel=2e-3)
    assert data["error"][0] < 1e-10 * data["response"][0]
    assert data["locality"]["round_trip"] == pytest.approx(np.pi * L, rel=1e-8)
    assert data["locality"]["local"]


def test_neumann_and_transparent_normal_modes(tmp_path, capsys):
    # A conformally coupled field in AdS4 has nu = 1/2: both falloffs Delta = 2 and Delta = 1 are normalisable
    # (Breitenlohner & Freedman 1982; Ishibashi & Wald, Class. Quantum Grav. 21, 2981 (2004)).  Neumann (the
    # slower one): omega L = 1 + l + 2n; for l = 0, u = sin(omega r*) with u'(pi L/2) = 0, and the same
    # normalisation as above gives the weight omega/(2 pi^2 L) (derived here).  Transparent is the average of the
    # two two-point functions (Avis, Isham & Storey 1978): both sets of modes with half their weights.
    spec = ads_spec(str(tmp_path), coupling="1/6")
    with open(spec) as handle:
        text = handle.read()
    for boundary, expected, half in (("neumann", [1.0, 3.0, 5.0, 7.0], 1.0),
                                     ("transparent", [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0], 0.5)):
        with open(spec, "w") as handle:
            handle.write(text.replace('coupling = "1/6"', f'coupling = "1/6"\nboundary = "{boundary}"'))
        modes = normal_modes(spec, 0, capsys)
        np.testing.assert_allclose(modes["omega"], np.array(expected) / L, rtol=1e-11)
        np.testing.assert_allclose(modes["weight"], half * np.array(expected) / (2 * np.pi ** 2 * L), rtol=1e-10)


@pytest.mark.slow
def test_an_off_centre_detector_in_ads_against_the_closed_form_wightman_function(tmp_path, capsys):
    # The conformally coupled massless field in AdS4 with the reflecting (Dirichlet, Delta = 2) condition has
    # W = (1/(8 pi^2 L^2)) [1/(Z - 1) - 1/(Z + 1)] (Avis, Isham & Storey, Phys. Rev. D 18, 3565 (1978)), Z = -X.X'/L^2
    # the embedding-space invariant; at the centre it is the mode sum of the test above, -1/(4 pi^2 L^2 sin^2(u/L)).
    # A static detector at r0 (lapse gamma = sqrt(1 + r0^2/L^2), proper time tau = gamma t) has
    # Z = gamma^2 cos(tau/(gamma L)) - gamma^2 + 1 (derived here).  F(Omega) = int du C(u) e^{-i Omega u} W(u - i0)
    # with C(u) = sqrt(pi) sigma e^{-u^2/(4 sigma^2)} for the Gaussian; W's singularities are all on the real
    # axis (cos w = c with |c| <= 1 has real roots only), so the integral runs on Im u = -sigma/2 (mpmath).
    # derive sums the normal modes of every l below the switching's reach.
    import mpmath as mp

    sigma, r0, gaps = 1.0, 0.7, [-1.0, 0.0, 1.0]
    spec = ads_spec(str(tmp_path), coupling="1/6", width=str(sigma))
    with open(spec) as handle:
        text = handle.read().replace('at = "r = 0"', f'at = "r = {r0}"').replace("gaps = [0.0]", f"gaps = {gaps}")
    with open(spec, "w") as handle:
        handle.write(text)
    assert main(["response", spec, "--json", "--tolerance", "1e-9"]) == 0
    data = json.loads(capsys.readouterr().out)
    mp.mp.dps = 25
    g2 = 1 + mp.mpf(r0) ** 2 / L ** 2
    shift = mp.mpf(sigma) / 2

    def wightman(z):
        Z = g2 * mp.cos(z / (mp.sqrt(g2) * L)) - g2 + 1
        return (1 / (Z - 1) - 1 / (Z + 1)) / (8 * mp.pi ** 2 * L ** 2)

    for gap, value, error in zip(gaps, data["response"], data["error"]):
        def integrand(u, gap=gap):
            z = u - 1j * shift
            return mp.sqrt(mp.pi) * sigma * mp.exp(-z ** 2 / (4 * sigma ** 2) - 1j * gap * z) * wightman(z)
        exact = float(mp.re(mp.quad(integrand, [-mp.inf, -5, 0, 5, mp.inf])))
        assert abs(value - exact) <= error, (gap, value, exact, error)
        assert error < 1e-9 * value


@pytest.mark.slow
def test_two_detectors_in_ads_against_the_closed_form_wightman_function(tmp_path, capsys):
    # Two static detectors in AdS4 (the centre and r = 3/2), conformally coupled massless field with the reflecting
    # (Dirichlet) condition: L_AB and M through derive's normal-mode sums (every mode below the reach, with the
    # weights between the two points) against the Avis-Isham-Storey Wightman function of the test above, now
    # between two points, Z = [sqrt((L^2 + r_A^2)(L^2 + r_B^2)) cos(v/L) - r_A r_B cos gamma]/L^2 (derived here
    # from the embedding X.X'), reduced over t_A + t_B as in tests/test_correlations.py and integrated by mpmath:
    # for L below every singularity (all on the real axis), for M (Feynman) below those at v > 0 and above those at
    # v < 0.
    import mpmath as mp

    # the two detectors as top-level inline tables (the same as [[detectors]] entries), before the spec's tables
    text = """detectors = [
  { name = "A", at = "r = 0", gap = 1.0, switching = { shape = "gaussian", width = "0.5" } },
  { name = "B", at = "r = 3/2", gap = 2.0, switching = { shape = "gaussian", width = "0.6", centre = "0.3" } }]
""" + ADS.format(L=L, mass="0", coupling="1/6", width="1").split("[detector]")[0] + """[detector]
state = "vacuum"
coupling = 0.1
"""
    path = tmp_path / "ads_pair.toml"
    path.write_text(text)
    assert main(["correlations", str(path), "--json", "--tolerance", "1e-6"]) == 0
    (pair,) = json.loads(capsys.readouterr().out)["pairs"]
    mp.mp.dps = 25
    rA, rB = mp.mpf(0), mp.mpf("1.5")
    aA, aB = mp.sqrt(1 + rA ** 2 / L ** 2), mp.sqrt(1 + rB ** 2 / L ** 2)

    def W(v):
        Z = (mp.sqrt((L ** 2 + rA ** 2) * (L ** 2 + rB ** 2)) * mp.cos(v / L) - rA * rB) / L ** 2
        return (1 / (Z - 1) - 1 / (Z + 1)) / (8 * mp.pi ** 2 * L ** 2)

    a, b = (mp.mpf("0.5") / aA) ** 2, (mp.mpf("0.6") / aB) ** 2
    c, wA, wB, D = a + b, aA * 1, aB * 2, -mp.mpf("0.3")
    light = L * mp.acos(L ** 2 / mp.sqrt((L ** 2 + rA ** 2) * (L ** 2 + rB ** 2)))
    h = light / 2

    def reduced(kappa, spread, sign):
        pre = aA * aB * mp.sqrt(2 * mp.pi * a * b / c) * mp.exp(-spread ** 2 * a * b / (2 * c))
        return lambda v: sign * pre * mp.exp(-(v - D) ** 2 / (2 * c) + 1j * kappa * (v - D)) * W(v)

    f_L = reduced((-wA * a - wB * b) / c, wB - wA, 1)
    f_M = reduced((wA * a - wB * b) / c, wA + wB, -1)
    L_ref = 0.01 * complex(mp.quad(lambda u: f_L(u - 1j * h), [-mp.inf, -5, 0, 5, mp.inf]))
    M_ref = 0.01 * complex(mp.quad(f_M, [-12 + 1j * h, -h + 1j * h, 0, h - 1j * h, 12 - 1j * h]))
    assert abs(complex(*pair["L"]) - L_ref) <= pair["error"]["L"] and pair["error"]["L"] < 1e-9 * abs(L_ref)
    assert abs(complex(*pair["M"]) - M_ref) <= pair["error"]["M"] and pair["error"]["M"] < 1e-9 * abs(M_ref)
    assert pair["signalling"]["light_time"] == pytest.approx(float(light), rel=1e-10)
