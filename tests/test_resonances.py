"""Quasi-bound resonances of a massive field outside a Schwarzschild black hole (derive.solve.resonances;
docs/conventions.md section 14)."""

import json
import os

import numpy as np
import pytest

import derive
from derive.cli import main
from derive.solve.exterior import mode_term
from derive.solve.resonances import quasi_bound

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

SPEC = """
format = 1
title = "Schwarzschild, massive field"
[parameters]
M = { value = 1.0, positive = true }
mu = { value = 0.1, positive = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[definitions]
f = "1 - 2*M/r"
[[region]]
name = "outside"
where = "r > 2*M"
line_element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "mu"
coupling = "0"
[detector]
at = "r = 10"
switching = { shape = "gaussian", width = "5" }
gaps = [-0.1, 0.0, 0.1]
state = "hartle-hawking"
coupling = 0.01
"""


@pytest.fixture(scope="module")
def spec(tmp_path_factory):
    path = tmp_path_factory.mktemp("resonances") / "spec.toml"
    path.write_text(SPEC)
    return str(path)


@pytest.fixture(scope="module")
def found(spec):
    """The lowest four resonances of l = 0 and l = 1 at a few couplings alpha = M mu (M = 1), memoised."""
    memo = {}

    def get(alpha, l):
        if (alpha, l) not in memo:
            memo[alpha, l] = quasi_bound(derive.load(spec, mu=alpha).numeric_problem, l, 4)
        return memo[alpha, l]
    return get


def test_widths_approach_the_small_coupling_limit(found):
    # Detweiler, Phys. Rev. D 22, 2323 (1980), eq. (28) at a = 0, with the overall factor 1/2 found since (Pani,
    # Cardoso, Gualtieri, Berti & Ishibashi, Phys. Rev. D 86, 104017 (2012); from memory): the energy decay rate
    # Gamma = -2 Im(omega) = 4 mu alpha^(4l+5) C_nl prod_{j<=l} (j^2 + 16 alpha^2) with
    # C_nl = 2^(4l+2) (2l+1+n)!/((l+1+n)^(2l+4) n!) (l!/((2l)! (2l+1)!))^2, n the overtone: for l = 0,
    # Gamma -> 16 mu alpha^5/(n+1)^3; for l = 1, Gamma -> mu alpha^9/6 (n = 0).  The corrections are of relative
    # order alpha^2 (measured: the deviation falls fourfold as alpha halves), so two couplings are extrapolated.
    def scaled(alpha, l):
        return found(alpha, l).width / (alpha * alpha ** (4 * l + 5))
    limit0 = (4 * scaled(0.025, 0) - scaled(0.05, 0)) / 3
    assert abs(limit0[0] / 16 - 1) < 0.02
    # the overtones' ratios, already close at alpha = 0.025
    np.testing.assert_allclose(scaled(0.025, 0)[1:] / scaled(0.025, 0)[0], 1 / np.arange(2, 5) ** 3, rtol=0.01)
    limit1 = (4 * scaled(0.05, 1) - scaled(0.1, 1)) / 3
    assert abs(limit1[0] * 6 - 1) < 0.03
    # C_11/C_01 = (2^6 4!/3^6)/(2^6 3!/2^6) = 0.3512
    assert abs(scaled(0.05, 1)[1] / scaled(0.05, 1)[0] / (64 * 24 / 729 / 6) - 1) < 0.02
    for alpha, l in ((0.025, 0), (0.05, 0), (0.05, 1), (0.1, 1)):
        levels = found(alpha, l)
        assert levels.truncated and np.all(levels.omega_error < 1e-9 * levels.omega)


def test_levels_approach_the_hydrogen_spectrum(found):
    # Far from the hole the well is Coulomb's, V -> mu^2 - 2 M mu^2/r: omega_n -> mu (1 - alpha^2/(2 N^2)) with
    # N = n + l + 1 (the hydrogen atom; Detweiler 1980, eq. (26)), the relative deviation of the binding energy
    # being of order alpha^2 (a fourfold fall as alpha halves).
    for l in (0, 1):
        N = np.arange(4) + l + 1
        deviation = {}
        for alpha in ((0.025, 0.05) if l == 0 else (0.05, 0.1)):
            levels = found(alpha, l)
            deviation[alpha] = (alpha - levels.omega) / (alpha * alpha ** 2 / (2 * N ** 2)) - 1
        small, large = sorted(deviation)
        assert np.all(np.abs(deviation[small]) < 0.03)
        assert np.all((3.5 < deviation[large] / deviation[small]) & (deviation[large] / deviation[small] < 4.7))


def test_the_density_below_the_mass_is_the_resonance_lorentzian(spec):
    # The up modes' density at r0 (summed l = 0 term, read off through u_dec at r0 by another path, the refined
    # mode terms of the l-sum) is h(omega)/|omega - z|^2 near a resonance z = omega_n - i Gamma/2 with h smooth:
    # with the listed z, S |omega - z|^2 across four half widths is a sextic to 1e-8, while moving z by 1e-5 of
    # the half width already leaves 1e-7 (common practice: a pole's residue times a smooth function).
    problem = derive.load(spec, mu=0.1).numeric_problem
    levels = quasi_bound(problem, 0, 1)
    centre, half = levels.omega[0], levels.width[0] / 2
    t = np.linspace(-2, 2, 21)
    S = mode_term(problem, 0, centre + half * t, (10.0, 10.0), 1.0, 1e-11)[1].real

    def roughness(shift, stretch):
        h = S * ((t - shift) ** 2 + stretch ** 2)
        return np.max(np.abs(np.polyval(np.polyfit(t, h, 6), t) - h)) / np.max(h)
    assert roughness(0.0, 1.0) < 1e-8
    assert roughness(1e-5, 1.0) > 1e-7 and roughness(0.0, 1 + 1e-5) > 1e-7


def test_spectrum_lists_the_resonances_and_the_response_names_them(spec, capsys, tmp_path):
    # The command-line contract: derive spectrum around a horizon lists the resonances of the asked l (JSON key
    # quasi_bound, each with its error; quasi_bound.csv with --out); derive response refuses (exit 2) and names
    # the missing resonances.
    code = main(["spectrum", spec, "--l", "0", "--omega", "0.05,0.2", "--json", "--out", str(tmp_path / "out")])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    rows = (tmp_path / "out" / "quasi_bound.csv").read_text().splitlines()
    assert rows[0] == "omega,omega_error,width,width_error,width_resolved" and len(rows) == 7
    table = data["quasi_bound"]
    assert table["l"] == 0 and len(table["omega"]) == 6 and table["truncated"] and all(table["resolved"])
    assert all(0 < w < 0.1 for w in table["omega"]) and table["omega"] == sorted(table["omega"])
    assert all(e < 1e-9 for e in table["error"]["omega"])
    assert main(["response", spec]) == 2
    message = capsys.readouterr().err
    assert "missing are the resonances of every l" in message
    assert f"{table['omega'][0]:.10g}" in message and "l = 1: omega = " in message


def test_the_run_summary_skips_what_is_exactly_zero():
    # derive run's summary around a massive black hole: below the mass |T|^2 = 0 exactly, with no error; its
    # largest relative error had been NaN (invalid in summary.json, and a warning on the terminal).
    from derive.run import _largest_relative

    assert _largest_relative([0.0, 2e-12, 1e-11], [0.0, 1e-1, 0.5]) == pytest.approx(2e-11)
    assert _largest_relative([0.0, 0.0], [0.0, 0.0]) == 0.0
