"""Plain-text summaries for the terminal (the JSON and LaTeX outputs carry the full results)."""

from __future__ import annotations

import math

import sympy as sp


def _short(expr, width: int = 90, variables=()) -> str:
    """One line of an expression for the terminal, sums ordered by the powers of ``variables`` (the
    coordinates), cut at ``width`` characters."""
    from derive.report.display import text as ordered

    text = ordered(expr, variables) if not isinstance(expr, str) else expr
    return text if len(text) <= width else text[: width - 3] + "..."


def spec_json(spacetime) -> dict:
    return {
        "title": spacetime.title,
        "dimension": spacetime.dimension,
        "coordinates": [c.name for c in spacetime.coordinates],
        "parameters": {p.name: {"value": p.value, **p.assumptions} for p in spacetime.parameters.values()},
        "definitions": {str(k): str(v) for k, v in spacetime.definitions.items()},
        "regions": {name: {"where": r.where_text, "unknowns": [u.name for u in r.unknowns],
                           "diagonal": r.metric.is_diagonal()} for name, r in spacetime.regions.items()},
        "interfaces": [{"between": list(i.between), "at": i.text} for i in spacetime.interfaces],
        "field": None if spacetime.field is None else {"mass": str(spacetime.field.mass),
                                                       "coupling": str(spacetime.field.coupling),
                                                       "boundary": spacetime.field.boundary},
        "detector": None if spacetime.detector is None else {
            "at": None if spacetime.detector.coordinate is None else
            f"{spacetime.detector.coordinate} = {spacetime.detector.position}",
            "state": spacetime.detector.state, "gaps": list(spacetime.detector.gaps),
            "switching": {k: str(v) for k, v in spacetime.detector.switching.items()}},
        "detectors": [{"name": d.name, "at": str(d.at), "gap": d.gap,
                       "switching": {k: str(v) for k, v in d.switching.items()}} for d in spacetime.detectors],
        "compare": None if spacetime.compare is None else {"with": spacetime.compare.with_,
                                                           "sigmas": spacetime.compare.sigmas},
        "design": None if spacetime.design_settings is None else {
            "shapes": list(spacetime.design_settings.shapes),
            "gaps": None if spacetime.design_settings.gaps is None else list(spacetime.design_settings.gaps),
            "locality": spacetime.design_settings.locality,
            "radii": None if spacetime.design_settings.radii is None else list(spacetime.design_settings.radii),
            "region": spacetime.design_settings.region},
        "source_hash": spacetime.source_hash,
    }


def spec_summary(spacetime) -> str:
    info = spec_json(spacetime)
    lines = [f"{spacetime.path}: valid spec, format 1", f"  title:       {info['title']}",
             f"  dimension:   {info['dimension']}  coordinates ({', '.join(info['coordinates'])})"]
    if info["parameters"]:
        lines.append("  parameters:  " + ", ".join(
            f"{k} = {v['value']:g}" if v["value"] is not None else k for k, v in info["parameters"].items()))
    for name, region in info["regions"].items():
        extra = f" where {region['where']}" if region["where"] else ""
        unknowns = f", unknowns {', '.join(region['unknowns'])}" if region["unknowns"] else ""
        lines.append(f"  region:      {name}{extra}{unknowns}")
    for interface in info["interfaces"]:
        lines.append(f"  interface:   {interface['between'][0]} | {interface['between'][1]} at {interface['at']}")
    if info["field"]:
        lines.append(f"  field:       mass {info['field']['mass']}, coupling {info['field']['coupling']}"
                     + (f", {info['field']['boundary']} at an AdS boundary"
                        if info["field"]["boundary"] != "dirichlet" else ""))
    if info["detector"] and info["detector"]["at"] is None:
        lines.append(f"  detector:    shared by the detectors below: state {info['detector']['state']}")
    elif info["detector"]:
        d = info["detector"]
        lines.append(f"  detector:    at {d['at']}, {d['switching'].get('shape')} switching, state {d['state']}, "
                     f"{len(d['gaps'])} gaps")
    for d in info["detectors"]:
        lines.append(f"  detectors:   {d['name']} at {d['at']}, gap {d['gap']:g}, {d['switching'].get('shape')} "
                     "switching")
    if info["compare"]:
        lines.append(f"  compare:     with {info['compare']['with']}")
    if info["design"]:
        d = info["design"]
        lines.append(f"  design:      {', '.join(d['shapes'])} switchings, locality {d['locality']:g} of the round trip"
                     + (f", gaps in [{d['gaps'][0]:g}, {d['gaps'][1]:g}]" if d["gaps"] else "")
                     + (f", radii in [{d['radii'][0]:g}, {d['radii'][1]:g}]" if d["radii"] else "")
                     + (f", radii over region {d['region']}" if d["region"] else ""))
    return "\n".join(lines)


def geometry_summary(spacetime, names) -> str:
    lines = [f"{spacetime.title}"]

    def short(expr):
        return _short(expr, variables=spacetime.coordinates)

    for name in names:
        geo = spacetime.geometry[name]
        lines.append(f"\nregion {name} ({geo.dimension} dimensions, coordinates "
                     f"{', '.join(c.name for c in geo.coordinates)})")
        lines.append(f"  nonzero Christoffel symbols:     {len(geo.christoffel)}")
        lines.append(f"  independent nonzero Riemann:     {len(geo.riemann)}")
        lines.append(f"  Ricci scalar R         = {short(geo.ricci_scalar)}")
        lines.append(f"  Kretschmann R_abcd R^abcd = {short(geo.kretschmann)}")
        lines.append(f"  Ricci squared R_ab R^ab  = {short(geo.ricci_squared)}")
        stress = geo.stress_energy
        if stress["energy_density"] is not None:
            lines.append(f"  energy density rho     = {short(stress['energy_density'])}")
            for cname, p in stress["pressures"].items():
                lines.append(f"  pressure p_{cname:<11} = {short(p)}")
            for cond, verdict in geo.energy_conditions.items():
                where = verdict.get("fails_where")
                tail = f", fails where {where}" if where and where != "everywhere" else ""
                lines.append(f"  {cond + ' energy condition':<26} {verdict['verdict']} ({verdict['how']}{tail})")
        elif all(sp.simplify(x) == 0 for x in stress["mixed"]):
            lines.append("  vacuum: T_ab = 0")
    return "\n".join(lines)


def junction_summary(spacetime) -> str:
    from derive.report.display import one_root

    lines = [spacetime.title]

    def short(expr):
        return _short(expr, variables=spacetime.coordinates)

    for shell in spacetime.shells:
        first, second = shell.interface.between
        lines.append(f"\ninterface {first} | {second} at {shell.interface.text} (normal from {first} to {second})")
        for unknown, value in shell.solved.items():
            rooted = one_root(value, spacetime.parameter_values)
            lines.append(f"  first junction condition: {unknown} = {short(rooted if rooted is not None else value)}")
        if not shell.solved:
            lines.append("  first junction condition: induced metrics agree")
        lines.append(f"  [K] = {short(shell.extrinsic_curvature['trace_jump'])}")
        if shell.surface_energy_density is not None:
            lines.append(f"  surface energy density sigma = {short(shell.surface_energy_density)}")
            lines.append(f"  surface pressure p           = {short(shell.surface_pressure)}")
        if shell.proper_mass is not None:
            lines.append(f"  proper mass m = 4 pi R^2 sigma = {short(shell.proper_mass)}")
        values = spacetime.parameter_values
        if shell.surface_energy_density is not None:
            sigma = shell.surface_energy_density.subs(values)
            p = shell.surface_pressure.subs(values)
            if sigma.is_number and p.is_number:
                lines.append(f"  at the spec's values: sigma = {float(sigma):.15g}, p = {float(p):.15g}")
        for cond, verdict in shell.energy_conditions.items():
            lines.append(f"  {cond + ' energy condition':<26} {verdict['verdict']} ({verdict['how']})")
    return "\n".join(lines)


def _numeric(text) -> bool:
    try:
        float(str(text))
    except ValueError:
        return False
    return True


def field_summary(spacetime, data) -> str:
    lines = [f"{spacetime.title}: field with mass {data['mass']}, coupling {data['coupling']}"
             + (f", l = {data['l']}" if data["l"] is not None else "")]
    for name, region in data["regions"].items():
        lines.append(f"\nregion {name}: f = {_short(region['f'], 60)}, h = {_short(region['h'], 60)}")
        lines.append(f"  dr*/dr = {_short(region['dtortoise_dr'])}")
        lines.append(f"  r*     = {_short(region['tortoise']) if region['tortoise'] else '(quadrature)'}")
        lines.append(f"  V      = {_short(region['potential'])}")
        for side, end in region["ends"].items():
            detail = end.get("tail") or end.get("region") or ""
            if end["kind"] == "horizon":
                detail = (f"({end['horizon']}) at {end['at']}"
                          + (f" = {end['radius']}" if end['radius'] != end['at'] and not _numeric(end['radius'])
                             else "")
                          + (f" = {end['value']:.15g}" if str(end['radius']) != f"{end['value']:.15g}" else "")
                          + f", surface gravity kappa = {end['surface_gravity']}")
            lines.append(f"  {side} end: {end['kind']} {detail}".rstrip())
    for interface in data["interfaces"]:
        first, second = interface["between"]
        lines.append(f"\nmatching {first} -> {second} at {interface['at']}: (u, du/dr*) transfer matrix")
        for row in interface["transfer_matrix"]:
            lines.append("  [" + ",  ".join(_short(x, 70) for x in row) + "]")
    return "\n".join(lines)


def _shown(value, spec: str, width: int = 0) -> str:
    """A number as ``spec``, or "not reached" (right-aligned to ``width``) where there is none (a value the
    computation could not reach is written as null in JSON)."""
    if value is None or not math.isfinite(value):
        return f"{'not reached':>{width}}"
    return format(value, spec)


def response_summary(title: str, data: dict) -> str:
    s = data["switching"]
    size = (f"width {s['width']:g}" if s.get("support") is None
            else f"support {s['support'][1] - s['support'][0]:g}")
    lines = [f"{title}: static detector at r = {data.get('at', 0.0):g}, {s['shape']} switching of {size} "
             f"(duration {s['duration']:.4g} holding all but {s['tail']:g} of chi^2), {data['state']} state"]
    header = f"{'gap':>8} {'F':>22} {'error':>9}"
    reference = data.get("reference")
    if reference:
        header += f" {'F_ref':>20} {'rel. difference':>16} {'error':>9} {'runs to tell apart':>20}"
    lines.append(header)
    for i, gap in enumerate(data["gaps"]):
        row = f"{gap:8.4g} {_shown(data['response'][i], '22.15e', 22)} {_shown(data['error'][i], '9.1e', 9)}"
        if reference:
            trials = (data["trials_to_distinguish"] or [None] * len(data["gaps"]))[i]
            bound = (data.get("trials_lower_bound") or [None] * len(data["gaps"]))[i]
            runs = f"{trials:20.4g}" if trials is not None else (f"{'> %.3g' % bound:>20}" if bound is not None
                                                               else f"{'-':>20}")
            row += (f" {reference['response'][i]:20.13e} {data['relative_difference'][i]:16.6e} "
                    f"{data['relative_difference_error'][i]:9.1e} {runs}")
        lines.append(row)
    if "states" in data:
        lines.append(f"the three states (local Tolman temperature {data['local_temperature']:.6g}):")
        for name, value in data["states"].items():
            lines.append(f"  {name:>15}: " + ", ".join(f"{_shown(f, '.6e')} +- {_shown(e, '.1e')}"
                                                         for f, e in zip(value["response"], value["error"])))
    teff = data.get("effective_temperature") or {}
    shown = [f"{g:g}: {v:.8g} +- {e:.1e}" for g, v, e in zip(teff.get("gap", []), teff.get("value", []),
                                                             teff.get("error", [])) if v is not None]
    if shown:
        lines.append("effective temperature Omega/ln(F(-Omega)/F(Omega)) at gap " + "; ".join(shown))
    levels = data.get("bound_levels")
    if levels:
        shares = ", ".join(f"{v:.3e}" for v in levels["share"])
        series = levels.get("series")
        rest = f", the rest from their {series} series" if series else " (all of them)"
        lines.append(f"bound levels below the mass (included in F): the lowest {levels['found']} found, omega "
                     f"{levels['omega'][0]:.10g} ... {levels['omega'][-1]:.10g}{rest}; their share of F at each "
                     f"gap: {shares}")
    loc = data["locality"]
    lines.append(f"locality: switching duration {loc['duration']:.4g} vs light round trip {loc['round_trip']:.4g} "
                 f"-> {'local' if loc['local'] else 'NOT local'}")
    if reference:
        lines.append(f"compared with {reference['with']}; runs at {data['sigmas']:g} standard deviations with "
                     f"coupling lambda = {data['coupling']}")
    for note in data["notes"]:
        lines.append("note: " + note)
    return "\n".join(lines)
