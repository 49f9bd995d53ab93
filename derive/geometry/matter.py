"""Stress-energy read off the Einstein tensor, and the classical energy conditions.

T^a_b = G^a_b / (8 pi) (geometric units, docs/conventions.md section 2).  For a diagonal metric whose first coordinate
is time, the static orthonormal frame gives the energy density rho = -T^t_t and the principal pressures
p_i = T^i_i.  The conditions (Hawking & Ellis 1973, sec. 4.3; Visser 1995, ch. 12):

* null (NEC):      rho + p_i >= 0 for every i
* weak (WEC):      NEC and rho >= 0
* strong (SEC):    NEC and rho + sum_i p_i >= 0
* dominant (DEC):  rho >= |p_i| for every i

Each inequality is decided symbolically when sympy's assumptions settle its sign ("how": "symbolic");
otherwise by sampling the region's domain at the spec's parameter values ("how": "sampled", with the
coordinate intervals where it fails); otherwise it is "undecided".
"""

from __future__ import annotations

import math

import sympy as sp

CONDITIONS = ("null", "weak", "strong", "dominant")
SAMPLES = 64


def inequalities(rho: sp.Expr, pressures: list[sp.Expr]) -> dict[str, list[sp.Expr]]:
    """The expressions that must be non-negative for each condition."""
    null = [rho + p for p in pressures]
    return {
        "null": null,
        "weak": null + [rho],
        "strong": null + [rho + sum(pressures)],
        "dominant": [rho - p for p in pressures] + [rho + p for p in pressures] + [rho],
    }


def sign_of(expr: sp.Expr) -> str:
    """'nonnegative', 'negative' or 'unknown' from sympy's assumptions, looking at factors."""
    expr = sp.factor(sp.cancel(expr)) if expr.count_ops() < 400 else expr
    if expr == 0 or expr.is_nonnegative:
        return "nonnegative"
    if expr.is_negative:
        return "negative"
    numer, denom = sp.fraction(expr)
    signs = []
    for part in sp.Mul.make_args(numer) + sp.Mul.make_args(denom):
        base, exponent = part.as_base_exp()
        if exponent.is_even:
            signs.append(1)   # non-negative, zero at most where the base vanishes
            continue
        if part.is_positive:
            signs.append(1)
        elif part.is_negative:
            signs.append(-1)
        else:
            return "unknown"
    if 0 in signs:
        return "unknown"
    return "nonnegative" if math.prod(signs) > 0 else "negative"


def sample_points(region, coordinates, values: dict, count: int = SAMPLES):
    """Points spread over the region's domain at the given parameter values (numeric)."""
    import numpy as np

    columns = []
    for c in coordinates:
        domain = region.domain_of(c)
        lo = hi = None
        if domain is not None:
            lo = float(domain.lower.subs(values)) if domain.lower is not None else None
            hi = float(domain.upper.subs(values)) if domain.upper is not None else None
        name = c.name
        if lo is None and hi is None:
            if name in ("theta", "th", "vartheta"):
                lo, hi = 0.0, math.pi
            elif name in ("phi", "varphi", "psi"):
                lo, hi = 0.0, 2 * math.pi
            elif c.is_positive or name in ("r", "rho"):
                lo, hi = 0.0, 50.0
            else:
                lo, hi = -5.0, 5.0
        elif lo is None:
            lo = 0.0 if (c.is_positive or name == "r") and hi > 0 else hi - 50.0
        elif hi is None:
            hi = lo + 50.0 if lo >= 0 else 50.0
        # interior points only; a geometric spacing resolves structure near the lower end
        u = (np.arange(count) + 0.5) / count
        if lo > 0 and hi / lo > 20:
            columns.append(lo * (hi / lo) ** u)
        else:
            columns.append(lo + (hi - lo) * u)
    return columns


def decide(expr: sp.Expr, region, coordinates, values: dict) -> dict:
    """Decide expr >= 0 over the region: {"verdict", "how", ("fails_where")}."""
    import numpy as np

    sign = sign_of(expr)
    if sign == "nonnegative":
        return {"verdict": "holds", "how": "symbolic"}
    if sign == "negative":
        return {"verdict": "fails", "how": "symbolic", "fails_where": "everywhere"}
    numeric = expr.subs(values)
    used = [c for c in coordinates if c in numeric.free_symbols]
    if numeric.free_symbols - set(used) or numeric.atoms(sp.core.function.AppliedUndef):
        return {"verdict": "undecided", "how": "free parameters or functions without values"}
    grids = sample_points(region, used, values)
    if len(used) <= 2:
        points = [m.ravel() for m in np.meshgrid(*grids, indexing="ij")]
    else:   # a Latin-hypercube-like spread: each coordinate's samples in a different order
        rng = np.random.default_rng(0)
        points = [g[rng.permutation(len(g))] for g in grids]
    func = sp.lambdify(used, numeric, "numpy")
    with np.errstate(all="ignore"):
        value = np.asarray(func(*points), dtype=complex) * np.ones(len(points[0]) if points else 1)
    if not np.all(np.isfinite(value)) or np.max(np.abs(value.imag)) > 1e-12 * max(np.max(np.abs(value)), 1):
        return {"verdict": "undecided", "how": "sampled (not finite or not real somewhere)"}
    value = value.real
    scale = max(float(np.max(np.abs(value))), 1e-300)
    bad = value < -1e-12 * scale
    if not np.any(bad):
        return {"verdict": "holds", "how": "sampled at the spec's parameter values"}
    where = {c.name: [float(p[bad].min()), float(p[bad].max())] for c, p in zip(used, points)}
    return {"verdict": "fails", "how": "sampled at the spec's parameter values",
            "fails_where": where or "everywhere"}


def energy_conditions(rho, pressures, region, coordinates, values) -> dict:
    """Verdict of each condition: holds / fails / undecided, with how it was decided."""
    result = {}
    for name, exprs in inequalities(rho, pressures).items():
        checks = [decide(e, region, coordinates, values) for e in exprs]
        verdicts = [c["verdict"] for c in checks]
        if "fails" in verdicts:
            failing = next(c for c in checks if c["verdict"] == "fails")
            result[name] = dict(failing)
        elif "undecided" in verdicts:
            result[name] = {"verdict": "undecided", "how": next(c["how"] for c in checks
                                                                  if c["verdict"] == "undecided")}
        else:
            hows = {c["how"] for c in checks}
            result[name] = {"verdict": "holds", "how": "symbolic" if hows == {"symbolic"} else
                            "sampled at the spec's parameter values"}
    return result
