"""Static positions written as a researcher writes them: ``"r = 2, theta = pi/2, phi = 0"``.

A position names the radius (the spec's first spatial coordinate) and, optionally, the angles (the spec's other
coordinates, in their order, read as the standard angles of the unit sphere: for (theta, phi) the unit vector
(cos theta, sin theta cos phi, sin theta sin phi); in general x_1 = cos a_1, x_2 = sin a_1 cos a_2, ...,
x_{n+1} = sin a_1 ... sin a_n).  Angles left out are zero.  Each value is an expression in the spec's
parameters (parsed by the same safe parser as the spec, never evaluated as code) and is evaluated at their
values.  A position may also be given as a number (the radius) or a mapping {coordinate name: value}.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from derive.errors import InputError
from derive.spec.expressions import ExpressionError, ExpressionParser

MAX_PARTS = 16


@dataclass(frozen=True)
class Position:
    """A static point: its radius, its angles (in the order of the spec's angular coordinates) and the text it
    was read from."""

    radius: float
    angles: tuple[float, ...]
    text: str

    def unit_vector(self) -> np.ndarray:
        """The point's direction on the unit sphere (standard angles; see the module docstring)."""
        vector, carried = [], 1.0
        for angle in self.angles:
            vector.append(carried * math.cos(angle))
            carried *= math.sin(angle)
        vector.append(carried)
        return np.array(vector)

    def to_json(self) -> dict:
        return {"r": self.radius, "angles": list(self.angles), "text": self.text}


def cos_angle(first: Position, second: Position) -> float:
    """cos of the angle between the two points' directions, as seen from the centre (1 when either is at the
    centre, where the direction does not matter)."""
    if first.radius == 0 or second.radius == 0:
        return 1.0
    return float(np.clip(first.unit_vector() @ second.unit_vector(), -1.0, 1.0))


def _split_top_level(text: str) -> list[str]:
    """Split at the commas outside brackets."""
    parts, depth, start = [], 0, 0
    for i, ch in enumerate(text):
        if ch in "([{":
            depth += 1
        elif ch in ")]}":
            depth -= 1
        elif ch == "," and depth == 0:
            parts.append(text[start:i])
            start = i + 1
    parts.append(text[start:])
    return [p.strip() for p in parts]


def parse_position(spacetime, value, key: str = "at") -> Position:
    """A :class:`Position` from a number (the radius), a mapping {coordinate: value} or a text
    ``"r = 2, theta = pi/2"``; :class:`~derive.errors.InputError` (exit 2) naming ``key`` otherwise."""
    coordinates = [c.name for c in spacetime.coordinates]
    if len(coordinates) < 2:
        raise InputError("the spacetime has no spatial coordinate to place a point on", file=spacetime.path, key=key)
    radius_name, angle_names = coordinates[1], coordinates[2:]
    fail = lambda problem: InputError(problem, file=spacetime.path, key=key)  # noqa: E731
    if isinstance(value, bool):
        raise fail("expected a position such as \"r = 2, theta = pi/2\", got a boolean")
    if isinstance(value, (int, float, np.integer, np.floating)):
        entries, text = {radius_name: float(value)}, f"{radius_name} = {float(value):g}"
    elif isinstance(value, Mapping):
        entries, text = dict(value), ", ".join(f"{k} = {v}" for k, v in value.items())
    elif isinstance(value, str):
        text = value
        if len(text) > 1000:
            raise fail("the position is longer than 1000 characters")
        parts = _split_top_level(text)
        if len(parts) > MAX_PARTS:
            raise fail(f"a position has at most {MAX_PARTS} parts")
        entries = {}
        for part in parts:
            left, equals, right = part.partition("=")
            name = left.strip()
            if not equals or not right.strip() or "=" in right:
                raise fail(f"cannot read {part!r}: write each part as 'coordinate = value', e.g. "
                           f"\"{radius_name} = 2\"")
            if name in entries:
                raise fail(f"{name} is given twice")
            entries[name] = right.strip()
    else:
        raise fail(f"expected a position such as \"{radius_name} = 2\", got {type(value).__name__}")
    symbols = {p.name: p.symbol for p in spacetime.parameters.values()}
    parser = ExpressionParser(symbols, {})
    numbers = {}
    for name, entry in entries.items():
        if name not in coordinates[1:]:
            spatial = ", ".join(coordinates[1:])
            raise fail(f"{name!r} is not a spatial coordinate of this spacetime (one of {spatial})")
        if isinstance(entry, bool) or not isinstance(entry, (str, int, float, np.integer, np.floating)):
            raise fail(f"{name}: expected a number or an expression in the parameters")
        try:
            expr = parser.parse(entry) if isinstance(entry, str) else entry
            number = complex(spacetime_value(spacetime, expr))
        except ExpressionError as exc:
            raise fail(f"{name}: {exc}") from None
        except (TypeError, ValueError):
            raise fail(f"{name} = {entry}: not a number at the parameters' values") from None
        if number.imag != 0 or not math.isfinite(number.real) or abs(number.real) > 1e12:
            raise fail(f"{name} = {entry}: expected a finite real number, got {number:g}")
        numbers[name] = number.real
    if radius_name not in numbers:
        raise fail(f"the position must give the radius, e.g. \"{radius_name} = 2\"")
    radius = numbers[radius_name]
    if radius < 0:
        raise fail(f"{radius_name} = {radius:g}: a radius must not be negative")
    angles = tuple(numbers.get(name, 0.0) for name in angle_names)
    return Position(radius, angles, text)


def spacetime_value(spacetime, expr):
    """An expression in the parameters, at their values (a number)."""
    import sympy as sp

    return sp.N(sp.S(expr).subs(spacetime.parameter_values), 17)
