"""The Derivation record: what each stage did, as labelled equations, rendered to a LaTeX document.

A stage appends :class:`Section` objects; each holds prose and :class:`Equation` objects (the LaTeX of a sympy
object, already laid out for the page by derive.report.display, plus a unique label).
:meth:`Derivation.to_latex` writes an ``article`` document with ``amsmath`` that pdflatex compiles;
:meth:`Derivation.body_latex` is the same text without the preamble, to ``\\input`` into a paper.
"""

from __future__ import annotations

import itertools
import re
import time
from dataclasses import dataclass, field

import sympy as sp

from derive.geometry.checks import bounded
from derive.report import display

_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
            "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}"}

CONVENTIONS = (r"\noindent Conventions: geometric units $G=c=\hbar=1$, signature $(-,+,+,+)$, "
               r"$\Gamma^a{}_{bc}=\tfrac12 g^{ad}(\partial_b g_{dc}+\partial_c g_{db}-\partial_d g_{bc})$, "
               r"$R^a{}_{bcd}=\partial_c\Gamma^a{}_{db}-\partial_d\Gamma^a{}_{cb}+\Gamma^a{}_{ce}\Gamma^e{}_{db}"
               r"-\Gamma^a{}_{de}\Gamma^e{}_{cb}$, $R_{bd}=R^a{}_{bad}$, $G_{ab}=8\pi T_{ab}$.")


def escape(text: str) -> str:
    """Escape plain text for LaTeX: the special characters printed as themselves, line breaks and other
    control characters as spaces (so spec text can end no comment or argument and start no command)."""
    return "".join(_SPECIAL.get(ch, " " if ch.isspace() or not ch.isprintable() else ch) for ch in str(text))


def latex_of(obj, variables=()) -> str:
    """LaTeX of a sympy object (or plain text for a string), sums ordered by the powers of ``variables``."""
    return display.tex(obj, variables)


@dataclass
class Equation:
    lhs: str          # LaTeX
    rhs: str          # LaTeX, on one line
    label: str
    relation: str = "="
    lines: list[str] = field(default_factory=list)   # the displayed right-hand side, one entry per line
    where: list[tuple[str, list[str]]] = field(default_factory=list)   # named quantities shown beside it
    omitted: str = ""  # why the right-hand side is not displayed (too long to read), if it is not
    entries: list["Equation"] = field(default_factory=list)   # a matrix too wide for a line, entry by entry
    note: str = ""     # LaTeX text set after it (what its symbols are, when they are not written as equations)

    @property
    def one_line(self) -> bool:
        return (not self.omitted and not self.where and not self.entries and not self.note
                and len(self.lines) <= 1)


@dataclass
class Section:
    title: str
    text: str = ""
    equations: list[Equation] = field(default_factory=list)
    subsections: list["Section"] = field(default_factory=list)
    block: bool = False   # short equations set two to a row in one aligned block


class Derivation:
    """An ordered record of sections; labels are made unique as equations are added.

    ``variables`` (the spacetime's coordinates) order the terms of every sum: the terms free of them first,
    then by their power, lowest magnitude first."""

    def __init__(self, title: str, variables=(), values=None):
        self.title = title
        self.variables = tuple(variables)
        self.values = dict(values or {})    # the parameters' values: display forms are checked there
        self.sections: list[Section] = []
        self._labels: set[str] = set()
        self._allowance = display.SIMPLIFY_SECONDS
        self._radicals: dict = {}   # square roots named in this document: base -> symbol

    def named_radicals(self) -> dict:
        """The square roots named so far (a copy): give it back to :meth:`forget_radicals_since` when equations
        built after it are not shown, so that the names stay without gaps."""
        return dict(self._radicals)

    def forget_radicals_since(self, snapshot: dict) -> None:
        self._radicals = dict(snapshot)

    def label(self, *parts) -> str:
        base = "eq:" + "-".join(re.sub(r"[^A-Za-z0-9]+", "", str(p)) or "x" for p in parts)
        label, k = base, 2
        while label in self._labels:
            label, k = f"{base}-{k}", k + 1
        self._labels.add(label)
        return label

    def equation(self, lhs, rhs, *label_parts, relation: str = "=") -> Equation:
        """An equation laid out for the page: broken at its sums, its square roots named when that is
        shorter, and not displayed (with a sentence saying so) when even that is too long to read."""
        lhs_tex = latex_of(lhs, self.variables)
        label = self.label(*label_parts)
        if isinstance(rhs, str) or not isinstance(rhs, (sp.Basic, sp.MatrixBase)):
            text = latex_of(rhs, self.variables)
            return Equation(lhs_tex, text, label, relation, [text])
        one_line = latex_of(rhs, self.variables)
        indent = display.width(lhs_tex) + display.width(relation) + 4.0
        if isinstance(rhs, sp.MatrixBase) and display.width(one_line) + indent > display.LINE_WIDTH_PT:
            return self._by_entry(lhs_tex, rhs, label, relation, one_line)
        rooted = self._bounded(lambda: display.one_root(rhs, self.values)) if self.values else None
        if rooted is not None and display.width(latex_of(rooted, self.variables)) < display.width(one_line):
            rhs, one_line = rooted, latex_of(rooted, self.variables)
        lines = display.display_lines(rhs, indent, self.variables)
        eq = Equation(lhs_tex, one_line, label, relation, lines)
        for rewrite in (display.factored, lambda e: display.collected(e, self.values)) if len(lines) > 1 else ():
            form = self._bounded(lambda rewrite=rewrite: rewrite(rhs))
            if form is not None:
                shorter = display.display_lines(form, indent, self.variables)
                if len(shorter) < len(eq.lines):
                    eq.lines = shorter
                    eq.rhs = latex_of(form, self.variables) if len(shorter) == 1 else one_line
        rewritings = (lambda registry: display.with_named_radicals(rhs, registry),
                      lambda registry: display.with_eliminated_root(rhs, registry, self.values))
        for rewrite in rewritings if len(eq.lines) > display.TRY_NAMES_LINES else ():
            registry = dict(self._radicals)      # names kept only if this form is shown (no gaps in S_k)
            form, names = self._bounded(lambda rewrite=rewrite, registry=registry: rewrite(registry)) or (rhs, [])
            if names:
                named = display.display_lines(form, indent, self.variables)
                where = [(latex_of(s), display.display_lines(v, 40.0, self.variables)) for s, v in names]
                if len(named) + sum(len(w) for _, w in where) < len(eq.lines):
                    eq.lines, eq.where = named, where
                    self._radicals = registry
        shown = [(line, indent) for line in eq.lines] + [(line, 40.0) for _, value in eq.where for line in value]
        unbreakable = any(display.width(line) + offset > display.OVERFULL_PT for line, offset in shown)
        if len(shown) > display.MAX_LINES or unbreakable:
            eq.lines, eq.where = [], []
            eq.omitted = (f"too long to display readably ({sp.count_ops(rhs)} operations as computed"
                          + ("" if unbreakable else f", {len(lines)} lines")
                          + "); derive geometry, junction and field print every result in full with --json")
        return eq

    def _by_entry(self, lhs_tex, matrix, label, relation, one_line) -> Equation:
        """A matrix too wide for a line: diagonal as diag(...) when that fits, else every nonzero entry."""
        eq = Equation(lhs_tex, one_line, label, relation)
        if matrix.is_square and matrix.is_diagonal():
            diagonal = r"\operatorname{diag}\left(" + ", ".join(latex_of(matrix[k, k], self.variables)
                                                            for k in range(matrix.rows)) + r"\right)"
            if display.width(lhs_tex + diagonal) <= display.LINE_WIDTH_PT:
                eq.rhs, eq.lines = diagonal, [diagonal]
                return eq
        base = lhs_tex if re.fullmatch(r"[A-Za-z]", lhs_tex) else rf"\left({lhs_tex}\right)"
        for i, j in itertools.product(range(matrix.rows), range(matrix.cols)):
            value = matrix[i, j]
            if value != 0 or not (matrix.is_square and matrix.is_diagonal()):
                sub = self.equation(f"{base}_{{{i + 1}{j + 1}}}", value, *label.removeprefix("eq:").split("-"),
                                    i + 1, j + 1, relation=relation)
                eq.entries.append(sub)
        return eq

    def _bounded(self, rewrite):
        """A display rewriting within the document's time allowance (a few seconds each, SIMPLIFY_SECONDS in
        all, of CPU time: the document does not depend on how busy the machine is), else None: the form as
        computed is exact, the rewriting only shortens it."""
        if self._allowance <= 0:
            return None
        start = time.process_time()
        try:
            return bounded(rewrite, None, seconds=min(display.REWRITE_SECONDS, self._allowance))
        finally:
            self._allowance -= time.process_time() - start

    def add(self, section: Section) -> Section:
        self.sections.append(section)
        return section

    def body_latex(self) -> str:
        """The sections as LaTeX to \\input into a document that loads amsmath and amssymb (the
        standalone document of :meth:`to_latex` is this body with a preamble)."""
        from derive import __version__
        from derive.outputs import LATEX_FIRST_LINE

        lines = [f"{LATEX_FIRST_LINE} {__version__} (the body of the derivation, to \\input; it needs amsmath "
                 "and amssymb)", CONVENTIONS, ""]
        for section in self.sections:
            lines += self._section(section, r"\section")
        return "\n".join(lines) + "\n"

    def to_latex(self) -> str:
        from derive import __version__
        from derive.outputs import LATEX_FIRST_LINE

        lines = [f"{LATEX_FIRST_LINE} {__version__}", r"\documentclass[10pt]{article}", r"\usepackage{amsmath,amssymb}",
                 r"\usepackage{graphicx}", r"\allowdisplaybreaks", r"\setlength{\textwidth}{6.5in}",
                 r"\setlength{\oddsidemargin}{0in}",
                 r"\setlength{\evensidemargin}{0in}", r"\sloppy",
                 r"\title{" + escape(self.title) + "}", r"\author{derive}", r"\date{}",
                 r"\begin{document}", r"\maketitle", self.body_latex().split("\n", 1)[1], r"\end{document}"]
        return "\n".join(lines) + "\n"

    def _section(self, section: Section, command: str) -> list[str]:
        out = [f"{command}{{{escape(section.title)}}}"]
        if section.text:
            out.append(section.text)
        pending: list[Equation] = []
        for eq in section.equations:
            if section.block and eq.one_line:
                pending.append(eq)
                continue
            out += _block(pending)
            pending = []
            out += _display(eq)
        out += _block(pending)
        for sub in section.subsections:
            out += self._section(sub, r"\subsection" if command == r"\section" else r"\subsubsection")
        out.append("")
        return out


def _display(eq: Equation) -> list[str]:
    if eq.entries:
        out = []
        for entry in eq.entries:
            out += _display(entry)
        return out
    if eq.omitted:
        return [rf"\noindent The right-hand side of ${eq.lhs}$ is {escape(eq.omitted)}.", ""]
    if eq.note:
        return _display(Equation(eq.lhs, eq.rhs, eq.label, eq.relation, eq.lines, eq.where)) + [eq.note, ""]
    if len(eq.lines) <= 1 and not eq.where:
        return [r"\begin{equation}", f"{eq.lhs} {eq.relation} {eq.rhs}", rf"\label{{{eq.label}}}",
                r"\end{equation}"]
    rows = [f"{eq.lhs} &{eq.relation} {eq.lines[0]}"] + [rf"&\quad {{}}{line.strip()}" for line in eq.lines[1:]]
    out = [r"\begin{align}"] + [row + r" \notag\\" for row in rows[:-1]] + [rows[-1] + rf" \label{{{eq.label}}}",
                                                                              r"\end{align}"]
    if eq.where:
        out.append(r"where")
        named = []
        for name, value in eq.where:
            named += [f"{name} &= {value[0]}"] + [rf"&\quad {{}}{line.strip()}" for line in value[1:]]
        out += [r"\begin{align*}", " \\\\\n".join(named), r"\end{align*}"]
    return out


def _block(equations: list[Equation]) -> list[str]:
    """Short equations in one aligned block, two to a row where both fit half the line."""
    if not equations:
        return []
    half = display.LINE_WIDTH_PT / 2 - 20.0
    rows, k = [], 0
    while k < len(equations):
        first = equations[k]
        pair = k + 1 < len(equations) and all(
            display.width(f"{e.lhs} {e.relation} {e.rhs}") <= half for e in equations[k:k + 2])
        row = f"{first.lhs} &{first.relation} {first.rhs}"
        if pair:
            second = equations[k + 1]
            row += f", & {second.lhs} &{second.relation} {second.rhs}"
        rows.append(row + rf" \label{{{first.label}}}")
        k += 2 if pair else 1
    if len(equations) == 1:
        return _display(equations[0])
    return [r"\begin{align}", " \\\\\n".join(rows), r"\end{align}"]
