"""Spec files: format 1 is read as README.md says, and every mistake is named by file and key."""

import pytest
import sympy as sp

import derive
from derive.errors import InputError
from conftest import static_spec

BASE = """
format = 1
title = "t"
[parameters]
M = { value = 1.0, positive = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
[[region]]
name = "outside"
line_element = "-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
"""


def error_of(write_spec, text):
    with pytest.raises(InputError) as info:
        derive.load(write_spec(text))
    return info.value


def test_load_reads_parameters_coordinates_and_metric(write_spec):
    st = derive.load(write_spec(BASE))
    assert st.dimension == 4
    assert st.parameters["M"].value == 1.0 and st.parameters["M"].symbol.is_positive
    assert [c.name for c in st.coordinates] == ["t", "r", "theta", "phi"]
    M, r = st.symbol("M"), st.symbol("r")
    assert sp.cancel(st.regions["outside"].metric[0, 0] + (1 - 2 * M / r)) == 0


def test_cross_term_gives_half_the_coefficient(write_spec):
    # README.md (spec format): a term c*dx*dy with x != y gives g_xy = c/2.
    text = BASE.replace('line_element = "-(1 - 2*M/r)*dt**2',
                        'line_element = "6*M*dt*dr - (1 - 2*M/r)*dt**2')
    g = derive.load(write_spec(text)).regions["outside"].metric
    M = [s for s in g.free_symbols if s.name == "M"][0]
    assert g[0, 1] == g[1, 0] == 3 * M


def test_definitions_are_kept_for_display_and_substituted_to_compute(write_spec):
    text = BASE.replace("[[region]]", '[definitions]\nf = "1 - 2*M/r"\n[[region]]').replace(
        '"-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r)', '"-f*dt**2 + dr**2/f')
    region = derive.load(write_spec(text)).regions["outside"]
    assert sp.Symbol("f") in region.metric_display[0, 0].free_symbols
    assert sp.Symbol("f") not in region.metric.free_symbols


def test_explicit_metric_matrix(write_spec):
    text = """
    format = 1
    [coordinates]
    names = ["t", "x"]
    [[region]]
    metric = [["-1", "0"], ["0", "1"]]
    """
    st = derive.load(write_spec(text))
    assert st.regions["spacetime"].metric == sp.diag(-1, 1)


def test_set_overrides_a_parameter(write_spec):
    st = derive.load(write_spec(BASE), overrides={"M": 2.5})
    assert st.parameters["M"].value == 2.5


@pytest.mark.parametrize("change, key, words", [
    (("title", "titel"), "titel", "did you mean 'title'"),
    (("format = 1", "format = 2"), "format", "format = 1"),
    (('name = "outside"', 'name = "outside"\nwhere_ = "r > 2*M"'), "region[0].where_", "did you mean 'where'"),
    (("dr**2/(1 - 2*M/r)", "dr**3"), "region[0].line_element", "not quadratic"),
    (("dr**2/(1 - 2*M/r)", "sqrt(dr)"), "region[0].line_element", "not a polynomial"),
    (("2*M/r", "2*Mass/r"), "region[0].line_element", "undeclared name 'Mass'"),
    (("2*M/r", "2*Mass/r"), "region[0].line_element", 'unknowns = ["Mass"]'),
    (("2*M/r)*dt", "__import__('os'))*dt"), "region[0].line_element", "underscore"),
    (('M = { value = 1.0, positive = true }', 'M = { value = -1.0, positive = true }'),
     "parameters.M.value", "contradicts"),
    (('M = { value = 1.0, positive = true }', 'M = { value = 1.0, positiv = true }'),
     "parameters.M.positiv", "did you mean 'positive'"),
    (('+ r**2*(dtheta**2 + sin(theta)**2*dphi**2)', '+ r**2*dtheta**2'), "region[0]", "degenerate"),
    (('names = ["t", "r", "theta", "phi"]', 'names = ["t", "r", "theta", "class"]'),
     "coordinates.names[3]", "not a valid name"),
])
def test_mistakes_are_named_by_file_and_key(write_spec, change, key, words):
    err = error_of(write_spec, BASE.replace(*change))
    assert err.key == key, str(err)
    assert words in str(err)
    assert err.file.endswith("spec.toml")


def test_malformed_toml_and_missing_sections(write_spec):
    assert "not valid TOML" in str(error_of(write_spec, "format = = 1"))
    err = error_of(write_spec, "format = 1\n[coordinates]\nnames=['t','x']\n")
    assert err.key == "region"


def test_interfaces_name_existing_regions(write_spec):
    text = static_spec("1").replace('name = "region"', 'name = "inside"') + """
[[region]]
name = "outside"
line_element = "-dt**2 + dr**2 + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[[interface]]
between = ["inside", "outsid"]
at = "r = 2*M"
"""
    err = error_of(write_spec, text)
    assert err.key == "interface[0].between[1]" and "did you mean 'outside'" in str(err)
    err = error_of(write_spec, text.replace('"outsid"', '"outside"').replace('at = "r = 2*M"', 'at = "M = r"'))
    assert err.key == "interface[0].at"


def test_set_of_an_unknown_parameter(write_spec):
    with pytest.raises(InputError) as info:
        derive.load(write_spec(BASE), overrides={"m": 1.0})
    assert "did you mean 'M'" in str(info.value)


def test_where_gives_coordinate_bounds(write_spec):
    text = BASE.replace('name = "outside"', 'name = "outside"\nwhere = "2*M < r <= 20*M"')
    region = derive.load(write_spec(text)).regions["outside"]
    domain = region.domains[0]
    M = [s for s in region.metric.free_symbols if s.name == "M"][0]
    assert domain.lower == 2 * M and domain.upper == 20 * M and domain.upper_closed and not domain.lower_closed


def test_singular_metric_is_refused_when_curvature_is_asked(write_spec):
    # a metric whose t-r block has zero determinant: -dt**2 + 2 dt dr - dr**2 = -(dt - dr)**2
    text = BASE.replace('"-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r)', '"-(dt - dr)**2')
    st = derive.load(write_spec(text))
    with pytest.raises(InputError) as info:
        st.geometry["outside"].christoffel  # noqa: B018
    assert "degenerate" in str(info.value) and "outside" in str(info.value)


def test_a_static_shell_inside_its_own_horizon_is_refused_at_load():
    # With 2M > R the Schwarzschild side's -g_tt = 1 - 2M/R is negative at the shell: no static shell exists there
    # (its induced metric cannot match a timelike interior), and check says so instead of junction failing later.
    import os

    path = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "worked", "static_shell",
                        "spec.toml")
    with pytest.raises(InputError) as error:
        derive.load(path, M=0.6)
    assert error.value.key == "interface[0].at" and "horizon of region 'outside'" in str(error.value)
    assert derive.load(path, M=0.4).parameters["M"].value == 0.4
