"""The key figures of every worked example (worked/*/README.md), as a user would get them."""

import json
import os

import numpy as np
import pytest
import sympy as sp

import derive
from derive.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
WORKED = os.path.join(ROOT, "worked")
EXAMPLES = sorted(d for d in os.listdir(WORKED) if os.path.isfile(os.path.join(WORKED, d, "spec.toml")))


def spec(name):
    return os.path.join(WORKED, name, "spec.toml")


def at_values(st, expr):
    return float(sp.N(expr.subs(st.field_problem.values), 20))


def test_there_are_six_worked_examples():
    assert len(EXAMPLES) >= 6
    for name in EXAMPLES:
        assert os.path.isfile(os.path.join(WORKED, name, "README.md"))


@pytest.mark.parametrize("name", [pytest.param(n, marks=pytest.mark.slow) if n == "constant_density_star" else n
                                  for n in EXAMPLES])
def test_every_example_checks_and_has_geometry(name, capsys):
    assert main(["check", spec(name)]) == 0
    assert "valid spec" in capsys.readouterr().out
    assert main(["geometry", spec(name), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["regions"]


@pytest.mark.parametrize("name, sigma, p", [
    # Source: Israel (1966); Poisson, A Relativist's Toolkit (2004) ch. 3 — general static-shell formula,
    # values at the examples' parameters computed independently from the closed forms in each README.
    ("static_shell", 0.0233077017861285, 0.00241359154689052),
    ("charged_shell", 0.0174254794108268, 0.000966668905793953),
    ("de_sitter_bubble", 0.0267213434032004, 0.00808113468783867),
])
def test_shell_examples(name, sigma, p):
    st = derive.load(spec(name))
    shell = st.shells[0]
    assert at_values(st, shell.surface_energy_density) == pytest.approx(sigma, rel=1e-13)
    assert at_values(st, shell.surface_pressure) == pytest.approx(p, rel=1e-13)
    if name == "static_shell":   # the tabulated value is the README's closed form at M = 0.25, R = 1
        import math
        M, R = st.parameters["M"].value, st.parameters["R"].value
        assert sigma == pytest.approx((1 - math.sqrt(1 - 2 * M / R)) / (4 * math.pi * R), rel=1e-14)


def test_constant_density_star_is_smooth():
    # Source: K. Schwarzschild (1916) interior solution; textbook (e.g. MTW 1973 ch. 23): rho = 3M/(4 pi R^3),
    # p(R) = 0, p(0) = rho (1 - sqrt(1-2M/R))/(3 sqrt(1-2M/R) - 1); a smooth junction has no surface stress.
    st = derive.load(spec("constant_density_star"))
    geo = st.geometry["star"]
    M, R, r = st.symbol("M"), st.symbol("R"), st.symbol("r")
    rho = 3 * M / (4 * sp.pi * R ** 3)
    assert sp.N((geo.stress_energy["energy_density"] - rho).subs({M: 0.2, R: 1, r: 0.37}), 25) == pytest.approx(0, abs=1e-20)
    p = geo.stress_energy["pressures"]["r"]
    assert float(p.subs({M: 0.2, R: 1, r: 1})) == pytest.approx(0, abs=1e-15)
    s = sp.sqrt(1 - 2 * M / R)
    p0 = rho * (1 - s) / (3 * s - 1)
    assert float(sp.N((p - p0).subs({M: 0.2, R: 1}).subs(r, 0), 25)) == pytest.approx(0, abs=1e-15)
    shell = st.shells[0]
    assert shell.surface_energy_density == 0 and shell.surface_pressure == 0
    assert st.field_problem.interfaces[0].transfer_matrix == sp.eye(2)


def test_schwarzschild_example_temperature():
    # Source: Hawking, Commun. Math. Phys. 43, 199 (1975): T_H = 1/(8 pi M).
    st = derive.load(spec("schwarzschild"))
    end = st.field_problem.regions["outside"].ends["lower"]
    assert at_values(st, end["hawking_temperature"]) == pytest.approx(1 / (8 * sp.pi.evalf() * 1.0), rel=1e-14)


def test_tangherlini_example():
    # Source: Tangherlini (1963): Ricci flat; horizon surface gravity f'(r_h)/2 = 1 at m = 1 (docs/conventions.md sec. 6).
    st = derive.load(spec("tangherlini_5d"))
    assert st.geometry["outside"].ricci == sp.zeros(5, 5)
    end = st.field_problem.regions["outside"].ends["lower"]
    assert end["kind"] == "horizon" and at_values(st, end["surface_gravity"]) == pytest.approx(1.0, rel=1e-14)


@pytest.mark.slow
def test_schwarzschild_example_response_in_three_states(capsys):
    # The README's key figures for worked/schwarzschild (derive's own results, stated there to 4 digits), and
    # the physics they must show: the Boulware value at zero gap is near the local vacuum 1/(4 pi) (equivalence
    # principle, common practice), and Boulware < Unruh < Hartle-Hawking (thermal factors, docs/conventions.md sec. 7).
    assert main(["response", spec("schwarzschild"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    zero = data["gaps"].index(0.0)
    states = {name: value["response"][zero] for name, value in data["states"].items()}
    assert states["boulware"] == pytest.approx(0.08307, abs=1e-5)
    assert states["unruh"] == pytest.approx(0.09314, abs=1e-5)
    assert states["hartle-hawking"] == pytest.approx(0.15727, abs=1e-5)
    assert abs(states["boulware"] * 4 * np.pi - 1) < 0.05
    assert data["local_temperature"] == pytest.approx(1 / (8 * np.pi * np.sqrt(1 - 2 / 6)), rel=1e-12)
    assert all(e < 1e-8 * abs(f) for f, e in zip(data["response"], data["error"]))


@pytest.mark.slow
def test_tangherlini_example_response(capsys):
    # The README's figures for worked/tangherlini_5d: the Minkowski reference F(0) = 1/(32 sqrt(pi) sigma) for
    # S = nu^2/(16 pi^2) in 4+1 (integrated by hand), and the three states at zero gap (derive's own results).
    assert main(["response", spec("tangherlini_5d"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    zero = data["gaps"].index(0.0)
    assert data["reference"]["response"][zero] == pytest.approx(1 / (32 * np.sqrt(np.pi) * 5), rel=1e-12)
    states = {name: value["response"][zero] for name, value in data["states"].items()}
    assert states["boulware"] == pytest.approx(3.790e-3, abs=1e-6)
    assert states["unruh"] == pytest.approx(6.299e-3, abs=1e-6)
    assert states["hartle-hawking"] == pytest.approx(9.436e-3, abs=1e-6)
    assert data["local_temperature"] == pytest.approx(1 / (2 * np.pi * np.sqrt(0.75)), rel=1e-12)


def test_reissner_nordstrom_example_horizon():
    # The README's horizon figures: r_+ = 1.6 found as a root, kappa = (r_+ - r_-)/(2 r_+^2) (textbook result).
    st = derive.load(spec("reissner_nordstrom"))
    (horizon,) = st.field_problem.horizons
    assert horizon.value == pytest.approx(1.6, rel=1e-15)
    assert horizon.surface_gravity == pytest.approx((1.6 - 0.4) / (2 * 1.6 ** 2), rel=1e-14)


@pytest.mark.slow
def test_reissner_nordstrom_example_response(capsys):
    # The README's figures (derive's own results, to 4 digits: a regression) and the Tolman temperature.
    assert main(["response", spec("reissner_nordstrom"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    zero = data["gaps"].index(0.0)
    states = {name: value["response"][zero] for name, value in data["states"].items()}
    assert states["boulware"] == pytest.approx(0.08260, abs=1e-5)
    assert states["unruh"] == pytest.approx(0.09148, abs=1e-5)
    assert states["hartle-hawking"] == pytest.approx(0.14947, abs=1e-5)
    kappa = (1.6 - 0.4) / (2 * 1.6 ** 2)
    assert data["local_temperature"] == pytest.approx(kappa / (2 * np.pi * np.sqrt(1 - 2 / 5 + 0.64 / 25)), rel=1e-12)


def test_de_sitter_patch_example(capsys):
    # The README's figures: thermal at 1/(2 pi L sqrt(f)) (Narnhofer, Peter & Thirring 1996; Deser & Levin 1997),
    # F(0) = 0.095428 (derive's own, checked against the thermal quadrature in tests/test_de_sitter.py).
    assert main(["response", spec("de_sitter_patch"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    zero = data["gaps"].index(0.0)
    assert data["local_temperature"] == pytest.approx(1 / (2 * np.pi * np.sqrt(0.75)), rel=1e-14)
    assert data["response"][zero] == pytest.approx(0.095428, abs=1e-6)
    assert data["reference"]["response"][zero] == pytest.approx(1 / (4 * np.pi), rel=1e-14)


@pytest.mark.slow
def test_schwarzschild_de_sitter_example(capsys):
    # The README's figures: both temperatures from kappa = |f'|/2 at each root (Gibbons & Hawking 1977) and the
    # four states at zero gap (derive's own results, to 4 digits: a regression).
    assert main(["response", spec("schwarzschild_de_sitter"), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    zero = data["gaps"].index(0.0)
    states = {name: value["response"][zero] for name, value in data["states"].items()}
    assert states["boulware"] == pytest.approx(0.07902, abs=1e-5)
    assert states["bunch-davies"] == pytest.approx(0.09514, abs=1e-5)
    assert states["unruh"] == pytest.approx(0.11388, abs=1e-5)
    assert states["hartle-hawking"] == pytest.approx(0.16656, abs=1e-5)
    # ordered as their thermal factors order them: none; both sets at the cooler T_c; each set at its own
    # horizon's temperature; both at the hotter T_h (docs/conventions.md section 7)
    assert states["boulware"] < states["bunch-davies"] < states["unruh"] < states["hartle-hawking"]
    assert data["local_temperature"] == pytest.approx(0.056689, rel=1e-4)
    assert data["local_cosmological_temperature"] == pytest.approx(0.020455, rel=1e-4)


def test_schwarzschild_de_sitter_horizons_found_from_the_word_horizon():
    # 'horizon < r < horizon': the roots of r^3 - L^2 r + 2 M L^2 (M = 1, L = 10) between which f > 0, against
    # numpy's polynomial roots (an outside reference), each classified with its surface gravity |f'|/2.
    st = derive.load(spec("schwarzschild_de_sitter"))
    horizons = {h.kind: h for h in st.field_problem.horizons}
    roots = sorted(z.real for z in np.roots([1.0, 0.0, -100.0, 200.0]) if z.real > 0)
    assert horizons["black hole"].value == pytest.approx(roots[0], rel=1e-14)
    assert horizons["cosmological"].value == pytest.approx(roots[1], rel=1e-14)
    for h, r in ((horizons["black hole"], roots[0]), (horizons["cosmological"], roots[1])):
        assert h.surface_gravity == pytest.approx(abs(2 / r ** 2 - 2 * r / 100) / 2, rel=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("name, zeta", [("spec", 1), ("neumann", -1), ("transparent", 0)])
def test_btz_example(capsys, name, zeta):
    # The README's table: each boundary condition against the image sum of AdS3's Wightman function (Lifschytz &
    # Ortiz, Phys. Rev. D 49, 1929 (1994); the reference integration is in tests/test_btz.py).
    from test_btz import image_sum_response

    path = os.path.join(ROOT, "worked", "btz", f"{name}.toml")
    assert main(["response", path, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    expected = [image_sum_response(g, zeta, r0=1.5, rh=1.0, ell=2.0, width=1.0) for g in data["gaps"]]
    np.testing.assert_allclose(data["response"], expected, rtol=1e-11)
    assert data["local_temperature"] == pytest.approx(1.0 / (2 * np.pi * 4.0 * np.sqrt(1.25 / 4.0)), rel=1e-12)


@pytest.mark.slow
def test_harvesting_shell_example(capsys):
    # The commutator part of M is state-independent and, inside the flat interior before any reflection from the
    # shell returns, it is flat space's (causality; the empty-space value is the closed form of
    # tests/test_correlations.py).  As M -> 0 the shell disappears and every figure tends to empty space's (the
    # issue's check).  The concurrence and its shift are derive's own (regression).
    path = spec("harvesting_shell")
    assert main(["correlations", path, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    (pair,) = data["pairs"]
    ours = complex(*pair["signalling"]["commutator_part"])
    # empty space, identical simultaneous detectors: the commutator part is i Im M (the light cone's term)
    flat = 1j * data["reference"]["pairs"][0]["M"][1]
    assert abs(ours - flat) <= 10 * pair["signalling"]["commutator_part_error"] + 1e-12 * abs(flat)
    assert all(d["locality"]["local"] for d in data["detectors"].values())
    assert pair["concurrence"] == pytest.approx(5.7601162e-6, rel=1e-7)                            # regression
    assert pair["difference_from_reference"]["concurrence"] == pytest.approx(1.0253e-9, rel=1e-3)   # regression
    assert main(["correlations", path, "--json", "--set", "M=1e-9"]) == 0
    light = json.loads(capsys.readouterr().out)
    (pair,) = light["pairs"]
    reference = light["reference"]["pairs"][0]
    assert pair["concurrence"] == pytest.approx(reference["concurrence"], rel=1e-7)
    assert complex(*pair["M"]) == pytest.approx(complex(*reference["M"]), rel=1e-7)


@pytest.mark.slow
def test_probe_design_example(capsys):
    # The best probe must be local, no worse than every local probe of the trade-off and than the spec's own
    # (whose runs are derive response's: checked against the closed-form Minkowski reference elsewhere); the
    # quantum runs never above counting's and equal for the ground state (Braunstein & Caves 1994).  The runs
    # themselves are derive's own (regression).
    assert main(["design", spec("probe_design"), "--json", "--quiet"]) == 0
    data = json.loads(capsys.readouterr().out)
    best, default = data["best"], data["default"]
    assert best["local"] and best["duration"] < best["round_trip"]
    assert best["runs"] <= default["runs"]
    assert best["runs"] <= min(r["runs"] for r in data["tradeoff"] if r["local"]) * (1 + 1e-6)
    limit = data["quantum_limit"]
    assert limit["runs"] <= limit["counting"]["runs"] * (1 + 1e-9)
    ground = limit["ground_state"]
    assert ground["best_measurement"]["runs"] == pytest.approx(ground["counting"]["runs"], rel=1e-9)
    assert best["switching"]["shape"] == "sin4"                                       # regression
    assert best["runs"] == pytest.approx(6.7090e9, rel=1e-3)                          # regression
    assert default["runs"] == pytest.approx(1.0217e12, rel=1e-3)                      # regression
