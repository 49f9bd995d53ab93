"""Detector response at a regular centre (docs/conventions.md sections 7-9; sources named beside each check)."""

import json
import os

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import erfcinv

import derive
from derive.cli import main
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_detector, numeric_problem
from derive.detector.response import trials_to_distinguish
from derive.detector.study import minkowski_gaussian_response, study
from derive.detector.switching import Switching, switching_from_spec
from test_shells import two_region_spec
from test_solve import FLAT

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DETECTOR = """
[detector]
at = "r = 0"
switching = {{ shape = "gaussian", width = "{width}" }}
gaps = [{gaps}]
state = "vacuum"
coupling = 0.01
[compare]
with = "minkowski"
sigmas = 3
"""


def run_study(path):
    st = derive.load(path)
    return study(numeric_problem(KernelSet(st)), numeric_detector(st))


def test_flat_gaussian_response_from_the_mode_sum(write_spec):
    # Source: the Minkowski Wightman function (Birrell & Davies, Quantum Fields in Curved Space, 1982,
    # ch. 3): with sigma = 1, F = 1/(4 pi) at Omega = 0, 0.007088272232636416 at Omega = 1,
    # 0.2891830640065146 at Omega = -1 (values computed independently three ways).
    path = write_spec(FLAT + DETECTOR.format(width="1", gaps="-1.0, 0.0, 1.0"))
    result = run_study(path)
    expected = np.array([0.2891830640065146, 1 / (4 * np.pi), 0.007088272232636416])
    np.testing.assert_allclose(result["response"], expected, rtol=1e-12)
    assert np.all(result["error"] <= 1e-10 * expected)
    np.testing.assert_allclose(minkowski_gaussian_response([-1.0, 0.0, 1.0], 1.0), expected, rtol=1e-15)
    # in flat space the relative difference to Minkowski is zero within its error
    assert np.all(np.abs(result["relative_difference"]) <= result["relative_difference_error"] + 1e-12)


def test_small_shell_difference_is_linear_in_its_mass(write_spec):
    # Issue 6 check: a thin shell of small mass M changes the response by an amount linear in M
    # (first-order perturbation theory; common practice).
    differences = []
    for mass in (1e-5, 2e-5):
        spec = two_region_spec("1", "1 - 2*M/r", f"M = {{ value = {mass}, positive = true }}\n"
                               "R = { value = 1.0, positive = true }")
        spec += DETECTOR.format(width="0.5", gaps="-4.0, 0.0, 4.0")
        result = run_study(write_spec(spec, f"shell{mass}.toml"))
        assert np.all(np.abs(result["relative_difference"]) > 10 * result["relative_difference_error"])
        differences.append(result["relative_difference"])
    np.testing.assert_allclose(differences[1] / differences[0], 2.0, rtol=2e-4)


@pytest.mark.parametrize("k", [0.0, 0.7, 3.0])
def test_gaussian_transform_against_direct_quadrature(k):
    # |chi_hat(k)|^2 = 2 pi sigma^2 exp(-sigma^2 k^2) (docs/conventions.md section 8) against scipy's quad of
    # int chi(tau) e^{-i k tau} dtau (the imaginary part vanishes by symmetry).
    switching = Switching("gaussian", 0.8)
    real, _ = quad(switching.chi, -12 * 0.8, 12 * 0.8, weight="cos", wvar=k, epsabs=1e-14, epsrel=1e-12)
    assert switching.power(k) == pytest.approx(real ** 2, rel=1e-11)
    # the effective duration holds all but the tail of chi^2
    inside, _ = quad(lambda t: switching.chi(t) ** 2, -switching.duration / 2, switching.duration / 2)
    total = np.sqrt(np.pi) * 0.8
    assert 1 - inside / total == pytest.approx(switching.tail, rel=1e-3)


@pytest.mark.slow
def test_locality_of_a_centred_detector():
    # docs/conventions.md section 9: from the centre of a flat interior of radius R the light round trip is 2R in the
    # interior's proper units; the Gaussian's duration is 2 sigma erfcinv(1e-12).
    result = run_study(os.path.join(ROOT, "worked", "static_shell", "spec.toml"))
    assert result["locality"]["round_trip"] == pytest.approx(2.0, rel=1e-13)
    assert result["locality"]["duration"] == pytest.approx(2 * 0.2 * erfcinv(1e-12), rel=1e-14)
    assert result["locality"]["local"] is False   # 2.017 > 2: the worked example is deliberately just non-local


def test_trials_formula():
    # docs/conventions.md section 9 (normal approximation to the binomial; common practice), by hand:
    p_a, p_b, z = 1.0e-3, 1.1e-3, 3.0
    expected = z ** 2 * (np.sqrt(p_a * (1 - p_a)) + np.sqrt(p_b * (1 - p_b))) ** 2 / (p_a - p_b) ** 2
    assert trials_to_distinguish(p_a, p_b, z) == pytest.approx(expected, rel=1e-15)


@pytest.mark.slow
def test_response_command_json_contract(tmp_path, capsys):
    # Issue 6 contract: {"gaps", "response", "error", "reference": {"with", "response", "error"},
    # "relative_difference", "locality": {"duration", "round_trip", "local"}, "trials_to_distinguish"}
    spec = os.path.join(ROOT, "worked", "static_shell", "spec.toml")
    assert main(["response", spec, "--json", "--out", str(tmp_path / "out"), "--gaps=-2,0,2"]) == 0
    data = json.loads(capsys.readouterr().out)
    for key in ("gaps", "response", "error", "reference", "relative_difference", "locality",
                "trials_to_distinguish"):
        assert key in data
    assert set(data["reference"]) >= {"with", "response", "error"}
    assert set(data["locality"]) >= {"duration", "round_trip", "local"}
    assert data["gaps"] == [-2.0, 0.0, 2.0] and len(data["trials_to_distinguish"]) == 3
    assert (tmp_path / "out" / "response.csv").is_file() and (tmp_path / "out" / "response.png").is_file()


def test_states_need_the_right_spacetime(capsys, tmp_path):
    # A thermal state needs a horizon; a regular spacetime says so (exit 2, with the reason).
    text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml")).read().replace(
        'state = "vacuum"', 'state = "hartle-hawking"')
    assert 'state = "hartle-hawking"' in text
    path = tmp_path / "spec.toml"
    path.write_text(text)
    assert main(["response", str(path)]) == 2
    assert "needs a horizon" in capsys.readouterr().err


def test_sharp_switching_is_refused_as_divergent(capsys, tmp_path):
    # Svaiter & Svaiter, Phys. Rev. D 46, 5267 (1992) (from memory): sharp switching gives a logarithmically
    # UV-divergent response in 3+1; derive refuses with the reason rather than print a cut-off-dependent number.
    text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml")).read()
    start = text.index("switching =")
    end = text.index("\n", start)
    path = tmp_path / "spec.toml"
    path.write_text(text[:start] + 'switching = { shape = "sharp", duration = "1" }' + text[end:])
    assert main(["response", str(path)]) == 2
    assert "diverges in the ultraviolet" in capsys.readouterr().err


def _quad_power(switching, k):
    a, b = switching.support
    chi = lambda x: float(switching.chi(np.array([x]))[0])
    # QUADPACK's cosine-weighted rule (QAWO) for the oscillatory integral
    re = quad(chi, a, b, weight="cos", wvar=k, limit=400, epsabs=1e-13, epsrel=1e-12)[0] if k else quad(
        chi, a, b, limit=400, epsabs=1e-14, epsrel=1e-12)[0]
    # these switchings are even: the sine part vanishes (QUADPACK would only warn that it cannot reach a
    # relative tolerance on zero); it is checked to be zero instead
    assert np.allclose(switching.chi(np.array([0.3, 0.9])), switching.chi(np.array([-0.3, -0.9])), rtol=0, atol=0)
    return re * re


@pytest.mark.parametrize("shape, values", [("sharp", {"duration": 2.0}), ("bump", {"duration": 3.0}),
                                           ("cos2", {"duration": 4.0, "ramp": 1.0}),
                                           ("sin4", {"duration": 4.0, "ramp": 1.5})])
def test_compact_switching_transforms_against_direct_quadrature(shape, values):
    # Issue 6 check: each switching's |chi_hat(k)|^2 against scipy's adaptive quadrature (QUADPACK) of
    # int chi(tau) e^{-i k tau} dtau, and its error bound covers the difference.
    switching = switching_from_spec({"shape": shape}, values)
    peak = switching.power(np.array([0.0]))[0]
    for k in (0.0, 0.7, 3.1, 10.0, 31.0):
        ours = switching.power(np.array([k]))[0]
        assert abs(ours - _quad_power(switching, k)) <= 1e-12 * peak + switching.power_error
    assert switching.support == (-values["duration"] / 2, values["duration"] / 2)
    assert switching.duration <= values["duration"]


def test_switching_shapes_know_their_decay_and_duration():
    # Integration by parts (common practice): a jump in the m-th derivative of chi gives |chi_hat|^2 ~ k^-2(m+1):
    # top hat m = 0, cos^2 ramps m = 2, the fourth-order ramps m = 4.  A user expression is classified the same
    # way: cos^2(pi tau/2) on |tau| < 1 has its first jump in the second derivative.
    profile = lambda tau: np.cos(np.pi * np.asarray(tau) / 2) ** 2
    user = switching_from_spec({"shape": "expression"}, {"duration": 2.0}, profile)
    cos2 = switching_from_spec({"shape": "cos2"}, {"duration": 2.0, "ramp": 1.0})
    assert user.decay == 6 and cos2.decay == 6
    # the same function two ways: cos^2 ramps of length 1 on a support of 2 are cos^2(pi tau/2)
    k = np.array([0.0, 1.3, 7.0])
    np.testing.assert_allclose(user.power(k), cos2.power(k), rtol=1e-12, atol=1e-14)
    assert switching_from_spec({"shape": "sin4"}, {"duration": 2.0, "ramp": 0.5}).decay == 10
    assert switching_from_spec({"shape": "bump"}, {"duration": 2.0}).decay is None
    # the bump's effective duration holds all but the tail of int chi^2 (checked by quadrature)
    bump = switching_from_spec({"shape": "bump"}, {"duration": 2.0, "tail": 1e-6})
    inner = quad(lambda t: float(bump.chi(np.array([t]))[0]) ** 2, -bump.duration / 2, bump.duration / 2)[0]
    whole = quad(lambda t: float(bump.chi(np.array([t]))[0]) ** 2, -1, 1)[0]
    assert 1 - inner / whole == pytest.approx(1e-6, rel=0.05)


@pytest.mark.slow
def test_compact_switching_flat_response_from_the_mode_sum(write_spec):
    # Flat space from the mode sum (centre density) against the same switching with the exact flat density
    # nu/(4 pi^2) (docs/conventions.md section 7): the solver's density enters, nothing else differs.
    st = derive.load(write_spec(FLAT + DETECTOR.format(width=1, gaps="-1.0, 0.0, 1.0").replace(
        'shape = "gaussian", width = "1"', 'shape = "sin4", duration = "3", ramp = "1"')))
    result = study(numeric_problem(KernelSet(st)), numeric_detector(st), tolerance=1e-10)
    assert np.all(np.abs(result["relative_difference"]) <= 1e-9)
    assert np.all(result["error"] < 1e-8 * np.abs(result["response"]))


@pytest.mark.slow
def test_user_expression_switching_through_the_spec(write_spec):
    # A user chi(tau) from the spec is lowered to a kernel (checked against its mpmath twin) and gives the same
    # response as the built-in shape it equals: cos^2(pi tau/4) on |tau| < 2 is the cos2 switching with ramps 2.
    base = FLAT + DETECTOR.format(width=1, gaps="-1.0, 1.0")
    user = derive.load(write_spec(base.replace('shape = "gaussian", width = "1"',
                                               'shape = "expression", expression = "cos(pi*tau/4)**2", '
                                               'duration = "4"'), "user.toml"))
    builtin = derive.load(write_spec(base.replace('shape = "gaussian", width = "1"',
                                                  'shape = "cos2", duration = "4", ramp = "2"'), "cos2.toml"))
    a = study(numeric_problem(KernelSet(user)), numeric_detector(user), tolerance=1e-9)
    b = study(numeric_problem(KernelSet(builtin)), numeric_detector(builtin), tolerance=1e-9)
    np.testing.assert_allclose(a["response"], b["response"], rtol=1e-12)
    assert a["switching"].decay == 6 and np.all(np.abs(a["relative_difference"]) <= a["relative_difference_error"] + 1e-9)


@pytest.mark.slow
def test_off_centre_flat_detector_responds_like_a_centred_one(write_spec):
    # Issue 6 check: in flat space the l-summed density off the centre is the centre's (addition theorem,
    # sum_l (2l+1) j_l^2 = 1, DLMF 10.60.12), so a detector at r0 = 0.7 gives the closed-form Gaussian response
    # (Birrell & Davies 1982, ch. 3; docs/conventions.md section 8) to the tolerance.
    text = FLAT + DETECTOR.format(width=2, gaps="-1.0, 0.0, 1.0").replace('at = "r = 0"', 'at = "r = 0.7"')
    result = run_study(write_spec(text))
    assert np.all(np.abs(result["relative_difference"]) <= 1e-9)
    assert np.all(result["relative_difference_error"] <= 1e-9)


def test_flat_massive_gaussian_response_against_direct_quadrature(write_spec):
    # F = int_mu^inf dnu sqrt(nu^2 - mu^2)/(4 pi^2) |chi_hat(Omega + nu)|^2 (docs/conventions.md sections 7-8) by scipy's
    # QUADPACK, independently of derive's mode sum and panels.
    text = FLAT.replace('mass = "0"', 'mass = "1/2"') + DETECTOR.format(width=1, gaps="-2.0, 0.0, 1.0")
    result = run_study(write_spec(text))
    sigma, mu = 1.0, 0.5
    for gap, ours, error in zip(result["gaps"], result["response"], result["error"]):
        weight = lambda nu: np.sqrt(nu * nu - mu * mu) / (4 * np.pi ** 2) * 2 * np.pi * sigma ** 2 * np.exp(
            -(sigma * (gap + nu)) ** 2)  # noqa: B023
        reference = quad(weight, mu, mu + 40, epsabs=0, epsrel=1e-13, limit=400, points=[max(mu, -gap)])[0]
        assert ours == pytest.approx(reference, rel=1e-9)
        assert error < 1e-8 * ours
    # the Minkowski reference of a massive field is the massive one: flat space differs from it by nothing
    assert np.all(np.abs(result["relative_difference"]) <= 1e-9)


@pytest.mark.slow
def test_flat_2plus1_gaussian_response(write_spec):
    # Flat 2+1, massless: S = 1/(4 pi) (docs/conventions.md section 7), so F = int_0^inf S 2 pi sigma^2 e^{-sigma^2 (W+nu)^2}
    # dnu = (sqrt(pi) sigma/4) erfc(sigma W) (integrated here; checked below by QUADPACK too).
    from scipy.special import erfc

    text = (FLAT.replace('names = ["t", "r", "theta", "phi"]', 'names = ["t", "r", "phi"]').replace(
        "r**2*(dtheta**2 + sin(theta)**2*dphi**2)", "r**2*dphi**2") + DETECTOR.format(width=1, gaps="-1.0, 0.0, 2.0"))
    st = derive.load(write_spec(text))
    # 1e-9: in 2+1 the density does not vanish at nu -> 0, where the far radius (10^3 wavelengths) is largest
    result = study(numeric_problem(KernelSet(st)), numeric_detector(st), tolerance=1e-9)
    sigma = 1.0
    closed = np.sqrt(np.pi) * sigma / 4 * erfc(sigma * np.array(result["gaps"]))
    direct = [quad(lambda nu: 2 * np.pi * sigma ** 2 * np.exp(-(sigma * (g + nu)) ** 2) / (4 * np.pi), 0, np.inf,  # noqa: B023
                   epsrel=1e-13)[0] for g in result["gaps"]]
    np.testing.assert_allclose(closed, direct, rtol=1e-12)
    # 2+1, sigma = 1 (computed independently, from the closed form sqrt(pi)/4 erfc(sigma Omega)): 0.443113462726379 at Omega = 0
    assert np.sqrt(np.pi) / 4 * erfc(0.0) == pytest.approx(0.443113462726379, rel=1e-14)
    assert np.sqrt(np.pi) / 4 * erfc(1.0) == pytest.approx(0.06970139632016549, rel=1e-13)
    np.testing.assert_allclose(result["response"], closed, rtol=1e-9)
    assert np.all(np.abs(result["relative_difference"]) <= 1e-9)


@pytest.mark.slow
def test_sharp_switching_in_2plus1_converges_with_its_tail_bounded(write_spec):
    # In 2+1 the flat density is constant, 1/(4 pi), so a sharp switching's k^-2 weight gives a finite response:
    # F = int_0^inf (1/(4 pi)) 4 sin^2((W + nu) T/2)/(W + nu)^2 dnu; at W = 0 this is T/4 (int_0^inf sin^2(x)/x^2 dx
    # = pi/2; integrated here). derive's value lies within its stated error, which carries the bounded tail.
    text = (FLAT.replace('names = ["t", "r", "theta", "phi"]', 'names = ["t", "r", "phi"]').replace(
        "r**2*(dtheta**2 + sin(theta)**2*dphi**2)", "r**2*dphi**2")
        + DETECTOR.format(width=1, gaps="0.0").replace('shape = "gaussian", width = "1"',
                                                      'shape = "sharp", duration = "2"'))
    st = derive.load(write_spec(text))
    result = study(numeric_problem(KernelSet(st)), numeric_detector(st), tolerance=1e-9)
    T = 2.0
    assert abs(result["response"][0] - T / 4) <= result["error"][0]
    assert result["error"][0] < 0.05 * T / 4


@pytest.mark.parametrize("switching, key", [('{ shape = "cos2", duration = "4", ramp = "3" }', "ramp"),
                                            ('{ shape = "bump" }', "duration"),
                                            ('{ shape = "gaussian", width = "-1" }', "width"),
                                            ('{ shape = "bump", width = "0.2" }', "width"),
                                            ('{ shape = "gaussian", duration = "2" }', "duration"),
                                            ('{ shape = "gaussian" }', "width")])
def test_bad_switching_names_file_and_key(capsys, tmp_path, switching, key):
    # Bad input gets exit 2 and a message naming the file and the key (house rule).
    text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml")).read()
    start = text.index("switching =")
    path = tmp_path / "spec.toml"
    path.write_text(text[:start] + f"switching = {switching}" + text[text.index("\n", start):])
    assert main(["response", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and f"detector.switching.{key}" in err


@pytest.mark.parametrize("tolerance", [1e-6, 1e-8, 1e-10, 1e-12])
def test_tolerance_aware_cutoff_against_the_closed_form(tolerance):
    # The Gaussian's frequency integral stops where a bound on the rest (four times the flat density) is below a
    # thousandth of the tolerance; checked against the closed-form flat response (docs/conventions.md section 8;
    # follows from the Minkowski Wightman function, Birrell & Davies 1982 ch. 3), for gaps from deep
    # de-excitation to far above the peak, with the error estimate covering the true error.
    from derive.detector.response import cutoff, response
    from derive.detector.study import flat_density

    switching = Switching("gaussian", 0.3)
    gaps = np.array([-40.0, -10.0, -1.0, 0.0, 2.0, 8.0, 15.0])
    result = response(gaps, switching, flat_density(4, 0.0), tolerance=tolerance)
    exact = minkowski_gaussian_response(gaps, 0.3)
    assert np.all(np.abs(result.response - exact) <= result.error)
    assert np.all(result.error <= tolerance * exact)
    upper, tail = cutoff(gaps, switching, tolerance=tolerance)
    assert upper < 40.0 + 10.0 / 0.3 and np.all(tail <= 1e-3 * tolerance * exact * 1.01)


def test_a_response_not_known_to_its_tolerance_is_a_shortfall():
    # The response's own error (density carried through the quadrature, quadrature, tails) is held to the
    # tolerance (factor 2 of slack): 1e-6 against 1e-8 is a shortfall naming the gap, 1e-8 is not.
    from derive.detector.response import Response
    from derive.detector.study import _check_response, passing_tolerance

    F = np.array([0.1, 0.2])
    shortfalls = []
    _check_response(Response(np.array([0.0, 1.0]), F, 1e-6 * F, 0 * F, 0 * F), 1e-8, shortfalls)
    assert len(shortfalls) == 1 and "gap 0" in shortfalls[0][0] and passing_tolerance(shortfalls) == 1e-5
    shortfalls = []
    _check_response(Response(np.array([0.0, 1.0]), F, 1e-8 * F, 0 * F, 0 * F), 1e-8, shortfalls)
    assert shortfalls == []


@pytest.mark.slow
def test_short_switching_in_a_cavity_resolves_the_density_ripple():
    # Self-consistency (no outside value): light returning from the shell after the round trip T makes the
    # density at the centre ripple with period 2 pi/T; a Gaussian of width 0.025 has panels 20 wide, which once
    # aliased that ripple (an error of 1.6e-8 reported as 3e-12).  With the panels capped at 2 pi/T the response
    # agrees with one on panels ten times narrower, within the errors both report.
    import derive
    from derive.codegen.problem import numeric_detector
    from derive.demo import demo_spec_path
    from derive.detector.study import detector_response
    from derive.detector.switching import Switching

    spacetime = derive.load(demo_spec_path())
    problem, detector = spacetime.numeric_problem, numeric_detector(spacetime)
    switching = Switching("gaussian", 0.025)
    plain, _, _ = detector_response(problem, detector, 1e-10, [-8.0, 1.6], switching=switching)
    fine, _, _ = detector_response(problem, detector, 1e-10, [-8.0, 1.6], switching=switching, panel=0.3)
    assert np.all(np.abs(plain.response - fine.response) <= plain.error + fine.error)


@pytest.mark.slow
def test_flat_bump_response_to_the_tolerance(tmp_path, capsys):
    # A bump switching's transform falls only like e^{-sqrt(k T)}: its reach and the tail it leaves must still let
    # the response meet 1e-10.  F = int_0^inf dnu nu/(4 pi^2) |chi_hat(Omega + nu)|^2 (the Minkowski density,
    # Birrell & Davies 1982, ch. 3) with chi_hat(k) = 2 int_0^{T/2} chi cos(k tau) dtau, both by scipy's QUADPACK
    # (the inner integral by its Fourier-weighted rule QAWO), independently of derive's panels and tables; out to
    # k T = 500, where |chi_hat|^2 is 1e-16 of its peak.
    T = 2.0
    text = FLAT + DETECTOR.format(width=1, gaps="-1.0, 0.0, 1.0").replace(
        'switching = { shape = "gaussian", width = "1" }', f'switching = {{ shape = "bump", duration = "{T}" }}')
    path = tmp_path / "bump.toml"
    path.write_text(text)
    assert main(["response", str(path), "--json", "--tolerance", "1e-10"]) == 0
    data = json.loads(capsys.readouterr().out)
    chi = switching_from_spec({"shape": "bump"}, {"duration": T}).chi

    def hat(k):
        return 2 * quad(lambda t: float(chi(np.array([t]))[0]), 0, T / 2, weight="cos", wvar=k, limit=200)[0]
    for gap, ours, error in zip(data["gaps"], data["response"], data["error"]):
        reference = quad(lambda nu, gap=gap: nu / (4 * np.pi ** 2) * hat(gap + nu) ** 2, 0, 250, epsabs=1e-16, epsrel=1e-12,
                         limit=2000, points=[max(0.0, -gap)])[0]
        assert abs(ours - reference) <= max(error, 1e-10 * reference)
        assert error < 1e-9 * ours
