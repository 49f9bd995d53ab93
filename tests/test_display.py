"""The derivation document's displayed forms: term order, domains, line breaking, named radicals, no overfull
lines.  The references are pdflatex itself (its measured box widths and its overfull-box report) and sympy
(each displayed form equal to the form as computed); the term order and domain chains are the common practice
of papers (1 - 2M/r + Q^2/r^2, 0 <= r < R)."""

from __future__ import annotations

import os
import random
import re
import shutil
import subprocess

import pytest
import sympy as sp

from derive.report import display
from derive.report.derivation import Derivation

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
WORKED = os.path.join(ROOT, "worked")
EXAMPLES = sorted(d for d in os.listdir(WORKED) if os.path.isfile(os.path.join(WORKED, d, "spec.toml")))
needs_tex = pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex not installed (CI installs it)")

r, M, Q, L, R = sp.symbols("r M Q L R", positive=True)


def test_sums_in_the_order_papers_write_them():
    assert display.tex(1 - 2 * M / r + Q**2 / r**2, (r,)) == r"1 - \frac{2 M}{r} + \frac{Q^{2}}{r^{2}}"
    assert display.tex(1 - r**2 / L**2, (r,)) == r"1 - \frac{r^{2}}{L^{2}}"
    assert display.tex(sp.sqrt(1 - 2 * M / R), (r,)) == r"\sqrt{1 - \frac{2 M}{R}}"


def test_polynomials_without_a_number_term_run_from_the_highest_power():
    assert display.tex(Q**2 - 2 * M * r + r**2, (r,)) == r"r^{2} - 2 M r + Q^{2}"
    assert display.tex(r - L, (r,)) == "r - L"
    assert display.tex(1 - 2 * M / r - r**2 / L**2, (r,)) == r"1 - \frac{2 M}{r} - \frac{r^{2}}{L^{2}}"
    assert display.text(R - 2 * M) == "R - 2*M" and display.text(1 + Q**2 / R**2 - 2 * M / R) == "1 - 2*M/R + Q**2/R**2"


def test_a_clock_rate_as_one_root_of_a_ratio():
    """The interior clock rate of a de Sitter core inside a Schwarzschild exterior, as the first junction
    condition gives it, written as papers do: sqrt((1 - 2M/R)/(1 - R^2/L^2)) (the lapses' ratio; common practice)."""
    raw = L * sp.sqrt(-(2 * M - R) / (L - R)) / (sp.sqrt(R) * sp.sqrt(L + R))
    values = {M: 0.3, R: 1.0, L: 4.0}
    form = display.one_root(raw, values)
    assert display.tex(form) == r"\sqrt{\frac{1 - \frac{2 M}{R}}{1 - \frac{R^{2}}{L^{2}}}}"
    _agree(form, raw, (R, L))
    # a sum is left alone, and so is a form that is not real at the values
    assert display.one_root(raw + 1, values) is None
    assert display.one_root(sp.sqrt(M - R) * sp.sqrt(L), values) is None


def test_domains_print_as_chains():
    x = sp.Symbol("x")
    assert display.tex(sp.And(sp.Le(0, x), sp.Lt(x, R))) == r"0 \le x < R"
    assert display.tex(sp.And(r > R, r < L)) == r"R < r < L"


def test_asymptotic_tail_has_no_zero_terms():
    derivation = Derivation("t", (r,))
    from derive.report.latex import field_sections  # noqa: F401 (the tail is built there from this form)
    leading = sp.S(0) + sp.S(0) / r + sp.Symbol("l") * (sp.Symbol("l") + 1) / r**2
    shown = display.tex(leading, (r,))
    assert "0 +" not in shown and r"\frac{0}" not in shown
    assert derivation.equation("V", shown + " + O(r^{-3})", "tail", relation=r"\sim").rhs == shown + " + O(r^{-3})"


def _long_sum(n=14):
    return sum((k + 3) * M**k * Q**(n - k) / r**k for k in range(n)) + sp.sqrt(1 - 2 * M / r) * L


def test_long_sums_break_into_lines_that_fit():
    lines = display.display_lines(_long_sum(30), 20.0, (r,))
    assert len(lines) > 2
    assert all(display.width(line) <= display.OVERFULL_PT for line in lines)
    # the lines are the terms of the sum, in order: joined they print the same sum
    assert " ".join(lines).replace("  ", " ") == display.tex(_long_sum(30), (r,))


def test_a_wide_product_opens_its_sums():
    expr = (M / (r - 2 * M)) * _long_sum() * (3 + _long_sum(6))
    lines = display.display_lines(expr, 20.0, (r,))
    assert len(lines) > 2 and r"\Bigl(" in lines[0] and lines[-1].endswith(r"\Bigr)")


def test_width_estimate_against_pdflatex(tmp_path):
    """The estimate against pdflatex's own box widths (reference: TeX measures the set formula)."""
    if shutil.which("pdflatex") is None:
        pytest.skip("pdflatex not installed (CI installs it)")
    forms = [display.tex(e, (r,)) for e in (_long_sum(4), _long_sum(9), (1 - 2 * M / r) ** 2 / (r**3 * sp.sqrt(R)),
                                            sp.sin(sp.Symbol("theta")) ** 2 * r**2, sp.Symbol("omega") ** 2 - M / r)]
    body = [r"\documentclass[10pt]{article}\usepackage{amsmath,amssymb}\begin{document}"]
    body += [r"\setbox0\hbox{$\displaystyle %s$}\typeout{W%d=\the\wd0}" % (f, k) for k, f in enumerate(forms)]
    body.append(r"\end{document}")
    (tmp_path / "w.tex").write_text("\n".join(body))
    out = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-no-shell-escape", "w.tex"], cwd=tmp_path,
                         capture_output=True, text=True, timeout=120, stdin=subprocess.DEVNULL).stdout
    measured = {int(k): float(w) for k, w in re.findall(r"W(\d+)=([\d.]+)pt", out)}
    assert len(measured) == len(forms)
    for k, form in enumerate(forms):
        # errs wide rather than narrow: never more than 13% under TeX's width (OVERFULL_PT relies on it)
        assert 0.87 * measured[k] <= display.width(form) <= 1.6 * measured[k], (form, measured[k])


def _agree(a, b, symbols, trials=4):
    rng = random.Random(1)
    for _ in range(trials):
        point = {s: sp.Rational(rng.randint(11, 40), 10) for s in symbols}
        point[M] = sp.Rational(rng.randint(1, 9), 100)        # keep every root real
        va, vb = sp.N(a.subs(point), 30), sp.N(b.subs(point), 30)
        assert abs(va - vb) <= 1e-20 * max(1, abs(va))


def test_named_radicals_are_the_same_expression():
    """Each b^{k/2} written S^k with S = sqrt(b): equal on the principal branch (checked at sample points)."""
    expr = (sp.sqrt(1 - 2 * M * r**2 / R**3) * 3 - sp.sqrt(1 - 2 * M / R)) ** 3 / (1 - 2 * M * r**2 / R**3) ** sp.Rational(3, 2)
    registry = {}
    form, names = display.with_named_radicals(expr, registry)
    assert len(names) == 2 and len(display.tex(form)) < len(display.tex(expr)) * 2
    back = form.subs({s: v for s, v in names})
    _agree(back, expr, (r, R))
    # the registry keeps names across equations of one document
    again, names_again = display.with_named_radicals(sp.sqrt(1 - 2 * M / R) * r, registry)
    assert {s for s, _ in names_again} <= set(registry.values())


def test_factored_form_is_equal():
    expr = M / (r - 2 * M) + Q**2 / (r * (r - 2 * M)) - 1 / r
    form = display.factored(expr)
    assert sp.cancel(form - expr) == 0


def test_matrix_too_wide_is_shown_by_entry():
    wide = sp.Matrix([[_long_sum(8), 0], [0, _long_sum(9)]])
    eq = Derivation("t", (r,)).equation("T", wide, "T")
    assert eq.entries and all(e.lhs.startswith("T_{") for e in eq.entries)


def test_unreadable_forms_are_said_not_shown():
    inner = sp.log(sum(M**k * sp.sqrt(r + k) for k in range(40)))      # one factor that cannot be broken
    eq = Derivation("t", (r,)).equation("X", inner, "x")
    assert eq.omitted and "--json" in eq.omitted and not eq.lines


def _overfull(tex: str) -> list[str]:
    from derive.report.latex import compile_pdf

    ok, log, _ = compile_pdf(tex, passes=1)      # one pass reports every overfull box
    assert ok, log[-2000:]
    return re.findall(r"Overfull \\hbox \(([\d.]+)pt too wide\)", log)


@needs_tex
@pytest.mark.slow
@pytest.mark.parametrize("name", EXAMPLES)
def test_worked_derivations_have_no_overfull_lines(name, tmp_path):
    """Every worked example's derivation (geometry, junctions, field) compiles with no overfull box
    (pdflatex's own report) and shows every result (none said too long to display)."""
    from derive.cli import main

    target = tmp_path / "derivation.tex"
    code = main(["field", os.path.join(WORKED, name, "spec.toml"), "--latex", str(target)])
    assert code == 0
    assert _overfull(target.read_text()) == []
    assert "too long to display readably" not in target.read_text()     # every result is shown
    if name == "de_sitter_bubble":      # shells and the field's matching are in the document (as test_cli checks)
        assert "Second junction condition" in target.read_text() and "Modes across" in target.read_text()
    body = (tmp_path / "derivation-body.tex").read_text()
    assert body.splitlines()[1] in target.read_text() and r"\documentclass" not in body


@needs_tex
def test_demo_derivation_has_no_overfull_lines(tmp_path):
    """The bundled scenario's derivation, as `derive run` writes it, compiles without an overfull box."""
    from derive.cli import main
    from derive.demo import demo_spec_path

    target = tmp_path / "demo.tex"
    assert main(["field", demo_spec_path(), "--latex", str(target)]) == 0
    assert _overfull(target.read_text()) == []
    assert "too long to display readably" not in target.read_text()


def test_values_with_errors_in_concise_notation():
    """The concise notation of the error in units of the last digit (common practice; e.g. the CODATA tables)."""
    from derive.report.results_tex import with_error

    assert with_error(0.564331529760, 2.5e-11) == r"5.64331529760(25)\times 10^{-1}"
    assert with_error(12.3456, 0.12) == r"1.235(12)\times 10^{1}"
    assert with_error(-3.2e-5, 4e-9) == r"-3.20000(40)\times 10^{-5}"
    assert with_error(1.5, 0.0) == "1.50000000000000"
    assert with_error(None, 1.0) == "--" and with_error(float("nan"), 1.0) == "--"


def test_pdf_figures_embed_truetype_fonts(tmp_path):
    """Vector figures with Type 42 (TrueType) fonts, not Type 3 (which journals' production systems refuse):
    the PDF's font dictionaries say /Subtype /TrueType or /Type0 (common practice of publishers' checks)."""
    from derive.report.tables import write_response_files

    data = {"gaps": [-1.0, 0.0, 1.0], "response": [0.2, 0.08, 0.007], "error": [1e-12, 1e-12, 1e-13],
            "switching": {"shape": "gaussian", "width": 0.5}, "state": "vacuum", "at": 0.0,
            "locality": {"duration": 5.0, "round_trip": 2.0, "local": False}}
    paths = write_response_files(str(tmp_path), data, "test", pdf=True)
    pdf = next(p for p in paths if p.endswith(".pdf"))
    raw = open(pdf, "rb").read()
    assert b"/Type3" not in raw and (b"/TrueType" in raw or b"/Type0" in raw)


def test_pdf_figures_fit_one_journal_column(tmp_path):
    """The vector figure is laid out for one column of a two-column journal page (Physical Review: 8.6 cm =
    3.4 in; common practice), with no text below 5.5 pt; the screen PNG keeps its size and title."""
    import re

    from matplotlib.text import Text

    from derive.report import tables

    data = {"gaps": [-1.0, 0.0, 1.0], "response": [0.2, 0.08, 0.007], "error": [1e-12, 1e-12, 1e-13],
            "switching": {"shape": "gaussian", "width": 0.5}, "state": "vacuum", "at": 0.0,
            "locality": {"duration": 5.0, "round_trip": 2.0, "local": False}}
    paths = tables.write_response_files(str(tmp_path), data, "test", pdf=True)
    raw = open(next(p for p in paths if p.endswith(".pdf")), "rb").read()
    width = float(re.search(rb"/MediaBox \[\s*0 0 ([0-9.]+) ([0-9.]+)", raw).group(1))
    assert 0.8 * 3.4 * 72 <= width <= 3.4 * 72 + 2
    figure = tables.response_figure(data, "test")
    assert figure.get_size_inches()[0] > 6       # the screen version
    tables.for_column(figure)
    sizes = [t.get_fontsize() for t in figure.findobj(Text) if t.get_text()]
    assert min(sizes) >= tables.SMALLEST_FONT and all(not axis.get_title() for axis in figure.axes)


@pytest.mark.slow
def test_tortoise_through_the_horizon_radii():
    # Reissner-Nordstrom written with M and Q: r_* = r + r_+^2/(r_+ - r_-) ln(r - r_+) - r_-^2/(r_+ - r_-) ln(r - r_-)
    # with r_+- = M +- sqrt(M^2 - Q^2) (the textbook form; from memory: Chandrasekhar, The Mathematical Theory of
    # Black Holes (1983), ch. 5); the document writes it so, with the radii defined beneath.
    import derive
    from derive.report.latex import field_sections

    st = derive.load(os.path.join(WORKED, "reissner_nordstrom", "spec.toml"))
    region = st.field_problem.regions["outside"]
    form, roots, polynomial = region.tortoise_through_roots
    rp, rm = sp.Symbol("r_+", real=True), sp.Symbol("r_-", real=True)
    x = region.r
    textbook = x + rp ** 2 / (rp - rm) * sp.log(x - rp) - rm ** 2 / (rp - rm) * sp.log(x - rm)
    assert sp.simplify(form - textbook) == 0
    values = st.parameter_values
    mass, charge = (next(k for k in values if str(k) == name) for name in ("M", "Q"))
    for symbol, sign in ((rp, 1), (rm, -1)):
        closed = mass + sign * sp.sqrt(mass ** 2 - charge ** 2)
        assert float(roots[symbol].subs(values)) == pytest.approx(float(closed.subs(values)), rel=1e-15)
    derivation = Derivation("t", (x,), values)
    field_sections(derivation, st)
    body = derivation.body_latex()
    assert r"r_{+} &= M + \sqrt{M^{2} - Q^{2}}" in body and r"\log{\left(r - r_{+} \right)}" in body


@pytest.mark.slow
def test_series_through_the_recursion_where_too_long():
    # The Frobenius recursion a_k = -sum_j a_{k-j} [P_j (s + k - j) + Q_j] / [(s + k)(s + k - 1) + P_0 (s + k) + Q_0]
    # (the standard one for u'' + p u' + q u = 0 with x p = sum P_j x^j, x^2 q = sum Q_j x^j: common practice, e.g.
    # Bender & Orszag (1978) section 3.3, from memory) with the P_j, Q_j the document shows reproduces the series
    # derive computes in its field of rational functions; the RN document gives a_2 through it.
    import derive
    from derive.report.latex import field_sections

    st = derive.load(os.path.join(WORKED, "reissner_nordstrom", "spec.toml"))
    end = st.field_problem.regions["outside"].ends["lower"]
    P, Q = end["recursion"]["P"], end["recursion"]["Q"]
    s = end["exponents"][0]
    a = [sp.Integer(1)]
    for k in (1, 2):
        total = sum(a[k - j] * (P[j] * (s + k - j) + Q[j]) for j in range(1, k + 1))
        a.append(-total / ((s + k) * (s + k - 1) + P[0] * (s + k) + Q[0]))
    values = {**st.parameter_values, sp.Symbol("omega", positive=True): sp.Rational(7, 10),
              sp.Symbol("l", nonnegative=True): 2}
    values.update({h.symbol: h.value for h in st.field_problem.regions["outside"].horizons})
    for k in (1, 2):
        mine, theirs = complex(sp.N(a[k].subs(values), 20)), complex(sp.N(end["series_ingoing"][k].subs(values), 20))
        assert mine == pytest.approx(theirs, rel=1e-14)
    derivation = Derivation("t", (st.field_problem.regions["outside"].r,), st.parameter_values)
    field_sections(derivation, st)
    body = derivation.body_latex()
    assert "gives $a_2$" in body and "Q_2 &=" in body and "The right-hand side of $a_2$" not in body


@pytest.mark.slow
def test_star_centre_series_through_its_normalised_root():
    """The constant-density star's a_2 at the centre (637 operations as computed) reads in two lines through
    S = sqrt(1 - 2M/R) with M eliminated; put back, it is the computed coefficient, and at M = 0 (S = 1) it is
    flat space's -omega^2/(2(2l + 3)), the second term of r j_l(omega r)'s series (Abramowitz & Stegun (1964)
    10.1.2)."""
    import derive

    st = derive.load(os.path.join(WORKED, "constant_density_star", "spec.toml"))
    end = st.field_problem.regions["star"].ends["lower"]
    a2 = end["series"][2]
    registry = {}
    form, names = display.with_eliminated_root(a2, registry, st.parameter_values)
    assert len(names) == 1 and len(display.display_lines(form, 30.0)) <= 3
    (S, root), = names
    mass, radius = (next(k for k in st.parameter_values if str(k) == name) for name in ("M", "R"))
    assert sp.cancel(root ** 2 - (1 - 2 * mass / radius)) == 0
    omega, ell = (next(s for s in a2.free_symbols if str(s) == name) for name in ("omega", "l"))
    rng = random.Random(3)
    for _ in range(3):
        point = {omega: sp.Rational(rng.randint(1, 30), 10), ell: rng.randint(0, 4)}
        point.update({k: sp.Rational(rng.randint(1, 9), 100) if str(k) == "M" else sp.Rational(rng.randint(10, 30), 10)
                      for k in st.parameter_values})
        back = form.subs(S, root).subs(point)
        assert abs(sp.N(back - a2.subs(point), 30)) <= 1e-25 * abs(sp.N(a2.subs(point), 30))
    assert sp.cancel(form.subs(S, 1) + omega ** 2 / (2 * (2 * ell + 3))) == 0
    # the document names it with the same S as the metric's own sqrt(1 - 2M/R)
    assert registry[sp.expand(root ** 2)] == S


def test_collected_form_is_equal_and_groups_the_eigenvalue():
    """A rational function's numerator by powers of l and omega (l^2 + l as l (l + 1)), each coefficient
    factored: the same function (exact cancellation)."""
    omega, ell = sp.Symbol("omega", positive=True), sp.Symbol("l", nonnegative=True)
    expr = sp.expand((ell * (ell + 1) * (R - 2 * M) ** 2 + omega ** 2 * R ** 3 * (R + M)) * (R + 3 * M)) / (R * (R - 2 * M) ** 3)
    form = display.collected(expr, {M: 0.1, R: 1.0})
    assert sp.cancel(form - expr) == 0
    shown = display.tex(form)
    assert r"\left(1 + l\right)" in shown and "l^{2}" not in shown and len(shown) < len(display.tex(expr))


def test_symbolic_time_limits_count_cpu_time():
    """A rewriting that runs past its limit gives the fallback (the exact, longer form); the limit counts the
    process's CPU time, so a busy machine does not change what a document shows."""
    import time

    from derive.geometry.checks import bounded

    def spin():
        while True:
            pass
    start = time.process_time()
    assert bounded(spin, "fallback", seconds=0.2) == "fallback"
    assert 0.15 <= time.process_time() - start < 2.0
    assert bounded(lambda: "done", "fallback", seconds=0.2) == "done"


def test_symbolic_time_limits_hold_off_the_main_thread():
    """In a worker thread (no signals there) the limit is kept by a trace function on the thread's CPU time: a
    rewriting that runs on gives the fallback; one that finishes gives its result."""
    import threading

    from derive.geometry.checks import bounded

    def spin():       # Python-level calls, as sympy's code makes them all the time
        while True:
            _step()

    def _step():
        return None
    out = {}

    def work():
        out["spun"] = bounded(spin, "fallback", seconds=0.2)
        out["done"] = bounded(lambda: sp.factor(sp.Symbol("x") ** 2 - 1), None, seconds=5.0)
    thread = threading.Thread(target=work, daemon=True)
    thread.start()
    thread.join(timeout=30)
    assert not thread.is_alive() and out["spun"] == "fallback"
    x = sp.Symbol("x")
    assert out["done"] == (x - 1) * (x + 1)
