"""`derive run`: the whole job for one spec, written atomically into one folder.

DIR receives derivation.tex (and derivation.pdf where pdflatex is found), kernels/ with verification.json,
spectrum and response tables (CSV) and plots (PNG and PDF), summary.json (key results, each with its error) and
provenance.json (spec hash, versions, tolerances, timings).  Everything is written into a staging folder beside
DIR and moved into place at the end: a run that fails or is interrupted leaves an earlier DIR as it was.
Stages the solver cannot do yet for this spacetime are skipped with the reason recorded in summary.json.
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


def run(spacetime, out: str, tolerance: float = 1e-10, progress=print) -> dict:
    """Write everything for ``spacetime`` into the folder ``out``; returns the summary."""
    from derive.codegen.catalog import KernelSet
    from derive.codegen.export import export
    from derive.report.derivation import Derivation
    from derive.outputs import check_output_folder, replace_folder, staging_folder, write_atomic
    from derive.report.latex import compile_pdf, field_sections, geometry_sections, junction_sections

    out = check_output_folder(out)
    staging = staging_folder(out, "run")
    timings, summary = {}, {"spec": spacetime.path, "title": spacetime.title, "skipped": {}}
    values = spacetime.parameter_values
    try:
        start = time.perf_counter()
        progress("geometry ...")
        derivation = Derivation(spacetime.title)
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
            kernels = KernelSet(spacetime)
            document = export(kernels, os.path.join(staging, "kernels"))
            summary["kernels"] = {k["name"]: {"status": k["status"], "max_relative_error": k["max_relative_error"]}
                                  for k in document["kernels"]}
            timings["kernels"] = time.perf_counter() - start
        tex = derivation.to_latex()
        write_atomic(os.path.join(staging, "derivation.tex"), tex)
        start = time.perf_counter()
        ok, log, pdf = compile_pdf(tex)
        if ok:
            write_atomic(os.path.join(staging, "derivation.pdf"), pdf)
        else:
            summary["skipped"]["derivation.pdf"] = "pdflatex not found" if "not found" in log else "pdflatex failed"
        timings["latex"] = time.perf_counter() - start
        if kernels is not None:
            _numerics(spacetime, kernels, staging, tolerance, summary, timings, progress)
        provenance = {"spec": spacetime.path, "spec_hash": spacetime.source_hash, "versions": _versions(),
                      "tolerance": tolerance, "timings_seconds": timings, "command": sys.argv,
                      "parameters": {p.name: p.value for p in spacetime.parameters.values()},
                      "written": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}
        write_atomic(os.path.join(staging, "summary.json"), json.dumps(_plain(summary), indent=2))
        write_atomic(os.path.join(staging, "provenance.json"), json.dumps(_plain(provenance), indent=2))
        replace_folder(staging, out, "run")
        return summary
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise


def _numerics(spacetime, kernels, staging, tolerance, summary, timings, progress):
    from derive.codegen.problem import numeric_problem
    from derive.report.tables import write_spectrum_files
    from derive.solve.api import METHOD, spectrum_at_centre
    from derive.solve.centre import Unsupported

    start = time.perf_counter()
    problem = numeric_problem(kernels)
    progress("spectral density ...")
    low, high, count = SPECTRUM_GRID
    omegas = np.linspace(low, high, count) / problem.length_scale
    if problem.regions[0].lower_kind == "horizon":
        _greybody(spacetime, problem, omegas, staging, tolerance, summary, timings, start)
        _response(spacetime, kernels, problem, staging, tolerance, summary, timings, progress)
        return
    from derive.solve.bound import is_ads

    if is_ads(problem):
        _normal_modes(spacetime, problem, omegas, staging, tolerance, summary, timings, start)
        _response(spacetime, kernels, problem, staging, tolerance, summary, timings, progress)
        return
    try:
        result = spectrum_at_centre(problem, omegas, 0, tolerance)
    except Unsupported as exc:
        summary["skipped"]["spectrum"] = str(exc)
        summary["skipped"]["response"] = str(exc)
        return
    data = {"l": 0, "at": 0.0, "omega": omegas.tolist(), "density": result["density"].tolist(),
            "error": {"density": result["error"].tolist()}, "minkowski_density": result["minkowski"].tolist(),
            "method": METHOD}
    from derive.solve.api import bound_state_table

    levels = bound_state_table(problem, 0, 0.0, tolerance)
    if levels is not None:
        data["bound_states"] = levels
    write_spectrum_files(staging, data, spacetime.title, pdf=True)
    positive = result["density"] > 0        # below a field's mass there is no continuum (density 0, error 0)
    worst = float(np.max(result["error"][positive] / result["density"][positive])) if np.any(positive) else 0.0
    summary["spectrum"] = {"at": 0.0, "l": 0, "omega_range": [float(omegas[0]), float(omegas[-1])],
                           "points": count, "largest_relative_error": worst, "ok": bool(result["ok"])}
    if levels is not None:
        summary["spectrum"]["bound_states"] = {"omega": levels["omega"], "weight": levels["weight"],
                                               "ok": levels["ok"], "truncated": levels["truncated"]}
        result["ok"] = result["ok"] and levels["ok"]
        if not levels["ok"]:
            result["message"] = levels["message"]
    timings["spectrum"] = time.perf_counter() - start
    if not result["ok"]:
        from derive.errors import AccuracyError

        raise AccuracyError(result["message"], {"largest relative error": worst, "tolerance": tolerance})
    _response(spacetime, kernels, problem, staging, tolerance, summary, timings, progress)


def _normal_modes(spacetime, problem, omegas, staging, tolerance, summary, timings, start):
    """A reflecting AdS boundary: the l = 0 normal modes and their weights at the centre (zero density between)."""
    from derive.errors import AccuracyError
    from derive.report.tables import write_spectrum_files
    from derive.solve.api import METHOD, bound_state_table

    modes = bound_state_table(problem, 0, 0.0, tolerance)
    zeros = [0.0] * len(omegas)
    data = {"l": 0, "at": 0.0, "omega": omegas.tolist(), "density": zeros, "error": {"density": zeros},
            "minkowski_density": zeros, "method": METHOD, "bound_states": modes}
    write_spectrum_files(staging, data, spacetime.title, pdf=True)
    summary["spectrum"] = {"at": 0.0, "l": 0, "normal_modes": {"omega": modes["omega"], "weight": modes["weight"],
                                                               "ok": modes["ok"]}, "ok": modes["ok"]}
    timings["spectrum"] = time.perf_counter() - start
    if not modes["ok"]:
        raise AccuracyError(modes["message"], {"tolerance": tolerance})


def _response(spacetime, kernels, problem, staging, tolerance, summary, timings, progress):
    from derive.cli import response_json
    from derive.codegen.problem import numeric_detector, numeric_problem
    from derive.detector.study import study
    from derive.detector.switching import UnsupportedSwitching
    from derive.errors import InputError
    from derive.report.tables import write_response_files
    from derive.solve.centre import Unsupported

    if spacetime.detector is None or not spacetime.detector.gaps:
        summary["skipped"]["response"] = "no [detector] section with gaps"
        return
    start = time.perf_counter()
    progress("detector response ...")
    detector = numeric_detector(spacetime)
    reference = None
    if detector.compare_with not in (None, "minkowski"):
        from derive import load

        reference = numeric_problem(type(kernels)(load(detector.compare_with)))
    try:
        answer = study(problem, detector, reference, tolerance)
    except (Unsupported, UnsupportedSwitching) as exc:
        summary["skipped"]["response"] = str(exc)
        return
    except InputError as exc:
        raise exc.located(file=spacetime.path) from None
    data = response_json(answer)
    write_response_files(staging, data, spacetime.title, pdf=True)
    summary["response"] = data
    timings["response"] = time.perf_counter() - start


def _greybody(spacetime, problem, omegas, staging, tolerance, summary, timings, start):
    from derive.report.tables import write_scattering_files
    from derive.solve.api import METHOD, scattering
    from derive.solve.centre import Unsupported

    try:
        results = {l: scattering(problem, omegas, l, tolerance) for l in (0, 1, 2)}
    except Unsupported as exc:
        summary["skipped"]["spectrum"] = str(exc)
        return
    first = results[0]
    data = {"l": 0, "omega": omegas.tolist(), "transmission": first["transmission"].tolist(),
            "reflection": first["reflection"].tolist(),
            "error": {"transmission": first["error"].tolist()}, "flux_defect": first["flux_defect"].tolist(),
            "method": METHOD}
    write_scattering_files(staging, data, spacetime.title, pdf=True)
    summary["spectrum"] = {"kind": "transmission", "omega_range": [float(omegas[0]), float(omegas[-1])],
                           "points": len(omegas),
                           "by_l": {str(l): {"largest_relative_error": float(np.max(r["error"] / r["transmission"])),
                                             "largest_flux_defect": float(np.max(np.abs(r["flux_defect"]))),
                                             "ok": bool(r["ok"])} for l, r in results.items()}}
    timings["spectrum"] = time.perf_counter() - start
    bad = [l for l, r in results.items() if not r["ok"]]
    if bad:
        from derive.errors import AccuracyError

        raise AccuracyError(results[bad[0]]["message"], {"l": bad[0], "tolerance": tolerance})


def _plain(value):
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    return value
