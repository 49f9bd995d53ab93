"""Telling two spacetimes apart with a pair of detectors: the information in their joint state, and the search
over the second detector's position and timing (docs/conventions.md section 13).  Numeric only.

Two detectors prepared in their ground states end, to second order in the coupling, in the joint state of
derive.detector.correlations (basis |gg>, |ge>, |eg>, |ee>, the first named first)

    rho = [[1 - L_AA - L_BB, 0, 0, M*], [0, L_BB, L_AB*, 0], [0, L_AB, L_AA, 0], [M, 0, 0, 0]] + O(lambda^4).

The states of two spacetimes differ at order lamb^2 in the populations and in L_AB.  The coherence M between
|gg> and |ee> carries information only at order lambda^4: |ee><ee| is itself of order lambda^4 and every
information measure divides |delta M|^2 by a population of order 1 (the SLD term 2 |delta M|^2/(p_gg + p_ee)).  At
leading order the joint state is therefore block diagonal: the population of |gg> and the one-excitation block
B = [[L_BB, L_AB*], [L_AB, L_AA]] (positive: L is a Gram matrix).  Its quantum (SLD) Fisher information along
the straight path between the two spacetimes' states, at the midpoint, is

    I_Q = (delta p_gg)^2 / p_gg + 2 sum_ij |<b_i| delta B |b_j>|^2 / (b_i + b_j),

(b_i, |b_i>) the midpoint block's eigenpairs (Braunstein & Caves, Phys. Rev. Lett. 72, 3439 (1994)); a measurement
in the block's eigenbasis (an entangled basis of |ge>, |eg> when L_AB is large) attains it.  Counting each
detector's excitations (outcomes gg, ge, eg) gives the classical I_C = sum_x (delta p_x)^2 / p_x, which sees only
L_AA and L_BB: the difference I_Q - I_C is what the correlations add.  Runs at z standard deviations: N = 4 z^2 / I
(the convention of derive.detector.quantum).

The search (:func:`search`) moves the second detector over a range of radii and, at each, its delay over a range
(:func:`best_delay`): grids refined by scipy's bounded scalar minimisation, deterministic; the caller supplies the
evaluation (both spacetimes' joint states) and the locality of each placement.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class JointState:
    """The second-order numbers of a pair's joint state (times lambda^2) with their absolute errors."""

    L_AA: float
    L_BB: float
    L_AB: complex
    errors: tuple = (0.0, 0.0, 0.0)

    def block(self) -> np.ndarray:
        return np.array([[self.L_BB, np.conj(self.L_AB)], [self.L_AB, self.L_AA]], dtype=complex)

    def shifted(self, index: int, amount: float) -> "JointState":
        """The state with one number moved (0: L_AA, 1: L_BB, 2: Re L_AB, 3: Im L_AB), for error propagation."""
        values = [self.L_AA, self.L_BB, self.L_AB.real, self.L_AB.imag]
        values[index] += amount
        return JointState(values[0], values[1], complex(values[2], values[3]), self.errors)


def _informations(ours: JointState, theirs: JointState) -> tuple[float, float]:
    """(I_Q, I_C) per run (module docstring), from the differences of the small numbers directly (never from
    1 - L, which would lose them)."""
    d_gg = -((theirs.L_AA - ours.L_AA) + (theirs.L_BB - ours.L_BB))
    p_gg = 1.0 - (ours.L_AA + ours.L_BB + theirs.L_AA + theirs.L_BB) / 2
    delta = theirs.block() - ours.block()
    values, vectors = np.linalg.eigh((ours.block() + theirs.block()) / 2)
    rotated = vectors.conj().T @ delta @ vectors
    floor = 1e-13 * max(float(np.sum(np.abs(values))), 1e-300)
    block = 0.0
    for i in range(2):
        for j in range(2):
            if values[i] + values[j] > floor:
                block += 2 * abs(rotated[i, j]) ** 2 / (values[i] + values[j])
    quantum = d_gg ** 2 / p_gg + block
    counting = d_gg ** 2 / p_gg
    for mine, other in ((ours.L_AA, theirs.L_AA), (ours.L_BB, theirs.L_BB)):
        mean = (mine + other) / 2
        if mean > 0:
            counting += (other - mine) ** 2 / mean
    return float(quantum), float(counting)


def runs(information: float, sigmas: float) -> float:
    return float(4 * sigmas ** 2 / information) if information > 0 else float("inf")


def compare_pairs(ours: JointState, theirs: JointState, sigmas: float) -> dict:
    """The runs of the best joint measurement (I_Q) and of counting both detectors (I_C), each with an error from
    the inputs' errors (first-order propagation, by moving each number by its error), and whether the difference
    is resolved (the information's error below half of it)."""
    quantum, counting = _informations(ours, theirs)
    e_quantum = e_counting = 0.0
    for state, other, first in ((ours, theirs, True), (theirs, ours, False)):
        e_AA, e_BB, e_AB = state.errors
        for index, error in ((0, e_AA), (1, e_BB), (2, e_AB), (3, e_AB)):
            if error == 0.0:
                continue
            moved = state.shifted(index, error)
            q, c = _informations(moved, other) if first else _informations(other, moved)
            e_quantum += abs(q - quantum)
            e_counting += abs(c - counting)
    out = {"runs": runs(quantum, sigmas), "counting_runs": runs(counting, sigmas),
           "information": quantum, "information_error": e_quantum,
           "counting_information": counting, "counting_information_error": e_counting,
           "resolved": bool(quantum > 2 * e_quantum)}
    out["runs_error"] = out["runs"] * e_quantum / quantum if quantum > 0 else float("inf")
    out["counting_runs_error"] = out["counting_runs"] * e_counting / counting if counting > 0 else float("inf")
    return out


def single_runs(p: float, q: float, sigmas: float) -> float:
    """One detector alone, counted: N = 4 z^2 / I with I = (p - q)^2 / (m (1 - m)), m the mean probability."""
    mean = (p + q) / 2
    return runs((p - q) ** 2 / (mean * (1 - mean)), sigmas) if p != q and 0 < mean < 1 else float("inf")


def log_runs(record: dict) -> float:
    """The search's objective: ln N (1e3 where the runs are infinite: nothing told apart)."""
    value = record["runs"]
    return float(np.log(value)) if np.isfinite(value) and value > 0 else 1e3


def best_delay(evaluate, radius: float, delays) -> dict:
    """The delay in [low, high] with the fewest runs at this radius: a 13-point grid, then bounded scalar
    minimisation between the best point's neighbours (scipy; deterministic).  ``evaluate(radius, delay)`` ->
    record; the record returned carries the range searched (``delays``)."""
    from scipy.optimize import minimize_scalar

    low, high = delays
    if high <= low:
        return dict(evaluate(radius, low), delays=[low, high])
    grid = np.linspace(low, high, 13)
    records = [evaluate(radius, d) for d in grid]
    k = int(np.argmin([log_runs(r) for r in records]))
    found = minimize_scalar(lambda d: log_runs(evaluate(radius, d)), method="bounded",
                            bounds=(grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)]),
                            options={"xatol": 1e-3 * (high - low), "maxiter": 20})
    return dict(min(records + [evaluate(radius, float(found.x))], key=log_runs), delays=[low, high])


def search(evaluate, radii, positions: int, delay_range, is_local) -> list[dict]:
    """Every radius evaluated (each at its best delay), in the order tried: ``positions`` radii evenly over
    [low, high], then bounded scalar minimisation between the best one's neighbours; a radius where the second
    detector is not local (``is_local(radius)`` False) is evaluated but never chosen."""
    from scipy.optimize import minimize_scalar

    scan = []

    def at_radius(radius):
        record = best_delay(evaluate, float(radius), delay_range(float(radius)))
        record["local"] = bool(is_local(float(radius)))
        scan.append(record)
        return log_runs(record) if record["local"] else 1e3 + float(radius)

    grid = np.linspace(radii[0], radii[1], positions)
    k = int(np.argmin([at_radius(r) for r in grid]))
    minimize_scalar(at_radius, bounds=(grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)]), method="bounded",
                    options={"xatol": 1e-3 * (radii[1] - radii[0]), "maxiter": 10})
    return scan
