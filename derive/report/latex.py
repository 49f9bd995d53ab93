"""LaTeX of the geometry stage: metric, Christoffel symbols, Riemann, Ricci, Einstein, invariants, T_ab."""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile

import sympy as sp

from derive.report.derivation import Derivation, Section, escape, latex_of


def _name(c) -> str:
    return sp.latex(c)


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
            body = sp.latex(coefficient)
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
        items = ", ".join(f"${sp.latex(p.symbol)} = {p.value:g}$" if p.value is not None
                          else f"${sp.latex(p.symbol)}$" for p in spacetime.parameters.values())
        derivation.add(Section("Parameters", "Values used for numerics: " + items + "."))
    for name in regions or spacetime.regions:
        region_section(derivation, spacetime, spacetime.geometry[name])


def region_section(derivation: Derivation, spacetime, geo) -> Section:
    coords = geo.coordinates
    where = f" where ${sp.latex(geo.region.where)}$" if geo.region.where is not None else ""
    sec = derivation.add(Section(f"Region {geo.name}", f"Coordinates $({', '.join(_name(c) for c in coords)})$"
                                 f"{where}."))
    metric = Section("Metric")
    metric.equations.append(derivation.equation("ds^2", line_element_latex(geo.metric_display, coords),
                                                geo.name, "metric"))
    if spacetime.definitions and geo.metric_display != geo.metric:
        metric.equations.append(derivation.equation("ds^2", line_element_latex(geo.metric, coords),
                                                    geo.name, "metric", "substituted"))
    sec.subsections.append(metric)

    chris = Section("Christoffel symbols", "Nonzero components with $b \\le c$ "
                    "($\\Gamma^a{}_{cb} = \\Gamma^a{}_{bc}$).")
    for (a, b, c), value in geo.christoffel.items():
        lhs = rf"\Gamma^{{{_name(coords[a])}}}{{}}_{{{_name(coords[b])}{_name(coords[c])}}}"
        chris.equations.append(derivation.equation(lhs, value, geo.name, "Gamma", coords[a], coords[b], coords[c]))
    if not geo.christoffel:
        chris.text += " All vanish."
    sec.subsections.append(chris)

    riem = Section("Riemann tensor", "Independent nonzero components $R_{abcd}$ with $a<b$, $c<d$, "
                   "$(a,b)\\le(c,d)$; the rest follow from the symmetries.")
    for (a, b, c, d), value in geo.riemann.items():
        lhs = "R_{" + "".join(_name(coords[i]) + " " for i in (a, b, c, d)).strip() + "}"
        riem.equations.append(derivation.equation(lhs, value, geo.name, "Riemann", *(coords[i] for i in (a, b, c, d))))
    if not geo.riemann:
        riem.text += " All vanish: the region is flat."
    sec.subsections.append(riem)

    ricci = Section("Ricci tensor and scalar")
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

    einstein = Section("Einstein tensor and stress-energy", "Mixed components $G^a{}_b$ and "
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
            einstein.equations.append(derivation.equation(rf"p_{{{sp.latex(sp.Symbol(cname))}}}", p,
                                                          geo.name, "pressure", cname))
        conditions = geo.energy_conditions
        einstein.text += " Energy conditions: " + "; ".join(
            f"{escape(k)}: {escape(v['verdict'])} ({escape(v['how'])})" for k, v in conditions.items()) + "."
    sec.subsections.append(einstein)

    inv = Section("Invariants")
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


def compile_pdf(tex: str, timeout: float = 120.0) -> tuple[bool, str, bytes | None]:
    """Compile LaTeX text with pdflatex in a temporary folder.

    Returns (ok, log tail, pdf bytes or None).  (False, reason, None) when pdflatex is not installed.
    """
    engine = shutil.which("pdflatex")
    if engine is None:
        return False, "pdflatex not found", None
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "derivation.tex")
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(tex)
        log = ""
        for _ in range(2):   # twice, for references
            proc = subprocess.run([engine, "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape",
                                   "derivation.tex"], cwd=tmp, capture_output=True, timeout=timeout,
                                  stdin=subprocess.DEVNULL)
            log = proc.stdout.decode("utf-8", "replace")
            if proc.returncode != 0:
                return False, log[-3000:], None
        with open(os.path.join(tmp, "derivation.pdf"), "rb") as handle:
            return True, log[-500:], handle.read()
