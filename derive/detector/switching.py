"""Switching functions chi(tau) in the detector's proper time, and |chi_hat(k)|^2 (docs/conventions.md section 8).

chi_hat(k) = int chi(tau) e^{-i k tau} dtau.  Every switching knows its support (None for the Gaussian), its
effective duration (the shortest interval centred on the peak that holds all but ``tail`` of int chi^2), the
frequency reach beyond which its weight may be neglected, and an absolute error bound on |chi_hat|^2.

Shapes (spec keys in brackets):
  gaussian  chi = exp(-tau^2/(2 width^2));  |chi_hat|^2 = 2 pi width^2 exp(-width^2 k^2)  (closed form)
  sharp     chi = 1 on |tau| < duration/2;   |chi_hat|^2 = (2 sin(k T/2)/k)^2  (closed form; decays as k^-2)
  bump      chi = exp(1 - 1/(1 - (2 tau/T)^2)) on |tau| < T/2 = duration/2: smooth (C-infinity) and exactly
            zero outside its support
  cos2      a plateau of 1 with cos^2 ramps of length ``ramp`` at both ends (total ``duration``): C^1
  sin4      the same plateau with ramps r(x) = sin^2((pi/2) sin^2(pi x/2)), x in [0, 1], whose contact with 0
            and 1 is of fourth order like sin^4 (C^3)
  expression  a user chi(tau) from the spec on |tau| < duration/2 (lowered to a numpy kernel)
The transforms of the compact shapes are computed by composite Gauss-Legendre quadrature on two resolutions;
their difference bounds the error of |chi_hat|^2.  Shapes with algebraic decay |chi_hat|^2 ~ A k^-p leave a
tail beyond the reach that is bounded with the local flat density nu/(4 pi^2) (a factor 4 of margin) and
reported as part of the response's error.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy.special import erfcinv

from derive.errors import InputError

DEFAULT_TAIL = 1e-12
SMOOTH_CAP = 500.0    # the largest reach x support of a smooth compact switching (the bump: a tail of 1e-12 of
                      # F near 470/T; its 64-panel transform is accurate to 1e-22 of its peak up to 800/T)
SHAPES = ("gaussian", "sharp", "bump", "cos2", "sin4", "expression")
NODES, WEIGHTS = np.polynomial.legendre.leggauss(16)


class UnsupportedSwitching(Exception):
    pass


def _bad(problem: str, key: str):
    return InputError(problem, key=f"detector.switching.{key}")


@dataclass(frozen=True)
class Switching:
    """A Gaussian switching (closed-form transform); the base of the others."""

    shape: str
    width: float
    tail: float = DEFAULT_TAIL

    def chi(self, tau):
        return np.exp(-np.asarray(tau, dtype=float) ** 2 / (2 * self.width ** 2))

    def power(self, k):
        """|chi_hat(k)|^2."""
        sigma = self.width
        return 2 * np.pi * sigma ** 2 * np.exp(-(sigma * np.asarray(k, dtype=float)) ** 2)

    power_error = 0.0        # absolute error bound on |chi_hat|^2 (closed form: rounding only)
    decay = None             # p in |chi_hat|^2 ~ A k^-p, or None when faster than any power
    support = None           # (a, b) when chi vanishes outside [a, b]

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

    def tail_error(self, gaps, dimension: int = 4) -> np.ndarray:
        return np.zeros(len(np.atleast_1d(gaps)))

    def transform(self, k):
        """chi_hat(k) (complex): sqrt(2 pi) width e^{-width^2 k^2/2}."""
        sigma = self.width
        return (np.sqrt(2 * np.pi) * sigma * np.exp(-(sigma * np.asarray(k, dtype=float)) ** 2 / 2)).astype(complex)

    transform_error = 0.0    # absolute error bound on chi_hat

    @property
    def breakpoints(self) -> np.ndarray:
        """Where chi or a derivative may jump, ends included (tau): the Gaussian is cut at 10 widths (chi below
        e^-50 beyond)."""
        return np.array([-10.0, 10.0]) * self.width


def gauss_panels(a: float, b: float, panels: int):
    """Nodes and weights of composite 16-point Gauss-Legendre on ``panels`` equal panels of [a, b]."""
    edges = np.linspace(a, b, panels + 1)
    mid, half = (edges[:-1] + edges[1:]) / 2, np.diff(edges) / 2
    return (mid[:, None] + half[:, None] * NODES[None, :]).ravel(), (half[:, None] * WEIGHTS[None, :]).ravel()


def _bump(x):
    out = np.zeros_like(x)
    inside = np.abs(x) < 1
    out[inside] = np.exp(1 - 1 / (1 - x[inside] ** 2))
    return out


def _ramp_cos2(x):
    return np.sin(np.pi * x / 2) ** 2


def _ramp_sin4(x):
    return np.sin(np.pi / 2 * np.sin(np.pi * x / 2) ** 2) ** 2


@dataclass(frozen=True)
class CompactSwitching(Switching):
    """A switching that vanishes outside |tau| <= duration/2, with a numerically computed transform."""

    support_length: float = 1.0
    ramp: float = 0.0
    profile: Callable | None = field(default=None, compare=False)
    algebraic: int | None = None
    panels: int = 0

    @property
    def support(self):
        return (-self.support_length / 2, self.support_length / 2)

    @property
    def decay(self):
        return self.algebraic

    def chi(self, tau):
        tau = np.asarray(tau, dtype=float)
        half = self.support_length / 2
        if self.shape == "bump":
            return _bump(2 * tau / self.support_length)
        if self.shape in ("cos2", "sin4"):
            ramp = _ramp_cos2 if self.shape == "cos2" else _ramp_sin4
            distance = half - np.abs(tau)          # from the nearer end of the support
            x = np.clip(distance / self.ramp, 0.0, 1.0)
            return np.where(np.abs(tau) < half, ramp(x), 0.0)
        if self.shape == "sharp":
            return np.where(np.abs(tau) < half, 1.0, 0.0)
        values = np.asarray(self.profile(tau), dtype=float) * np.ones_like(tau)
        return np.where(np.abs(tau) <= half, values, 0.0)

    def _transform(self, k, panels):
        """chi_hat(k) by composite Gauss-Legendre on ``panels`` equal panels of the support."""
        k = np.asarray(k, dtype=float)
        tau, weight = gauss_panels(*self.support, panels)
        weight = weight * self.chi(tau)
        flat = k.ravel()
        out = np.empty(flat.shape, dtype=complex)
        for start in range(0, len(flat), 256):
            chunk = flat[start:start + 256]
            out[start:start + 256] = np.exp(-1j * chunk[:, None] * tau[None, :]) @ weight
        return out.reshape(k.shape)

    def transform(self, k):
        return self._transform(k, self.panels)

    @property
    def transform_error(self) -> float:
        return _transform_error(self)

    @property
    def breakpoints(self) -> np.ndarray:
        half = self.support_length / 2
        if self.shape in ("cos2", "sin4"):   # the plateau's ends, where the ramps meet it
            return np.array([-half, self.ramp - half, half - self.ramp, half])
        return np.array([-half, half])

    def power(self, k):
        if self.shape == "sharp":
            k = np.asarray(k, dtype=float)
            T = self.support_length
            small = np.abs(k * T) < 1e-4
            safe = np.where(small, 1.0, k)
            return np.where(small, T * T * (1 - (k * T) ** 2 / 12), (2 * np.sin(safe * T / 2) / safe) ** 2)
        return np.abs(self._transform(k, self.panels)) ** 2

    @property
    def power_error(self) -> float:
        if self.shape == "sharp":
            return 0.0
        return _power_error(self)

    @property
    def reach(self) -> float:
        return _reach(self)

    @property
    def panel_width(self) -> float:
        # |chi_hat|^2 oscillates with period about 2 pi/T: 12 Gauss nodes on panels of 2/T resolve it (the
        # response compares panels of this width and half of it)
        return 2.0 / self.support_length

    @property
    def duration(self) -> float:
        """The shortest centred interval holding all but ``tail`` of int chi^2 (at most the support)."""
        half = self.support_length / 2
        tau = np.linspace(0.0, half, 20001)
        weight = self.chi(tau) ** 2 + self.chi(-tau) ** 2
        cumulative = np.concatenate([[0.0], np.cumsum((weight[1:] + weight[:-1]) / 2 * np.diff(tau))])
        target = (1 - self.tail) * cumulative[-1]
        index = int(np.searchsorted(cumulative, target))
        return float(2 * tau[min(index, len(tau) - 1)])

    def tail_error(self, gaps, dimension: int = 4) -> np.ndarray:
        """A bound on the part of F beyond the reach, with four times the flat density c_D nu^(D-3) (c_D =
        area(S^(D-2))/(2 (2 pi)^(D-1))): int_start^inf 4 c_D (x + |Omega|)^(D-3) A x^-p dx, expanded binomially."""
        from math import comb

        from derive.solve.centre import sphere_area

        gaps = np.abs(np.atleast_1d(np.asarray(gaps, dtype=float)))
        p, q = self.algebraic, dimension - 3
        K = self.reach
        c = sphere_area(dimension - 2) / (2 * (2 * np.pi) ** (dimension - 1))
        if p is None:   # faster than any power: the tail itself on [K, 2K] (a fine trapezoid: an overestimate of
            # a convex tail), and beyond 2K its largest value over [2K, 3K] for a stretch of K (it falls faster
            # than that: e^{-sqrt(k T)} for the bump)
            k = np.linspace(K, 2 * K, 2001)
            weights = 4 * c * (k[None, :] + gaps[:, None]) ** q * self.power(k)[None, :]
            near = np.sum((weights[:, 1:] + weights[:, :-1]) / 2 * np.diff(k)[None, :], axis=1)
            far_peak = float(np.max(self.power(np.linspace(2 * K, 3 * K, 400))))
            return near + 4 * c * far_peak * (3 * K + gaps) ** q * K
        if p <= q + 1:
            return np.full(len(gaps), np.inf)
        A = _envelope(self, K)
        start = np.maximum(K - gaps, K / 2)
        total = sum(comb(q, j) * gaps ** (q - j) * start ** (j - p + 1) / (p - j - 1) for j in range(q + 1))
        return 4 * c * A * total


_CACHE: dict = {}


def _power_error(s: CompactSwitching) -> float:
    key = ("error", s)
    if key not in _CACHE:
        k = np.linspace(0.0, s.reach + 20 / s.support_length, 400)
        _CACHE[key] = float(np.max(np.abs(np.abs(s._transform(k, 2 * s.panels)) ** 2
                                          - np.abs(s._transform(k, s.panels)) ** 2)))
    return _CACHE[key]


def _transform_error(s: CompactSwitching) -> float:
    key = ("transform error", s)
    if key not in _CACHE:
        k = np.linspace(-(s.reach + 20 / s.support_length), s.reach + 20 / s.support_length, 800)
        _CACHE[key] = float(np.max(np.abs(s._transform(k, 2 * s.panels) - s._transform(k, s.panels))))
    return _CACHE[key]


def _envelope(s: CompactSwitching, K: float) -> float:
    """A = max over [K/2, 2K] of |chi_hat(k)|^2 k^p (the algebraic tail's constant)."""
    k = np.linspace(K / 2, 2 * K, 800)
    return float(np.max(s.power(k) * k ** s.algebraic))


def _reach(s: CompactSwitching, target: float = 1e-12) -> float:
    """The frequency beyond which the weight may be dropped: for fast decay, where the flat zero-gap response's
    tail with its margin (4 k |chi_hat(k)|^2 beyond K, against the whole) falls below ``target``, capped at
    SMOOTH_CAP/T; for an algebraic decay, where the tail bound falls below target/(4 pi) (F is about 1/(4 pi) at
    zero gap), capped at 200/T (the tail bound is then reported as error)."""
    key = ("reach", s)
    if key in _CACHE:
        return _CACHE[key]
    T = s.support_length
    reach = 200.0 / T
    if s.algebraic is None:
        k = np.linspace(0.0, SMOOTH_CAP / T, 5001)
        integrand = k * s.power(k)
        pieces = (integrand[1:] + integrand[:-1]) / 2 * np.diff(k)
        beyond = np.concatenate([np.cumsum(pieces[::-1])[::-1], [0.0]])
        fits = 4 * beyond <= target * beyond[0]
        reach = max(float(k[int(np.argmax(fits))]) if np.any(fits) else SMOOTH_CAP / T, 10.0 / T)
    for K in (np.arange(10.0, 200.0 + 1e-9, 5.0) / T if s.algebraic is not None else ()):
        if s.algebraic > 2:   # (a k^-2 tail is not integrable against the 3+1 density: keep the cap)
            A = _envelope(s, K)
            if 4 / (4 * np.pi ** 2) * A * K ** (2 - s.algebraic) / (s.algebraic - 2) <= target / (4 * np.pi):
                reach = K
                break
    _CACHE[key] = float(reach)
    return float(reach)


def switching_from_spec(spec: dict, values: dict, profile: Callable | None = None) -> Switching:
    """Build a Switching from the spec's [detector] switching table (numbers already substituted)."""
    shape = spec.get("shape", "gaussian")
    if shape not in SHAPES:
        raise UnsupportedSwitching(f"switching shape {shape!r} is not known (one of {', '.join(SHAPES)})")
    tail = float(values.get("tail", DEFAULT_TAIL))
    if not (0 < tail < 1):
        raise _bad(f"the tail must lie between 0 and 1, got {tail}", "tail")
    if shape == "gaussian":
        if "width" not in values:
            raise _bad("a gaussian switching needs width = (sigma, in the detector's proper time)", "width")
        width = float(values["width"])
        if not (width > 0 and np.isfinite(width)):
            raise _bad(f"the width must be positive, got {width}", "width")
        return Switching("gaussian", width, tail)
    if "duration" not in values:
        raise _bad(f"a switching of shape {shape!r} needs duration = (the length of its support)", "duration")
    duration = float(values["duration"])
    if not (duration > 0 and np.isfinite(duration)):
        raise _bad(f"the duration must be positive, got {duration}", "duration")
    ramp = 0.0
    if shape in ("cos2", "sin4"):
        ramp = float(values.get("ramp", duration / 4))
        if not (0 < ramp <= duration / 2):
            raise _bad(f"the ramp must lie in (0, duration/2] = (0, {duration / 2:g}], got {ramp}", "ramp")
    if shape == "expression" and profile is None:
        raise _bad("a switching of shape 'expression' needs its expression", "expression")
    algebraic = {"sharp": 2, "cos2": 6, "sin4": 10, "bump": None, "expression": None}[shape]
    # 16 Gauss nodes on each of 64 panels resolve the bump to rounding (its transform's two resolutions agree to
    # 1e-16); the ramps of cos2 and sin4 get 8 panels each; a user expression gets 512
    panels = 64 if shape == "bump" else max(64, int(np.ceil(duration / max(ramp, duration / 64) * 8)))
    if shape == "expression":
        values_at = np.asarray(profile(np.linspace(-duration / 2, duration / 2, 257)), dtype=float)
        if not np.all(np.isfinite(values_at)):
            raise _bad("the expression is not finite on its support", "expression")
        algebraic = _end_order(profile, duration)
    return CompactSwitching(shape, duration, tail, duration, ramp, profile, algebraic, panels)


def _end_order(profile, duration) -> int | None:
    """p in |chi_hat|^2 ~ k^-p for a user chi cut off at |tau| = duration/2: a jump in the m-th derivative at an
    end gives |chi_hat| ~ k^-(m+1) (integration by parts; common practice).  The m-th one-sided difference is
    taken at steps h and h/2: a derivative that vanishes shrinks with h, one that does not stays.  None when the
    first five vanish (treated as smooth; the reach then checks the decay)."""
    scale = float(np.max(np.abs(np.asarray(profile(np.linspace(-duration / 2, duration / 2, 101)), dtype=float))))
    scale = scale or 1.0
    for m in range(5):
        for end, direction in ((duration / 2, -1.0), (-duration / 2, 1.0)):
            estimates = []
            for h in (0.02 * duration, 0.01 * duration):
                points = end + direction * h * np.arange(m + 1)
                values = np.asarray(profile(points), dtype=float) * np.ones(m + 1)
                estimates.append(abs(np.diff(values, m)[0]) / h ** m * duration ** m)
            if estimates[1] > 1e-6 * scale and estimates[1] > 0.75 * estimates[0]:
                return 2 * (m + 1)
    return None
