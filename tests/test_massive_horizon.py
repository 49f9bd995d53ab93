"""Massive fields outside a horizon (docs/conventions.md sections 4, 6 and 7; issue 5: Coulomb-like tail, evanescent
below the mass)."""

import json
import os

import mpmath
import numpy as np
import pytest

import derive
from derive.cli import main
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_detector, numeric_problem
from derive.detector.study import detector_response
from derive.solve.centre import Unsupported
from derive.solve.exterior import mode_term
from derive.solve.horizon import transmission

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SCHWARZSCHILD = os.path.join(ROOT, "worked", "schwarzschild", "spec.toml")
M = 1


def massive_spec(folder, mu) -> str:
    """The worked Schwarzschild example with a field of mass mu (M = 1)."""
    with open(SCHWARZSCHILD) as handle:
        text = handle.read().replace('mass = "0"', f'mass = "{mu}"')
    path = os.path.join(folder, f"massive_{mu}.toml")
    with open(path, "w") as handle:
        handle.write(text)
    return path


@pytest.fixture(scope="module")
def heavy(tmp_path_factory):
    """M mu = 0.4."""
    st = derive.load(massive_spec(str(tmp_path_factory.mktemp("massive")), 0.4))
    return numeric_problem(KernelSet(st)), numeric_detector(st)


def _poly_mul(a, b):
    out = [0] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def _poly_add(*polys):
    out = [0] * max(len(p) for p in polys)
    for p in polys:
        for i, x in enumerate(p):
            out[i] += x
    return out


def asymptotic_solution(l, omega, mu, R, sign, terms=60):
    """u = e^{i sign (k r + lam ln r)} sum_n c_n r^-n and du/dr* at r = R for the massive Schwarzschild radial
    equation, k = sqrt(omega^2 - mu^2) (i kappa below the mass, so sign = +1 is the decaying solution there) and
    lam = M (2 omega^2 - mu^2)/k (the Coulomb-like logarithmic phase).  The coefficients follow from the radial
    equation written as A y'' + B y' + C y = 0 with polynomial A, B, C (times r^4): the order r^(3-n) gives
    2 i sign k n c_n in terms of the earlier c_m (derived here; the standard large-r expansion, common practice).
    The asymptotic series is cut at its smallest term."""
    w, m, L = mpmath.mpf(omega), mpmath.mpf(mu), l * (l + 1)
    k = mpmath.sqrt(mpmath.mpc(w * w - m * m))
    if mpmath.im(k) < 0:
        k = -k
    lam = M * (2 * w * w - m * m) / k
    i = 1j * sign
    x2M = [-2 * M, 1]
    square = _poly_mul(x2M, x2M)
    A = _poly_mul(square, [0, 0, 1])
    B = _poly_add(_poly_mul(square, [0, 2 * i * lam, 2 * i * k]), _poly_mul(x2M, [0, 2 * M]))
    PP = [-(lam * lam) - i * lam, -2 * k * lam, -k * k]          # r^2 (P' + P^2), P = i sign (k + lam/r)
    C = _poly_add(_poly_mul(square, PP), _poly_mul(x2M, [2 * M * i * lam, 2 * M * i * k]), [0, 0, 0, 0, w * w],
                  [-v for v in _poly_mul(x2M, [2 * M, L, 0, m * m])])
    get = lambda p, j: p[j] if 0 <= j < len(p) else 0
    assert abs(get(C, 4)) < 1e-15 and abs(get(C, 3)) < 1e-12      # k and lam cancel the two leading orders
    c = [mpmath.mpc(1)]
    for n in range(1, terms):
        total = sum((get(A, 5 - n + q) * q * (q + 1) - get(B, 4 - n + q) * q + get(C, 3 - n + q)) * c[q]
                    for q in range(n))
        c.append(total / (get(B, 4) * n))
    r = mpmath.mpf(R)
    best = min(range(5, terms), key=lambda n: abs(c[n] * r ** -n))
    y = sum(c[n] * r ** -n for n in range(best))
    dy = sum(-n * c[n] * r ** (-n - 1) for n in range(best))
    phase = mpmath.exp(i * (k * r + lam * mpmath.log(r)))
    P = i * (k + lam / r)
    return phase * y, phase * (1 - 2 * M / r) * (dy + P * y), k


def reference_massive(l, omega, mu, r0, R=100.0, dps=20):
    """(|T|^2, |u_in(r0)|^2, |u_up(r0)|^2) with unit incident flux, independently of derive: the massive
    Regge-Wheeler-type potential (1 - 2M/r)(l(l+1)/r^2 + 2M/r^3 + mu^2) integrated by mpmath's Taylor-series ODE
    solver in y = ln(r - 2M) from the ingoing horizon solution, and matched at r = R to asymptotic_solution.
    Below the mass the up mode is u_dec/A, with u_dec the decaying solution and W[u_H, u_dec] = 2 i omega A."""
    with mpmath.workdps(dps):
        w, L, m = mpmath.mpf(omega), l * (l + 1), mpmath.mpf(mu)

        def rhs(y, s):
            r = 2 * M + mpmath.exp(y)
            V = (1 - 2 * M / r) * (L / r ** 2 + 2 * M / r ** 3 + m * m)
            return [r * s[1], -r * (w ** 2 - V) * s[0]]

        y0 = mpmath.mpf(-30)
        s = -2j * w * M
        u0 = mpmath.exp(s * y0)
        outward = mpmath.odefun(rhs, y0, [u0, s * u0 / (2 * M + mpmath.exp(y0))])
        y_probe, y_far = mpmath.log(r0 - 2 * M), mpmath.log(R - 2 * M)
        u_h = outward(y_probe)[0]
        u_far, v_far = outward(y_far)
        out_u, out_v, k = asymptotic_solution(l, omega, mu, R, 1)
        inward = mpmath.odefun(lambda z, st: [-v for v in rhs(-z, st)], -y_far, [out_u, out_v])
        u_back = inward(-y_probe)[0]
        if mpmath.im(k) == 0:
            k = mpmath.re(k)
            in_u, in_v, _ = asymptotic_solution(l, omega, mu, R, -1)
            A = (u_far * out_v - out_u * v_far) / (in_u * out_v - out_u * in_v)
            T2 = w / (k * abs(A) ** 2)
            return float(T2), float(T2 * abs(u_h) ** 2), float(T2 * w / k * abs(u_back) ** 2)
        A = (u_far * out_v - v_far * out_u) / (2j * w)
        return 0.0, 0.0, float(abs(u_back) ** 2 / abs(A) ** 2)


@pytest.mark.slow
def test_massive_modes_against_an_independent_mpmath_solution(heavy):
    # Issue 5 check: above the mass (in and up modes, |T|^2) and below it (up modes only, totally reflected),
    # derive's values agree with the independent 20-digit solution above to 1e-10 (M mu = 0.4, l = 1, r0 = 6M).
    problem, _ = heavy
    l, r0 = 1, 6.0
    omegas = np.array([0.35, 0.6])
    scattering = transmission(problem, l, omegas, 1e-11)
    t_in, t_up, _, _, e_in, e_up = mode_term(problem, l, omegas, (r0, r0), 1.0,
                                             1e-11)
    t_in, t_up = t_in.real, t_up.real
    weight = (2 * l + 1) / (4 * np.pi) / (4 * np.pi * omegas * r0 * r0)
    for i, omega in enumerate(omegas):
        T2, u_in2, u_up2 = reference_massive(l, omega, 0.4, r0)
        assert scattering.transmission[i] == pytest.approx(T2, rel=1e-10, abs=1e-300)
        assert t_in[i] / weight[i] == pytest.approx(u_in2, rel=1e-10, abs=1e-300)
        assert t_up[i] / weight[i] == pytest.approx(u_up2, rel=1e-10)
        assert e_up[i] < 1e-10 * t_up[i]


def test_flux_and_the_mass_threshold(heavy):
    # Below the mass nothing reaches infinity (|T|^2 = 0, |R|^2 = 1; docs/conventions.md section 6: evanescent); above it
    # |R|^2 + |T|^2 = 1 is a check, not imposed; and in modes exist only above the mass.
    problem, _ = heavy
    omegas = np.array([0.1, 0.39, 0.4001, 0.45, 0.8, 2.0])
    # 1e-9: at k = 0.009 (omega - mu = 1e-4) the far piece needs ~10^4 steps and the rounding floor counted for
    # them is ~1e-10
    result = transmission(problem, 1, omegas, 1e-9)
    assert result.ok, result.message()
    below = omegas < 0.4
    assert np.all(result.transmission[below] == 0) and np.all(result.reflection[below] == 1)
    assert np.all(result.transmission[~below] > 0)
    np.testing.assert_allclose(result.flux_defect, 0, atol=1e-10)
    t_in, t_up, _, _, e_in, e_up = mode_term(problem, 1, omegas, (6.0, 6.0), 1.0,
                                             1e-9)
    t_in, t_up = t_in.real, t_up.real
    assert np.all(t_in[below] == 0) and np.all(t_in[~below] > 0) and np.all(t_up > 0)
    assert np.all(e_in + e_up <= 1e-9 * (t_in + t_up))


def test_low_energy_absorption_approaches_the_sommerfeld_enhanced_form(tmp_path):
    # Unruh, Phys. Rev. D 14, 3251 (1976): for M omega, M mu << 1 the l = 0 absorption of a massive scalar is the
    # horizon area times a Coulomb (Sommerfeld) factor.  In our flux normalisation (rederived here by matching
    # the near-zone constant to the regular Coulomb function F_0 ~ C_0 k r; form from memory of that paper):
    #   |T|^2 = 16 M^2 omega k 2 pi eta/(1 - e^{-2 pi eta}),  eta = M (2 omega^2 - mu^2)/k,
    # which becomes 16 M^2 omega^2 (Das, Gibbons & Mathur 1997) when mu -> 0.  Corrections are O((M mu)^2), so
    # the deviation must shrink about fourfold when M mu halves, at fixed velocity v = 0.05.
    deviations = []
    for mu in (0.01, 0.005):
        problem = numeric_problem(KernelSet(derive.load(massive_spec(str(tmp_path), mu))))
        v = 0.05
        omega = mu / np.sqrt(1 - v * v)
        k = omega * v
        result = transmission(problem, 0, np.array([omega]), 1e-10)
        assert result.ok, result.message()
        eta = M * (2 * omega ** 2 - mu ** 2) / k
        expected = 16 * M ** 2 * omega * k * 2 * np.pi * eta / (1 - np.exp(-2 * np.pi * eta))
        deviations.append(abs(result.transmission[0] / expected - 1))
    assert deviations[0] < 0.02
    assert 3.0 < deviations[0] / deviations[1] < 5.0


def test_spectrum_command_on_a_massive_black_hole(tmp_path, capsys):
    # the command-line contract of issue 5 for a massive field outside a horizon: density at r0 below and above
    # the mass (in modes only above it), every value with its error, exit 0 when the tolerance is met
    spec = massive_spec(str(tmp_path), 0.4)
    code = main(["spectrum", spec, "--l", "1", "--omega", "0.2,0.6", "--at", "6", "--json", "--tolerance", "1e-9"])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert data["transmission"][0] == 0 and data["reflection"][0] == 1 and data["transmission"][1] > 0
    assert data["density_in"][0] == 0 and data["density_in"][1] > 0 and data["density_up"][0] > 0
    for value, error in zip(data["density"], data["error"]["density"]):
        assert 0 < value and error <= 1e-9 * value


def test_response_is_refused_for_a_massive_field_outside_a_horizon(heavy):
    # quasi-bound resonances below the mass are far narrower than any frequency grid of the response: refused
    problem, detector = heavy
    with pytest.raises(Unsupported, match="quasi-bound"):
        detector_response(problem, detector, 1e-6)


def test_a_massive_field_outside_a_five_dimensional_black_hole_is_thermal(tmp_path, capsys):
    # Outside f = 1 - m/r^2 a field with m mu^2 < 3/4 sees V rise from the horizon to mu^2 with a repulsive
    # inverse-square tail: nothing is trapped below the mass, and the response is computed (up modes alone below
    # it).  Hartle-Hawking is thermal at the local Tolman temperature T = kappa/(2 pi sqrt(f(r0))) (kappa = 1 at
    # m = 1); for a Gaussian switching of width sigma the KMS condition S(-nu) = e^(-nu/T) S(nu) gives, on
    # completing the square, F(-Omega) = e^(Omega/T + 1/(4 sigma^2 T^2)) F(Omega + 1/(2 sigma^2 T)) exactly
    # (derived here; the KMS condition: R. Haag, N. M. Hugenholtz and M. Winnink, Commun. Math. Phys. 5, 215
    # (1967), from memory)
    sigma, gap = 5.0, 0.5
    T = 1 / (2 * np.pi * np.sqrt(0.75))
    shifted = gap + 1 / (2 * sigma ** 2 * T)
    with open(os.path.join(ROOT, "worked", "tangherlini_5d", "spec.toml")) as handle:
        text = handle.read().replace('mass = "0"', 'mass = "0.5"').replace(
            "gaps = [-0.5, 0.0, 0.5]", f"gaps = [{-gap}, {float(shifted)!r}]")
    path = tmp_path / "tangherlini_massive.toml"
    path.write_text(text)
    assert main(["response", str(path), "--json", "--tolerance", "1e-9"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["local_temperature"] == pytest.approx(T, rel=1e-12)
    F_minus, F_shifted = data["states"]["hartle-hawking"]["response"]
    e_minus, e_shifted = data["states"]["hartle-hawking"]["error"]
    ratio = F_minus / (np.exp(gap / T + 1 / (4 * sigma ** 2 * T ** 2)) * F_shifted)
    assert abs(ratio - 1) <= 2 * (e_minus / F_minus + e_shifted / F_shifted) + 1e-12
    assert abs(ratio - 1) < 1e-8


def test_a_five_dimensional_black_hole_that_traps_waves_is_refused_naming_them(tmp_path, capsys):
    # m mu^2 = 4 > 3/4: V -> mu^2 + c/r^2 with c = 3/4 - m mu^2 = -13/4 (supercritical: s = sqrt(-c - 1/4) =
    # sqrt(3)), so l = 0 holds infinitely many quasi-bound resonances in a geometric series, kappa ratio
    # e^(-pi/s) (Case 1950, from memory); l = 1 (c = 15/4 - 4 = -1/4) is critical, not supercritical
    with open(os.path.join(ROOT, "worked", "tangherlini_5d", "spec.toml")) as handle:
        text = handle.read().replace('mass = "0"', 'mass = "2"')
    path = tmp_path / "tangherlini_trapping.toml"
    path.write_text(text)
    assert main(["response", str(path)]) == 2
    message = capsys.readouterr().err
    assert f"l = 0 (kappa_(n+1)/kappa_n -> {np.exp(-np.pi / np.sqrt(3)):.4g}, s = 1.73205)" in message
    assert "l = 1 (" not in message


@pytest.mark.slow
def test_an_array_of_a_massive_field_outside_a_five_dimensional_black_hole_decomposes_into_multipoles(tmp_path,
                                                                                                      capsys):
    # Two detectors on r = 2 around the 4+1 black hole (m = 1, mu = 0.5: nothing trapped), a quarter turn apart, in
    # the Hartle-Hawking state.  A consistency check of derive's own (not an outside value): the multipole weights
    # sum to the single detector's response, and sum_l w_l G_l(cos gamma) (Gegenbauer, index 1 on the 3-sphere) is
    # the pair's L_AB.  The weights' frequency integrals had started at the mass, where outside a horizon the up
    # modes reach below it: they summed to 15% of the response.
    from derive.solve.offcentre import angular_factor

    from test_correlations import detectors_toml

    with open(os.path.join(ROOT, "worked", "tangherlini_5d", "spec.toml")) as handle:
        text = handle.read().replace('mass = "0"', 'mass = "0.5"')
    wide = '{ shape = "gaussian", width = "5" }'
    text = text[:text.index("[detector]")] + '[detector]\nstate = "hartle-hawking"\ncoupling = 0.01\n' + detectors_toml(
        ("A", "r = 2, chi = pi/2, theta = pi/2, phi = 0", 0.25, wide),
        ("B", "r = 2, chi = pi/2, theta = pi/2, phi = pi/2", 0.25, wide))
    path = tmp_path / "array.toml"
    path.write_text(text)
    assert main(["correlations", str(path), "--json", "--tolerance", "1e-5", "--quiet"]) == 0
    data = json.loads(capsys.readouterr().out)
    weights, errors = np.array(data["multipoles"]["weight"]), np.array(data["multipoles"]["error"])
    single = data["detectors"]["A"]
    assert abs(weights.sum() - single["probability"]) <= errors.sum() + single["error"] + 1e-9 * single["probability"]
    (pair,) = data["pairs"]
    series = sum(w * angular_factor(l, 3, 0.0) for l, w in enumerate(weights))
    assert abs(series - pair["L"][0]) <= errors.sum() + pair["error"]["L"] + 1e-9 * abs(pair["L"][0])
