"""Verification of numpy kernels against high-precision evaluation of their expressions.

For each kernel, at 200 or more points spread over its domain (the spec's parameter values; r across the
region, with points crowding any horizon; omega log-spaced over the range in use; l over 0..20):

1. the reference is the mpmath twin at 40 significant digits (its literals are exact, so it evaluates the
   expression itself, not a double-precision copy); the twin is checked against sympy's own ``evalf`` at the
   first few points;
2. the numpy kernel's largest relative error, and where it occurs, is reported;
3. when it exceeds the tolerance, other algebraically equal forms are tried (factored, cancelled, expanded);
   if none passes, the kernel is flagged with the condition number sum|terms|/|sum| at the worst point, which
   says whether double precision can do better at all.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import mpmath
import numpy as np
import sympy as sp

TOLERANCE = 1e-12
REFERENCE_DIGITS = 40
EVALF_CHECKS = 4


@dataclass
class Verification:
    """Result of checking one kernel."""

    max_relative_error: float
    points: int
    worst_point: dict
    status: str                     # "verified" or "flagged"
    reason: str = ""
    condition_number: float | None = None
    form: str = "as derived"
    twin_checked: int = 0
    extra: dict = field(default_factory=dict)

    def as_json(self) -> dict:
        out = {"max_relative_error": self.max_relative_error, "points": self.points,
               "worst_point": self.worst_point, "status": self.status, "form": self.form,
               "twin_checked_against_evalf": self.twin_checked}
        if self.reason:
            out["reason"] = self.reason
        if self.condition_number is not None:
            out["condition_number"] = self.condition_number
        return out


def relative_errors(values, reference) -> np.ndarray:
    """|value - reference| / |reference|, with exact zeros of the reference measured against the typical size."""
    values = np.asarray(values, dtype=complex)
    reference = np.asarray(reference, dtype=complex)
    scale = np.abs(reference)
    floor = max(float(np.median(scale)) * 1e-30, 1e-300)
    return np.abs(values - reference) / np.maximum(scale, floor)


def reference_values(twin, columns, shape) -> np.ndarray:
    """The mpmath twin at REFERENCE_DIGITS digits at every point (columns: one array per argument)."""
    count = len(columns[0]) if columns else 1
    out = []
    with mpmath.workdps(REFERENCE_DIGITS):
        for i in range(count):
            args = [mpmath.mpf(float(c[i])) for c in columns]
            value = twin(*args)
            flat = _flatten(value)
            out.append([complex(v) for v in flat])
    return np.array(out)


def _flatten(value):
    if isinstance(value, (list, tuple)):
        result = []
        for v in value:
            result.extend(_flatten(v))
        return result
    return [value]


def numpy_values(kernel, columns, shape) -> np.ndarray:
    value = np.asarray(kernel(*columns))
    if shape == ():
        return value.reshape(-1, 1)
    count = len(columns[0])
    flat = value.reshape(int(np.prod(shape)), count)
    return flat.T


def check_twin(twin, components, arguments, columns, count=EVALF_CHECKS) -> int:
    """Compare the mpmath twin with sympy's evalf of the expression itself at a few points."""
    checked = 0
    with mpmath.workdps(REFERENCE_DIGITS):
        for i in range(min(count, len(columns[0]) if columns else 1)):
            point = {a: sp.Float(float(c[i]), REFERENCE_DIGITS) for a, c in zip(arguments, columns)}
            twin_value = _flatten(twin(*[mpmath.mpf(float(c[i])) for c in columns]))
            for component, value in zip(components, twin_value):
                exact = complex(sp.N(component.subs(point), REFERENCE_DIGITS))
                if abs(complex(value) - exact) > 1e-25 * max(abs(exact), 1e-280):
                    raise AssertionError(f"mpmath twin disagrees with evalf at {point}: {value} vs {exact}")
            checked += 1
    return checked


def condition_number(component, arguments, point) -> float:
    """sum |terms| / |sum| of the top-level sum at a point (1 for a product)."""
    terms = sp.Add.make_args(sp.expand(component)) if sp.count_ops(component) < 2000 else (component,)
    subs = {a: sp.Float(v, 30) for a, v in zip(arguments, point)}
    total = abs(complex(sp.N(component.subs(subs), 30)))
    size = sum(abs(complex(sp.N(t.subs(subs), 30))) for t in terms)
    return float(size / total) if total > 0 else float("inf")
