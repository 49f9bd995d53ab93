"""The Klein-Gordon field: potentials, tortoise coordinates, ends and matching (docs/conventions.md sections 4-6)."""

import json

import numpy as np
import pytest
import sympy as sp

import derive
from derive.cli import main
from derive.errors import InputError
from derive.fields.radial import L_SYMBOL as l, OMEGA as omega
from conftest import static_spec
from test_shells import DUST, two_region_spec


def region_field(write_spec, text, name="region"):
    st = derive.load(write_spec(text))
    return st, st.field_problem.regions[name]


def with_field(text, mass="0", coupling="0"):
    return text + f'\n[field]\nmass = "{mass}"\ncoupling = "{coupling}"\n'


def same(a, b):
    return sp.simplify(sp.sympify(a) - sp.sympify(b)) == 0


def test_schwarzschild_potential_regge_wheeler(write_spec):
    # Source: Regge & Wheeler, Phys. Rev. 108, 1063 (1957), scalar case; Berti, Cardoso & Starinets,
    # Class. Quantum Grav. 26, 163001 (2009): V = (1 - 2M/r)(l(l+1)/r^2 + 2M/r^3 + mu^2).
    text = with_field(static_spec("1 - 2*M/r", where="r > 2*M",
                                  parameters="M = { value = 1.0, positive = true }\nmu = { value = 0.1, positive = true }"),
                      mass="mu")
    st, field = region_field(write_spec, text)
    M, mu, r = st.symbol("M"), st.symbol("mu"), field.r
    assert same(field.potential, (1 - 2 * M / r) * (l * (l + 1) / r ** 2 + 2 * M / r ** 3 + mu ** 2))


def test_reissner_nordstrom_potential_with_coupling(write_spec):
    # Source: textbook standard (e.g. Birrell & Davies 1982 ch. 3 for the conformal term), common practice: V = f[l(l+1)/r^2 + mu^2 + xi R] + F F'/r,
    # F = sqrt(f h) = f here; for Reissner-Nordstrom R = 0, so xi drops out.
    params = "M = { value = 1.0, positive = true }\nQ = { value = 0.5, positive = true }"
    text = with_field(static_spec("1 - 2*M/r + Q**2/r**2", parameters=params, where="r > 2*M"), coupling="0.3")
    st, field = region_field(write_spec, text)
    M, Q, r = st.symbol("M"), st.symbol("Q"), field.r
    f = 1 - 2 * M / r + Q ** 2 / r ** 2
    assert same(field.potential, f * l * (l + 1) / r ** 2 + f * sp.diff(f, r) / r)


def test_schwarzschild_de_sitter_potential(write_spec):
    # Source: derived and computed independently with sympy: f = 1 - 2M/r - Lambda r^2/3 gives
    # V = f[l(l+1)/r^2 + 2M/r^3 - 2 Lambda/3 + mu^2 + 4 xi Lambda], R = 4 Lambda.
    params = ("M = { value = 1.0, positive = true }\nLam = { value = 0.01, positive = true }\n"
              "mu = { value = 0.2, positive = true }\nxi = { value = 0.1, positive = true }")
    text = with_field(static_spec("1 - 2*M/r - Lam*r**2/3", parameters=params, where="3 < r < 10"),
                      mass="mu", coupling="xi")
    st, field = region_field(write_spec, text)
    M, Lam, mu, xi, r = (st.symbol(n) for n in ("M", "Lam", "mu", "xi", "r"))
    f = 1 - 2 * M / r - Lam * r ** 2 / 3
    assert same(field.potential, f * (l * (l + 1) / r ** 2 + 2 * M / r ** 3 - 2 * Lam / 3 + mu ** 2 + 4 * xi * Lam))


def test_flat_space_potentials_in_four_and_three_dimensions(write_spec):
    # Source: textbook (DLMF ch. 10): u = r j_l(omega r) in 3+1 gives V = l(l+1)/r^2; in 2+1 (n = 1) the
    # Bessel equation gives V = (l^2 - 1/4)/r^2.
    _, field = region_field(write_spec, with_field(static_spec("1", parameters="")))
    assert same(field.potential, l * (l + 1) / field.r ** 2)
    text = """
format = 1
[coordinates]
names = ["t", "r", "phi"]
positive = ["r"]
[[region]]
name = "region"
line_element = "-dt**2 + dr**2 + r**2*dphi**2"
"""
    _, field = region_field(write_spec, with_field(text))
    assert same(field.potential, (l ** 2 - sp.Rational(1, 4)) / field.r ** 2)


def test_tangherlini_potential_in_five_dimensions(write_spec):
    # Source: docs/conventions.md section 4 (any D): V = f (lambda/r^2 + mu^2 + xi R) + (n/2) F F'/r
    # + (n/2)(n/2 - 1) F^2/r^2, lambda = l(l + n - 1), n = 3 for D = 5 (Tangherlini, Nuovo Cimento 27, 636, 1963).
    text = """
format = 1
[parameters]
m = { value = 1.0, positive = true }
[coordinates]
names = ["t", "r", "chi", "theta", "phi"]
positive = ["r"]
[[region]]
name = "region"
where = "r > 1"
line_element = "-(1 - m/r**2)*dt**2 + dr**2/(1 - m/r**2) + r**2*(dchi**2 + sin(chi)**2*(dtheta**2 + sin(theta)**2*dphi**2))"
"""
    st, field = region_field(write_spec, with_field(text))
    r, m = field.r, st.symbol("m")
    f = 1 - m / r ** 2
    n = 3
    expected = f * l * (l + n - 1) / r ** 2 + sp.Rational(n, 2) * f * sp.diff(f, r) / r \
        + sp.Rational(n, 2) * (sp.Rational(n, 2) - 1) * f ** 2 / r ** 2
    assert field.form.n == 3 and field.form.k == 1
    assert same(field.potential, expected)


@pytest.mark.parametrize("f, where, expected", [
    # Source: textbook (e.g. Carroll 2004 ch. 5 for Schwarzschild; the others by partial fractions, derived); compared up to an additive constant.
    ("1 - 2*M/r", "r > 2*M", lambda r, M, Q, L: r + 2 * M * sp.log(r / (2 * M) - 1)),
    ("1 - 2*M/r + Q**2/r**2", "r > 2*M", lambda r, M, Q, L: (
        r + (M + sp.sqrt(M ** 2 - Q ** 2)) ** 2 / (2 * sp.sqrt(M ** 2 - Q ** 2)) * sp.log(r - M - sp.sqrt(M ** 2 - Q ** 2))
        - (M - sp.sqrt(M ** 2 - Q ** 2)) ** 2 / (2 * sp.sqrt(M ** 2 - Q ** 2)) * sp.log(r - M + sp.sqrt(M ** 2 - Q ** 2)))),
    ("1 - r**2/L**2", "0 < r < L", lambda r, M, Q, L: L / 2 * sp.log((L + r) / (L - r))),
])
def test_tortoise_coordinates(write_spec, f, where, expected):
    params = ("M = { value = 1.0, positive = true }\nQ = { value = 0.5, positive = true }\n"
              "L = { value = 5.0, positive = true }")
    st, field = region_field(write_spec, with_field(static_spec(f, parameters=params, where=where)))
    M, Q, L = st.symbol("M"), st.symbol("Q"), st.symbol("L")
    assert field.tortoise is not None
    difference = field.tortoise - expected(field.r, M, Q, L)
    values = {M: 1, Q: sp.Rational(1, 2), L: 5}
    points = (3, 4, 7) if "M" in f else (1, 2, 3)
    numbers = [sp.N(difference.subs(values).subs(field.r, p), 30) for p in points]
    assert all(abs(sp.im(x)) < 1e-25 for x in numbers)
    assert max(numbers, key=abs) - min(numbers, key=abs) == pytest.approx(0, abs=1e-25)


def test_horizon_end_of_schwarzschild(write_spec):
    # Source: Hawking, Commun. Math. Phys. 43, 199 (1975): kappa = 1/(4M), T_H = 1/(8 pi M); docs/conventions.md
    # section 6: u ~ (r - r_h)^(-+ i omega/(2 kappa)).
    st, field = region_field(write_spec, with_field(static_spec("1 - 2*M/r", where="r > 2*M")))
    M = st.symbol("M")
    end = field.ends["lower"]
    # the horizon is found (a root of f at the region's bound), named r_h and carried as a symbol = 2M
    assert end["kind"] == "horizon" and end["radius"] == 2 * M and end["value"] == 2.0
    at_root = {end["at"]: 2 * M}
    assert same(end["surface_gravity"].subs(at_root), 1 / (4 * M))
    assert same(end["hawking_temperature"].subs(at_root), 1 / (8 * sp.pi * M))
    assert same(end["exponents"][0].subs(at_root), -2 * sp.I * M * omega)
    end = {**end, "series_ingoing": [a.subs(at_root) for a in end["series_ingoing"]],
           "exponents": [e.subs(at_root) for e in end["exponents"]]}
    upper = field.ends["upper"]
    assert upper["tail"] == "centrifugal" and same(upper["centrifugal"], l * (l + 1))
    # the ingoing series solves the radial equation: residual O(x^(s + order - 1)) (checked numerically)
    x = sp.Symbol("x", positive=True)
    s = end["exponents"][0]
    series = sum(a * x ** k for k, a in enumerate(end["series_ingoing"]))
    values = {M: 1, l: 2, omega: sp.Rational(3, 10)}
    r = field.r
    F2 = (1 - 2 * M / r) ** 2
    u = x ** s * series
    residual = (F2 * sp.diff(u, x, 2) + sp.diff(F2, r).subs(r, 2 * M + x) / 2 * sp.diff(u, x)
                + (omega ** 2 - field.potential.subs(r, 2 * M + x)) * u).subs(F2, F2.subs(r, 2 * M + x))
    residual = residual.subs(r, 2 * M + x).subs(values)
    small = [abs(sp.N(residual.subs(x, h) / (h ** s), 20)) for h in (sp.Rational(1, 100), sp.Rational(1, 200))]
    assert small[1] < small[0] / 4   # residual falls at least like x^2 relative to the leading term


def test_regular_centre_series_matches_riccati_bessel(write_spec):
    # Source: DLMF 10.53.1: x j_l(x) = x^(l+1)/(2l+1)!! (1 - x^2/(2(2l+3)) + ...), x = omega r / alpha inside a
    # flat interior whose clock runs at rate alpha.
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r", DUST)))
    field = st.field_problem.regions["inside"]
    end = field.ends["lower"]
    assert end["kind"] == "regular centre"
    assert same(end["regular_exponent"], l + 1)
    alpha2 = 1 - 2 * st.symbol("M") / st.symbol("R")
    assert end["series"][1] == 0
    assert same(end["series"][2], -omega ** 2 / (2 * alpha2 * (2 * l + 3)))


def test_massive_field_has_a_coulomb_tail(write_spec):
    # Source: docs/conventions.md section 6: a massive field outside mass M has V ~ mu^2 - 2 M mu^2 / r.
    params = "M = { value = 1.0, positive = true }\nmu = { value = 0.1, positive = true }"
    st, field = region_field(write_spec, with_field(static_spec("1 - 2*M/r", parameters=params, where="r > 2*M"),
                                                    mass="mu"))
    end = field.ends["upper"]
    M, mu = st.symbol("M"), st.symbol("mu")
    assert end["tail"].startswith("Coulomb-like")
    assert same(end["V_infinity"], mu ** 2) and same(end["coulomb"], -2 * M * mu ** 2)


def test_anti_de_sitter_boundary(write_spec):
    # Source: docs/conventions.md section 6: AdS has a reflecting conformal boundary (discrete spectrum).
    _, field = region_field(write_spec, with_field(static_spec(
        "1 + r**2/L**2", parameters="L = { value = 1.0, positive = true }")))
    assert field.ends["upper"]["tail"] == "AdS-like"


def test_minimal_coupling_matching_is_continuity_of_sqrt_h_dpsi_dr(write_spec):
    # Source: docs/conventions.md section 5: for xi = 0, psi and sqrt(h) dpsi/dr are continuous across the shell.
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r", DUST)))
    problem = st.field_problem
    T = problem.interfaces[0].transfer_matrix
    inside, outside = problem.regions["inside"], problem.regions["outside"]
    R = st.symbol("R")
    values = {st.symbol("M"): 1, R: 4}
    u, du = sp.Rational(3, 7), sp.Rational(-5, 11)
    u2, du2 = (T * sp.Matrix([u, du])).subs(values)
    # psi = u/r, dpsi/dr = (du/dr* / F - u/r)/r on each side
    F_in, F_out = (side.F.subs(side.r, R).subs(values) for side in (inside, outside))
    h_in, h_out = (side.h.subs(side.r, R).subs(values) for side in (inside, outside))
    r0 = 4
    dpsi_in = (du / F_in - u / r0) / r0
    dpsi_out = (du2 / F_out - u2 / r0) / r0
    assert u2 == u
    assert sp.N(sp.sqrt(h_out) * dpsi_out - sp.sqrt(h_in) * dpsi_in, 30) == pytest.approx(0, abs=1e-25)


def _ricci_scalar_static(f, h, r):
    """Independent textbook computation (nested loops, sympy) of R for -f dt^2 + dr^2/h + r^2 dOmega^2."""
    t, th, ph = sp.symbols("t theta phi")
    x = [t, r, th, ph]
    g = sp.diag(-f, 1 / h, r ** 2, r ** 2 * sp.sin(th) ** 2)
    gi = g.inv()
    n = 4
    G = [[[sum(gi[a, d] * (sp.diff(g[d, b], x[c]) + sp.diff(g[d, c], x[b]) - sp.diff(g[b, c], x[d]))
               for d in range(n)) / 2 for c in range(n)] for b in range(n)] for a in range(n)]
    ricci = sp.zeros(n)
    for b in range(n):
        for d in range(n):
            ricci[b, d] = sum(sp.diff(G[a][d][b], x[a]) - sp.diff(G[a][a][b], x[d])
                              + sum(G[a][a][e] * G[e][d][b] - G[a][d][e] * G[e][a][b] for e in range(n))
                              for a in range(n))
    return sp.simplify(sum(gi[i, i] * ricci[i, i] for i in range(n)))


@pytest.mark.slow
def test_curvature_coupled_matching_against_a_smoothed_shell(write_spec):
    # Independent check (issue 3; docs/conventions.md section 5): replace the thin shell by a thick one of width eps
    # (tanh profile in f and h), integrate the radial equation in flux form (P psi')' = W(-omega^2/f + lambda/r^2
    # + mu^2 + xi R) psi across it with scipy, and let eps -> 0: the result must approach derive's transfer
    # matrix (computed from the weak form), and must not approach the matching that ignores the delta term.
    from scipy.integrate import solve_ivp

    xi_value, omega_value, l_value, M0, R0 = 0.25, 0.6, 1, 1.0, 4.0
    st = derive.load(write_spec(two_region_spec("1", "1 - 2*M/r", DUST).replace(
        'coupling = "0"', f'coupling = "{xi_value}"')))
    T = st.field_problem.interfaces[0].transfer_matrix.subs(
        {st.symbol("M"): M0, st.symbol("R"): R0, l: l_value, omega: omega_value})
    T = np.array(T.evalf(), dtype=float)
    # the matching that ignores the delta term (xi = 0): du/dr* jumps by (F_out - F_in)/R only
    alpha = np.sqrt(1 - 2 * M0 / R0)
    T_minimal = np.array([[1.0, 0.0], [((1 - 2 * M0 / R0) - alpha) / R0, 1.0]])

    r, e = sp.symbols("r epsilon", positive=True)
    step = (1 + sp.tanh((r - R0) / e)) / 2
    f_s = alpha ** 2 + ((1 - 2 * M0 / r) - alpha ** 2) * step
    h_s = 1 + ((1 - 2 * M0 / r) - 1) * step
    fsym, hsym = sp.Function("f")(r), sp.Function("h")(r)
    R_general = _ricci_scalar_static(fsym, hsym, r)
    R_s = R_general.subs({fsym.diff(r, 2): f_s.diff(r, 2), hsym.diff(r, 2): h_s.diff(r, 2)}).subs(
        {fsym.diff(r): f_s.diff(r), hsym.diff(r): h_s.diff(r)}).subs({fsym: f_s, hsym: h_s})
    coefficients = sp.lambdify((r, e), [sp.sqrt(f_s / h_s) * r ** 2, sp.sqrt(f_s * h_s) * r ** 2, f_s, R_s], "numpy")
    lam = l_value * (l_value + 1)

    def smooth_rhs(radius, y, eps):
        W, P, f, R = coefficients(radius, eps)
        return [y[1] / P, W * (-omega_value ** 2 / f + lam / radius ** 2 + xi_value * R) * y[0]]

    def side_rhs(radius, y, outside):
        f = (1 - 2 * M0 / radius) if outside else alpha ** 2
        h = (1 - 2 * M0 / radius) if outside else 1.0
        W, P = np.sqrt(f / h) * radius ** 2, np.sqrt(f * h) * radius ** 2
        return [y[1] / P, W * (-omega_value ** 2 / f + lam / radius ** 2) * y[0]]

    r_a, r_b = 3.7, 4.3
    start = [0.8, -0.3]   # (psi, P psi') at r_a, arbitrary

    def sharp(matrix):
        y = solve_ivp(side_rhs, (r_a, R0), start, args=(False,), rtol=1e-12, atol=1e-14, method="DOP853").y[:, -1]
        F_in, F_out = alpha, 1 - 2 * M0 / R0
        P_in, P_out = F_in * R0 ** 2, F_out * R0 ** 2
        psi, dpsi = y[0], y[1] / P_in
        u, du = R0 * psi, F_in * (psi + R0 * dpsi)
        u2, du2 = matrix @ np.array([u, du])
        psi2 = u2 / R0
        dpsi2 = (du2 / F_out - psi2) / R0
        y2 = [psi2, P_out * dpsi2]
        return solve_ivp(side_rhs, (R0, r_b), y2, args=(True,), rtol=1e-12, atol=1e-14, method="DOP853").y[:, -1]

    target, wrong = sharp(T), sharp(T_minimal)
    errors = []
    for eps in (0.004, 0.002, 0.001):
        y = solve_ivp(smooth_rhs, (r_a, r_b), start, args=(eps,), rtol=1e-11, atol=1e-13, method="DOP853",
                      max_step=eps / 4).y[:, -1]
        errors.append(np.max(np.abs(y - target)) / np.max(np.abs(target)))
    gap = np.max(np.abs(wrong - target)) / np.max(np.abs(target))
    assert errors[-1] < 0.02 * gap           # converges to the weak-form matching, not to the one without xi R
    assert errors[2] < errors[1] < errors[0]  # and does so as eps shrinks (about linearly)
    assert errors[0] / errors[2] > 2.5


def test_field_json_contract_and_l_substitution(write_spec, capsys):
    # Issue contract: {"regions": {NAME: {"dtortoise_dr", "tortoise", "potential", "ends"}},
    # "interfaces": [{"between", "transfer_matrix"}]}; l and omega stay symbols unless --l is given.
    path = write_spec(two_region_spec("1", "1 - 2*M/r", DUST))
    assert main(["field", path, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    for name in ("inside", "outside"):
        for key in ("dtortoise_dr", "tortoise", "potential", "ends"):
            assert key in data["regions"][name]
    assert "l" in sp.sympify(data["regions"]["outside"]["potential"]).free_symbols.__repr__()
    assert len(data["interfaces"][0]["transfer_matrix"]) == 2
    assert main(["field", path, "--json", "--l", "2"]) == 0
    data = json.loads(capsys.readouterr().out)
    potential = sp.sympify(data["regions"]["inside"]["potential"])
    assert "l" not in {s.name for s in potential.free_symbols}


def test_non_static_region_is_refused(write_spec, capsys):
    from test_curvature_published import KERR

    path = write_spec(with_field(KERR))
    with pytest.raises(InputError) as info:
        derive.load(path).field_problem.regions["region"]
    assert "not diagonal" in str(info.value)
    assert main(["field", path]) == 2


@pytest.mark.slow
def test_transfer_matrix_through_named_quantities_equals_the_solved_matching_condition():
    """T = [[1, 0], [n (F_2 - F_1)/(2R) - 2 s xi [K] N, 1]] (derived in derive/fields/matching.py from the
    matching condition with P_i = F_i R^n), which derive substitutes and shortens, agrees with the matrix
    solved here from the condition itself, [P psi_r] = -2 s xi [K] w psi at the shell (the jump of the radial
    flux; docs/conventions.md section 5), for a shell with curvature coupling (the de Sitter bubble, conformal)
    and without (the charged shell)."""
    import os

    import sympy as sp

    import derive

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    u, du1, du2 = sp.symbols("u du1 du2")
    for name in ("de_sitter_bubble", "charged_shell"):
        st = derive.load(os.path.join(root, "worked", name, "spec.toml"))
        exact = {k: sp.Rational(v) for k, v in st.parameter_values.items()}
        for matching in st.field_problem.interfaces:
            p, R = matching.pieces, matching.shell.position
            n, xi = p["first"]["n"], matching.problem.spacetime.field.coupling

            root_n = R ** sp.Rational(-n, 2)      # psi = r^{-n/2} u; du = du/dr* = F du/dr
            flux = [p[side]["P"] * root_n * (du / p[side]["F"] - n * u / (2 * R))
                    for side, du in (("first", du1), ("second", du2))]
            jump = -2 * p["orientation"] * xi * matching.shell.extrinsic_curvature["trace_jump"] * p["first"]["w"]
            (solved,) = sp.solve(sp.Eq(flux[1], flux[0] + jump * root_n * u), du2)
            solved = sp.expand(solved)
            expected = sp.Matrix([[1, 0], [solved.coeff(u), solved.coeff(du1)]])
            named, quantities = matching.named_transfer_matrix
            assert named[1, 1] == 1 and named[0, 0] == 1 and named[0, 1] == 0
            for i in range(2):
                for j in range(2):
                    a = sp.N(expected[i, j].subs(exact), 30)
                    b = sp.N(matching.transfer_matrix[i, j].subs(exact), 30)
                    assert abs(a - b) <= 1e-25 * (1 + abs(b))
