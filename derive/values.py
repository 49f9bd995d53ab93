"""Numbers from the command line: "a,b,c" or FROM:TO:COUNT (linearly spaced)."""

from __future__ import annotations

import numpy as np

from derive.errors import InputError

MAX_VALUES = 200_000
MAX_MAGNITUDE = 1e12


def parse_values(text: str, key: str) -> np.ndarray:
    """A list "0.1,0.5,1" or FROM:TO:COUNT; finite numbers only; an InputError naming ``key`` otherwise."""
    if not isinstance(text, str) or len(text) > 100_000:
        raise InputError(f"{key}: expected a list 'a,b,c' or FROM:TO:COUNT", key=key)
    try:
        if ":" in text:
            start, stop, count = text.split(":")
            if int(count) > MAX_VALUES:
                raise InputError(f"{key}: more than {MAX_VALUES} values", key=key)
            values = np.linspace(float(start), float(stop), int(count))
        else:
            values = np.array([float(x) for x in text.split(",") if x.strip()])
    except ValueError:
        raise InputError(f"{key} expects a list 'a,b,c' or FROM:TO:COUNT, got {text!r}", key=key) from None
    if len(values) == 0 or not np.all(np.isfinite(values)) or len(values) > MAX_VALUES \
            or np.any(np.abs(values) > MAX_MAGNITUDE):
        raise InputError(f"{key}: expected between 1 and {MAX_VALUES} finite values of magnitude at most "
                         f"{MAX_MAGNITUDE:g}, got {text!r}", key=key)
    return values
