"""LaTeX of the geometry stage: metric, Christoffel symbols, Riemann, Ricci, Einstein, invariants, T_ab."""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile

import sympy as sp

from derive.report.derivation import Derivation, Section, escape, latex_of


def _name(c) -> str:
    return latex_of(c)


def line_element_latex(metric: sp.Matrix, coordinates) -> str:
    """ds^2 = g_ab dx^a dx^b as LaTeX, one term per component pair."""
    terms = []
    n = len(coordinates)
    for a in range(n):
        for b in range(a, n):
            g = metric[a, b]
            if g == 0:
                continue
            coefficient = g if a == b else 2 * g
            differential = (rf"d{_name(coordinates[a])}^2" if a == b
                            else rf"d{_name(coordinates[a])}\,d{_name(coordinates[b])}")
            terms.append((coefficient, differential))
    out = []
    for i, (coefficient, differential) in enumerate(terms):
        if coefficient == 1:
            text = differential
        elif coefficient == -1:
            text = "-" + differential
        else:
            body = latex_of(coefficient, coordinates)
            if isinstance(coefficient, sp.Add):
                body = rf"\left({body}\right)"
            text = rf"{body}\,{differential}"
        if i and not text.startswith("-"):
            text = "+ " + text
        out.append(text)
    return " ".join(out) if out else "0"


def geometry_sections(derivation: Derivation, spacetime, regions=None) -> None:
    """Append the definitions and, per region, the geometry section."""
    if spacetime.definitions:
        sec = derivation.add(Section("Definitions", "Abbreviations used in the line elements; "
                                     "they are substituted before anything is computed."))
        for symbol, value in spacetime.definitions.items():
            sec.equations.append(derivation.equation(symbol, value, "def", symbol))
    if spacetime.parameters:
        items = ", ".join(f"${latex_of(p.symbol)} = {p.value:g}$" if p.value is not None
                          else f"${latex_of(p.symbol)}$" for p in spacetime.parameters.values())
        derivation.add(Section("Parameters", "Values used for numerics: " + items + "."))
    for name in regions or spacetime.regions:
        region_section(derivation, spacetime, spacetime.geometry[name])


def region_section(derivation: Derivation, spacetime, geo) -> Section:
    coords = geo.coordinates
    where = f" where ${latex_of(geo.region.where)}$" if geo.region.where is not None else ""
    sec = derivation.add(Section(f"Region {geo.name}", f"Coordinates $({', '.join(_name(c) for c in coords)})$"
                                 f"{where}."))
    metric = Section("Metric")
    metric.equations.append(derivation.equation("ds^2", line_element_latex(geo.metric_display, coords),
                                                geo.name, "metric"))
    if spacetime.definitions and geo.metric_display != geo.metric:
        metric.equations.append(derivation.equation("ds^2", line_element_latex(geo.metric, coords),
                                                    geo.name, "metric", "substituted"))
    sec.subsections.append(metric)

    chris = Section("Christoffel symbols", block=True, text="Nonzero components with $b \\le c$ "
                    "($\\Gamma^a{}_{cb} = \\Gamma^a{}_{bc}$).")
    for (a, b, c), value in geo.christoffel.items():
        lhs = rf"\Gamma^{{{_name(coords[a])}}}{{}}_{{{_name(coords[b])}{_name(coords[c])}}}"
        chris.equations.append(derivation.equation(lhs, value, geo.name, "Gamma", coords[a], coords[b], coords[c]))
    if not geo.christoffel:
        chris.text += " All vanish."
    sec.subsections.append(chris)

    riem = Section("Riemann tensor", block=True, text="Independent nonzero components $R_{abcd}$ with $a<b$, $c<d$, "
                   "$(a,b)\\le(c,d)$; the rest follow from the symmetries.")
    for (a, b, c, d), value in geo.riemann.items():
        lhs = "R_{" + "".join(_name(coords[i]) + " " for i in (a, b, c, d)).strip() + "}"
        riem.equations.append(derivation.equation(lhs, value, geo.name, "Riemann", *(coords[i] for i in (a, b, c, d))))
    if not geo.riemann:
        riem.text += " All vanish: the region is flat."
    sec.subsections.append(riem)

    ricci = Section("Ricci tensor and scalar", block=True)
    n = geo.dimension
    zero = True
    for a in range(n):
        for b in range(a, n):
            if geo.ricci[a, b] != 0:
                zero = False
                ricci.equations.append(derivation.equation(rf"R_{{{_name(coords[a])}{_name(coords[b])}}}",
                                                           geo.ricci[a, b], geo.name, "Ricci", coords[a], coords[b]))
    if zero:
        ricci.text = "All components of the Ricci tensor vanish."
    ricci.equations.append(derivation.equation("R", geo.ricci_scalar, geo.name, "Ricci", "scalar"))
    sec.subsections.append(ricci)

    einstein = Section("Einstein tensor and stress-energy", block=True, text="Mixed components $G^a{}_b$ and "
                       "$T^a{}_b = G^a{}_b/(8\\pi)$.")
    for a in range(n):
        for b in range(n):
            if geo.einstein[a, b] != 0:
                einstein.equations.append(derivation.equation(
                    rf"G^{{{_name(coords[a])}}}{{}}_{{{_name(coords[b])}}}", geo.einstein[a, b], geo.name,
                    "Einstein", coords[a], coords[b]))
    stress = geo.stress_energy
    if stress["energy_density"] is not None:
        einstein.equations.append(derivation.equation(r"\rho = -T^{t}{}_{t}", stress["energy_density"],
                                                      geo.name, "rho"))
        for cname, p in stress["pressures"].items():
            einstein.equations.append(derivation.equation(rf"p_{{{latex_of(sp.Symbol(cname))}}}", p,
                                                          geo.name, "pressure", cname))
        conditions = geo.energy_conditions
        einstein.text += " Energy conditions: " + "; ".join(
            f"{escape(k)}: {escape(v['verdict'])} ({escape(v['how'])})" for k, v in conditions.items()) + "."
    sec.subsections.append(einstein)

    inv = Section("Invariants", block=True)
    inv.equations.append(derivation.equation(r"R_{abcd}R^{abcd}", geo.kretschmann, geo.name, "Kretschmann"))
    inv.equations.append(derivation.equation(r"R_{ab}R^{ab}", geo.ricci_squared, geo.name, "Riccisquared"))
    if n >= 4:
        inv.equations.append(derivation.equation(r"C_{abcd}C^{abcd}", geo.weyl_squared, geo.name, "Weylsquared"))
    sec.subsections.append(inv)
    return sec


def region_summary_latex(geo) -> str:
    """A short LaTeX summary for notebooks."""
    return (r"$\displaystyle ds^2 = " + line_element_latex(geo.metric_display, geo.coordinates)
            + r",\quad R = " + latex_of(geo.ricci_scalar)
            + r",\quad R_{abcd}R^{abcd} = " + latex_of(geo.kretschmann) + "$")


def compile_pdf(tex: str, timeout: float = 120.0, files=(), passes: int = 2) -> tuple[bool, str, bytes | None]:
    """Compile LaTeX text with pdflatex in a temporary folder (``files``: paths copied there first, the figures
    the document includes; ``passes``: pdflatex runs, two for references, one is enough to read the log).

    Returns (ok, log, pdf bytes or None): the whole log of the last pass when it compiled (overfull boxes are
    reported there), its tail when it failed; (False, reason, None) when pdflatex is not installed.
    """
    engine = shutil.which("pdflatex")
    if engine is None:
        return False, "pdflatex not found", None
    with tempfile.TemporaryDirectory() as tmp:
        for source in files:
            shutil.copyfile(source, os.path.join(tmp, os.path.basename(source)))
        path = os.path.join(tmp, "derivation.tex")
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(tex)
        log = ""
        for _ in range(passes):   # twice by default, for references
            proc = subprocess.run([engine, "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape",
                                   "derivation.tex"], cwd=tmp, capture_output=True, timeout=timeout,
                                  stdin=subprocess.DEVNULL)
            log = proc.stdout.decode("utf-8", "replace")
            if proc.returncode != 0:
                return False, log[-3000:], None
        with open(os.path.join(tmp, "derivation.pdf"), "rb") as handle:
            return True, log, handle.read()


def junction_sections(derivation: Derivation, spacetime) -> None:
    """A section per interface: induced metrics, normal, K_ab on each side, the jump, S_ab, sigma and p."""
    for shell in spacetime.shells:
        first, second = shell.interface.between
        ys = shell.tangential
        sec = derivation.add(Section(
            f"Interface {first} | {second}",
            f"The hypersurface ${latex_of(shell.coordinate)} = {latex_of(shell.position)}$ with intrinsic "
            f"coordinates $({', '.join(_name(y) for y in ys)})$. The unit normal points from region "
            f"{escape(first)} to region {escape(second)}; $[X] = X_{{\\rm {escape(second)}}} - "
            f"X_{{\\rm {escape(first)}}}$."))
        induced = Section("First junction condition", "Induced metric from each side:")
        for side in (first, second):
            induced.equations.append(derivation.equation(
                rf"h^{{\rm ({escape(side)})}}_{{ij}}", shell.induced_metric_of(side, solved=False), first, second,
                "h", side))
        for unknown, value in shell.solved.items():
            induced.equations.append(derivation.equation(unknown, value, first, second, "solved", unknown))
        if not shell.solved:
            induced.text += " They agree as they stand."
        sec.subsections.append(induced)
        second_sec = Section("Second junction condition",
                             r"$K_{ij} = -\Gamma^{x}{}_{ij}\, n_x$ on each side, "
                             r"$S^i{}_j = -\frac{1}{8\pi}\left([K^i{}_j] - [K]\,\delta^i{}_j\right)$.")
        k = shell.extrinsic_curvature
        n_cov = shell.normal_covector(second)[shell.index]
        second_sec.equations.append(derivation.equation(rf"n_{{{_name(shell.coordinate)}}}", n_cov, first, second,
                                                        "normal"))
        second_sec.equations.append(derivation.equation(rf"K^i{{}}_j\big|_{{\rm {escape(first)}}}", k["minus"],
                                                        first, second, "K", first))
        second_sec.equations.append(derivation.equation(rf"K^i{{}}_j\big|_{{\rm {escape(second)}}}", k["plus"],
                                                        first, second, "K", second))
        second_sec.equations.append(derivation.equation(r"[K^i{}_j]", k["jump"], first, second, "Kjump"))
        second_sec.equations.append(derivation.equation(r"[K]", k["trace_jump"], first, second, "Ktrace"))
        second_sec.equations.append(derivation.equation(r"S^i{}_j", shell.surface_stress, first, second, "S"))
        if shell.surface_energy_density is not None:
            second_sec.equations.append(derivation.equation(r"\sigma = -S^{t}{}_{t}", shell.surface_energy_density,
                                                            first, second, "sigma"))
            second_sec.equations.append(derivation.equation("p", shell.surface_pressure, first, second, "p"))
        if shell.proper_mass is not None:
            second_sec.equations.append(derivation.equation(r"m = 4\pi R^2 \sigma", shell.proper_mass, first,
                                                            second, "m"))
        second_sec.equations.append(derivation.equation(r"R \supset c\,\delta(\ell),\quad c = -2[K]",
                                                        shell.ricci_delta, first, second, "Rdelta"))
        conditions = shell.energy_conditions
        second_sec.text += " Energy conditions on the shell: " + "; ".join(
            f"{escape(name)}: {escape(v['verdict'])} ({escape(v['how'])})" for name, v in conditions.items()) + "."
        sec.subsections.append(second_sec)


def _tortoise_through_roots(derivation: Derivation, named, name, region):
    """r_* through the named roots of 1/F's denominator (the horizons among them): the roots written out where
    each fits a line, else as the roots of their polynomial with their values at the spec's parameters."""
    from derive.report import display

    form, roots, polynomial = named
    eq = derivation.equation(r"r_*", form, "field", name, "tortoise")
    shown = {symbol: display.merged_roots(root, derivation.values) for symbol, root in roots.items()}
    lines = {symbol: display.display_lines(value, 40.0, derivation.variables) for symbol, value in shown.items()}
    if all(len(v) == 1 and display.width(v[0]) <= display.LINE_WIDTH_PT / 2 for v in lines.values()):
        eq.where = [(latex_of(symbol), lines[symbol]) for symbol in roots]
        # a root that is one of the region's horizons: said, under the name the ends use
        same = []
        for symbol, root in roots.items():
            value = complex(sp.N(root.subs(derivation.values), 20))
            for horizon in region.horizons:
                if horizon.symbol != symbol and abs(value - horizon.value) <= 1e-12 * abs(horizon.value):
                    kind = escape(horizon.kind.replace(" ", "-"))
                    same.append(rf"${latex_of(symbol)} = {latex_of(horizon.symbol)}$, the {kind} horizon at the "
                                f"{horizon.side} end")
        if same:
            eq.note = r"\noindent Here " + "; ".join(same) + "."
    else:
        symbols = list(roots)
        ordered = " > ".join(latex_of(s) for s in symbols) if all(
            abs(complex(sp.N(v.subs(derivation.values))).imag) < 1e-12 for v in roots.values()) else ", ".join(
            latex_of(s) for s in symbols)
        approx = ", ".join(f"{latex_of(s)} \\approx {complex(sp.N(v.subs(derivation.values), 15)).real:.10g}"
                           for s, v in roots.items())
        eq.note = (rf"\noindent where ${ordered}$ are the roots of ${latex_of(polynomial, derivation.variables)} = 0$ "
                   rf"(at the spec's values ${approx}$); derive field --json gives them in closed form.")
    return eq


RECURSION_LINES = 6   # the longest P_j or Q_j for which the recursion is shown instead of a long a_k


def _recursion(derivation: Derivation, end, name, side, missing) -> list | None:
    """The series' coefficients through the recursion and the Taylor coefficients of the radial equation, for
    the a_k too long to show as one expression: a paper's way of giving them."""
    names = derivation.named_radicals()    # restored if the recursion is not shown (no gaps in the names)
    variable = "r" if end["kind"] == "regular centre" else (r"r_{h} - r" if side == "upper" else r"r - r_{h}")
    which = ", ".join(f"$a_{k}$" for k in missing)
    recursion = derivation.equation(
        "a_k", r"-\frac{\sum_{j=1}^{k} a_{k-j} \left[P_j (s + k - j) + Q_j\right]}"
               r"{(s + k)(s + k - 1) + P_0 (s + k) + Q_0}", "field", name, side, "recursion")
    recursion.note = (rf"\noindent gives {which} (too long to show as one expression), with $x = {variable}$, "
                      r"$u = x^s \sum_k a_k x^k$, $a_0 = 1$, and $x\,p = \sum_j P_j x^j$, "
                      r"$x^2 q = \sum_j Q_j x^j$ the Taylor coefficients of the radial equation "
                      r"$u'' + p\,u' + q\,u = 0$ in $r$ ($p = (F^2)'/(2F^2)$, $q = (\omega^2 - V)/F^2$):")
    out = [recursion]
    for letter in ("P", "Q"):
        for j, value in enumerate(end["recursion"][letter]):
            out.append(derivation.equation(f"{letter}_{j}", value, "field", name, side, letter, j))
    # worth it only when every coefficient reads in a few lines (else the omission note stands)
    if any(eq.omitted or len(eq.lines) + sum(len(w) for _, w in eq.where) > RECURSION_LINES for eq in out[1:]):
        derivation.forget_radicals_since(names)
        return None
    return out


def field_sections(derivation: Derivation, spacetime) -> None:
    """The field: separation, radial equation, potential, tortoise coordinate, ends, matching."""
    problem = spacetime.field_problem
    field = spacetime.field
    sec = derivation.add(Section(
        "The scalar field",
        rf"$(\Box - \mu^2 - \xi R)\phi = 0$ with $\mu = {latex_of(field.mass)}$, $\xi = {latex_of(field.coupling)}$. "
        r"Separation $\phi = e^{-i\omega t}\, Y(\text{angles})\, r^{-n/2} u(r)$ with $\Delta_\Sigma Y = -\lambda Y$; "
        r"tortoise coordinate $dr_*/dr = 1/F$, $F = \sqrt{f h}$; Schr\"odinger form "
        r"$d^2u/dr_*^2 + (\omega^2 - V)u = 0$; Klein-Gordon inner product "
        r"$(\omega+\omega')\int u_\omega u_{\omega'}\, dr_*$."))
    for name, region in problem.regions.items():
        sub = Section(f"Region {name}")
        sub.equations.append(derivation.equation("f", region.f, "field", name, "f"))
        sub.equations.append(derivation.equation("h", region.h, "field", name, "h"))
        sub.equations.append(derivation.equation(r"\lambda", region.eigenvalue, "field", name, "lambda"))
        sub.equations.append(derivation.equation("0", region.radial_equation, "field", name, "radial"))
        sub.equations.append(derivation.equation(r"\frac{dr_*}{dr}", region.dtortoise_dr, "field", name, "dtortoise"))
        named = region.tortoise_through_roots
        if named is not None:
            sub.equations.append(_tortoise_through_roots(derivation, named, name, region))
        elif region.tortoise is not None:
            sub.equations.append(derivation.equation(r"r_*", region.tortoise, "field", name, "tortoise"))
        else:
            sub.text += r"$r_*$ has no closed form here; it is computed by quadrature. "
        sub.equations.append(derivation.equation(r"V(r;\omega,l)", region.potential, "field", name, "potential"))
        for side, end in region.ends.items():
            text = f"{side.capitalize()} end: {escape(end['kind'])}"
            if end["kind"] == "interface":
                text += f" with region {escape(end['region'])}"
            if end["kind"] == "horizon":
                text += (f" ({escape(end['horizon'])}) at the root ${latex_of(end['at'])}"
                         + (f" = {latex_of(end['radius'])}" if end["radius"] != end["at"]
                            and not sp.S(end["radius"]).is_Float else "")
                         + f" \\approx {end['value']:.10g}$ of $f$")
            if end.get("tail"):
                text += f", {escape(end['tail'])} tail ({escape(end.get('behaviour', ''))})"
            sub.text += text + ". "
            if "exponents" in end:
                sub.equations.append(derivation.equation(
                    r"s", latex_of(end["exponents"][0]) + r",\ " + latex_of(end["exponents"][1]),
                    "field", name, side, "exponents"))
            if "surface_gravity" in end:
                sub.equations.append(derivation.equation(r"\kappa", end["surface_gravity"], "field", name, "kappa"))
            series = end.get("series") or end.get("series_ingoing") or end.get("series_outgoing")
            if series:
                shown = [derivation.equation(f"a_{k}", coefficient, "field", name, side, "a", k)
                         for k, coefficient in enumerate(series[1:], start=1)]
                missing = [k for k, eq in enumerate(shown, start=1) if eq.omitted]
                through = _recursion(derivation, end, name, side, missing) if missing and end.get("recursion") else None
                if through is not None:
                    sub.equations += [eq for eq in shown if not eq.omitted] + through
                else:
                    sub.equations += shown
            if end.get("tail") and end["tail"] not in ("AdS-like", "growing", "unknown"):
                radius = region.r
                leading = sp.S(end["V_infinity"]) + sp.S(end["coulomb"]) / radius + sp.S(end["centrifugal"]) / radius**2
                shown = latex_of(leading, (radius,)) if leading != 0 else ""
                sub.equations.append(derivation.equation(
                    r"V", (shown + " + " if shown else "") + rf"O({latex_of(radius)}^{{-3}})", "field", name, "tail",
                    relation=r"\sim"))
        sec.subsections.append(sub)
    for matching in problem.interfaces:
        first, second = matching.between
        sub = Section(f"Modes across {first} | {second}",
                      r"From the weak form of the field equation: $\psi$ is continuous and "
                      r"$[d\psi/d\ell] = -2\xi[K]\psi$. On the column $(u, du/dr_*)$ from region "
                      f"{escape(first)} to region {escape(second)}:")
        named, quantities = matching.named_transfer_matrix
        sub.text = sub.text.rstrip(":") + (
            f", written with $F = \\sqrt{{f h}}$ on each side at the shell (1: region {escape(first)}, 2: region "
            f"{escape(second)}), the lapse $N = \\sqrt{{f}}$ there (the same on both sides) and the jump $[K]$ of "
            "the junction conditions, then with these substituted:")
        sub.equations.append(derivation.equation("T", named, "field", first, second, "T", "named"))
        for symbol, value in quantities.items():
            sub.equations.append(derivation.equation(symbol, value, "field", first, second, "def", symbol))
        sub.equations.append(derivation.equation("T", matching.transfer_matrix, "field", first, second, "T"))
        sec.subsections.append(sub)
