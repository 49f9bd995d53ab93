"""JSON of the symbolic stages: expressions as strings sympy reads back (DESIGN.md), numbers as floats."""

from __future__ import annotations

import json
import math
import os
import tempfile

import sympy as sp


def expr_text(expr) -> str:
    """str() of a sympy expression: the form sympy reads back."""
    return str(expr)


def matrix_text(matrix: sp.Matrix) -> list[list[str]]:
    return [[expr_text(matrix[i, j]) for j in range(matrix.shape[1])] for i in range(matrix.shape[0])]


def geometry_json(geo) -> dict:
    """The geometry of one region (keys documented in README.md)."""
    names = [c.name for c in geo.coordinates]
    stress = geo.stress_energy
    out = {
        "coordinates": names,
        "metric": matrix_text(geo.metric),
        "inverse_metric": matrix_text(geo.inverse_metric),
        "christoffel": {f"{names[a]},{names[b]},{names[c]}": expr_text(v) for (a, b, c), v in geo.christoffel.items()},
        "riemann": {",".join(names[i] for i in k): expr_text(v) for k, v in geo.riemann.items()},
        "ricci": matrix_text(geo.ricci),
        "ricci_scalar": expr_text(geo.ricci_scalar),
        "einstein": matrix_text(geo.einstein),
        "kretschmann": expr_text(geo.kretschmann),
        "ricci_squared": expr_text(geo.ricci_squared),
        "stress_energy": {
            "mixed": matrix_text(stress["mixed"]),
            "frame": stress["frame"],
            "energy_density": None if stress["energy_density"] is None else expr_text(stress["energy_density"]),
            "pressures": None if stress["pressures"] is None else
            {k: expr_text(v) for k, v in stress["pressures"].items()},
        },
        "energy_conditions": geo.energy_conditions,
    }
    if geo.dimension >= 4:
        out["weyl_squared"] = expr_text(geo.weyl_squared)
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


def write_atomic(path: str, text: str | bytes) -> None:
    """Write a file so that it either appears whole or not at all."""
    folder = os.path.dirname(os.path.abspath(path)) or "."
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".tmp-")
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(text.encode("utf-8") if isinstance(text, str) else text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
