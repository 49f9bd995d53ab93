"""The results section of `derive run`'s derivation: the numbers with their errors, and the figures.

Built from the run's summary (the same JSON as summary.json), so the document and the files agree.  Figures are
the PDF files the run wrote beside the document (``\\includegraphics`` by file name, at their natural size: one
journal column).
"""

from __future__ import annotations

import math

from derive.report.derivation import Derivation, Section, escape

FIGURES = (("spectrum.pdf", "spectrum"), ("response.pdf", "response"), ("correlations.pdf", "correlations"))


def with_error(value, error) -> str:
    """A value and its error in LaTeX math, in the concise notation: the error in units of the value's last
    digit, two significant digits (``5.64331529760(25)\times 10^{-1}`` is 0.564331529760 +- 0.000000000025).
    A missing value is a dash; a value without an error is given to six digits."""
    if value is None or not isinstance(value, (int, float)) or not math.isfinite(value):
        return "--"
    if error is None or not math.isfinite(error) or error < 0:
        return _scientific(value, 6)
    scale = abs(value) if value != 0 else error
    if scale == 0:
        return "0"
    exponent = math.floor(math.log10(scale))
    mantissa, spread = value / 10**exponent, error / 10**exponent
    decimals = 14 if spread == 0 else min(14, max(0, 1 - math.floor(math.log10(spread))))
    digits = round(spread * 10**decimals)
    body = f"{mantissa:.{decimals}f}({digits})" if digits else f"{mantissa:.{decimals}f}"
    return body if exponent == 0 else body + rf"\times 10^{{{exponent}}}"


def _scientific(value, digits=3) -> str:
    if value is None or not math.isfinite(value):
        return "--"
    if value == 0:
        return "0"
    exponent = math.floor(math.log10(abs(value)))
    mantissa = value / 10**exponent
    return f"{mantissa:.{digits - 1}f}" + (rf"\times 10^{{{exponent}}}" if exponent else "")


def results_section(derivation: Derivation, summary: dict, figures: list[str]) -> Section:
    """Append the results section: the response table (gap, F with its error, the relative difference from the
    reference with its error, the runs to tell them apart), the detector's set-up and locality, the spectrum's
    accuracy, the pairs of several detectors, then the figures the run wrote (``figures``: file names)."""
    tolerance = summary.get("tolerance")
    sec = derivation.add(Section("Results", f"Computed by derive at relative tolerance {escape(tolerance)}; every "
                                 "number is given with its error estimate."))
    response = summary.get("response")
    if response:
        sec.subsections.append(_response_section(response))
    spectrum = summary.get("spectrum")
    if spectrum:
        at = spectrum.get("at")
        where = f" at $r = {at:.6g}$" if isinstance(at, (int, float)) else ""
        worst = spectrum.get("largest_relative_error")
        text = (f"The spectral density{where} was computed at {spectrum.get('points')} frequencies; the largest "
                f"relative error is ${_scientific(worst, 2)}$." if worst is not None else
                f"The transmission was computed at {spectrum.get('points')} frequencies for each $l$.")
        sec.subsections.append(Section("Spectrum", text))
    correlations = summary.get("correlations")
    if correlations and correlations.get("pairs"):
        sec.subsections.append(_pairs_section(correlations))
    skipped = summary.get("skipped") or {}
    if skipped:
        sec.text += " Not computed: " + "; ".join(f"{escape(k)} ({escape(v)})" for k, v in skipped.items()) + "."
    shown = Section("Figures") if figures else None
    for name, stem in FIGURES:
        if name in figures:
            shown.text += ("\n\\begin{figure}[h]\\centering\\includegraphics{" + name + "}"
                         f"\\caption{{The {stem}, as written to {escape(stem)}.csv.}}\\end{{figure}}\n")
    if shown is not None:
        sec.subsections.append(shown)
    return sec


def _response_section(response: dict) -> Section:
    switching = response.get("switching") or {}
    shape = escape(switching.get("shape", ""))
    size = switching.get("width") or switching.get("duration")
    locality = response.get("locality") or {}
    local = locality.get("local")
    text = (f"A static detector at $r = {response.get('at', 0):.6g}$ in the {escape(response.get('state', ''))} "
            f"state, {shape} switching ({'width' if switching.get('width') else 'duration'} "
            f"${_scientific(size, 4) if isinstance(size, (int, float)) else escape(size)}$ in its proper time), "
            f"coupling $\\lambda = {response.get('coupling')}$. ")
    if locality:
        text += (f"Effective duration ${_scientific(locality.get('duration'), 4)}$ against a light round trip of "
                 f"${_scientific(locality.get('round_trip'), 4)}$: the measurement is "
                 f"{'local' if local else 'not local'}. ")
    reference = response.get("reference") or {}
    rows = []
    runs = response.get("trials_to_distinguish") or []
    bounds = response.get("trials_lower_bound") or []
    differences = response.get("relative_difference") or []
    difference_errors = response.get("relative_difference_error") or []
    for k, gap in enumerate(response.get("gaps", [])):
        row = [f"${gap:g}$", f"${with_error(response['response'][k], response['error'][k])}$"]
        if reference:
            row.append(f"${with_error(differences[k], difference_errors[k])}$" if k < len(differences) else "--")
            run = runs[k] if k < len(runs) else None
            bound = bounds[k] if k < len(bounds) else None
            row.append(f"${_scientific(run, 3)}$" if run is not None else
                       (f"$\\ge {_scientific(bound, 2)}$" if bound is not None else "--"))
        rows.append(" & ".join(row) + r" \\")
    header = [r"$\Omega$", r"$F(\Omega)$"]
    if reference:
        header += [r"$(F - F_{\rm ref})/F_{\rm ref}$", f"runs at ${response.get('sigmas', 5):g}\\sigma$"]
        named = str(reference.get("with", ""))
        named = named.capitalize() if named == "minkowski" else named
        text += (f"The reference is {escape(named)}; the runs are those needed to tell the two apart at the "
                 "spec's coupling. ")
    table = ("\\begin{center}\\small\\begin{tabular}{" + "r" * len(header) + "}\n" + " & ".join(header) + r" \\"
             + "\n\\hline\n" + "\n".join(rows) + "\n\\end{tabular}\\end{center}")
    return Section("Detector response", text + "\n" + table)


def _pairs_section(correlations: dict) -> Section:
    rows = []
    for pair in correlations["pairs"]:
        a, b = pair["between"]
        rows.append(f"{escape(a)} & {escape(b)} & ${_scientific(pair.get('concurrence'), 3)}$ & "
                    f"${_scientific(pair.get('negativity'), 3)}$ & ${_scientific(pair.get('mutual_information'), 3)}$"
                    + r" \\")
    table = ("\\begin{center}\\small\\begin{tabular}{llrrr}\nA & B & concurrence & negativity & mutual information"
             + r" \\" + "\n\\hline\n" + "\n".join(rows) + "\n\\end{tabular}\\end{center}")
    return Section("Pairs of detectors", "Every pair's joint state at second order in the coupling.\n" + table)
