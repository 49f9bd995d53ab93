"""`derive run`: the whole job for one spec, written atomically into one folder.

DIR receives derivation.tex (and derivation.pdf where pdflatex is found), kernels/ with verification.json,
spectrum and response tables (CSV) and plots (PNG and PDF), summary.json (key results, each with its error) and
provenance.json (spec hash, versions, tolerances, timings).  Everything is written into a staging folder beside
DIR and moved into place at the end: a run that fails or is interrupted leaves an earlier DIR as it was.
Stages the solver cannot do yet for this spacetime are refused with the reason recorded in summary.json ("refused",
and "status": "refused"); the rest is still written, and the run then exits 2 naming them.
"""

from __future__ import annotations

import json
import os
import platform
import shutil
import sys
import time
from importlib import metadata

import numpy as np
import sympy as sp

from derive.results import plain

from derive import __version__

SPECTRUM_GRID = (0.02, 20.0, 200)   # omega in units of 1/length scale


def _versions() -> dict:
    out = {"derive": __version__, "python": platform.python_version()}
    for name in ("sympy", "mpmath", "numpy", "scipy", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


def _number(expr, values):
    value = sp.S(expr).subs(values)
    return float(sp.N(value, 17)) if value.is_number and value.is_real else str(expr)


def run(spacetime, out: str, tolerance: float = 1e-10, progress=print, l_progress=None) -> dict:
    """Write everything for ``spacetime`` into the folder ``out``; returns the summary.

    A value that misses the tolerance does not lose the run: everything reached is written, each value with its
    error, summary.json says ``"status": "tolerance not met"`` with what was missed, and then AccuracyError
    (exit 1) names a tolerance that would pass."""
    from derive.codegen.export import export
    from derive.report.derivation import Derivation
    from derive.outputs import check_output_folder, replace_folder, staging_folder, write_atomic
    from derive.report.latex import compile_pdf, field_sections, geometry_sections, junction_sections
    from derive.report.results_tex import FIGURES, results_section

    out = check_output_folder(out)
    staging = staging_folder(out, "run")
    timings, summary = {}, {"spec": spacetime.path, "title": spacetime.title, "skipped": {}}
    values = spacetime.parameter_values
    try:
        start = time.perf_counter()
        progress("geometry ...")
        derivation = Derivation(spacetime.title, spacetime.coordinates, spacetime.parameter_values)
        geometry_sections(derivation, spacetime)
        summary["regions"] = {name: {"ricci_scalar": str(geo.ricci_scalar), "kretschmann": str(geo.kretschmann),
                                     "energy_conditions": geo.energy_conditions}
                              for name, geo in spacetime.geometry.items()}
        timings["geometry"] = time.perf_counter() - start
        if spacetime.interfaces:
            start = time.perf_counter()
            progress("junction conditions ...")
            junction_sections(derivation, spacetime)
            summary["interfaces"] = [{
                "between": list(shell.interface.between), "at": shell.interface.text,
                "solved": {str(k): str(v) for k, v in shell.solved.items()},
                "surface_energy_density": _number(shell.surface_energy_density, values),
                "surface_pressure": _number(shell.surface_pressure, values),
                "error": {"surface_energy_density": 0.0, "surface_pressure": 0.0},
                "exact": "closed forms evaluated at the spec's values in double precision"}
                for shell in spacetime.shells]
            timings["junction"] = time.perf_counter() - start
        kernels = None
        if spacetime.field is not None:
            start = time.perf_counter()
            progress("field equations ...")
            field_sections(derivation, spacetime)
            timings["field"] = time.perf_counter() - start
            start = time.perf_counter()
            progress("kernels (generated and verified) ...")
            kernels = spacetime.kernels
            document = export(kernels, os.path.join(staging, "kernels"))
            summary["kernels"] = {k["name"]: {"status": k["status"], "max_relative_error": k["max_relative_error"]}
                                  for k in document["kernels"]}
            timings["kernels"] = time.perf_counter() - start
        if kernels is not None:
            _numerics(spacetime, staging, tolerance, summary, timings, progress, l_progress)
        summary["status"] = ("refused" if summary.get("refused") else
                             "tolerance not met" if summary.get("shortfalls") else "ok")
        summary["tolerance"] = tolerance
        start = time.perf_counter()
        figures = [name for name, _ in FIGURES if os.path.isfile(os.path.join(staging, name))]
        if kernels is not None:
            results_section(derivation, plain(summary, nonfinite_as_none=True), figures)
        tex = derivation.to_latex()
        write_atomic(os.path.join(staging, "derivation.tex"), tex)
        write_atomic(os.path.join(staging, "derivation-body.tex"), derivation.body_latex())
        ok, log, pdf = compile_pdf(tex, files=[os.path.join(staging, name) for name in figures])
        if ok:
            write_atomic(os.path.join(staging, "derivation.pdf"), pdf)
        else:
            summary["skipped"]["derivation.pdf"] = "pdflatex not found" if "not found" in log else "pdflatex failed"
        timings["latex"] = time.perf_counter() - start
        provenance = {"spec": spacetime.path, "spec_hash": spacetime.source_hash, "versions": _versions(),
                      "tolerance": tolerance, "timings_seconds": timings, "command": sys.argv,
                      "parameters": {p.name: p.value for p in spacetime.parameters.values()},
                      "written": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}
        for name, record in (("summary.json", summary), ("provenance.json", provenance)):
            write_atomic(os.path.join(staging, name), json.dumps(plain(record, nonfinite_as_none=True), indent=2))
        replace_folder(staging, out, "run")
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    if summary.get("refused"):      # what derive cannot serve exits 2 as the stage's own command does
        from derive.errors import NotSupported

        shortfalls = "; ".join(f"{k} missed its tolerance: {v}" for k, v in summary.get("shortfalls", {}).items())
        raise NotSupported(f"{out} holds everything else derive reached; refused: "
                           + "; ".join(f"{k}: {v}" for k, v in summary["refused"].items())
                           + (f"; {shortfalls}" if shortfalls else ""))
    if summary.get("shortfalls"):
        from derive.errors import AccuracyError

        raise AccuracyError(f"{out} holds everything reached, each value with its error; "
                            + "; ".join(f"{k}: {v}" for k, v in summary["shortfalls"].items()),
                            {"tolerance": tolerance, "status": summary["status"]})
    return summary


def _numerics(spacetime, staging, tolerance, summary, timings, progress, l_progress=None):
    """The spectrum (at the detector's own radius) and the response, through the public API; a value that
    misses the tolerance is written with the error it reached and recorded in ``summary["shortfalls"]``."""
    from derive.report.tables import write_scattering_files, write_spectrum_files

    start = time.perf_counter()
    problem = spacetime.numeric_problem
    progress("spectral density ...")
    low, high, count = SPECTRUM_GRID
    omegas = np.linspace(low, high, count) / problem.length_scale
    r0 = _detector_radius(spacetime)
    if problem.regions[0].lower_kind == "horizon":
        results = {l: _try(summary, "spectrum", lambda l=l: spacetime.spectrum(omegas, l=l, tolerance=tolerance))
                   for l in (0, 1, 2)}
        if results[0] is not None:
            write_scattering_files(staging, results[0].to_json(), spacetime.title, pdf=True)
            summary["spectrum"] = {
                "kind": "transmission", "omega_range": [float(omegas[0]), float(omegas[-1])], "points": count,
                "by_l": {str(l): {"largest_relative_error": _largest_relative(r.error["transmission"], r.transmission),
                                  "largest_flux_defect": float(np.max(np.abs(r.flux_defect))), "ok": r.ok}
                         for l, r in results.items() if r is not None}}
            for l, r in results.items():
                _note(summary, f"spectrum (l = {l})", r)
    else:
        result = _try(summary, "spectrum", lambda: spacetime.spectrum(omegas, at=r0, tolerance=tolerance,
                                                                       progress=l_progress))
        if result is not None:
            data = result.to_json()
            write_spectrum_files(staging, data, spacetime.title, pdf=True)
            density, error = result.density, result.error["density"]
            positive = density > 0      # below a field's mass there is no continuum (density 0, error 0)
            worst = float(np.max(error[positive] / density[positive])) if np.any(positive) else 0.0
            summary["spectrum"] = {"at": r0, "l": data["l"], "omega_range": [float(omegas[0]), float(omegas[-1])],
                                   "points": count, "largest_relative_error": worst, "ok": result.ok}
            levels = data.get("bound_states")
            if levels is not None:
                key = "normal_modes" if "normal_modes" in data else "bound_states"
                summary["spectrum"][key] = {"omega": levels["omega"], "weight": levels["weight"],
                                            "ok": levels["ok"], "truncated": levels.get("truncated", False)}
            _note(summary, "spectrum", result)
    timings["spectrum"] = time.perf_counter() - start
    _response(spacetime, staging, tolerance, summary, timings, progress, l_progress)
    _correlations(spacetime, staging, tolerance, summary, timings, progress, l_progress)


def _correlations(spacetime, staging, tolerance, summary, timings, progress, l_progress=None):
    """With [[detectors]]: every detector's probability and every pair's joint state (derive correlations)."""
    from derive.report.tables import write_correlations_files

    if len(spacetime.detectors) < 2:
        return
    _stage(summary, timings, progress, "correlations", "correlations between the detectors ...",
           lambda: spacetime.correlations(tolerance=tolerance, progress=l_progress),
           lambda data: write_correlations_files(staging, data, spacetime.title, pdf=True))


def _stage(summary, timings, progress, name, label, compute, write) -> None:
    """One numeric stage of run: compute through the API, write its files, record its JSON, shortfall and time."""
    start = time.perf_counter()
    progress(label)
    result = _try(summary, name, compute)
    if result is None:
        return
    data = result.to_json()
    write(data)
    summary[name] = data
    _note(summary, name, result)
    timings[name] = time.perf_counter() - start


def _detector_radius(spacetime) -> float:
    """The radius the spectrum is written at: the detector's own (the centre without a detector)."""
    detector = spacetime.detector
    if detector is None or detector.position is None:
        return 0.0
    value = sp.S(detector.position).subs(spacetime.parameter_values)
    return float(value) if value.is_number else 0.0


def _try(summary, stage, compute):
    """compute(), or None with the reason under summary["skipped"] and summary["refused"] when derive cannot serve
    it yet (the run goes on, writes what it reaches, and then exits 2 naming what was refused)."""
    from derive.errors import NotSupported

    try:
        return compute()
    except NotSupported as exc:
        summary["skipped"][stage] = str(exc)
        summary.setdefault("refused", {})[stage] = str(exc)
        return None


def _note(summary, stage, result) -> None:
    if result is not None and not result.ok:
        summary.setdefault("shortfalls", {})[stage] = result.message


def _response(spacetime, staging, tolerance, summary, timings, progress, l_progress=None):
    from derive.report.tables import write_response_files

    if spacetime.detector is None or not spacetime.detector.gaps:
        summary["skipped"]["response"] = ("several detectors: see correlations" if spacetime.detectors else
                                          "no [detector] section with gaps")
        return
    _stage(summary, timings, progress, "response", "detector response ...",
           lambda: spacetime.response(tolerance=tolerance, progress=l_progress),
           lambda data: write_response_files(staging, data, spacetime.title, pdf=True))


def _largest_relative(error, value) -> float:
    """The largest error/value where the value is nonzero (below a mass nothing is transmitted: |T|^2 = 0
    exactly, with no error), 0 where none is."""
    error, value = np.asarray(error, dtype=float), np.asarray(value, dtype=float)
    nonzero = value != 0
    return float(np.max(error[nonzero] / np.abs(value[nonzero]))) if np.any(nonzero) else 0.0
