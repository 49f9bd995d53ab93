"""Bound states of a massive field around a body with a regular centre (issue 5: massive fields below the mass)."""

import json
import os

import numpy as np
import pytest

import derive
from derive.cli import main
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_problem
from derive.solve.bound import bound_states

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DUST_SHELL = os.path.join(ROOT, "worked", "static_shell", "spec.toml")
M, R, MU = 1.0, 10.0, 0.02          # alpha = M mu = 0.02; Bohr radius 1/(M mu^2) = 2500 >> R
ALPHA, BOHR = M * MU, 1 / (M * MU * MU)


def light_field_around_a_shell(folder) -> str:
    """The worked static shell with M = 1, R = 10 and a field of mass 0.02: a 'gravitational atom' whose Bohr
    radius is 250 times the shell's."""
    with open(DUST_SHELL) as handle:
        text = handle.read()
    text = (text.replace("M = { value = 0.25, positive = true }", f"M = {{ value = {M}, positive = true }}")
            .replace("R = { value = 1.0, positive = true }", f"R = {{ value = {R}, positive = true }}")
            .replace('mass = "0"', f'mass = "{MU}"'))
    path = os.path.join(folder, "atom.toml")
    with open(path, "w") as handle:
        handle.write(text)
    return path


def binding(n, l):
    """(mu - omega)/mu of the level (n, l) outside a non-spinning mass to order alpha^4: the hydrogen-like term
    alpha^2/(2 n^2) and the relativistic corrections alpha^4/(8 n^4) - (2l - 3n + 1) alpha^4/(n^4 (l + 1/2))
    (Baumann, Chia & Porto, Phys. Rev. D 99, 044001 (2019), the spectrum of the gravitational atom; from
    memory).  For l >= 1 the body's interior enters only far beyond this order (the level's wave function
    ~ (r/a)^l inside)."""
    a4 = ALPHA ** 4
    return ALPHA ** 2 / (2 * n * n) + a4 / (8 * n ** 4) - (2 * l - 3 * n + 1) * a4 / (n ** 4 * (l + 0.5))


@pytest.mark.slow
def test_p_levels_and_weights_of_a_gravitational_atom(tmp_path, capsys):
    # derive spectrum lists the bound states of the requested l with their weights at --at.  The levels carry
    # the alpha^4 fine structure: agreement to 1% of the alpha^4 part (higher orders are ~alpha^2 of it).
    # The weight of the 2p level at r0 = 1.2 Bohr radii is the hydrogen one, (3/4 pi) R_21(r0)^2/(2 mu) with
    # R_21 = (24 a^3)^-1/2 (r/a) e^{-r/2a} (any quantum-mechanics text), to the relativistic corrections (~1%).
    spec = light_field_around_a_shell(str(tmp_path))
    r0 = 1.2 * BOHR
    assert main(["spectrum", spec, "--l", "1", "--omega", "0.021", "--at", str(r0), "--json",
                 "--tolerance", "1e-8"]) == 0
    levels = json.loads(capsys.readouterr().out)["bound_states"]
    assert levels["ok"] and levels["truncated"] and levels["l"] == 1
    omega = np.array(levels["omega"])
    for n, value in zip((2, 3, 4), omega):
        fine = binding(n, 1) - ALPHA ** 2 / (2 * n * n)
        assert abs((MU - value) / MU - binding(n, 1)) < 0.01 * abs(fine)
    np.testing.assert_array_less(np.array(levels["error"]["omega"]), 1e-10 * omega)
    radial2 = (r0 / BOHR) ** 2 * np.exp(-r0 / BOHR) / (24 * BOHR ** 3)
    hydrogen = 3 / (4 * np.pi) * radial2 / (2 * MU)
    assert levels["weight"][0] == pytest.approx(hydrogen, rel=0.01)
    weights, errors = np.array(levels["weight"]), np.array(levels["error"]["weight"])
    assert np.all(errors <= 1e-8 * weights)


@pytest.mark.slow
def test_s_levels_at_the_centre_scale_like_hydrogen(tmp_path):
    # At the centre only l = 0 survives; hydrogen's |psi_n00(0)|^2 = 1/(pi a^3 n^3), so the weight
    # |psi(0)|^2/(2 omega) falls like n^-3 (to the level's relativistic and finite-size corrections, which fade
    # with n) and is the hydrogen value to a few per cent (R/a = 0.4%, relativistic O(alpha)).
    # (at a tolerance of 1e-8: so weakly bound, kappa^2 = 4e-4 mu^2/n^2, a level's weight carries ~1e-9 of
    # rounding, omega^2 - V against kappa^2; derive.solve.bound.ROUNDING)
    problem = numeric_problem(KernelSet(derive.load(light_field_around_a_shell(str(tmp_path)))))
    result = bound_states(problem, 0, 0.0, 1e-8, count=3)
    assert result.ok, result.message()
    n = np.arange(1, 4)
    scaled = result.weight * n ** 3
    assert np.all(np.abs(scaled / scaled[-1] - 1) < 0.005)
    hydrogen = 1 / (np.pi * BOHR ** 3) / (2 * MU)
    np.testing.assert_allclose(scaled, hydrogen, rtol=0.03)
    np.testing.assert_allclose((MU - result.omega) / MU, ALPHA ** 2 / (2 * n * n), rtol=0.005)


def test_no_bound_states_for_a_massless_field(tmp_path, capsys):
    assert main(["spectrum", DUST_SHELL, "--omega", "1.0", "--json", "--tolerance", "1e-8"]) == 0
    assert "bound_states" not in json.loads(capsys.readouterr().out)


@pytest.mark.slow
def test_run_lists_the_bound_states_and_sums_them_into_the_response(tmp_path):
    # derive run on a massive field around a body: the continuum density, the s levels at the centre (in the
    # summary and bound_states.csv), and the response at the centre with the levels' share included (found
    # levels plus their quantum-defect series: derive.solve.levels)
    spec = light_field_around_a_shell(str(tmp_path))
    out = str(tmp_path / "atom")
    assert main(["run", spec, "--out", out, "--tolerance", "1e-8"]) == 0
    with open(os.path.join(out, "summary.json")) as handle:
        summary = json.load(handle)
    levels = summary["spectrum"]["bound_states"]
    assert levels["ok"] and len(levels["omega"]) == 4 and all(w < MU for w in levels["omega"])
    assert os.path.exists(os.path.join(out, "bound_states.csv"))
    assert "response" not in summary.get("skipped", {})
    share = summary["response"]["bound_levels"]
    assert share["found"] >= 8 and all(0 < s for s in share["share"])
    assert np.isfinite(summary["spectrum"]["largest_relative_error"])


