"""The Derivation record: what each stage did, as labelled equations, rendered to a LaTeX document.

A stage appends :class:`Section` objects; each holds prose and :class:`Equation` objects (LaTeX of a sympy
object plus a unique label).  :meth:`Derivation.to_latex` writes an ``article`` document with ``amsmath``
that pdflatex compiles.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import sympy as sp

_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
            "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}"}


def escape(text: str) -> str:
    """Escape plain text for LaTeX: the special characters printed as themselves, line breaks and other
    control characters as spaces (so spec text can end no comment or argument and start no command)."""
    return "".join(_SPECIAL.get(ch, " " if ch.isspace() or not ch.isprintable() else ch) for ch in str(text))


def latex_of(obj) -> str:
    """LaTeX of a sympy object (or plain text for a string)."""
    if isinstance(obj, str):
        return obj
    return sp.latex(obj, long_frac_ratio=3)


@dataclass
class Equation:
    lhs: str          # LaTeX
    rhs: str          # LaTeX
    label: str
    relation: str = "="


@dataclass
class Section:
    title: str
    text: str = ""
    equations: list[Equation] = field(default_factory=list)
    subsections: list["Section"] = field(default_factory=list)


class Derivation:
    """An ordered record of sections; labels are made unique as equations are added."""

    def __init__(self, title: str):
        self.title = title
        self.sections: list[Section] = []
        self._labels: set[str] = set()

    def label(self, *parts) -> str:
        base = "eq:" + "-".join(re.sub(r"[^A-Za-z0-9]+", "", str(p)) or "x" for p in parts)
        label, k = base, 2
        while label in self._labels:
            label, k = f"{base}-{k}", k + 1
        self._labels.add(label)
        return label

    def equation(self, lhs, rhs, *label_parts, relation: str = "=") -> Equation:
        return Equation(latex_of(lhs), latex_of(rhs), self.label(*label_parts), relation)

    def add(self, section: Section) -> Section:
        self.sections.append(section)
        return section

    def to_latex(self) -> str:
        from derive import __version__
        from derive.outputs import LATEX_FIRST_LINE

        lines = [f"{LATEX_FIRST_LINE} {__version__}", r"\documentclass[10pt]{article}", r"\usepackage{amsmath,amssymb}",
                 r"\allowdisplaybreaks", r"\setlength{\textwidth}{6.5in}", r"\setlength{\oddsidemargin}{0in}",
                 r"\setlength{\evensidemargin}{0in}", r"\sloppy",
                 r"\title{" + escape(self.title) + "}", r"\author{derive}", r"\date{}",
                 r"\begin{document}", r"\maketitle",
                 r"\noindent Conventions: geometric units $G=c=\hbar=1$, signature $(-,+,+,+)$, "
                 r"$\Gamma^a{}_{bc}=\tfrac12 g^{ad}(\partial_b g_{dc}+\partial_c g_{db}-\partial_d g_{bc})$, "
                 r"$R^a{}_{bcd}=\partial_c\Gamma^a{}_{db}-\partial_d\Gamma^a{}_{cb}+\Gamma^a{}_{ce}\Gamma^e{}_{db}"
                 r"-\Gamma^a{}_{de}\Gamma^e{}_{cb}$, $R_{bd}=R^a{}_{bad}$, $G_{ab}=8\pi T_{ab}$.", ""]
        for section in self.sections:
            lines += self._section(section, r"\section")
        lines.append(r"\end{document}")
        return "\n".join(lines) + "\n"

    def _section(self, section: Section, command: str) -> list[str]:
        out = [f"{command}{{{escape(section.title)}}}"]
        if section.text:
            out.append(section.text)
        for eq in section.equations:
            out += [r"\begin{equation}", f"{eq.lhs} {eq.relation} {eq.rhs}", rf"\label{{{eq.label}}}",
                    r"\end{equation}"]
        for sub in section.subsections:
            out += self._section(sub, r"\subsection" if command == r"\section" else r"\subsubsection")
        out.append("")
        return out
