"""Curvature of exact spacetimes against published values (docs/conventions.md section 1; each source named beside its check)."""

import mpmath
import pytest
import sympy as sp

import derive
from conftest import static_spec


def geometry(write_spec, text, region="region"):
    return derive.load(write_spec(text)).geometry[region]


def same(a, b) -> bool:
    difference = a - b
    if isinstance(difference, sp.MatrixBase):
        return all(sp.simplify(x) == 0 for x in difference)
    return sp.simplify(difference) == 0


def symbols_of(geo):
    return {s.name: s for s in geo.metric.free_symbols}


# -- Schwarzschild -----------------------------------------------------------------------------------
def test_schwarzschild_christoffel_symbols(write_spec):
    # Source: Misner, Thorne & Wheeler, Gravitation (1973); Carroll, Spacetime and Geometry (2004), eq. 5.53.
    geo = geometry(write_spec, static_spec("1 - 2*M/r"))
    s = symbols_of(geo)
    M, r, th = s["M"], s["r"], s["theta"]
    t_, r_, h_, p_ = 0, 1, 2, 3
    expected = {
        (t_, t_, r_): M / (r * (r - 2 * M)),
        (r_, t_, t_): M * (r - 2 * M) / r ** 3,
        (r_, r_, r_): -M / (r * (r - 2 * M)),
        (r_, h_, h_): -(r - 2 * M),
        (r_, p_, p_): -(r - 2 * M) * sp.sin(th) ** 2,
        (h_, r_, h_): 1 / r,
        (p_, r_, p_): 1 / r,
        (h_, p_, p_): -sp.sin(th) * sp.cos(th),
        (p_, h_, p_): sp.cos(th) / sp.sin(th),
    }
    assert set(geo.christoffel) == set(expected)
    for key, value in expected.items():
        assert same(geo.christoffel[key], value), key


def test_schwarzschild_kretschmann_and_vacuum(write_spec):
    # Source: MTW (1973); Wald, General Relativity (1984): K = 48 M^2 / r^6, R_ab = 0.
    geo = geometry(write_spec, static_spec("1 - 2*M/r"))
    s = symbols_of(geo)
    assert same(geo.kretschmann, 48 * s["M"] ** 2 / s["r"] ** 6)
    assert geo.ricci == sp.zeros(4, 4)
    # Vacuum: the Weyl invariant equals the Kretschmann scalar (textbook identity when R_ab = 0).
    assert same(geo.weyl_squared, geo.kretschmann)
    assert all(v["verdict"] == "holds" for v in geo.energy_conditions.values())


# -- Reissner-Nordstrom ------------------------------------------------------------------------------
def test_reissner_nordstrom_kretschmann_and_maxwell_stress(write_spec):
    # Source: the a = 0 limit of the Kerr-Newman invariant (Henry, ApJ 535, 350, 2000):
    # K = 48 M^2/r^6 - 96 M Q^2/r^7 + 56 Q^4/r^8, R = 0, G^mu_nu = (Q^2/r^4) diag(-1,-1,1,1) = 8 pi T^mu_nu
    # (Gaussian units; textbook, e.g. Carroll 2004 sec. 5.8).
    geo = geometry(write_spec, static_spec("1 - 2*M/r + Q**2/r**2",
                                           parameters="M = { value = 1.0, positive = true }\n"
                                                      "Q = { value = 0.5, positive = true }"))
    s = symbols_of(geo)
    M, Q, r = s["M"], s["Q"], s["r"]
    assert same(geo.kretschmann, 48 * M ** 2 / r ** 6 - 96 * M * Q ** 2 / r ** 7 + 56 * Q ** 4 / r ** 8)
    assert geo.ricci_scalar == 0
    assert same(geo.einstein - Q ** 2 / r ** 4 * sp.diag(-1, -1, 1, 1), sp.zeros(4, 4))
    stress = geo.stress_energy
    assert same(stress["energy_density"], Q ** 2 / (8 * sp.pi * r ** 4))
    assert same(stress["pressures"]["r"], -Q ** 2 / (8 * sp.pi * r ** 4))
    # the electromagnetic field obeys all four classical energy conditions (Hawking & Ellis 1973, sec. 4.3)
    assert {k: v["verdict"] for k, v in geo.energy_conditions.items()} == dict.fromkeys(
        ("null", "weak", "strong", "dominant"), "holds")


# -- Kerr --------------------------------------------------------------------------------------------
KERR = """
format = 1
title = "Kerr"
[parameters]
M = { value = 1.0, positive = true }
a = { value = 0.5, positive = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[definitions]
Sigma = "r**2 + a**2*cos(theta)**2"
Delta = "r**2 - 2*M*r + a**2"
[[region]]
name = "region"
line_element = "-(1 - 2*M*r/Sigma)*dt**2 - 4*M*a*r*sin(theta)**2/Sigma*dt*dphi + Sigma/Delta*dr**2 + Sigma*dtheta**2 + (r**2 + a**2 + 2*M*r*a**2*sin(theta)**2/Sigma)*sin(theta)**2*dphi**2"
"""


@pytest.mark.slow
def test_kerr_ricci_flat_and_kretschmann(write_spec):
    # Source: R. C. Henry, Astrophys. J. 535, 350 (2000):
    # K = 48 M^2 (r^6 - 15 a^2 r^4 c^2 + 15 a^4 r^2 c^4 - a^6 c^6)/Sigma^6, c = cos(theta);
    # value at M=1, a=0.5, Q=0, r=3, theta=0.7: 0.045440905143678737302 (Overduin et al., Universe 6, 22, 2020).
    geo = geometry(write_spec, KERR)
    s = symbols_of(geo)
    M, a, r, th = s["M"], s["a"], s["r"], s["theta"]
    c = sp.cos(th)
    sigma = r ** 2 + a ** 2 * c ** 2
    expected = 48 * M ** 2 * (r ** 6 - 15 * a ** 2 * r ** 4 * c ** 2 + 15 * a ** 4 * r ** 2 * c ** 4
                              - a ** 6 * c ** 6) / sigma ** 6
    assert geo.ricci == sp.zeros(4, 4)
    assert sp.cancel(sp.expand(geo.kretschmann - expected)) == 0
    with mpmath.workdps(30):
        value = sp.N(geo.kretschmann.subs({M: 1, a: sp.Rational(1, 2), r: 3, th: sp.Rational(7, 10)}), 25)
    assert abs(value - sp.Float("0.045440905143678737302", 25)) < 1e-20
    # the off-diagonal t-phi component is there
    assert geo.metric[0, 3] != 0


# -- de Sitter and anti-de Sitter ------------------------------------------------------------------------
@pytest.mark.parametrize("sign, scalar", [(1, 12), (-1, -12)])
def test_de_sitter_static_patch_is_maximally_symmetric(write_spec, sign, scalar):
    # Source: textbook (e.g. Carroll, Spacetime and Geometry, 2004, ch. 8): f = 1 -/+ r^2/L^2 gives R = +/-12/L^2,
    # K = 24/L^4, R_ab = (R/4) g_ab, and R_abcd = (R/12)(g_ac g_bd - g_ad g_bc).
    f = "1 - r**2/L**2" if sign == 1 else "1 + r**2/L**2"
    geo = geometry(write_spec, static_spec(f, parameters="L = { value = 3.0, positive = true }"))
    s = symbols_of(geo)
    L = s["L"]
    assert same(geo.ricci_scalar, scalar / L ** 2)
    assert same(geo.kretschmann, 24 / L ** 4)
    assert same(geo.ricci - geo.ricci_scalar / 4 * geo.metric, sp.zeros(4, 4))
    g = geo.metric
    for (a, b, c, d), value in geo.riemann.items():
        assert same(value, geo.ricci_scalar / 12 * (g[a, c] * g[b, d] - g[a, d] * g[b, c]))
    assert geo.weyl == {} and geo.weyl_squared == 0


def test_schwarzschild_de_sitter_kretschmann(write_spec):
    # Source: textbook (Schwarzschild-de Sitter; e.g. Carroll 2004 ch. 8), from memory: K = 48 M^2/r^6 + 8 Lambda^2/3 for f = 1 - 2M/r - Lambda r^2/3.
    geo = geometry(write_spec, static_spec("1 - 2*M/r - Lam*r**2/3",
                                           parameters="M = { value = 1.0, positive = true }\n"
                                                      "Lam = { value = 0.01, positive = true }"))
    s = symbols_of(geo)
    assert same(geo.kretschmann, 48 * s["M"] ** 2 / s["r"] ** 6 + 8 * s["Lam"] ** 2 / 3)
    assert same(geo.ricci_scalar, 4 * s["Lam"])


# -- FLRW ------------------------------------------------------------------------------------------------
FLRW = """
format = 1
title = "FLRW"
[parameters]
k = { value = 0.0, real = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
[functions]
a = ["t"]
[[region]]
name = "region"
line_element = "-dt**2 + a(t)**2*(dr**2/(1 - k*r**2) + r**2*(dtheta**2 + sin(theta)**2*dphi**2))"
"""


def test_flrw_friedmann_equations(write_spec):
    # Source: Carroll, Spacetime and Geometry (2004), sec. 8.3: G_tt = 3(adot^2 + k)/a^2,
    # G^i_i = -[2 addot/a + (adot^2 + k)/a^2], R = 6(addot/a + adot^2/a^2 + k/a^2).
    geo = geometry(write_spec, FLRW)
    t = [c for c in geo.coordinates if c.name == "t"][0]
    k = [s for s in geo.metric.free_symbols if s.name == "k"][0]
    a = geo.metric[1, 1].atoms(sp.core.function.AppliedUndef).pop()
    ad, add = sp.diff(a, t), sp.diff(a, t, 2)
    assert same(geo.einstein_lower[0, 0], 3 * (ad ** 2 + k) / a ** 2)
    for i in (1, 2, 3):
        assert same(geo.einstein[i, i], -(2 * add / a + (ad ** 2 + k) / a ** 2))
    assert same(geo.ricci_scalar, 6 * (add / a + ad ** 2 / a ** 2 + k / a ** 2))
    # conformally flat (Weyl invariant vanishes): textbook property of FLRW
    assert geo.weyl_squared == 0
    # a free scale factor leaves the energy conditions undecided
    assert geo.energy_conditions["null"]["verdict"] == "undecided"


# -- higher and lower dimensions -----------------------------------------------------------------------
def test_schwarzschild_tangherlini_five_dimensions(write_spec):
    # Source: F. R. Tangherlini, Nuovo Cimento 27, 636 (1963): f = 1 - mu/r^(D-3) is Ricci flat.
    # Kretschmann K = (D-1)(D-2)^2(D-3) mu^2 / r^(2(D-1)) (from memory; it gives 48 M^2/r^6 at D = 4,
    # mu = 2M), so 72 mu^2/r^8 at D = 5.
    text = """
    format = 1
    title = "Tangherlini D=5"
    [parameters]
    mu = { value = 1.0, positive = true }
    [coordinates]
    names = ["t", "r", "chi", "theta", "phi"]
    positive = ["r"]
    [[region]]
    name = "region"
    line_element = "-(1 - mu/r**2)*dt**2 + dr**2/(1 - mu/r**2) + r**2*(dchi**2 + sin(chi)**2*(dtheta**2 + sin(theta)**2*dphi**2))"
    """
    geo = geometry(write_spec, text)
    s = symbols_of(geo)
    assert geo.ricci == sp.zeros(5, 5)
    assert same(geo.kretschmann, 72 * s["mu"] ** 2 / s["r"] ** 8)


def test_btz_black_hole_in_2_plus_1(write_spec):
    # Source: Banados, Teitelboim & Zanelli, Phys. Rev. Lett. 69, 1849 (1992): the non-rotating BTZ metric
    # f = r^2/l^2 - M has constant curvature, R = -6/l^2, R_abcd = -(g_ac g_bd - g_ad g_bc)/l^2, K = 12/l^4.
    text = """
    format = 1
    title = "BTZ"
    [parameters]
    M = { value = 1.0, positive = true }
    ell = { value = 2.0, positive = true }
    [coordinates]
    names = ["t", "r", "phi"]
    positive = ["r"]
    [[region]]
    name = "region"
    line_element = "-(r**2/ell**2 - M)*dt**2 + dr**2/(r**2/ell**2 - M) + r**2*dphi**2"
    """
    geo = geometry(write_spec, text)
    s = symbols_of(geo)
    ell = s["ell"]
    assert same(geo.ricci_scalar, -6 / ell ** 2)
    assert same(geo.kretschmann, 12 / ell ** 4)
    g = geo.metric
    for (a, b, c, d), value in geo.riemann.items():
        assert same(value, -(g[a, c] * g[b, d] - g[a, d] * g[b, c]) / ell ** 2)


# -- general static metric and energy conditions -------------------------------------------------------
def test_general_static_metric_ricci_scalar(write_spec):
    # Source: textbook standard (e.g. Carroll 2004 ch. 5), common practice: for -f dt^2 + dr^2/f + r^2 dOmega^2,
    # R = -f'' - 4 f'/r + 2 (1 - f)/r^2.
    text = """
    format = 1
    title = "general"
    [coordinates]
    names = ["t", "r", "theta", "phi"]
    positive = ["r"]
    [functions]
    f = ["r"]
    [[region]]
    name = "region"
    line_element = "-f(r)*dt**2 + dr**2/f(r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
    """
    geo = geometry(write_spec, text)
    r = [c for c in geo.coordinates if c.name == "r"][0]
    f = geo.metric[1, 1].atoms(sp.core.function.AppliedUndef).pop()
    assert same(geo.ricci_scalar, -sp.diff(f, r, 2) - 4 * sp.diff(f, r) / r + 2 * (1 - f) / r ** 2)


def test_wormhole_violates_null_energy_condition(write_spec):
    # Source: Morris & Thorne, Am. J. Phys. 56, 395 (1988); Visser, Lorentzian Wormholes (1995), ch. 12:
    # the throat of ds^2 = -dt^2 + dr^2/(1 - b0^2/r^2) + r^2 dOmega^2 has rho = -b0^2/(8 pi r^4) < 0 and
    # rho + p_r = -2 b0^2/(8 pi r^4) < 0, so every classical energy condition fails.
    text = static_spec("1", "1 - b0**2/r**2", parameters="b0 = { value = 1.0, positive = true }",
                       where="r > b0")
    geo = geometry(write_spec, text)
    r, b0 = symbols_of(geo)["r"], symbols_of(geo)["b0"]
    assert same(geo.stress_energy["energy_density"], -b0 ** 2 / (8 * sp.pi * r ** 4))
    verdicts = {k: v["verdict"] for k, v in geo.energy_conditions.items()}
    assert verdicts == dict.fromkeys(("null", "weak", "strong", "dominant"), "fails")
