"""Several static detectors: their joint state at second order in the coupling, from the field's spectral
two-point function between their positions (docs/conventions.md section 9).

Detector i sits at a static point where the redshift factor is alpha_i = sqrt(-g_tt) (proper time per unit of the
spec's time t), with gap Omega_i and a Gaussian switching chi_i(tau) = exp(-tau^2/(2 sigma_i^2)) in its proper time
tau, peaked at t = T_i.  With W(x_i(t), x_j(t')) = int_0^inf domega [S_+(omega) e^{-i omega (t - t')}
+ S_-(omega) e^{+i omega (t - t')}] (S between x_i and x_j, per unit omega of t; S_- = 0 in a vacuum) and
chi_hat(k) = int chi(tau) e^{-i k tau} dtau = sqrt(2 pi) sigma e^{-sigma^2 k^2/2}:

    L_ij = lambda^2 int dtau dtau' chi_i(tau) chi_j(tau') e^{-i (Omega_i tau - Omega_j tau')} W(x_i, x_j)
         = lambda^2 int_0^inf domega [ S_+ e^{-i omega D} chi_hat_i(Omega_i + omega/alpha_i)
                                           chi_hat_j(Omega_j + omega/alpha_j)
                                     + S_- e^{+i omega D} chi_hat_i(Omega_i - omega/alpha_i)
                                           chi_hat_j(Omega_j - omega/alpha_j) ],

D = T_i - T_j.  The non-local term M = -lambda^2 int dtau dtau' chi_A chi_B e^{i (Omega_A tau + Omega_B tau')}
<T phi(x_A(tau)) phi(x_B(tau'))> (time ordering in t) becomes, after the integral over t_A + t_B (Gaussian,
exact), with a = (sigma_A/alpha_A)^2, b = (sigma_B/alpha_B)^2, c = a + b, w = alpha Omega, W = w_A + w_B,
kappa = (w_A a - w_B b)/c:

    M = -lambda^2 alpha_A alpha_B sqrt(2 pi a b/c) e^{-W^2 a b/(2c)}
        int dv e^{-(v - D)^2/(2c) + i kappa (v - D)} G_F(v),

v = t_A - t_B, and G_F = Re W_AB + sgn(v) i Im W_AB: the anticommutator half plus sgn(v) times the commutator half.
The commutator vanishes for |v| below the light time T between the two points, so sgn(v) may be replaced by
erf(v/epsilon) with epsilon = T/6 (they differ by erfc(6) = 2e-17 where it does not vanish); then every v-integral
is closed form (an erf of complex argument, through the Faddeeva function) and M is one omega-integral too.

The omega-integrals use Gauss-Legendre panels, doubled until two successive rules agree to the tolerance; the
error of each result adds that difference, the spectral function's own errors carried through the weights, and
rounding.  Other switchings (compact shapes, a user expression) take the same frequency integrals with their
transforms, M's time integrals numerically (``TimeOrdered``: the cross-correlation of the two switchings against
the smoothed sign); a switching whose transform falls only algebraically leaves a tail beyond its reach, bounded
through the single detectors' tail bounds (``pair_terms``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import erf, wofz

from derive.detector.switching import Switching, gauss_panels
from derive.solve.centre import Unsupported

NODES = 16               # Gauss-Legendre nodes per panel
FIRST_PANELS = 8
MAX_PANELS = 512
REACH = 9.0              # Gaussian factors are below e^{-REACH^2/2} = 3e-18 beyond the frequency range used
SMOOTHING = 6.0          # epsilon = light time / SMOOTHING


@dataclass(frozen=True)
class Probe:
    """One detector as numbers: its name, radius, redshift factor, gap, proper width (a Gaussian's; None for
    another shape) and peak time (of t), and its switching (by default the Gaussian of that width)."""

    name: str
    radius: float
    alpha: float
    gap: float
    sigma: float | None
    centre: float
    switching: Switching | None = None

    def __post_init__(self):
        if self.switching is None:
            object.__setattr__(self, "switching", Switching("gaussian", float(self.sigma), 1e-12))

    @property
    def gaussian(self) -> bool:
        return self.switching.shape == "gaussian"

    @property
    def half_duration(self) -> float:
        """Half the effective duration in t: all but the switching's tail (1e-12 by default) of chi^2."""
        return self.switching.duration / (2 * self.alpha)


def chi_hat(probe: Probe, k):
    """chi_hat(k) = int chi(tau) e^{-i k tau} dtau (closed form for the Gaussian, quadrature otherwise)."""
    return probe.switching.transform(k)


def _scaled_erf(base_log, z):
    """e^{base_log} erf(z) without overflow, for complex z (base_log + Re(-z^2) <= 0 where it is used): through
    erf(z) = 1 - e^{-z^2} w(iz) for Re z >= 0 and erf(z) = -erf(-z) otherwise (w the Faddeeva function)."""
    sign = np.where(np.real(z) >= 0, 1.0, -1.0)
    z = sign * z
    return sign * (np.exp(base_log) - np.exp(base_log - z * z) * wofz(1j * z))


def m_kernels(A: Probe, B: Probe, omegas, light_time: float):
    """(prefactor, J_+, J_-, E_+, E_-) at the frequencies for two Gaussian switchings, in closed form: M = -lambda^2
    prefactor int domega (1/2) [(S_+ + conj S_-) J_+ + (S_- + conj S_+) J_- + (S_+ - conj S_-) E_+
    + (S_- - conj S_+) E_-] (module docstring)."""
    _separated(light_time)
    a, b = (A.sigma / A.alpha) ** 2, (B.sigma / B.alpha) ** 2
    c = a + b
    wa, wb = A.alpha * A.gap, B.alpha * B.gap
    W = wa + wb
    kappa = (wa * a - wb * b) / c
    D = A.centre - B.centre
    prefactor = A.alpha * B.alpha * np.sqrt(2 * np.pi * a * b / c) * np.exp(-W * W * a * b / (2 * c))
    epsilon = light_time / SMOOTHING
    spread = np.sqrt(epsilon ** 2 + 2 * c)
    out = []
    for p in (kappa - omegas, kappa + omegas):
        log_base = 1j * (p - kappa) * D - c * p * p / 2
        J = np.sqrt(2 * np.pi * c) * np.exp(log_base)
        E = np.sqrt(2 * np.pi * c) * _scaled_erf(log_base, (D + 1j * c * p) / spread)
        out.append((J, E))
    (J_plus, E_plus), (J_minus, E_minus) = out
    return prefactor, J_plus, J_minus, E_plus, E_minus


def _separated(light_time: float) -> None:
    if not light_time > 0:
        raise Unsupported("two detectors at the same point: their commutator is not separated from the "
                          "anticommutator by a light time (place them apart)")


class TimeOrdered:
    """The kernels of M for any two switchings: with f_i(t) = chi_i(alpha_i (t - T_i)) e^{i w_i (t - T_i)},
    w_i = alpha_i Omega_i, M = -lambda^2 alpha_A alpha_B int dv K(v) G_F(v) with K(v) = int dt f_A(t + v) f_B(t)
    the switchings' cross-correlation, so that (in the form of ``m_kernels``, prefactor alpha_A alpha_B)

        J_+(omega) = int dv K(v) e^{-i omega v} = e^{-i omega D} chi_hat_A(omega/alpha_A - Omega_A)
                     chi_hat_B(-omega/alpha_B - Omega_B)/(alpha_A alpha_B),   J_-(omega) = J_+(-omega),
        E_+-(omega) = int dv K(v) erf(v/epsilon) e^{-+ i omega v}.

    J comes from the transforms; E by composite Gauss-Legendre in v and, for each v, in t, on panels that end at
    every breakpoint of the switchings (their ends and ramps) and resolve the phases, the switchings and the
    smoothed sign; at two resolutions, whose difference is E's error."""

    def __init__(self, A: Probe, B: Probe, light_time: float, top: float):
        _separated(light_time)
        self.A, self.B = A, B
        self.epsilon = light_time / SMOOTHING
        self.cuts = [p.centre + p.switching.breakpoints / p.alpha for p in (A, B)]
        wa, wb = A.alpha * A.gap, B.alpha * B.gap
        h_t = min([_resolution(A), _resolution(B)] + ([10.0 / abs(wa + wb)] if wa + wb else []))
        h_v = min(self.epsilon, 10.0 / (top + abs(wa)), h_t)
        v_cuts = np.unique((self.cuts[0][:, None] - self.cuts[1][None, :]).ravel())
        if v_cuts[0] < 0 < v_cuts[-1]:     # where the smoothed sign turns
            v_cuts = np.unique(np.concatenate([v_cuts, [0.0]]))
        self.grids = []
        for m in (1, 2):
            v, weight = _panels(v_cuts, h_v / m)
            K = self._cross(v, h_t / m)
            self.grids.append((v, weight * K * erf(v / self.epsilon)))

    def _f(self, p: Probe, t):
        u = t - p.centre
        return p.switching.chi(p.alpha * u) * np.exp(1j * p.alpha * p.gap * u)

    def _cross(self, v_nodes, h_t):
        (a0, a1), (b0, b1) = (c[[0, -1]] for c in self.cuts)
        out = np.zeros(len(v_nodes), dtype=complex)
        for i, v in enumerate(v_nodes):
            lo, hi = max(a0 - v, b0), min(a1 - v, b1)
            if hi <= lo:
                continue
            cuts = np.concatenate([[lo, hi], self.cuts[0] - v, self.cuts[1]])
            t, weight = _panels(np.unique(cuts[(cuts >= lo) & (cuts <= hi)]), h_t)
            out[i] = np.sum(weight * self._f(self.A, t + v) * self._f(self.B, t))
        return out

    def __call__(self, omegas):
        """(prefactor, J_+, J_-, E_+, E_-, error of J_+-, error of E_+, error of E_-) at the frequencies."""
        A, B = self.A, self.B
        D = A.centre - B.centre
        scale = A.alpha * B.alpha
        ka, kb = omegas / A.alpha, omegas / B.alpha
        hat_a_plus, hat_a_minus = chi_hat(A, ka - A.gap), chi_hat(A, -ka - A.gap)
        hat_b_plus, hat_b_minus = chi_hat(B, -kb - B.gap), chi_hat(B, kb - B.gap)
        J_plus = np.exp(-1j * omegas * D) * hat_a_plus * hat_b_plus / scale
        J_minus = np.exp(1j * omegas * D) * hat_a_minus * hat_b_minus / scale
        da, db = A.switching.transform_error, B.switching.transform_error
        J_error = (da * (np.abs(hat_b_plus) + np.abs(hat_b_minus)) + db * (np.abs(hat_a_plus) + np.abs(hat_a_minus))
                   + 2 * da * db) / scale
        E = []
        for v, g in self.grids:
            plus, minus = np.empty(len(omegas), dtype=complex), np.empty(len(omegas), dtype=complex)
            for start in range(0, len(omegas), 256):
                phase = np.exp(-1j * np.outer(omegas[start:start + 256], v))
                both = phase @ np.stack([g, np.conj(g)], axis=1)
                plus[start:start + 256], minus[start:start + 256] = both[:, 0], np.conj(both[:, 1])
            E.append((plus, minus))
        (_, _), (E_plus, E_minus) = E
        return (scale, J_plus, J_minus, E_plus, E_minus, J_error, np.abs(E_plus - E[0][0]),
                np.abs(E_minus - E[0][1]))


def _resolution(p: Probe) -> float:
    """A panel width in t that resolves the switching between its breakpoints: a 64th of its support (a
    Gaussian: half its width); the second resolution of ``TimeOrdered`` checks it."""
    s = p.switching
    width = s.width / 2 if p.gaussian else s.support_length / 64
    return width / p.alpha


def _panels(cuts, h):
    """Composite 16-point Gauss-Legendre on every interval between consecutive ``cuts``, panels at most h wide."""
    nodes, weights = [], []
    for a, b in zip(cuts[:-1], cuts[1:]):
        if b > a:
            x, w = gauss_panels(a, b, max(1, int(np.ceil((b - a) / h))))
            nodes.append(x)
            weights.append(w)
    if not nodes:
        return np.zeros(0), np.zeros(0)
    return np.concatenate(nodes), np.concatenate(weights)


def frequency_reach(A: Probe, B: Probe, light_time: float | None) -> float:
    """Where every factor of the integrands is below e^{-REACH^2/2} (an algebraic switching: where its tail bound
    is reached, the rest counted in the error): the switchings' transforms, and for M the Gaussian of width
    1/sqrt(c) and the smoothed sign's e^{-c p^2 epsilon^2/(2 (epsilon^2 + 2c))}; for other switchings the
    smoothed sign's e^{-omega^2 epsilon^2/4} beyond their own reach."""
    top = max(p.alpha * (abs(p.gap) + (REACH / p.sigma if p.gaussian else p.switching.reach)) for p in (A, B))
    if light_time is not None:
        epsilon = light_time / SMOOTHING
        if not (A.gaussian and B.gaussian):
            return top + np.sqrt(2.0) * REACH / epsilon
        a, b = (A.sigma / A.alpha) ** 2, (B.sigma / B.alpha) ** 2
        c = a + b
        kappa = (A.alpha * A.gap * a - B.alpha * B.gap * b) / c
        top = max(top, abs(kappa) + REACH * np.sqrt((epsilon ** 2 + 2 * c) / (c * epsilon ** 2)))
    return top


def _rule(top: float, panels: int, start: float = 0.0, log_period: float | None = None, kink: float | None = None):
    """Gauss-Legendre on ``panels`` equal panels over [start, top] (split at ``kink``, where the spectrum's
    derivative jumps: a massive field's threshold outside a horizon, above which the in modes begin):
    (nodes, weights, remainder weights).  With
    ``log_period`` (a density oscillating in log k at a supercritical threshold ``start``, k = sqrt(omega^2 -
    start^2)) the first 1/FIRST_PANELS of the range is integrated in t = log k instead (the single detector's
    panels, derive.detector.response.log_k_edges, as many more as the rule has been doubled); what lies below
    k_min is bounded by the remainder weight at the lowest node (zero elsewhere)."""
    x, w = np.polynomial.legendre.leggauss(NODES)

    def gauss(edges):
        half = np.diff(edges) / 2
        return ((edges[:-1, None] + half[:, None] * (1 + x[None, :])).ravel(), (half[:, None] * w[None, :]).ravel())
    if log_period is None or start <= 0:
        if kink is not None and start < kink < top:   # panels end at the kink (a massive field's threshold)
            below = max(1, int(round(panels * (kink - start) / (top - start))))
            edges = np.concatenate([np.linspace(start, kink, below + 1), np.linspace(kink, top, panels + 1)[1:]])
        else:
            edges = np.linspace(start, top, panels + 1)
        nodes, weights = gauss(edges)
        return nodes, weights, np.zeros(len(nodes))
    from derive.detector.response import from_log_k, log_k_edges

    split = start + (top - start) / FIRST_PANELS
    t_edges, below = log_k_edges(start, split, log_period, max(1, panels // FIRST_PANELS))
    t, t_weights = gauss(t_edges)
    near, jacobian = from_log_k(start, t)
    nodes, weights = gauss(np.linspace(split, top, panels + 1))
    remainder = np.zeros(len(near) + len(nodes))
    remainder[0] = below
    return np.concatenate([near, nodes]), np.concatenate([t_weights * jacobian, weights]), remainder


def _integrals(spectrum, integrands, top, tolerance, start=0.0, log_period=None, kink=None):
    """Each integrand(omega, S_+, S_-) -> (values, |factor of S_+|, |factor of S_-|[, absolute error of values])
    integrated over [start, top] on doubled panel rules until two successive ones agree (to the tolerance, or
    within the spectral errors carried through); returns (value, error, scale) each.  ``spectrum(omegas)`` -> (S_+,
    e_+, S_-, e_-); ``start`` is where it begins (a massive field's continuum at its threshold, where it jumps; with
    ``log_period``, where it oscillates in log k: :func:`_rule`)."""
    previous = None
    panels = FIRST_PANELS
    while True:
        nodes, weights, remainder = _rule(top, panels, start, log_period, kink)
        s_plus, e_plus, s_minus, e_minus = spectrum(nodes)
        results = []
        for integrand in integrands:
            values, plus_factor, minus_factor, *own = integrand(nodes, s_plus, s_minus)
            value = np.sum(weights * values)
            carried = np.sum(weights * (np.abs(plus_factor) * e_plus + np.abs(minus_factor) * e_minus
                                        + (own[0] if own else 0.0)) + remainder * np.abs(values))
            scale = np.sum(weights * (np.abs(plus_factor) * np.abs(s_plus) + np.abs(minus_factor) * np.abs(s_minus)))
            results.append((value, carried, scale))
        if previous is not None:
            done = True
            out = []
            for (value, carried, scale), (old, _, _) in zip(results, previous):
                rounding = 64 * np.finfo(float).eps * scale
                error = abs(value - old) + carried + rounding
                out.append((value, error, scale))
                # converged when the rules agree to the tolerance, or to within what the spectral function's own
                # errors explain (then refining the rule cannot do better)
                done &= abs(value - old) <= max(tolerance * max(scale, 1e-300), 2 * carried)
            if done or panels >= MAX_PANELS:
                return out
        previous = results
        panels *= 2


@dataclass
class PairResult:
    L: complex
    L_error: float
    M: complex
    M_error: float
    commutator: complex
    commutator_error: float
    L_scale: float = 0.0        # the integrals of |integrand| (what the tolerance refers to, with sqrt(L_AA L_BB))
    M_scale: float = 0.0


def _pair_integrands(A: Probe, B: Probe, light_time: float | None, dimension: int, time_ordered: bool = True):
    """The integrands of L_AB and of M's anticommutator and commutator parts, each (omega, S_+, S_-) -> (values,
    |factor of S_+|, |factor of S_-|, own absolute error); the frequency up to which they matter; and the bound on
    what lies beyond it for an algebraically decaying switching (see :func:`pair_terms`)."""
    D = A.centre - B.centre
    da, db = A.switching.transform_error, B.switching.transform_error

    def l_integrand(w, s_plus, s_minus):
        hats = [(chi_hat(A, A.gap + sign * w / A.alpha), chi_hat(B, B.gap + sign * w / B.alpha)) for sign in (1, -1)]
        plus = np.exp(-1j * w * D) * hats[0][0] * np.conj(hats[0][1])
        minus = np.exp(1j * w * D) * hats[1][0] * np.conj(hats[1][1])
        own = sum((da * np.abs(b) + db * np.abs(a) + da * db) * np.abs(s) for (a, b), s in zip(hats, (s_plus, s_minus)))
        return s_plus * plus + s_minus * minus, plus, minus, own

    tails = [p.switching.tail_error([p.gap], dimension)[0] for p in (A, B)]
    tail = float(np.sqrt(tails[0] * tails[1]))
    if not time_ordered:
        return [l_integrand], frequency_reach(A, B, None), tail
    top = frequency_reach(A, B, light_time)
    if A.gaussian and B.gaussian:
        def kernels_at(w):
            zero = np.zeros(len(w))
            return (*m_kernels(A, B, w, light_time), zero, zero, zero)
    else:
        kernels_at = TimeOrdered(A, B, light_time, top)
    kernels = {}

    def m_parts(w):
        key = w.tobytes()
        if key not in kernels:
            kernels.clear()
            kernels[key] = kernels_at(w)
        return kernels[key]

    def anticommutator(w, s_plus, s_minus):
        pre, J_plus, J_minus, _, _, J_error, _, _ = m_parts(w)
        first, second = s_plus + np.conj(s_minus), s_minus + np.conj(s_plus)
        value = 0.5 * (first * J_plus + second * J_minus)
        size_plus = 0.5 * (np.abs(J_plus) + np.abs(J_minus))
        own = 0.5 * pre * J_error * (np.abs(first) + np.abs(second))
        return -pre * value, pre * size_plus, pre * size_plus, own

    def commutator(w, s_plus, s_minus):
        pre, _, _, E_plus, E_minus, _, E_plus_error, E_minus_error = m_parts(w)
        first, second = s_plus - np.conj(s_minus), s_minus - np.conj(s_plus)
        value = 0.5 * (first * E_plus + second * E_minus)
        size = 0.5 * (np.abs(E_plus) + np.abs(E_minus))
        own = 0.5 * pre * (E_plus_error * np.abs(first) + E_minus_error * np.abs(second))
        return -pre * value, pre * size, pre * size, own

    return [l_integrand, anticommutator, commutator], top, tail


def _pair_result(parts, tail) -> PairResult:
    """PairResult from the (value, error, scale) of L and, when computed, of M's two parts."""
    (L, L_error, L_scale), *rest = parts
    if not rest:
        return PairResult(complex(L), float(L_error) + tail, 0j, 0.0, 0j, 0.0, float(L_scale), 0.0)
    (anti, anti_error, anti_scale), (comm, comm_error, comm_scale) = rest
    return PairResult(complex(L), float(L_error) + tail, complex(anti + comm),
                      float(anti_error + comm_error) + 2 * tail, complex(comm), float(comm_error) + tail,
                      float(L_scale), float(anti_scale + comm_scale))


def pair_terms(A: Probe, B: Probe, spectrum, light_time: float | None, tolerance: float, dimension: int = 4,
               time_ordered: bool = True, start: float = 0.0, log_period: float | None = None,
               kink: float | None = None) -> PairResult:
    """L_AB and M (each per lambda^2) between two detectors, with errors; ``spectrum(omegas)`` gives
    (S_+, e_+, S_-, e_-) between A's point and B's in the state.  Gaussian switchings use the closed-form kernels
    of M, others ``TimeOrdered``; the part of the frequency integrals beyond the reach of an algebraically decaying
    switching is bounded by Cauchy-Schwarz in the (positive) spectral measure, sqrt(tail_A tail_B) with each
    single detector's tail bound, and added to the errors (for E, whose large-frequency part comes from the same
    breakpoints of K where the smoothed sign is at most 1, the same bound is taken as an estimate).  Without
    ``time_ordered`` only L_AB (M and its parts zero; no light time needed).  ``start``: the spectrum is zero
    below it (a massive field's continuum threshold with a regular centre: panels start there, at the jump);
    ``log_period``: the spectrum oscillates in log k there (a supercritical inverse-square tail, :func:`_rule`);
    ``kink``: panels end there (a massive field's threshold outside a horizon)."""
    integrands, top, tail = _pair_integrands(A, B, light_time, dimension, time_ordered)
    return _pair_result(_integrals(spectrum, integrands, max(top, 2 * start), tolerance, start, log_period, kink),
                        tail)


def pair_terms_discrete(A: Probe, B: Probe, modes, light_time: float, dimension: int = 4) -> PairResult:
    """L_AB and M for a discrete spectrum (normal modes, derive.solve.bound.ModeList between the two points, the
    angular factor in the weights, up to :func:`frequency_reach`): the frequency integrals become sums over the
    modes (a vacuum: S_+ = the weights, S_- = 0).  Errors: the weights' errors through the factors, each mode's
    frequency error through a central difference of its term, the integrands' own errors, and ten times the
    first mode left out of every l (as for one detector)."""
    integrands, _, tail = _pair_integrands(A, B, light_time, dimension)
    terms, errors, scales = mode_pair_terms(integrands, modes)
    beyond_omega = np.array([w for w, _ in modes.beyond], dtype=float)
    beyond_weight = np.array([v for _, v in modes.beyond], dtype=float).astype(complex)
    parts = []
    for integrand, term, error, scale in zip(integrands, terms, errors, scales):
        error = float(np.sum(error))
        if len(beyond_omega):
            error += 10 * np.sum(np.abs(integrand(beyond_omega, beyond_weight, np.zeros(len(beyond_omega)))[0]))
        scale = float(np.sum(scale))
        parts.append((complex(np.sum(term)), error + 64 * np.finfo(float).eps * scale, scale))
    return _pair_result(parts, tail)


def mode_pair_terms(integrands, modes):
    """Each mode's terms of the pair integrals (one row per integrand: L_AB, M's anticommutator and commutator
    parts), their errors (the weight's error through the factor, the frequency's error through a central
    difference of the term, the integrand's own) and sizes (|factor| |weight|): three arrays (integrands, modes)."""
    omegas = np.asarray(modes.omega, dtype=float)
    weights = np.asarray(modes.weight, dtype=float).astype(complex)
    zero = np.zeros(len(omegas), dtype=complex)
    step = 1e-6 * max(float(np.max(omegas)) if len(omegas) else 1.0, 1.0)
    terms, errors, scales = [], [], []
    for integrand in integrands:
        if not len(omegas):
            terms.append(zero), errors.append(np.zeros(0)), scales.append(np.zeros(0))
            continue
        values, plus, minus, own = integrand(omegas, weights, zero)
        up = integrand(omegas + step, weights, zero)[0]
        down = integrand(omegas - step, weights, zero)[0]
        terms.append(values)
        errors.append(np.abs(plus) * modes.weight_error + own + np.abs(up - down) / (2 * step) * modes.omega_error)
        scales.append(np.abs(plus) * np.abs(weights))
    return np.array(terms), np.array(errors), np.array(scales)


def pair_levels(problem, A: Probe, B: Probe, cos_gamma: float, light_time: float | None, tolerance: float,
                scale: float, time_ordered: bool = True) -> tuple[PairResult, dict]:
    """The bound levels' share of L_AB and M (per lambda^2) around a body (derive.solve.levels): for each l the
    lowest levels weighed between the two points (times G_l(cos gamma)) and the rest from their hydrogen-like
    series, l = 0, 1, ... until two in a row add below 1e-2 of the tolerance of ``scale`` (sqrt(L_AA L_BB));
    l = 0 only when a detector sits at the centre.  Without ``time_ordered`` only L_AB (as :func:`pair_terms`).
    Returns the share and a summary (levels found, l reached)."""
    from derive.solve.levels import level_sum, sum_over_l
    from derive.solve.offcentre import angular_factor

    integrands, _, _ = _pair_integrands(A, B, light_time, problem.dimension, time_ordered)

    def power(omega):
        omega = np.asarray(omega, dtype=float)
        ones, zero = np.ones(len(omega), dtype=complex), np.zeros(len(omega), dtype=complex)
        return np.array([integrand(omega, ones, zero)[0] for integrand in integrands])

    def terms_of(modes):
        terms, errors, _ = mode_pair_terms(integrands, modes)
        return terms, errors

    scales = np.full(len(integrands), scale)
    r0, r1 = sorted((A.radius, B.radius))

    def share_of(l):      # an l whose G_l vanishes at this angle adds nothing
        angular = angular_factor(l, problem.dimension - 2, cos_gamma) if r0 > 0 else 1.0
        return None if angular == 0.0 else level_sum(problem, power, terms_of, tolerance, scales, l, r0, r1, angular)
    sums, l = sum_over_l(share_of, scales, tolerance, r0 == 0.0)
    value = sum(s.value for s in sums)
    error = sum(s.error for s in sums)
    parts = [(complex(value[k]), float(error[k]), float(np.abs(value[k]))) for k in range(len(integrands))]
    return _pair_result(parts, 0.0), {"found": int(sum(len(s.states.omega) for s in sums)), "l_max": l}


def combined(first: PairResult, second: PairResult) -> PairResult:
    """The sum of two parts of a pair's terms (the continuum's and the bound levels'), errors and scales added."""
    return PairResult(first.L + second.L, first.L_error + second.L_error, first.M + second.M,
                      first.M_error + second.M_error, first.commutator + second.commutator,
                      first.commutator_error + second.commutator_error, first.L_scale + second.L_scale,
                      first.M_scale + second.M_scale)


def probability(A: Probe, spectrum, tolerance: float) -> tuple[float, float]:
    """L_AA (per lambda^2): the single detector's excitation probability, with its error."""
    def integrand(w, s_plus, s_minus):
        plus = np.abs(chi_hat(A, A.gap + w / A.alpha)) ** 2
        minus = np.abs(chi_hat(A, A.gap - w / A.alpha)) ** 2
        return s_plus * plus + s_minus * minus, plus, minus

    ((value, error, _),) = _integrals(spectrum, [integrand], frequency_reach(A, A, None), tolerance)
    return float(np.real(value)), float(error)


def pair_record(A: Probe, B: Probe, terms: PairResult, L_AA: float, L_BB: float, e_AA: float, e_BB: float,
                lam2: float) -> dict:
    """A pair's JSON record: L, M (times lambda^2) with their errors and the entanglement read-outs."""
    record = {"between": [A.name, B.name], "L": [lam2 * terms.L.real, lam2 * terms.L.imag],
              "M": [lam2 * terms.M.real, lam2 * terms.M.imag],
              "error": {"L": lam2 * terms.L_error, "M": lam2 * terms.M_error}}
    record.update(entanglement(L_AA, L_BB, lam2 * terms.L, lam2 * terms.M,
                               (e_AA, e_BB, lam2 * terms.L_error, lam2 * terms.M_error)))
    return record


def entanglement(L_AA, L_BB, L_AB, M, errors) -> dict:
    """Concurrence, negativity and mutual information of the two-qubit state at second order, in the basis
    |g g>, |g e>, |e g>, |e e> (A first):  rho = [[1 - L_AA - L_BB, 0, 0, M*], [0, L_BB, L_AB*, 0],
    [0, L_AB, L_AA, 0], [M, 0, 0, 0]] + O(lambda^4).  Errors by first-order propagation of ``errors`` =
    (e_AA, e_BB, e_AB, e_M)."""
    e_AA, e_BB, e_AB, e_M = errors
    root = np.sqrt(L_AA * L_BB)
    e_root = 0.5 * (e_AA * np.sqrt(L_BB / max(L_AA, 1e-300)) + e_BB * np.sqrt(L_AA / max(L_BB, 1e-300)))
    concurrence = 2 * max(0.0, abs(M) - root)
    e_concurrence = 2 * (e_M + e_root) if concurrence > 0 else 0.0
    # the partial transpose's smallest eigenvalue: ((L_AA + L_BB) - sqrt((L_AA - L_BB)^2 + 4|M|^2))/2
    spread = np.sqrt((L_AA - L_BB) ** 2 + 4 * abs(M) ** 2)
    negativity = max(0.0, (spread - L_AA - L_BB) / 2)
    e_negativity = (e_AA + e_BB + 2 * e_M) if negativity > 0 else 0.0
    # mutual information (natural log): the eigenvalues L_+- of the one-excitation block against the marginals
    disc = np.sqrt((L_AA - L_BB) ** 2 + 4 * abs(L_AB) ** 2)
    plus, minus = (L_AA + L_BB + disc) / 2, (L_AA + L_BB - disc) / 2

    def xlogx(x):
        return x * np.log(x) if x > 0 else 0.0

    information = xlogx(plus) + xlogx(minus) - xlogx(L_AA) - xlogx(L_BB)
    largest = max(abs(np.log(max(x, 1e-300))) + 1 for x in (plus, minus, L_AA, L_BB))
    e_information = largest * (2 * (e_AA + e_BB) + 2 * e_AB)
    return {"concurrence": float(concurrence), "concurrence_error": float(e_concurrence),
            "negativity": float(negativity), "negativity_error": float(e_negativity),
            "mutual_information": float(information), "mutual_information_error": float(e_information)}


def _optical(problem):
    """(radial, angular) elements of the optical metric dt^2 = dr^2/(f h) + (r^2/f) dOmega^2 of null curves."""
    def pieces(r):
        r = np.atleast_1d(np.asarray(r, dtype=float))
        radial, angular = np.full_like(r, np.nan), np.full_like(r, np.nan)
        for region in problem.regions:
            inside = (r >= region.lower) & ((r < region.upper) if region.upper is not None else True)
            if region is problem.regions[-1] and region.upper is not None:
                inside |= r == region.upper
            if np.any(inside):
                x = r[inside]
                radial[inside] = np.broadcast_to(np.asarray(region.dtortoise_dr(x), dtype=float), x.shape)
                f = np.broadcast_to(np.asarray(region.metric_f(x), dtype=float), x.shape)
                angular[inside] = x / np.sqrt(f)
        return radial, angular
    return pieces


def light_time(problem, first, second) -> tuple[float, float]:
    """The shortest coordinate time a light signal needs between two static points (the optical-metric distance),
    with an error estimate: radial when the points share a direction; otherwise the shortest of the path through
    a regular centre and a path r(psi) in the plane of the two points and the centre, optimised over its radii at
    32 and at 64 nodes (scipy.optimize), extrapolated (second order), a third of their difference the error."""
    from scipy.optimize import minimize

    from derive.solve.centre import tortoise_distance
    from derive.spec.positions import cos_angle

    pieces = _optical(problem)
    r1, r2 = first.radius, second.radius
    gamma = float(np.arccos(np.clip(cos_angle(first, second), -1.0, 1.0)))
    if gamma < 1e-12 or r1 == 0 or r2 == 0:
        value = tortoise_distance(problem, min(r1, r2), max(r1, r2))
        return value, 1e-12 * value
    candidates = []
    if problem.regions[0].lower_kind == "regular centre":
        candidates.append(tortoise_distance(problem, 0.0, r1) + tortoise_distance(problem, 0.0, r2))
    lowest = problem.regions[0].lower * (1 + 1e-6) if problem.regions[0].lower_kind == "horizon" else 0.0
    last = problem.regions[-1]
    highest = last.upper * (1 - 1e-6) if last.upper is not None else 1e3 * max(r1, r2)
    x, w = np.polynomial.legendre.leggauss(6)

    def length(inner, nodes):
        radii = np.concatenate([[r1], inner, [r2]])
        dpsi = gamma / nodes
        a, b = radii[:-1, None], radii[1:, None]
        r = (a + b) / 2 + (b - a) / 2 * x[None, :]
        radial, angular = pieces(r.ravel())
        slope = ((b - a) / dpsi) * np.ones_like(r)
        speed = np.sqrt((radial.reshape(r.shape) * slope) ** 2 + angular.reshape(r.shape) ** 2)
        return float(np.sum(speed * w[None, :]) * dpsi / 2)

    found = []
    for nodes in (32, 64):
        psi = np.linspace(0.0, gamma, nodes + 1)[1:-1]
        if gamma < np.pi - 1e-9:   # the straight chord of flat space as the first guess
            guess = r1 * r2 * np.sin(gamma) / (r1 * np.sin(psi) + r2 * np.sin(gamma - psi))
        else:
            guess = np.interp(psi, [0.0, gamma], [r1, r2])
        guess = np.clip(guess, lowest + 1e-9 * max(r1, r2), highest)
        best = minimize(length, guess, args=(nodes,), method="L-BFGS-B",
                        bounds=[(lowest + 1e-9 * max(r1, r2), highest)] * len(guess), options={"maxiter": 500})
        found.append(min(best.fun, length(guess, nodes)))
    # the polygon in (psi, r) converges at second order: Richardson on the two, their difference the error
    path = found[1] + (found[1] - found[0]) / 3
    value = min(candidates + [path])
    error = abs(found[1] - found[0]) / 3 if value == path else 1e-12 * value
    return value, error


MAX_MULTIPOLE = 400


def multipole_weights(problem, probe: Probe, tolerance: float, density=None, thermal: bool = False,
                      temperature: float | None = None, levels: bool = False):
    """w_l = int dnu S_l(nu) |chi_hat(Omega + nu)|^2 (per lambda^2; nu proper frequency; in a thermal state also
    the part at -nu) for a detector like ``probe`` on the sphere of radius probe.radius, S_l the l-th term of the
    density there: two such detectors an angle gamma apart have L_AB = lambda^2 sum_l w_l G_l(cos gamma) (G_l the
    normalised Gegenbauer polynomial, Legendre's P_l in 3+1).  Summed until three weights in a row fall below the
    tolerance of the running sum.  ``density(omegas, l)`` -> (S_l, error) per unit omega of t, or (S_l, error,
    S_l at -omega, error) with ``thermal`` (``temperature``: the state's, of t); by default the engine's at a
    regular centre, in the vacuum.  With ``levels`` each w_l adds the bound levels of that l at the radius
    (derive.solve.levels; the continuum's first panel then ungraded at the Coulomb threshold, as for one
    detector).  Returns (weights, errors)."""
    from derive.detector.response import normal_mode_terms, response
    from derive.detector.study import frequency_threshold
    from derive.solve.centre import finite_at_threshold, threshold_log_period
    from derive.solve.levels import level_sum

    if density is None:
        from derive.solve.offcentre import multipole_density

        def density(omegas, l):
            result = multipole_density(problem, omegas, probe.radius, l, tolerance)
            return result.density, result.error
    switching = probe.switching
    # the continuum's lowest proper frequency, as for one detector (outside a horizon the up modes reach below the
    # mass: starting at the mass had left out 85% of the weights of a massive field around a 4+1 black hole)
    threshold = frequency_threshold(problem, probe.alpha) if problem is not None else 0.0
    dimension = problem.dimension if problem is not None else 4
    local = None if temperature is None else temperature / probe.alpha
    gaps = np.array([probe.gap])

    def power(omega):
        return switching.power(gaps[:, None] + np.asarray(omega)[None, :] / probe.alpha)

    def terms_of(modes):
        return normal_mode_terms(modes, gaps, switching, probe.alpha)[:2]
    weights, errors, quiet = [], [], 0
    for l in range(MAX_MULTIPOLE):
        def density_at(nu, l=l):
            return tuple(probe.alpha * np.asarray(part) for part in density(probe.alpha * np.asarray(nu, dtype=float),
                                                                            l))
        result = response(gaps, switching, density_at, thermal, threshold, dimension, tolerance, local,
                          graded=not (levels and finite_at_threshold(problem)),
                          log_period=threshold_log_period(problem) if levels else None)
        weights.append(float(result.response[0]))
        errors.append(float(result.error[0]))
        if levels:     # the levels of this l at the sphere's radius, as derive response adds them (study.with_levels)
            share = level_sum(problem, power, terms_of, tolerance, np.abs(result.response), l, probe.radius)
            weights[-1] += float(share.value[0])
            errors[-1] += float(share.error[0])
        quiet = quiet + 1 if abs(weights[-1]) <= tolerance * abs(sum(weights)) else 0
        if quiet >= 3:
            break
    return np.array(weights), np.array(errors)
