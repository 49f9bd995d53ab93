"""Several detectors: the joint state of two static detectors at second order (sources named beside each check).

Flat 3+1, massless, vacuum: W(v, d) = 1/(4 pi^2 (d^2 - (v - i eps)^2)) between points a distance d apart
(Birrell & Davies 1982, ch. 3), its spectral form S_+(omega) = sin(omega d)/(4 pi^2 d) per unit omega, and the
Feynman function <T phi phi> = 1/(4 pi^2 (d^2 - v^2 + i eps)).  For two identical Gaussian-switched detectors
(width sigma, gap Omega, peaks simultaneous), derived here by the Gaussian integral over t_A + t_B:

    L_AB = sqrt(pi) sigma int dv e^{-v^2/(4 sigma^2) - i Omega v} W(v, d),
    M    = -sqrt(pi) sigma e^{-sigma^2 Omega^2} / (4 pi^2 d) [2 sqrt(pi) F(d/(2 sigma)) - i pi e^{-d^2/(4 sigma^2)}]

(F the Dawson function: the principal value of the Feynman function's real part; the imaginary part from its
delta function on the light cone).  This is the pointlike case of the closed forms of Pozas-Kerstjens &
Martin-Martinez, Phys. Rev. D 92, 064042 (2015) (from memory: M = i sigma e^{-sigma^2 Omega^2 - d^2/(4 sigma^2)}
(1 + i erfi(d/(2 sigma)))/(4 sqrt(pi) d), the same function).  L_AB is integrated by mpmath on the real line moved
below W's poles at v = +-d + i eps (W is analytic there; common practice).
"""

import json
import os

import mpmath
import numpy as np
import pytest
from scipy.special import dawsn

import derive
from derive.cli import main
from derive.detector.correlations import Probe, entanglement, light_time, pair_terms, probability
from derive.detector.study import minkowski_gaussian_response


def flat_pair(d):
    def spectrum(w):
        zero = np.zeros_like(w)
        return (np.sin(w * d) / (4 * np.pi ** 2 * d)).astype(complex), 1e-18 + zero, zero.astype(complex), zero
    return spectrum


def flat_density(w):
    zero = np.zeros_like(w)
    return (w / (4 * np.pi ** 2)).astype(complex), zero, zero.astype(complex), zero


def l_reference(d, sigma_a, sigma_b, gap_a, gap_b, D):
    """L_AB = int dv K_L(v) W(v + D, d): the Gaussian integral over t_A + t_B done (derived as for M in the module
    docstring of derive.detector.correlations), the rest by mpmath below the poles."""
    with mpmath.workdps(30):
        a, b = mpmath.mpf(sigma_a) ** 2, mpmath.mpf(sigma_b) ** 2
        c = a + b
        kappa = (-gap_a * a - gap_b * b) / c       # the phases e^{-i Omega_A tau + i Omega_B tau'}
        Wg = -gap_a + gap_b
        pre = mpmath.sqrt(2 * mpmath.pi * a * b / c) * mpmath.exp(-Wg ** 2 * a * b / (2 * c))

        def integrand(x):
            v = x - 0.5j
            return pre * mpmath.exp(-(v - D) ** 2 / (2 * c) + 1j * kappa * (v - D)) / (
                4 * mpmath.pi ** 2 * (d * d - v * v))
        return complex(mpmath.quad(integrand, [-mpmath.inf, -2 * d, 0, 2 * d, mpmath.inf]))


def m_reference(d, sigma_a, sigma_b, gap_a, gap_b, D):
    """M from the same reduction with the Feynman function, integrated by mpmath along a path that passes below
    its pole at v = d + i eps and above the one at v = -d - i eps."""
    with mpmath.workdps(30):
        a, b = mpmath.mpf(sigma_a) ** 2, mpmath.mpf(sigma_b) ** 2
        c = a + b
        kappa = (gap_a * a - gap_b * b) / c
        Wg = gap_a + gap_b
        pre = mpmath.sqrt(2 * mpmath.pi * a * b / c) * mpmath.exp(-Wg ** 2 * a * b / (2 * c))
        h = d / 2

        def integrand(v):
            return -pre * mpmath.exp(-(v - D) ** 2 / (2 * c) + 1j * kappa * (v - D)) / (
                4 * mpmath.pi ** 2 * (d * d - v * v))
        path = [-mpmath.inf, -d - h, -d + 1j * h, -d + h, d - h, d - 1j * h, d + h, mpmath.inf]
        return complex(mpmath.quad(integrand, path))


def test_identical_detectors_in_flat_space_match_the_closed_forms():
    d, sigma, gap = 1.0, 0.5, 1.0
    A, B = Probe("A", 0.0, 1.0, gap, sigma, 0.0), Probe("B", d, 1.0, gap, sigma, 0.0)
    result = pair_terms(A, B, flat_pair(d), d, 1e-12)
    x = d / (2 * sigma)
    M = -np.sqrt(np.pi) * sigma * np.exp(-(sigma * gap) ** 2) / (4 * np.pi ** 2 * d) * (
        2 * np.sqrt(np.pi) * dawsn(x) - 1j * np.pi * np.exp(-x * x))
    assert result.M == pytest.approx(M, rel=1e-13)
    assert result.L == pytest.approx(l_reference(d, sigma, sigma, gap, gap, 0.0), rel=1e-13)
    assert result.M_error < 1e-12 * abs(M) and result.L_error < 1e-12 * abs(result.L)
    # the commutator part is the light cone's delta function: i sigma e^{-sigma^2 Omega^2 - d^2/(4 sigma^2)}/(4 sqrt(pi) d)
    assert result.commutator == pytest.approx(1j * sigma * np.exp(-(sigma * gap) ** 2 - x * x) / (4 * np.sqrt(np.pi) * d),
                                              rel=1e-12)
    # the probability is the single detector's response (Sriramkumar & Padmanabhan 1996; derive's own closed form)
    value, error = probability(A, flat_density, 1e-12)
    assert value == pytest.approx(minkowski_gaussian_response([gap], sigma)[0], rel=1e-13)


@pytest.mark.parametrize("d, sigmas, gaps, D", [(2.0, (0.5, 0.8), (1.0, 2.0), 0.3), (0.7, (1.0, 0.4), (0.0, -0.5), -1.5),
                                                 (3.0, (0.6, 0.6), (2.0, 2.0), 4.0)])
def test_unequal_detectors_in_flat_space(d, sigmas, gaps, D):
    A = Probe("A", 0.0, 1.0, gaps[0], sigmas[0], D)
    B = Probe("B", d, 1.0, gaps[1], sigmas[1], 0.0)
    result = pair_terms(A, B, flat_pair(d), d, 1e-12)
    M = m_reference(d, *sigmas, *gaps, D)
    L = l_reference(d, *sigmas, *gaps, D)
    scale = np.sqrt(probability(A, flat_density, 1e-12)[0] * probability(B, flat_density, 1e-12)[0])
    assert abs(result.M - M) < 1e-12 * scale + 1e-12 * abs(M)
    assert abs(result.L - L) < 1e-12 * scale + 1e-12 * abs(L)


def test_entanglement_measures_against_the_density_matrix():
    # Negativity: minus the smallest eigenvalue of the partial transpose of rho (Peres 1996; Vidal & Werner 2002,
    # here without the factor 2 of some authors: N = sum of |negative eigenvalues|); concurrence of an X state
    # 2 max(0, |M| - sqrt(L_AA L_BB)) (Wootters 1998 for the X form).  Mutual information at leading order against
    # numpy's entropies of rho (scaled by lambda^2 -> small).
    L_AA, L_BB, L_AB, M = 2.0e-4, 3.0e-4, 1.2e-4 + 0.4e-4j, 3.1e-4 - 0.5e-4j
    out = entanglement(L_AA, L_BB, L_AB, M, (0, 0, 0, 0))
    rho = np.array([[1 - L_AA - L_BB, 0, 0, np.conj(M)], [0, L_BB, np.conj(L_AB), 0], [0, L_AB, L_AA, 0],
                    [M, 0, 0, 0]])
    transpose = rho.reshape(2, 2, 2, 2).transpose(0, 3, 2, 1).reshape(4, 4)
    smallest = np.linalg.eigvalsh(transpose)[0]
    assert out["negativity"] == pytest.approx(-smallest, rel=1e-6)   # rho's O(lambda^4) entries are left out
    assert out["concurrence"] == pytest.approx(2 * (abs(M) - np.sqrt(L_AA * L_BB)), rel=1e-14)

    def entropy(matrix):
        values = np.linalg.eigvalsh(matrix)
        values = values[values > 1e-300]
        return float(-np.sum(values * np.log(values)))
    # without M (which only enters at higher order) rho is a valid state and its mutual information is exact
    rho0 = rho.copy()
    rho0[0, 3] = rho0[3, 0] = 0
    rho_a = np.array([[1 - L_AA, 0], [0, L_AA]])
    rho_b = np.array([[1 - L_BB, 0], [0, L_BB]])
    exact = entropy(rho_a) + entropy(rho_b) - entropy(rho0)
    assert out["mutual_information"] == pytest.approx(exact, rel=1e-3)


def spec_file(folder, detectors, shared='state = "vacuum"\ncoupling = 0.1'):
    text = """format = 1
title = "Empty space with detectors"
[parameters]
d = { value = 1.0, positive = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[[region]]
name = "all"
where = "r >= 0"
line_element = "-dt**2 + dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "0"
coupling = "0"
[detector]
""" + shared + "\n" + detectors
    path = os.path.join(folder, "detectors.toml")
    with open(path, "w") as handle:
        handle.write(text)
    return path


def detectors_toml(*entries):
    """[[detectors]] tables from (name, at, gap, switching) tuples."""
    return "".join(f'\n[[detectors]]\nname = "{name}"\nat = "{at}"\ngap = {gap}\nswitching = {switching}'
                   for name, at, gap, switching in entries) + "\n"


GAUSSIAN = '{ shape = "gaussian", width = "0.5" }'
TWO = detectors_toml(("A", "r = 0", 1.0, GAUSSIAN), ("B", "r = d", 1.0, GAUSSIAN))


@pytest.mark.slow
def test_correlations_command_in_flat_space(tmp_path, capsys):
    path = spec_file(str(tmp_path), TWO)
    out = str(tmp_path / "out")
    assert main(["correlations", path, "--json", "--out", out]) == 0
    data = json.loads(capsys.readouterr().out)
    # the JSON contract of the correlations issue
    assert set(data) >= {"detectors", "pairs", "convention", "status"}
    assert set(data["detectors"]["A"]) >= {"probability", "error", "at", "gap"}
    (pair,) = data["pairs"]
    assert pair["between"] == ["A", "B"]
    assert set(pair) >= {"L", "M", "error", "concurrence", "negativity", "mutual_information", "signalling"}
    assert set(pair["error"]) == {"L", "M"}
    assert set(pair["signalling"]) >= {"light_time", "overlap", "commutator_part"}
    lam2 = 0.01
    x = 1.0 / (2 * 0.5)     # d/(2 sigma)
    M = -lam2 * np.sqrt(np.pi) * 0.5 * np.exp(-0.25) / (4 * np.pi ** 2) * (
        2 * np.sqrt(np.pi) * dawsn(x) - 1j * np.pi * np.exp(-x * x))
    assert complex(*pair["M"]) == pytest.approx(M, rel=1e-9)
    assert pair["error"]["M"] < 1e-9 * abs(M)
    assert pair["signalling"]["light_time"] == pytest.approx(1.0, rel=1e-10)
    P = lam2 * minkowski_gaussian_response([1.0], 0.5)[0]
    assert data["detectors"]["B"]["probability"] == pytest.approx(P, rel=1e-9)
    assert pair["concurrence"] == pytest.approx(2 * (abs(M) - P), rel=1e-8)
    for name in ("correlations.csv", "detectors.csv", "correlations.png"):
        assert (tmp_path / "out" / name).is_file()


def test_light_time_is_the_chord_in_flat_space(tmp_path):
    # In flat space the shortest light path is the straight chord, sqrt(r1^2 + r2^2 - 2 r1 r2 cos gamma) (Euclid);
    # through the centre for gamma = pi.
    from derive.spec.positions import parse_position

    st = derive.load(spec_file(str(tmp_path), TWO))
    problem = st.numeric_problem
    for r1, r2, gamma in ((1.0, 2.0, 0.0), (1.0, 2.0, np.pi / 3), (1.5, 1.5, np.pi / 2), (1.0, 3.0, np.pi)):
        first = parse_position(st, "r = %r" % r1)
        second = parse_position(st, {"r": r2, "theta": gamma})
        value, error = light_time(problem, first, second)
        chord = np.sqrt(r1 * r1 + r2 * r2 - 2 * r1 * r2 * np.cos(gamma))
        assert value == pytest.approx(chord, rel=1e-6) and abs(value - chord) <= 10 * error + 1e-10 * chord


@pytest.mark.parametrize("text, key", [
    (TWO.replace('name = "B"', 'name = "A"'), "detectors[1].name"),
    (TWO.replace("gap = 1.0\nswitching = { shape = \"gaussian\", width = \"0.5\" }\n[[detectors]]", "[[detectors]]"),
     "detectors[0].gap"),
    (TWO.replace('at = "r = d"', 'at = 2'), None),
    (TWO.replace('width = "0.5" }\n[[detectors]]', 'width = "0.5", wdth = 1 }\n[[detectors]]'),
     "detectors[0].switching"),
])
def test_bad_detector_arrays_are_refused(tmp_path, capsys, text, key):
    path = spec_file(str(tmp_path), text)
    code = main(["check", path])
    err = capsys.readouterr().err
    if key is None:
        assert code == 0
    else:
        assert code == 2 and key in err and "Traceback" not in err


def test_one_detector_or_a_sharp_switching_is_refused(tmp_path, capsys):
    one = TWO[:TWO.index("[[detectors]]", 10)]
    assert main(["check", spec_file(str(tmp_path), one)]) == 2
    assert "detectors" in capsys.readouterr().err
    sharp = TWO.replace('{ shape = "gaussian", width = "0.5" }\n[[detectors]]',
                        '{ shape = "sharp", duration = "2" }\n[[detectors]]')
    assert main(["correlations", spec_file(str(tmp_path), sharp)]) == 2
    err = capsys.readouterr().err
    assert "detectors[0].switching.shape" in err and "diverges" in err and "Traceback" not in err


def _direct(d, chi_a, chi_b, half_a, half_b, gap_a, gap_b, D):
    """L_AB and M for inertial detectors a distance d apart whose switchings never reach each other's light cone
    (|t_A - t_B| < d on the supports): there W = <T phi phi> = 1/(4 pi^2 (d^2 - v^2)), real and finite (Birrell &
    Davies 1982, ch. 3), and both are plain double integrals, done by scipy's dblquad (QUADPACK)."""
    from scipy.integrate import dblquad

    def part(kind, real):
        def f(tb, ta):
            v = ta + D - tb
            phase = np.exp(-1j * (gap_a * ta - gap_b * tb)) if kind == "L" else -np.exp(1j * (gap_a * ta + gap_b * tb))
            z = chi_a(ta) * chi_b(tb) * phase / (4 * np.pi ** 2 * (d * d - v * v))
            return z.real if real else z.imag
        return dblquad(f, -half_a, half_a, -half_b, half_b, epsabs=1e-16, epsrel=1e-12)[0]
    return tuple(part(kind, True) + 1j * part(kind, False) for kind in ("L", "M"))


@pytest.mark.slow
@pytest.mark.parametrize("shape, extra", [("bump", {}), ("cos2", {"ramp": 0.5})])
def test_compact_switchings_against_direct_double_integrals(shape, extra):
    # Two compactly switched detectors 3 apart whose switchings (durations 1.5 and 2, peaks 0.2 apart) stay
    # spacelike: L_AB and M through derive's spectral route (the transforms, and the cross-correlation of the
    # switchings against the smoothed sign for M) against the direct double integrals above; the commutator part
    # vanishes (spacelike) to within its error.
    from derive.detector.switching import switching_from_spec

    d = 3.0
    sa = switching_from_spec({"shape": shape}, {"duration": 1.5, **extra})
    sb = switching_from_spec({"shape": shape}, {"duration": 2.0, **extra})
    A, B = Probe("A", 0.0, 1.0, 1.0, None, 0.2, sa), Probe("B", d, 1.0, 2.0, None, 0.0, sb)
    terms = pair_terms(A, B, flat_pair(d), d, 1e-10)
    L, M = _direct(d, sa.chi, sb.chi, 0.75, 1.0, 1.0, 2.0, 0.2)
    # (cos2's transform falls like k^-3: the part beyond the reach, a few 1e-9 here, is inside the reported error)
    rel = 1e-11 if shape == "bump" else 1e-8
    assert terms.L == pytest.approx(L, rel=rel) and abs(terms.L - L) <= terms.L_error
    assert terms.M == pytest.approx(M, rel=rel) and abs(terms.M - M) <= terms.M_error
    assert abs(terms.commutator) <= terms.commutator_error


def test_the_numeric_time_ordered_kernels_reproduce_the_gaussian_closed_form():
    # Two methods for the same kernels of M: TimeOrdered's quadrature of the switchings' cross-correlation against
    # the smoothed sign, and the closed form for two Gaussians (the Faddeeva function), with redshift factors,
    # different gaps, widths and peak times.
    from derive.detector.correlations import TimeOrdered, frequency_reach, m_kernels

    A, B = Probe("A", 0.0, 0.9, 1.5, 0.4, 0.25), Probe("B", 1.3, 1.1, -0.5, 0.6, -0.1)
    light = 0.9
    omegas = np.linspace(0.0, frequency_reach(A, B, light), 40)
    closed = m_kernels(A, B, omegas, light)
    numeric = TimeOrdered(A, B, light, frequency_reach(A, B, light))(omegas)
    for k in range(1, 5):
        np.testing.assert_allclose(numeric[0] * numeric[k], closed[0] * closed[k], rtol=0, atol=1e-14)
    assert np.max(numeric[0] * numeric[6]) < 1e-14


@pytest.mark.slow
def test_a_compact_and_a_gaussian_detector_through_the_command(tmp_path, capsys):
    # A bump-switched detector at the centre, peaked at t = 0.3, and a Gaussian one at r = 1/2: derive's l-sum of
    # the flat two-point function against the closed-form spectral function S_+ = sin(omega d)/(4 pi^2 d)
    # (Birrell & Davies 1982, ch. 3) through the same pair integrals.
    from derive.detector.switching import switching_from_spec

    path = spec_file(str(tmp_path), TWO.replace('{ shape = "gaussian", width = "0.5" }\n[[detectors]]',
                                                '{ shape = "bump", duration = "3", centre = "0.3" }\n[[detectors]]'))
    assert main(["correlations", path, "--json", "--set", "d=0.5", "--tolerance", "1e-5"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["detectors"]["A"]["switching"] == {"shape": "bump", "duration": 3.0, "tail": 1e-12}
    (pair,) = data["pairs"]
    bump = switching_from_spec({"shape": "bump"}, {"duration": 3.0})
    A, B = Probe("A", 0.0, 1.0, 1.0, None, 0.3, bump), Probe("B", 0.5, 1.0, 1.0, 0.5, 0.0)
    terms = pair_terms(A, B, flat_pair(0.5), 0.5, 1e-11)
    assert complex(*pair["L"]) == pytest.approx(0.01 * terms.L, rel=1e-9)
    assert complex(*pair["M"]) == pytest.approx(0.01 * terms.M, rel=1e-9)


def test_the_pair_order_conjugates_L_and_keeps_M():
    # L_BA = conj(L_AB) (rho is Hermitian) and M is symmetric in A and B (the time-ordered product is);
    # with different gaps, widths and peak times so that the phases matter.
    d = 1.3
    A, B = Probe("A", 0.0, 1.0, 1.5, 0.4, 0.25), Probe("B", d, 1.0, -0.5, 0.6, -0.1)
    ab = pair_terms(A, B, flat_pair(d), d, 1e-12)
    ba = pair_terms(B, A, flat_pair(d), d, 1e-12)
    assert ba.L == pytest.approx(np.conj(ab.L), rel=1e-12)
    assert ba.M == pytest.approx(ab.M, rel=1e-12)


@pytest.mark.slow
def test_spacelike_switchings_carry_no_commutator(tmp_path, capsys):
    # Switchings whose effective durations (all but 1e-12 of chi^2) fit inside the light time cannot signal: the
    # commutator part of M is then of the size of the Gaussians' tails at the light cone,
    # sigma e^{-sigma^2 Omega^2 - d^2/(4 sigma^2)}/(4 sqrt(pi) d) (the closed form above), here e^{-30}.
    narrow = TWO.replace('width = "0.5"', 'width = "0.2"')
    path = spec_file(str(tmp_path), narrow)
    assert main(["correlations", path, "--json", "--set", "d=2.2", "--tolerance", "1e-8"]) == 0
    data = json.loads(capsys.readouterr().out)
    (pair,) = data["pairs"]
    assert pair["signalling"]["overlap"] is False
    assert pair["signalling"]["light_time"] == pytest.approx(2.2, rel=1e-10)
    tail = 0.01 * 0.2 * np.exp(-0.04 - 2.2 ** 2 / 0.16) / (4 * np.sqrt(np.pi) * 2.2)
    assert abs(complex(*pair["signalling"]["commutator_part"])) <= tail + pair["signalling"]["commutator_part_error"]
    assert abs(complex(*pair["M"])) > 1e6 * tail       # the anticommutator (harvested) part is not small


@pytest.mark.slow
def test_two_detectors_off_the_centre_through_the_mode_sums(tmp_path, capsys):
    # Both detectors off the centre, a third of a turn apart (d = sqrt(3)/2), with different gaps, widths and peak
    # times: derive's l-sums of the two-point function against the flat references above, to 1e-9 (asked for 1e-8;
    # measured 2e-10 off: at 1e-9 the run took half as long again for the same check).
    path = spec_file(str(tmp_path), """
[[detectors]]
name = "A"
at = "r = 1/2, theta = pi/2, phi = 0"
gap = 1.0
switching = { shape = "gaussian", width = "0.5", centre = "0.2" }
[[detectors]]
name = "B"
at = "r = 1/2, theta = pi/2, phi = 2*pi/3"
gap = 2.0
switching = { shape = "gaussian", width = "0.7" }
""")
    assert main(["correlations", path, "--json", "--tolerance", "1e-8"]) == 0
    (pair,) = json.loads(capsys.readouterr().out)["pairs"]
    d = np.sqrt(3) / 2
    L = 0.01 * l_reference(d, 0.5, 0.7, 1.0, 2.0, 0.2)
    M = 0.01 * m_reference(d, 0.5, 0.7, 1.0, 2.0, 0.2)
    assert complex(*pair["L"]) == pytest.approx(L, rel=1e-9)
    assert complex(*pair["M"]) == pytest.approx(M, rel=1e-9)
    assert pair["signalling"]["light_time"] == pytest.approx(d, rel=1e-6)


def test_multipoles_of_the_density_in_flat_space(tmp_path):
    # Rayleigh's expansion sin(k d)/(k d) = sum_l (2l + 1) j_l(k r)^2 P_l(cos gamma) (two points at radius r, an
    # angle gamma apart; Abramowitz & Stegun 10.1.45) gives the l-th term of the flat density at r:
    # S_l = (2l + 1) omega j_l(omega r)^2/(4 pi^2), with scipy's spherical Bessel functions as the reference; and the
    # weights w_l of a Gaussian detector sum to its response (derive's closed form).
    from scipy.integrate import quad
    from scipy.special import spherical_jn

    from derive.detector.correlations import multipole_weights
    from derive.solve.offcentre import multipole_density

    st = derive.load(spec_file(str(tmp_path), TWO))
    problem = st.numeric_problem
    omegas = np.array([0.3, 1.0, 4.0, 9.0])
    for l in (0, 1, 3, 6):
        result = multipole_density(problem, omegas, 1.0, l, 1e-11)
        expected = (2 * l + 1) * omegas * spherical_jn(l, omegas) ** 2 / (4 * np.pi ** 2)
        np.testing.assert_allclose(result.density, expected, rtol=1e-9, atol=1e-14)
    probe = Probe("A", 1.0, 1.0, 1.0, 0.5, 0.0)

    def flat(w, l):
        return (2 * l + 1) * w * spherical_jn(l, w) ** 2 / (4 * np.pi ** 2), 1e-17 * np.ones_like(w)
    weights, errors = multipole_weights(None, probe, 1e-10, density=flat)
    for l in range(3):
        reference = quad(lambda x, l=l: flat(np.array([x]), l)[0][0] * 2 * np.pi * 0.25 * np.exp(-0.25 * (1 + x) ** 2),
                         0, 60, epsabs=0, epsrel=1e-13, limit=200)[0]
        assert weights[l] == pytest.approx(reference, rel=1e-11)
    assert weights.sum() == pytest.approx(minkowski_gaussian_response([1.0], 0.5)[0], rel=1e-10)


@pytest.mark.slow
def test_an_array_outside_a_black_hole_decomposes_into_multipoles(tmp_path, capsys):
    # Two detectors on the sphere r = 6M of Schwarzschild, a quarter turn apart, in the Hartle-Hawking state: the
    # multipole weights w_l (each l-term of the in and up densities, thermal, integrated against the switching)
    # against two computations that do not use them (a consistency check of derive's own, not an outside value):
    # their sum is the single detector's response (the full l-sum of the density), and sum_l w_l P_l(cos gamma) is
    # the pair's L_AB (the l-sum of the two-point function between the points).
    text = open(os.path.join(os.path.dirname(__file__), "..", "worked", "schwarzschild", "spec.toml")).read()
    wide = '{ shape = "gaussian", width = "3" }'
    text = text[:text.index("[detector]")] + '[detector]\nstate = "hartle-hawking"\ncoupling = 0.01' + detectors_toml(
        ("A", "r = 6*M, theta = pi/2, phi = 0", 0.25, wide), ("B", "r = 6*M, theta = pi/2, phi = pi/2", 0.25, wide))
    path = tmp_path / "array.toml"
    path.write_text(text)
    assert main(["correlations", str(path), "--json", "--tolerance", "1e-6"]) == 0
    data = json.loads(capsys.readouterr().out)
    multipoles = data["multipoles"]
    weights, errors = np.array(multipoles["weight"]), np.array(multipoles["error"])
    single = data["detectors"]["A"]
    assert abs(weights.sum() - single["probability"]) <= errors.sum() + single["error"] + 1e-9 * single["probability"]
    (pair,) = data["pairs"]
    assert multipoles["largest_mismatch"] < 1e-6
    legendre = np.polynomial.legendre.legval(0.0, np.diag(np.ones(len(weights)))) @ weights
    assert legendre == pytest.approx(pair["L"][0], rel=1e-6)
    assert np.all(weights[:4] > 0)       # each l-term of a density is positive


def test_two_detectors_at_the_same_point_are_refused(tmp_path, capsys):
    # Bad input, not an internal error (it had divided by the zero light time): exit 2 naming the key.
    path = spec_file(str(tmp_path), detectors_toml(("A", "r = 0", 1.0, GAUSSIAN), ("B", "r = 0", 2.0, GAUSSIAN)))
    assert main(["correlations", path]) == 2
    assert "detectors[1].at" in capsys.readouterr().err


def test_a_minkowski_comparison_of_a_massive_pair_is_refused_before_any_work(tmp_path, capsys):
    # Bad input (the flat reference of several detectors is built massless in 3+1): exit 2 naming compare.with,
    # at once (it had come after the whole computation: 77 s for an array around a 4+1 black hole)
    path = spec_file(str(tmp_path), TWO)
    text = open(path).read().replace('mass = "0"', 'mass = "1"') + '\n[compare]\nwith = "minkowski"\n'
    with open(path, "w") as handle:
        handle.write(text)
    assert main(["correlations", path]) == 2
    assert "compare.with" in capsys.readouterr().err


def test_pair_rule_ends_its_panels_at_a_kink():
    # A spectrum whose slope jumps at a massive field's threshold outside a horizon (the in modes begin there):
    # with the panels ending at the kink the rule integrates each smooth side to rounding (exact integrals of the
    # polynomial pieces, derived here); across it, Gauss-Legendre errs at the jump's order
    from derive.detector.correlations import _rule

    def spectrum(w):
        return np.where(w < 0.7, w ** 2, w ** 2 + 3 * (w - 0.7) ** 2)
    exact = 2.0 ** 3 / 3 + (2.0 - 0.7) ** 3
    nodes, weights, _ = _rule(2.0, 8, 0.0, kink=0.7)
    assert abs(weights @ spectrum(nodes) - exact) < 1e-13 * exact
    nodes, weights, _ = _rule(2.0, 8, 0.0)
    assert abs(weights @ spectrum(nodes) - exact) > 1e-8 * exact     # (6e-8 here)
