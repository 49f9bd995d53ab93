"""Israel junction conditions against published thin-shell results (docs/conventions.md section 3; sources named beside each check)."""

import json

import pytest
import sympy as sp

import derive
from derive.cli import main
from derive.errors import JunctionError
from conftest import two_region_spec  # noqa: F401  (re-exported for other test modules)



DUST = "M = { value = 1.0, positive = true }\nR = { value = 4.0, positive = true }"


def test_flat_inside_schwarzschild_outside(write_spec):
    # Source: W. Israel, Nuovo Cimento B 44, 1 (1966); E. Poisson, A Relativist's Toolkit (2004), ch. 3:
    # sigma = (1 - sqrt(1-2M/R))/(4 pi R), p = ((1-M/R)/sqrt(1-2M/R) - 1)/(8 pi R), M = m - m^2/(2R) with
    # m = 4 pi R^2 sigma; at M = 1, R = 4: sigma = 0.00582692544653213, p = 0.000603397886722628 (computed independently).
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r", DUST)))
    shell = st.shells[0]
    M, R = st.symbol("M"), st.symbol("R")
    alpha = st.regions["inside"].unknowns[0]
    assert sp.simplify(shell.solved[alpha] - sp.sqrt(1 - 2 * M / R)) == 0
    sigma = (1 - sp.sqrt(1 - 2 * M / R)) / (4 * sp.pi * R)
    p = ((1 - M / R) / sp.sqrt(1 - 2 * M / R) - 1) / (8 * sp.pi * R)
    values = {M: 1, R: 4}
    assert sp.N(shell.surface_energy_density.subs(values) - sigma.subs(values), 30) == pytest.approx(0, abs=1e-25)
    assert sp.N(shell.surface_pressure.subs(values) - p.subs(values), 30) == pytest.approx(0, abs=1e-25)
    assert float(shell.surface_energy_density.subs(values)) == pytest.approx(0.00582692544653213, rel=1e-14)
    assert float(shell.surface_pressure.subs(values)) == pytest.approx(0.000603397886722628, rel=1e-14)
    m = shell.proper_mass
    for point in ({M: 1, R: 4}, {M: sp.Rational(1, 3), R: 7}):
        assert sp.N((m - m ** 2 / (2 * R) - M).subs(point), 30) == pytest.approx(0, abs=1e-25)
    # the two angular pressures agree and the shell's matter obeys all four energy conditions here
    assert len(set(shell.surface_pressures.values())) == 1
    assert all(v["verdict"] == "holds" for v in shell.energy_conditions.values())


def test_charged_shell_reissner_nordstrom_outside(write_spec):
    # Source: the general static thin-shell formula (Poisson 2004 ch. 3), computed independently with sympy:
    # at M = 1, Q = 1/2, R = 4: sigma = 0.00560881255683711, p = 0.000442310841956401;
    # M = m - m^2/(2R) + Q^2/(2R).
    params = DUST + "\nQ = { value = 0.5, positive = true }"
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r + Q**2/r**2", params)))
    shell = st.shells[0]
    M, R, Q = st.symbol("M"), st.symbol("R"), st.symbol("Q")
    values = {M: 1, R: 4, Q: sp.Rational(1, 2)}
    assert float(shell.surface_energy_density.subs(values)) == pytest.approx(0.00560881255683711, rel=1e-14)
    assert float(shell.surface_pressure.subs(values)) == pytest.approx(0.000442310841956401, rel=1e-14)
    m = shell.proper_mass
    assert sp.N((m - m ** 2 / (2 * R) + Q ** 2 / (2 * R) - M).subs(values), 30) == pytest.approx(0, abs=1e-25)


def test_de_sitter_bubble_inside_schwarzschild(write_spec):
    # Source: Poisson (2004) ch. 3, static shell between -f_- and -f_+ (f = h each side):
    # sigma = (sqrt(f_-) - sqrt(f_+))/(4 pi R), p = (1/(8 pi)) [f'/(2 sqrt f) + sqrt f / R]_-^+.
    params = DUST + "\nL = { value = 10.0, positive = true }"
    st = derive.load(write_spec(two_region_spec("1 - r**2/L**2", "1 - 2*M/r", params)))
    shell = st.shells[0]
    M, R, L = st.symbol("M"), st.symbol("R"), st.symbol("L")
    r = sp.Symbol("r")
    f_in, f_out = 1 - r ** 2 / L ** 2, 1 - 2 * M / r

    def bracket(f):
        return (sp.diff(f, r) / (2 * sp.sqrt(f)) + sp.sqrt(f) / r).subs(r, R)
    sigma = (sp.sqrt(f_in) - sp.sqrt(f_out)).subs(r, R) / (4 * sp.pi * R)
    p = (bracket(f_out) - bracket(f_in)) / (8 * sp.pi)
    for values in ({M: 1, R: 4, L: 10}, {M: sp.Rational(1, 2), R: 3, L: 5}):
        assert sp.N((shell.surface_energy_density - sigma).subs(values), 30) == pytest.approx(0, abs=1e-25)
        assert sp.N((shell.surface_pressure - p).subs(values), 30) == pytest.approx(0, abs=1e-25)


def test_ricci_delta_of_the_static_shell(write_spec):
    # Source: computed independently: for the flat/Schwarzschild shell at M = 1, R = 4 the
    # integral of R across the shell is -2[K] = 0.116116523516816 (docs/conventions.md section 3).
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r", DUST)))
    value = st.shells[0].ricci_delta.subs({st.symbol("M"): 1, st.symbol("R"): 4})
    assert float(value) == pytest.approx(0.116116523516816, rel=1e-13)


def test_shells_that_cannot_be_glued_name_the_components(write_spec, capsys):
    # g_tt jumps and there is no unknown to absorb it: the first junction condition fails.
    path = write_spec(two_region_spec("1", "1 - 2*M/r", DUST, unknowns="[]", alpha=False))
    with pytest.raises(JunctionError) as info:
        derive.load(path).shells[0].solved  # noqa: B018
    message = str(info.value)
    assert "h_tt" in message and "inside" in message and "outside" in message and "differ by" in message
    assert main(["junction", path]) == 2
    err = capsys.readouterr().err
    assert "first junction condition fails" in err and "interface[0]" in err


def test_junction_json_contract(write_spec, capsys):
    # Issue contract: {"interfaces": [{"between", "at", "solved", "surface_stress", "surface_energy_density",
    # "surface_pressure", "energy_conditions"}]}
    path = write_spec(two_region_spec("1", "1 - 2*M/r", DUST))
    assert main(["junction", path, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    entry = data["interfaces"][0]
    for key in ("between", "at", "solved", "surface_stress", "surface_energy_density", "surface_pressure",
                "energy_conditions"):
        assert key in entry
    assert entry["between"] == ["inside", "outside"] and entry["at"] == "r = R"
    M, R = sp.symbols("M R")
    sigma = sp.sympify(entry["surface_energy_density"])
    assert float(sigma.subs({M: 1, R: 4})) == pytest.approx(0.00582692544653213, rel=1e-14)
