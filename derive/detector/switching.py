"""Switching functions chi(tau) in the detector's proper time, and |chi_hat(k)|^2 (PHYSICS.md section 8).

chi_hat(k) = int chi(tau) e^{-i k tau} dtau.  Each switching knows its effective duration: the length of the
interval that holds all but a stated tail of int chi^2 (Gaussians have no compact support).

So far: the Gaussian chi = exp(-tau^2/(2 sigma^2)), |chi_hat(k)|^2 = 2 pi sigma^2 exp(-sigma^2 k^2) (closed form).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import erfcinv

DEFAULT_TAIL = 1e-12


class UnsupportedSwitching(Exception):
    pass


@dataclass(frozen=True)
class Switching:
    """A switching function: shape, width (sigma for the Gaussian), and the tail for the effective duration."""

    shape: str
    width: float
    tail: float = DEFAULT_TAIL

    def chi(self, tau):
        return np.exp(-np.asarray(tau, dtype=float) ** 2 / (2 * self.width ** 2))

    def power(self, k):
        """|chi_hat(k)|^2."""
        sigma = self.width
        return 2 * np.pi * sigma ** 2 * np.exp(-(sigma * np.asarray(k, dtype=float)) ** 2)

    @property
    def reach(self) -> float:
        """Beyond |k| > reach the weight |chi_hat|^2 is below e^-100 of its peak."""
        return 10.0 / self.width

    @property
    def panel_width(self) -> float:
        return 0.5 / self.width

    @property
    def duration(self) -> float:
        """Length of the interval |tau| < T holding all but ``tail`` of int chi^2: chi^2 = exp(-tau^2/sigma^2),
        so the tail is erfc(T/sigma) and T = sigma erfcinv(tail)."""
        return float(2 * self.width * erfcinv(self.tail))


def switching_from_spec(spec: dict, values: dict) -> Switching:
    """Build a Switching from the spec's [detector] switching table (numbers already substituted)."""
    shape = spec.get("shape", "gaussian")
    if shape != "gaussian":
        raise UnsupportedSwitching(f"switching shape {shape!r} is not available yet (so far: gaussian)")
    width = float(values["width"])
    if not (width > 0 and np.isfinite(width)):
        raise ValueError(f"switching width must be positive, got {width}")
    tail = float(values.get("tail", DEFAULT_TAIL))
    if not (0 < tail < 1):
        raise ValueError(f"switching tail must lie between 0 and 1, got {tail}")
    return Switching("gaussian", width, tail)
