"""The command line: parses arguments, calls the public API, writes files.  Nothing else lives here.

Exit codes (README.md): 0 success; 2 bad input (message names the file, key and problem); 1 a requested
accuracy not reached (message says what was reached).
"""

from __future__ import annotations

import argparse
import os
import sys

from derive import __version__
from derive.errors import AccuracyError, InputError


def _overrides(pairs) -> dict[str, float]:
    result = {}
    for item in pairs or []:
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise InputError(f"--set expects NAME=VALUE, got {item!r}", key="--set")
        try:
            result[name.strip()] = float(value)
        except ValueError:
            raise InputError(f"--set {name}: {value!r} is not a number", key="--set") from None
    return result


def _load(args):
    from derive.spec.loader import load

    return load(args.spec, _overrides(args.set), origin="--set")


def _emit_json(data) -> None:
    from derive.report.json_output import dumps

    sys.stdout.write(dumps(data) + "\n")


def _write(path: str, text) -> None:
    from derive.outputs import write_atomic

    write_atomic(path, text)
    print(f"wrote {path}", file=sys.stderr)


def _check_outputs(args) -> None:
    """Refuse output paths derive may not write (exit 2) before any work is done."""
    from derive.outputs import check_output_file, check_output_folder

    if getattr(args, "out", None) is not None:
        check_output_folder(args.out, "--out")
    if getattr(args, "latex", None) is not None:
        check_output_file(args.latex, "--latex")
        check_output_file(body_path(args.latex), "--latex (its body file)")


def body_path(path: str) -> str:
    """Where the body of a derivation goes beside its standalone document: name.tex -> name-body.tex."""
    stem, ext = os.path.splitext(path)
    return f"{stem}-body{ext or '.tex'}"


def _write_derivation(path: str, derivation) -> None:
    _write(path, derivation.to_latex())
    _write(body_path(path), derivation.body_latex())


def _selected_regions(spacetime, name):
    if name is None:
        return list(spacetime.regions)
    if name not in spacetime.regions:
        from derive.spec.loader import suggest

        close = suggest(name, spacetime.regions)
        hint = f"; did you mean '{close}'?" if close else f" (regions: {', '.join(spacetime.regions)})"
        raise InputError(f"no region named '{name}'{hint}", file=spacetime.path, key="--region")
    return [name]


# -- commands ---------------------------------------------------------------------------------------------
def cmd_check(args) -> int:
    from derive.report.summary import spec_summary

    spacetime = _load(args)
    if args.json:
        from derive.report.summary import spec_json

        _emit_json(spec_json(spacetime))
    else:
        print(spec_summary(spacetime))
    return 0


def cmd_geometry(args) -> int:
    from derive.report.derivation import Derivation
    from derive.report.json_output import geometry_json
    from derive.report.latex import geometry_sections
    from derive.report.summary import geometry_summary

    spacetime = _load(args)
    names = _selected_regions(spacetime, args.region)
    if args.latex:
        derivation = Derivation(spacetime.title, spacetime.coordinates, spacetime.parameter_values)
        geometry_sections(derivation, spacetime, names)
        _write_derivation(args.latex, derivation)
    if args.json:
        _emit_json({"regions": {n: geometry_json(spacetime.geometry[n]) for n in names}})
    else:
        print(geometry_summary(spacetime, names))
    return 0


def _derivation_with(spacetime, *stages):
    from derive.report.derivation import Derivation
    from derive.report.latex import field_sections, geometry_sections, junction_sections

    derivation = Derivation(spacetime.title, spacetime.coordinates, spacetime.parameter_values)
    builders = {"geometry": geometry_sections, "junction": junction_sections, "field": field_sections}
    for stage in stages:
        builders[stage](derivation, spacetime)
    return derivation


def cmd_junction(args) -> int:
    from derive.report.json_output import junction_json
    from derive.report.summary import junction_summary

    spacetime = _load(args)
    if not spacetime.interfaces:
        raise InputError("the spec has no [[interface]]: nothing to glue", file=spacetime.path, key="interface")
    data = {"interfaces": [junction_json(shell) for shell in spacetime.shells]}
    if args.latex:
        _write_derivation(args.latex, _derivation_with(spacetime, "geometry", "junction"))
    if args.json:
        _emit_json(data)
    else:
        print(junction_summary(spacetime))
    return 0


def cmd_field(args) -> int:
    from derive.report.json_output import field_json
    from derive.report.summary import field_summary

    spacetime = _load(args)
    if args.l is not None and args.l < 0:
        raise InputError("--l must be a non-negative integer", key="--l")
    data = field_json(spacetime.field_problem, args.l)
    if args.latex:
        stages = ("geometry", "junction", "field") if spacetime.interfaces else ("geometry", "field")
        _write_derivation(args.latex, _derivation_with(spacetime, *stages))
    if args.json:
        _emit_json(data)
    else:
        print(field_summary(spacetime, data))
    return 0


def cmd_kernels(args) -> int:
    from derive.codegen.catalog import KernelSet
    from derive.codegen.export import export, kernel_records

    spacetime = _load(args)
    kernels = KernelSet(spacetime)
    if args.out:
        document = export(kernels, args.out)
        print(f"wrote {args.out}", file=sys.stderr)
    else:
        kernels.verify_all()
        document = {"kernels": kernel_records(kernels)}
    if args.json:
        _emit_json({"kernels": document["kernels"]})
    elif not document["kernels"]:
        print("no kernels: the spec has no [field] and its curvature invariants hold free functions")
    else:
        for k in document["kernels"]:
            owner = k.get("region") or k.get("interface")
            print(f"{k['name']:<40} {k['quantity']:<16} {owner:<18} {k['status']:<9} "
                  f"max rel. error {k['max_relative_error']:.1e} over {k['points']} points")
            if k["status"] != "verified":
                print(f"    {k['reason']}")
    return 0


def _omega_grid(text: str):
    from derive.values import parse_values

    values = parse_values(text, "--omega")
    if (values <= 0).any():
        raise InputError(f"--omega needs positive frequencies, got {text!r}", key="--omega")
    return values


def _deliver(args, result, write_files, header, rows) -> int:
    """The common ending of the numeric commands: files with --out, JSON with --json, else a table; exit 1 with
    what was reached when the tolerance was missed (everything reached is still written and printed)."""
    _end_progress(args)
    data = result.to_json()
    if args.out:
        from derive.outputs import prepare_folder

        prepare_folder(args.out, result.kind)
        for path in write_files(args.out, data, result.title):
            print(f"wrote {path}", file=sys.stderr)
    if args.json:
        _emit_json(data)
    elif header is not None:
        print(header)
        for row in rows:
            print(row)
    if not result.ok:
        raise AccuracyError(result.message, {"tolerance": result.tolerance, "status": result.status})
    return 0


def _computed(args, request):
    """The common start of the numeric commands: the spec loaded (with --set), its tolerance (--tolerance, else
    [numerics]), ``request(spacetime, tolerance, progress)`` called; returns (spacetime, result, its JSON)."""
    spacetime = _load(args)
    result = request(spacetime, _tolerance(args, spacetime), _progress(args))
    return spacetime, result, result.to_json()


def _tolerance(args, spacetime):
    from derive.pipeline import tolerance_of

    return tolerance_of(spacetime, args.tolerance)


def _progress(args):
    """A one-line progress report of an l-sum on a terminal (the l reached and the share of frequencies done);
    nothing when stderr is not a terminal, or with --quiet."""
    if getattr(args, "quiet", False) or not sys.stderr.isatty():
        return None

    def report(l, share=None):
        done = f", {share:.0%} of frequencies done" if share is not None else ""
        print(f"\r  summing over l: l = {l}{done}   ", end="", file=sys.stderr, flush=True)
    return report


def _end_progress(args) -> None:
    """End the progress line (it may have been written by a worker process, so the parent cannot tell)."""
    if _progress(args) is not None:
        print("\r" + " " * 60 + "\r", end="", file=sys.stderr, flush=True)


def cmd_spectrum(args) -> int:
    from derive.report.tables import write_scattering_files, write_spectrum_files

    spacetime = _load(args)
    omegas = _omega_grid(args.omega)
    if args.at is not None and not args.at >= 0.0:
        raise InputError(f"--at {args.at}: expected a radius >= 0", key="--at")
    tolerance = _tolerance(args, spacetime)
    result = spacetime.spectrum(omegas, at=args.at, l=args.l, tolerance=tolerance, progress=_progress(args))
    data = result.to_json()
    if "transmission" in data:
        return _deliver(args, result, write_scattering_files, *_scattering_rows(spacetime, data))
    if "normal_modes" in data:
        modes = data["normal_modes"]
        rows = [f"{w:22.15e} {we:10.1e} {d:22.15e} {de:10.1e}" for w, we, d, de in
                zip(modes["omega"], modes["error"]["omega"], modes["weight"], modes["error"]["weight"])]
        return _deliver(args, result, write_spectrum_files,
                        f"{spacetime.title}: normal modes of l = {data['l']} (reflecting AdS boundary), weights at "
                        f"r = {data['at']:g}\n{'omega':>22} {'error':>10} {'weight':>22} {'error':>10}", rows)
    # the comparison at equal local (proper) frequency: at equal coordinate frequency the ratio would be the
    # redshift 1/alpha^2, which reads like an enhancement
    ratios = data.get("ratio_to_minkowski") or [None] * len(data["omega"])
    rows = [f"{w:12.6g} {d:22.15e} {e:10.1e} " + (f"{q:14.10f}" if q is not None else "")
            for w, d, e, q in zip(data["omega"], data["density"], data["error"]["density"], ratios)]
    levels = data.get("bound_states")
    if levels is not None:
        rows.append(f"bound states (l = {levels.get('l', data['l'])}; discrete: a weight per level, per unit omega "
                    "integrated):\n"
                    f"{'omega':>22} {'error':>10} {'weight':>22} {'error':>10}")
        rows += [f"{w:22.15e} {we:10.1e} {d:22.15e} {de:10.1e}" for w, we, d, de in
                 zip(levels["omega"], levels["error"]["omega"], levels["weight"], levels["error"]["weight"])]
        if levels["truncated"]:
            rows.append("  (more levels accumulate at the mass: the lowest are listed)")
    where = f"l = {data['l']}" if data["l"] is not None else "summed over l"
    return _deliver(args, result, write_spectrum_files,
                    f"{spacetime.title}: spectral density at r = {data['at']:g}, {where}"
                    + (f"; redshift factor sqrt(-g_tt) = {data['redshift_factor']:.10g}, the last column compares "
                       "with Minkowski at equal proper frequency" if "redshift_factor" in data else "") + "\n"
                    f"{'omega':>12} {'density':>22} {'error':>10} {'/ Minkowski':>14}", rows)


def cmd_two_point(args) -> int:
    from derive.report.tables import write_two_point_files

    omegas = _omega_grid(args.omega)
    spacetime, result, data = _computed(args, lambda st, tolerance, progress: st.two_point(
        omegas, args.between, tolerance=tolerance, progress=progress))
    points = " and ".join(p["text"] for p in data["between"])
    rows = [f"{w:12.6g} {re:22.15e} {im:22.15e} {e:10.1e} {c:22.15e}" for w, re, im, e, c in
            zip(data["omega"], data["wightman"]["re"], data["wightman"]["im"], data["error"]["wightman"],
                data["scale"])]
    title = (f"{spacetime.title}: spectral two-point function ({data['state']}) between {points} "
             f"(cos angle {data['cos_angle']:.10g})\n"
             f"{'omega':>12} {'Re':>22} {'Im':>22} {'error':>10} {'scale':>22}")
    levels = data.get("bound_states")
    if levels is not None:    # the discrete part, beside the continuum above
        rows.append("bound levels (discrete: a weight per level between the two points, times P_l(cos angle)):\n"
                    f"{'l':>4} {'omega':>22} {'error':>10} {'weight':>22} {'error':>10}")
        rows += [f"{l:4d} {w:22.15e} {we:10.1e} {d:22.15e} {de:10.1e}" for l, w, we, d, de in
                 zip(levels["l"], levels["omega"], levels["error"]["omega"], levels["weight"],
                     levels["error"]["weight"])]
        rows.append("  (more levels of each l accumulate at the mass: the lowest are listed)")
    return _deliver(args, result, write_two_point_files, title, rows)


def cmd_design(args) -> int:
    from derive.report.tables import write_design_files, write_pair_design_files

    spacetime, result, data = _computed(args, lambda st, tolerance, progress: st.design(tolerance, progress))
    if "pair" in data:
        def placed(label, p):
            singles = ", ".join(f"{name} alone {runs:.3e}" for name, runs in p["single_runs"].items())
            return (f"  {label:<9} second detector at r = {p['radius']:.5g}, delay {p['delay']:.5g}: "
                    f"{p['runs']:.4e} +- {p['runs_error']:.1e} runs (counting both {p['counting_runs']:.4e}; "
                    f"{singles}; {'local' if p['local'] else 'NOT local'})")
        pair = data["pair"]
        rows = [placed("best", pair["best"]), placed("spec's", pair["default"]),
                f"scan over the radius (best delay at each; delays searched {pair['delays'][0]:.4g} .. "
                f"{pair['delays'][1]:.4g}):"]
        rows += [f"  r = {r['radius']:9.5g}  delay {r['delay']:9.4g}  {r['runs']:12.4e} +- {r['runs_error']:.1e}  "
                 f"counting {r['counting_runs']:.4e}  {'local' if r['local'] else 'not local'}"
                 for r in pair["scan"]]
        rows += [f"note: {note}" for note in data["notes"]]
        title = (f"{spacetime.title}: where to put the second detector to tell it from {data['compare']}, "
                 f"coupling {data['coupling']:g}, {data['sigmas']:g} sigma")
        return _deliver(args, result, write_pair_design_files, title, rows)

    def line(label, p):
        s = p["switching"]
        size = f"width {s['width']:.5g}" if "width" in s else f"duration {s['duration']:.5g}"
        return (f"  {label:<9} gap {p['gap']:9.5g}  {s['shape']:<8} {size:<18} lasting {p['duration']:.4g} "
                f"(round trip {p['round_trip']:.4g}, {'local' if p['local'] else 'NOT local'}) at r = {p['at']:.4g}: "
                f"{p['runs']:.4e} +- {p['runs_error']:.1e} runs")
    rows = [line("best", data["best"]), line("default", data["default"]),
            f"trade-off (best runs at each duration; budget {data['search']['budget']:.4g}):"]
    rows += [f"  {r['duration']:10.4g} {r['runs']:12.4e} +- {r['runs_error']:.1e}  gap {r['gap']:8.4g} "
             f"{r['shape']:<8} {'local' if r['local'] else 'not local'}" for r in data["tradeoff"]]
    q = data["quantum_limit"]
    rows.append(f"quantum limit (the best probe, {q['switching']['shape']} lasting "
                f"{q['switching']['effective_duration']:.4g}, gap {q['gap']:.5g}): best initial state "
                f"theta = {q['initial_state']['theta']:.4g}, phi = {q['initial_state']['phi']:.4g}")
    rows.append(f"  counting {q['counting']['runs']:.4e}  best measurement {q['best_measurement']['runs']:.4e}"
                f"  (ground state: counting {q['ground_state']['counting']['runs']:.4e}, best "
                f"{q['ground_state']['best_measurement']['runs']:.4e})  Chernoff exponent "
                f"{q['chernoff']['exponent']:.4e} (sufficient runs {q['chernoff']['runs']:.4e})")
    rows += [f"note: {note}" for note in data["notes"]]
    title = (f"{spacetime.title}: the probe that tells it from {data['compare']} fastest, coupling "
             f"{data['coupling']:g}, {data['sigmas']:g} sigma")
    return _deliver(args, result, write_design_files, title, rows)


def cmd_correlations(args) -> int:
    from derive.report.tables import write_correlations_files

    spacetime, result, data = _computed(args, lambda st, tolerance, progress: st.correlations(tolerance, progress))
    rows = [f"  {name:<12} at {d['at']['text']:<28} gap {d['gap']:<8g} P = {d['probability']:.10e} "
            f"+- {d['error']:.1e}" for name, d in data["detectors"].items()]
    rows.append(f"{'pair':<16} {'|L_AB|':>12} {'|M|':>12} {'error':>8} {'concurrence':>12} {'negativity':>12} "
                f"{'mutual inf.':>12} {'light time':>11} signalling")
    for p in data["pairs"]:
        s = p["signalling"]
        rows.append(f"{p['between'][0] + '-' + p['between'][1]:<16} {abs(complex(*p['L'])):12.5e} "
                    f"{abs(complex(*p['M'])):12.5e} {p['error']['M']:8.1e} {p['concurrence']:12.5e} "
                    f"{p['negativity']:12.5e} {p['mutual_information']:12.5e} {s['light_time']:11.6g} "
                    + ("possible (the switchings reach across the light time)" if s["overlap"] else "none"))
    title = (f"{spacetime.title}: {len(data['detectors'])} detectors, {data['state']} state, coupling "
             f"{data['coupling']:g}; probabilities:")
    return _deliver(args, result, write_correlations_files, title, rows)


def _scattering_rows(spacetime, data):
    n = len(data["omega"])
    density = data["density"] or [None] * n
    density_error = data["error"].get("density") or [None] * n
    rows = [f"{w:12.6g} {t:22.15e} {e:10.1e} {r:22.15e} {d:15.1e}"
            + (f" {s:22.15e} {se:10.1e}" if s is not None else "") for w, t, e, r, d, s, se in
            zip(data["omega"], data["transmission"], data["error"]["transmission"], data["reflection"],
                data["flux_defect"], density, density_error)]
    header = f"{'omega':>12} {'|T|^2':>22} {'error':>10} {'|R|^2':>22} {'|R|^2+|T|^2-1':>15}"
    if data["density"] is not None:
        header += f" {'density (Boulware)':>22} {'error':>10}"
    title = (f"{spacetime.title}: scattering of the l = {data['l']} field off the horizon"
             + (f"; spectral density at r = {data['at']:g} summed over l" if data.get("at") is not None else ""))
    resonances = data.get("quasi_bound")
    if resonances is not None:
        rows.append(f"quasi-bound resonances (l = {data['l']}; complex frequency omega - i width/2; a narrow peak of "
                    f"the up modes' density below the mass):\n{'omega':>22} {'error':>10} {'width':>22} {'error':>10}")
        rows += [f"{w:22.15e} {we:10.1e} " + (f"{g:22.15e} {ge:10.1e}" if ok else f"{'< ' + format(ge, '.1e'):>22}")
                 for w, we, g, ge, ok in zip(resonances["omega"], resonances["error"]["omega"], resonances["width"],
                                             resonances["error"]["width"], resonances["resolved"])]
        if resonances["truncated"]:
            rows.append("  (infinitely many more accumulate at the mass: the lowest are listed)")
    return title + "\n" + header, rows


def cmd_response(args) -> int:
    from derive.report.summary import response_summary
    from derive.report.tables import write_response_files

    spacetime = _load(args)
    gaps = None
    if args.gaps:
        from derive.values import parse_values

        gaps = [float(g) for g in parse_values(args.gaps, "--gaps")]
    tolerance = _tolerance(args, spacetime)
    result = spacetime.response(gaps, tolerance=tolerance, progress=_progress(args))
    summary = None if args.json else response_summary(spacetime.title, result.to_json())
    return _deliver(args, result, write_response_files, summary, [])


def cmd_run(args) -> int:
    from derive.run import run

    spacetime = _load(args)
    tolerance = _tolerance(args, spacetime)
    progress = (lambda message: print(message, file=sys.stderr)) if not args.quiet else (lambda message: None)
    summary = run(spacetime, args.out, tolerance, progress, l_progress=_progress(args))
    print(f"wrote {args.out}: " + ", ".join(sorted(os.listdir(args.out))))
    for stage, reason in summary["skipped"].items():
        print(f"  skipped {stage}: {reason}")
    return 0


def cmd_scan(args) -> int:
    from derive.scan import parse_vary, run_scan

    spacetime = _load(args)
    vary = parse_vary(args.vary, list(spacetime.parameters))
    tolerance = _tolerance(args, spacetime)
    workers = _workers(args.workers)
    result = run_scan(spacetime, vary, args.out, tolerance, args.executor, workers, args.scheduler)
    print(f"scan of {result['points']} points: {result['computed']} computed now, {result['reused']} already "
          f"done; wrote {result['csv']}")
    not_ok = result["not_ok"]
    if not_ok:     # every point is written; the exit code says that some are not numbers derive stands behind
        from derive.errors import AccuracyError, InputError

        listed = "; ".join(f"{len(v)} {kind} (point {v[0][0]}: {v[0][1]})" for kind, v in not_ok.items())
        message = f"{result['csv']} holds every point, the status column says which are not ok: {listed}"
        if "refused" in not_ok or "error" in not_ok:
            raise InputError(message, key="--vary")
        raise AccuracyError(message, {"tolerance": tolerance})
    return 0


def _workers(requested: int | None) -> int:
    """--workers bounded by the machine: at least 1, at most the number of cores (0: one per core)."""
    if requested is None:
        return 0
    if requested < 1:
        raise InputError(f"--workers must be at least 1, got {requested}", key="--workers")
    cores = os.cpu_count() or 1
    if requested > cores:
        print(f"derive: --workers {requested} capped at {cores}, the number of cores of this machine",
              file=sys.stderr)
        return cores
    return requested


def cmd_demo(args) -> int:
    from derive.demo import run_demo

    return run_demo(out=args.out)


# -- parser ---------------------------------------------------------------------------------------------
def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="derive", description="From a spacetime spec to what a static "
                                     "Unruh-DeWitt detector registers there.")
    parser.add_argument("--version", action="version", version=f"derive {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    def spec_command(name, help_text, func):
        p = sub.add_parser(name, help=help_text, description=help_text)
        p.add_argument("spec", help="the spec file (TOML, format 1)")
        p.add_argument("--set", action="append", metavar="NAME=VALUE", help="override a parameter's value")
        p.set_defaults(func=func)
        return p

    def numeric_options(p, tolerance_help, out_help):
        """--tolerance, --json, --out and --quiet of the numeric commands."""
        p.add_argument("--tolerance", type=float, help=tolerance_help)
        p.add_argument("--json", action="store_true", help="print JSON")
        p.add_argument("--out", metavar="DIR", help=out_help)
        p.add_argument("--quiet", action="store_true", help="no progress report")

    p = spec_command("check", "validate a spec file and summarise it", cmd_check)
    p.add_argument("--json", action="store_true", help="print JSON")
    p = spec_command("geometry", "curvature, stress-energy and energy conditions of each region", cmd_geometry)
    p.add_argument("--region", help="only this region")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.add_argument("--latex", metavar="FILE", help="write the derivation as a LaTeX document")

    p = spec_command("junction", "Israel junction conditions and surface stress-energy of each shell", cmd_junction)
    p.add_argument("--json", action="store_true", help="print JSON")
    p.add_argument("--latex", metavar="FILE", help="write the derivation as a LaTeX document")
    p = spec_command("field", "radial equations, potentials, tortoise coordinates, ends and matching", cmd_field)
    p.add_argument("--l", type=int, help="substitute this angular label l")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.add_argument("--latex", metavar="FILE", help="write the derivation as a LaTeX document")
    p = spec_command("kernels", "numeric kernels (numpy and mpmath), verified against 40-digit evaluation",
                     cmd_kernels)
    p.add_argument("--out", metavar="DIR", help="write a standalone, importable folder of kernels here")
    p.add_argument("--json", action="store_true", help="print JSON")

    p = spec_command("spectrum", "spectral density of the field at a static point, with error estimates",
                     cmd_spectrum)
    p.add_argument("--l", type=int, default=0, help="angular label (at the centre only l = 0 contributes)")
    p.add_argument("--omega", required=True, metavar="LIST|FROM:TO:COUNT", help="frequencies (spec time)")
    p.add_argument("--at", type=float, help="radius of the static point (0: the centre; else summed over l)")
    numeric_options(p, "relative tolerance (default: [numerics] or 1e-10)", "write spectrum.csv and spectrum.png here")

    p = spec_command("two-point", "spectral two-point (Wightman) function between two static points, with errors",
                     cmd_two_point)
    p.add_argument("--omega", required=True, metavar="LIST|FROM:TO:COUNT", help="frequencies (spec time)")
    p.add_argument("--between", required=True, nargs=2, metavar="POINT",
                   help='the two points, e.g. "r = 1" "r = 2, theta = pi/3" (angles left out are zero)')
    numeric_options(p, "tolerance relative to the scale (default: [numerics] or 1e-10)",
                    "write two_point.csv and two_point.png here")

    p = spec_command("correlations", "several detectors ([[detectors]]): probabilities, every pair's joint state, "
                     "entanglement and signalling", cmd_correlations)
    numeric_options(p, "relative tolerance (default: [numerics] or 1e-10)",
                    "write correlations.csv, detectors.csv and correlations.png here")

    p = spec_command("design", "the local probe that tells the spacetime from its [compare] reference in the fewest "
                     "runs, the trade-off against duration, and the quantum limit", cmd_design)
    numeric_options(p, "relative tolerance (default: [numerics] or 1e-10)",
                    "write design.csv (the trade-off) and design.png here")

    p = spec_command("response", "response of the static detector, comparison, locality and runs needed",
                     cmd_response)
    p.add_argument("--gaps", metavar="LIST", help="gaps Omega (detector's proper time), overriding the spec's")
    numeric_options(p, "relative tolerance of the spectral density (default 1e-10)",
                    "write response.csv and response.png here")

    p = spec_command("run", "the whole job: derivation, kernels, spectrum, response, summary, provenance", cmd_run)
    p.add_argument("--out", required=True, metavar="DIR", help="folder to write (replaced atomically)")
    p.add_argument("--tolerance", type=float, help="relative tolerance of the numerics (default 1e-10)")
    p.add_argument("--quiet", action="store_true", help="no progress messages")

    p = spec_command("scan", "sweep parameters (resumable; local cores or a dask cluster)", cmd_scan)
    p.add_argument("--vary", action="append", required=True, metavar="NAME=FROM:TO:COUNT",
                   help="a parameter and its values (repeat for a grid)")
    p.add_argument("--out", required=True, metavar="DIR", help="folder of the scan (reused to resume)")
    p.add_argument("--executor", choices=["local", "dask"], default="local", help="where points run")
    p.add_argument("--workers", type=int, help="local processes (default: one per core)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="dask scheduler address, with --executor dask")
    p.add_argument("--tolerance", type=float, help="relative tolerance of the numerics (default 1e-10)")

    p = sub.add_parser("demo", help="run the bundled scenario end to end and explain what it shows")
    p.add_argument("--out", metavar="DIR", help="also write the files of the run here")
    p.set_defaults(func=cmd_demo)
    return parser


EXIT_INTERNAL = 3


def _internal_error(exc: BaseException) -> int:
    """An error derive did not expect: said to be one, the traceback written to a file, exit 3."""
    import tempfile
    import traceback

    text = "".join(traceback.format_exception(exc))
    if os.environ.get("DERIVE_DEBUG"):
        print(text, file=sys.stderr)
    try:
        fd, path = tempfile.mkstemp(prefix="derive-error-", suffix=".txt")
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(f"derive {__version__}\n{' '.join(sys.argv)}\n\n{text}")
        where = f"; the details are in {path}"
    except OSError:
        where = ""
    print(f"derive: internal error ({type(exc).__name__}: {str(exc)[:200]}). This is a bug in derive, not in "
          f"your input: please report it with the spec file{where}", file=sys.stderr)
    return EXIT_INTERNAL


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        _check_outputs(args)
        return args.func(args)
    except RecursionError:
        print("derive: error: the input is nested too deeply to process (an expression or a definition "
              "refers through too many levels); simplify it", file=sys.stderr)
        return 2
    except MemoryError:
        print("derive: error: the input needs more memory than this machine has (an expression grows too "
              "large); simplify it", file=sys.stderr)
        return 2
    except InputError as exc:
        print(f"derive: error: {exc}", file=sys.stderr)
        return 2
    except AccuracyError as exc:
        print(f"derive: accuracy not reached: {exc}", file=sys.stderr)
        for key, value in exc.reached.items():
            print(f"  {key}: {value}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("derive: interrupted; nothing half-written was left behind", file=sys.stderr)
        return 130
    except BrokenPipeError:
        os._exit(0)
    except Exception as exc:
        return _internal_error(exc)


if __name__ == "__main__":
    sys.exit(main())
