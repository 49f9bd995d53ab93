"""JSON of the symbolic stages: expressions as strings sympy reads back (README.md), numbers as floats."""

from __future__ import annotations

import json
import math
from functools import partial

import sympy as sp

from derive.report import display


def expr_text(expr, variables=()) -> str:
    """str() of a sympy expression, the form sympy reads back, with sums in the order papers write them
    (terms free of ``variables`` first, then by their power)."""
    return display.text(expr, variables)


def matrix_text(matrix: sp.Matrix, variables=()) -> list[list[str]]:
    return [[expr_text(matrix[i, j], variables) for j in range(matrix.shape[1])] for i in range(matrix.shape[0])]


def geometry_json(geo) -> dict:
    """The geometry of one region (keys documented in README.md)."""
    _tx, _mx = partial(expr_text, variables=geo.coordinates), partial(matrix_text, variables=geo.coordinates)

    names = [c.name for c in geo.coordinates]
    stress = geo.stress_energy
    out = {
        "coordinates": names,
        "metric": _mx(geo.metric),
        "inverse_metric": _mx(geo.inverse_metric),
        "christoffel": {f"{names[a]},{names[b]},{names[c]}": _tx(v) for (a, b, c), v in geo.christoffel.items()},
        "riemann": {",".join(names[i] for i in k): _tx(v) for k, v in geo.riemann.items()},
        "ricci": _mx(geo.ricci),
        "ricci_scalar": _tx(geo.ricci_scalar),
        "einstein": _mx(geo.einstein),
        "kretschmann": _tx(geo.kretschmann),
        "ricci_squared": _tx(geo.ricci_squared),
        "stress_energy": {
            "mixed": _mx(stress["mixed"]),
            "frame": stress["frame"],
            "energy_density": None if stress["energy_density"] is None else _tx(stress["energy_density"]),
            "pressures": None if stress["pressures"] is None else
            {k: _tx(v) for k, v in stress["pressures"].items()},
        },
        "energy_conditions": geo.energy_conditions,
    }
    if geo.dimension >= 4:
        out["weyl_squared"] = _tx(geo.weyl_squared)
    return out


def _clean(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


def dumps(data) -> str:
    return json.dumps(_clean(data), indent=2, sort_keys=False)


def _textify(value):
    """Sympy objects inside nested dicts and lists become strings; numbers and text stay."""
    if isinstance(value, dict):
        return {str(k): _textify(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_textify(v) for v in value]
    if isinstance(value, sp.MatrixBase):
        return matrix_text(value)
    if isinstance(value, sp.Basic):
        return expr_text(value)
    return value


def junction_json(shell) -> dict:
    """One interface (keys documented in README.md)."""
    _tx, _mx = partial(expr_text, variables=shell.coordinates), partial(matrix_text, variables=shell.coordinates)

    k = shell.extrinsic_curvature
    return {
        "between": list(shell.interface.between),
        "at": shell.interface.text,
        "solved": {str(u): _tx(v) for u, v in shell.solved.items()},
        "intrinsic_coordinates": [c.name for c in shell.tangential],
        "induced_metric": _mx(shell.induced_metric),
        "normal_points_to_larger": shell.coordinate.name if shell.orientation > 0 else None,
        "extrinsic_curvature": {"first": _mx(k["minus"]), "second": _mx(k["plus"]),
                                "jump": _mx(k["jump"]), "trace_jump": _tx(k["trace_jump"])},
        "surface_stress": _mx(shell.surface_stress),
        "surface_energy_density": _textify(shell.surface_energy_density),
        "surface_pressure": _textify(shell.surface_pressure),
        "surface_pressures": _textify(shell.surface_pressures),
        "proper_mass": _textify(shell.proper_mass),
        "ricci_delta": _tx(shell.ricci_delta),
        "energy_conditions": shell.energy_conditions,
    }


def field_json(problem, l_value=None) -> dict:
    """The radial problem of every region and the transfer matrix of every interface."""
    coordinates = problem.spacetime.coordinates
    _tx, _mx = partial(expr_text, variables=coordinates), partial(matrix_text, variables=coordinates)

    from derive.fields.radial import L_SYMBOL

    def at_l(expr):
        return expr.subs(L_SYMBOL, l_value) if l_value is not None and isinstance(expr, sp.Basic) else expr

    def deep(value):
        if isinstance(value, dict):
            return {k: deep(v) for k, v in value.items()}
        if isinstance(value, (list, tuple)):
            return [deep(v) for v in value]
        return at_l(value)

    regions = {}
    for name, region in problem.regions.items():
        regions[name] = {
            "f": _tx(region.f), "h": _tx(region.h),
            "transverse": {"n": region.form.n, "k": region.form.k},
            "eigenvalue": _tx(at_l(region.eigenvalue)),
            "ricci_scalar": _tx(region.ricci_scalar),
            "dtortoise_dr": _tx(region.dtortoise_dr),
            "tortoise": None if region.tortoise is None else _tx(region.tortoise),
            "potential": _tx(at_l(region.potential)),
            "ends": _textify(deep(region.ends)),
        }
        named = region.tortoise_through_roots
        if named is not None:    # r_* through the named roots of its denominator, with their definitions
            regions[name]["tortoise_through_roots"] = {
                "expression": _tx(named[0]), "definitions": {str(k): _tx(v) for k, v in named[1].items()},
                "roots_of": _tx(named[2])}
    interfaces = [{"between": list(m.between), "at": m.shell.interface.text,
                   "transfer_matrix": _mx(m.transfer_matrix.applyfunc(at_l)),
                   "transfer_matrix_named": _mx(m.named_transfer_matrix[0]),
                   "definitions": {str(k): _tx(v) for k, v in m.named_transfer_matrix[1].items()},
                   "derivative_jump": _tx(m.derivative_jump)} for m in problem.interfaces]
    return {"l": l_value, "mass": _tx(problem.spacetime.field.mass),
            "coupling": _tx(problem.spacetime.field.coupling), "boundary": problem.spacetime.field.boundary,
            "regions": regions, "interfaces": interfaces}
