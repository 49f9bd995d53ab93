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
