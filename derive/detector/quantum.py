"""A detector qubit's state after the switching, to second order in the coupling, for any initial state, and
how well two such states can be told apart (docs/conventions.md section 12).  Numeric only.

The qubit has levels |g>, |e> a gap Omega apart; it couples as lambda chi(tau) mu(tau) phi(x(tau)) with
mu(tau) = e^{i Omega tau} sigma_+ + e^{-i Omega tau} sigma_-, to a field in a stationary state whose Wightman
function along the static worldline is W(s) = int dw S(w) e^{-i w s} (S(-nu) for nu > 0 is the state's
de-excitation part: zero in a vacuum).  The Dyson series to second order, traced over the field (derived in
docs/conventions.md section 12), gives, in the interaction picture at the end of the switching,

    rho_ee -> rho_ee + lambda^2 (rho_gg F(Omega) - rho_ee F(-Omega)),     rho_gg = 1 - rho_ee,
    rho_eg -> rho_eg + lambda^2 (C rho_ge - rho_eg [(F(Omega) + F(-Omega))/2 + i delta]),

with F the response, C = int_0^inf dnu (S(nu) + S(-nu)) chi_hat(Omega + nu) chi_hat(Omega - nu) (a real, even
chi centred on tau = 0), and delta = Delta(Omega) - Delta(-Omega), where G(Omega) = F(Omega)/2 - i Delta(Omega) is
the time-ordered double integral of the switching against W.  For a Gaussian chi = exp(-tau^2/(2 sigma^2)) the
ordered kernel is

    g(k) = int int_{tau > tau'} chi(tau) chi(tau') e^{-i k (tau - tau')} = pi sigma^2 e^{-k^2 sigma^2}
           - 2 i sqrt(pi) sigma^2 D(k sigma),

D the Dawson function (derived in the conventions; checked against direct quadrature in the tests), so
delta = int_0^inf dnu (S(nu) + S(-nu)) [h(nu + Omega) - h(nu - Omega)], h(k) = 2 sqrt(pi) sigma^2 D(k sigma).
In 3+1 this integral diverges logarithmically (the detector's Lamb shift): the gap is renormalised against the
same detector in the Minkowski vacuum, i.e. S(nu) is replaced by S(nu) - S_flat(nu) in delta, which is what a
gap calibrated in empty space means (common practice).

Telling two states apart from N runs, at z standard deviations (the convention of the counting measurement in
derive.detector.response: the two means z (sigma_A + sigma_B) apart), is put in the Fisher form N = 4 z^2 / I,
with I the Fisher information per run along the straight path rho(t) = rho_A + t (rho_B - rho_A) at t = 1/2:
the classical one of counting excitations (I = dp^2/(p (1 - p))), and the quantum (SLD) one (Braunstein & Caves,
Phys. Rev. Lett. 72, 3439 (1994)), which the measurement in the SLD's eigenbasis attains for a qubit.  The quantum
Chernoff bound (Audenaert et al., Phys. Rev. Lett. 98, 160501 (2007)), Q = min_{0<=s<=1} Tr rho_A^s rho_B^(1-s),
bounds the error probability of the best collective measurement on N copies, P_e <= Q^N / 2 (tight in the
exponent as N grows); it is reported as its exponent -ln Q beside counting's classical Chernoff exponent (never
larger), and with the runs at which the bound guarantees P_e <= Phi(-z), the one-sided normal tail: a
sufficient number of runs, not a lower bound.  The lower bound is the quantum Fisher information's: no
measurement on the runs, collective or not, needs fewer than 4 z^2 / I_Q (the information is additive over
copies), and for a detector prepared in its ground state counting attains it.  The 2x2 algebra runs in mpmath
at 40 digits: the states differ in their eighth or ninth decimal.
"""

from __future__ import annotations

from dataclasses import dataclass

import mpmath
import numpy as np
from scipy.optimize import minimize, minimize_scalar
from scipy.special import dawsn

DIGITS = 40


def ordered_kernel(k, sigma: float):
    """g(k) for a Gaussian switching of width sigma (see the module docstring): complex array."""
    k = np.asarray(k, dtype=float)
    return (np.pi * sigma ** 2 * np.exp(-(k * sigma) ** 2)
            - 2j * np.sqrt(np.pi) * sigma ** 2 * dawsn(k * sigma))


def shift_tail(upper: float, gap: float, h) -> float:
    """|int_upper^inf [h(nu + Omega) - h(nu - Omega)] dnu| = |int_{upper - Omega}^{upper + Omega} h(k) dk|
    (the two tails telescope), by Gauss-Legendre on that interval; ``h`` the switching's ordered kernel."""
    nodes, weights = np.polynomial.legendre.leggauss(40)
    a, b = upper - abs(gap), upper + abs(gap)
    k = (a + b) / 2 + (b - a) / 2 * nodes
    return float(abs((b - a) / 2 * np.sum(weights * h(k))))


@dataclass(frozen=True)
class SecondOrder:
    """The numbers that fix the second-order state at one gap: F(+Omega), F(-Omega), C and delta, each with its
    absolute error."""

    gap: float
    excite: float
    relax: float
    coherence: float
    shift: float
    errors: tuple = (0.0, 0.0, 0.0, 0.0)

    def state(self, initial, coupling: float):
        """rho (2x2 mpmath matrix, basis g, e) after the switching for the initial qubit state ``initial``: a
        2x2 density matrix (numpy or mpmath) or a state vector (a_g, a_e)."""
        with mpmath.workdps(DIGITS):
            rho0 = _as_matrix(initial)
            lam2 = mpmath.mpf(coupling) ** 2
            gg, ee, eg = rho0[0, 0], rho0[1, 1], rho0[1, 0]
            ge = rho0[0, 1]
            Fp, Fm = mpmath.mpf(self.excite), mpmath.mpf(self.relax)
            C, d = mpmath.mpf(self.coherence), mpmath.mpf(self.shift)
            new_ee = ee + lam2 * (gg * Fp - ee * Fm)
            new_eg = eg + lam2 * (C * ge - eg * ((Fp + Fm) / 2 + 1j * d))
            out = mpmath.matrix(2, 2)
            out[1, 1] = new_ee
            out[0, 0] = 1 - new_ee
            out[1, 0] = new_eg
            out[0, 1] = mpmath.conj(new_eg)
            return out


def _as_matrix(initial):
    if isinstance(initial, mpmath.matrix):
        return initial
    array = np.asarray(initial, dtype=complex)
    if array.shape == (2,):
        array = np.outer(array, array.conj()) / np.vdot(array, array).real
    out = mpmath.matrix(2, 2)
    for i in range(2):
        for j in range(2):
            out[i, j] = mpmath.mpc(complex(array[i, j]))
    return out


def bloch_vector(theta: float, phi: float) -> np.ndarray:
    """cos(theta/2)|g> + e^{i phi} sin(theta/2)|e>: theta = 0 the ground state, pi the excited one."""
    return np.array([np.cos(theta / 2), np.exp(1j * phi) * np.sin(theta / 2)])


def _eigh(rho):
    """Eigenvalues and eigenvectors (columns) of a 2x2 Hermitian mpmath matrix, in closed form."""
    a, d, b = mpmath.re(rho[0, 0]), mpmath.re(rho[1, 1]), rho[0, 1]
    mean, half = (a + d) / 2, (a - d) / 2
    radius = mpmath.sqrt(half ** 2 + abs(b) ** 2)
    values = [mean - radius, mean + radius]
    vectors = []
    for value in values:
        if abs(b) > mpmath.mpf(10) ** (-DIGITS + 5):
            v = mpmath.matrix([b, value - a])
        else:
            v = mpmath.matrix([1, 0]) if abs(value - a) <= abs(value - d) else mpmath.matrix([0, 1])
        norm = mpmath.sqrt(sum(abs(x) ** 2 for x in v))
        vectors.append(v / norm)
    return values, vectors


def quantum_fisher(rho_a, rho_b) -> float:
    """The SLD quantum Fisher information of the path rho_A + t (rho_B - rho_A) at t = 1/2:
    2 sum_ij |<i|d rho|j>|^2 / (p_i + p_j) over the midpoint's eigenbasis (terms with p_i + p_j > 0)."""
    with mpmath.workdps(DIGITS):
        mid = (rho_a + rho_b) / 2
        derivative = rho_b - rho_a
        values, vectors = _eigh(mid)
        total = mpmath.mpf(0)
        for i in range(2):
            for j in range(2):
                denominator = values[i] + values[j]
                if denominator <= 0:
                    continue
                element = (vectors[i].H * derivative * vectors[j])[0]
                total += 2 * abs(element) ** 2 / denominator
        return float(total)


def counting_fisher(rho_a, rho_b) -> float:
    """The classical Fisher information of counting excitations (measuring |e><e|) along the same path:
    dp^2 / (p (1 - p)) at the midpoint."""
    with mpmath.workdps(DIGITS):
        p_a, p_b = mpmath.re(rho_a[1, 1]), mpmath.re(rho_b[1, 1])
        p = (p_a + p_b) / 2
        if p <= 0 or p >= 1:
            return 0.0
        return float((p_b - p_a) ** 2 / (p * (1 - p)))


def _power(rho, s):
    values, vectors = _eigh(rho)
    out = mpmath.matrix(2, 2)
    for value, vector in zip(values, vectors):
        if value > 0:
            out += (value ** s) * (vector * vector.H)
    return out


def chernoff(rho_a, rho_b) -> tuple[float, float]:
    """(Q, s*): Q = min over s in [0, 1] of Tr rho_A^s rho_B^(1-s) (Audenaert et al. 2007), by bounded
    minimisation (the function is convex in s)."""
    def trace(s):
        with mpmath.workdps(DIGITS):
            product = _power(rho_a, s) * _power(rho_b, 1 - s)
            return float(mpmath.re(product[0, 0] + product[1, 1]))
    found = minimize_scalar(trace, bounds=(0.0, 1.0), method="bounded", options={"xatol": 1e-6})
    best = min((found.fun, found.x), (trace(0.0), 0.0), (trace(1.0), 1.0))
    return float(best[0]), float(best[1])


def counting_chernoff(rho_a, rho_b) -> float:
    """The classical Chernoff information of counting excitations: -ln min_s sum_x p_A(x)^s p_B(x)^(1-s) over
    the two outcomes (never above the quantum one, -ln Q)."""
    with mpmath.workdps(DIGITS):
        p_a, p_b = mpmath.re(rho_a[1, 1]), mpmath.re(rho_b[1, 1])

        def total(s):
            with mpmath.workdps(DIGITS):
                s = mpmath.mpf(s)
                return float(p_a ** s * p_b ** (1 - s) + (1 - p_a) ** s * (1 - p_b) ** (1 - s))
        found = minimize_scalar(total, bounds=(0.0, 1.0), method="bounded", options={"xatol": 1e-6})
        value = min(found.fun, total(0.0), total(1.0))
        return float(-np.log(value)) if 0 < value < 1 else 0.0


def runs_from_fisher(information: float, sigmas: float) -> float:
    """N = 4 z^2 / I (see the module docstring)."""
    return float(4 * sigmas ** 2 / information) if information > 0 else float("inf")


def runs_from_chernoff(Q: float, sigmas: float) -> float:
    """The N at which the bound Q^N/2 on the error probability reaches Phi(-z)."""
    from scipy.special import ndtr

    target = float(ndtr(-sigmas))
    if not 0 < Q < 1:
        return float("inf")
    return float(np.log(2 * target) / np.log(Q)) if 2 * target < 1 else 0.0


def compare_states(ours: SecondOrder, theirs: SecondOrder, coupling: float, sigmas: float, initial) -> dict:
    """For one initial state: the runs of counting excitations, of the best single-qubit measurement (the SLD
    basis) and the Chernoff bound's, telling the state after ``ours`` from the one after ``theirs``."""
    rho_a, rho_b = ours.state(initial, coupling), theirs.state(initial, coupling)
    q, s = chernoff(rho_a, rho_b)
    return {"counting": runs_from_fisher(counting_fisher(rho_a, rho_b), sigmas),
            "counting_chernoff_exponent": counting_chernoff(rho_a, rho_b),
            "best_measurement": runs_from_fisher(quantum_fisher(rho_a, rho_b), sigmas),
            "chernoff": {"Q": q, "s": s, "exponent": float(-np.log(q)) if 0 < q < 1 else 0.0,
                         "runs": runs_from_chernoff(q, sigmas)}}


def best_initial_state(ours: SecondOrder, theirs: SecondOrder, coupling: float, sigmas: float) -> dict:
    """The initial qubit state (Bloch angles) that minimises the runs of the best single-qubit measurement: a
    grid over the sphere (theta in [0, pi], phi in [0, 2 pi)) and Nelder-Mead from its best point (bounded,
    deterministic).  Returns theta, phi, the state vector and the comparison of :func:`compare_states`."""
    def runs(angles):
        theta, phi = angles
        rho_a = ours.state(bloch_vector(theta, phi), coupling)
        rho_b = theirs.state(bloch_vector(theta, phi), coupling)
        information = quantum_fisher(rho_a, rho_b)
        return np.log(runs_from_fisher(information, sigmas)) if information > 0 else 1e3
    grid = [(t, p) for t in np.linspace(0.0, np.pi, 9) for p in np.linspace(0.0, 2 * np.pi, 8, endpoint=False)]
    start = min(grid, key=runs)
    found = minimize(runs, np.array(start), method="Nelder-Mead", bounds=[(0.0, np.pi), (0.0, 2 * np.pi)],
                     options={"xatol": 1e-4, "fatol": 1e-7, "maxiter": 400})
    theta, phi = (found.x if found.fun <= runs(start) else np.array(start))
    vector = bloch_vector(theta, phi)
    return {"theta": float(theta), "phi": float(phi),
            "vector": {"g": [float(vector[0].real), float(vector[0].imag)],
                       "e": [float(vector[1].real), float(vector[1].imag)]},
            **compare_states(ours, theirs, coupling, sigmas, vector)}


def is_density_matrix(rho, slack: float) -> bool:
    """Hermitian, unit trace and eigenvalues >= -slack."""
    with mpmath.workdps(DIGITS):
        values, _ = _eigh(rho)
        trace = mpmath.re(rho[0, 0] + rho[1, 1])
        hermitian = abs(rho[0, 1] - mpmath.conj(rho[1, 0])) <= mpmath.mpf(10) ** (-DIGITS + 5)
        return bool(hermitian and abs(trace - 1) <= mpmath.mpf(10) ** (-DIGITS + 5) and min(values) >= -slack)
