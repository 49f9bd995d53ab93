"""A detector's whole answer: its response, the comparison, locality and the runs needed (numeric only).

Supported so far: a static detector at the regular centre (r = 0), Gaussian switching, the vacuum state, a
massless field in an asymptotically flat spacetime.  (Off the centre the density is an l-sum; it is available
through derive spectrum --at, but a response needs it at about a thousand frequencies, which is too slow yet.)
"""

from __future__ import annotations

import mpmath
import numpy as np

from derive.detector.response import response, round_trip, trials_to_distinguish
from derive.detector.switching import switching_from_spec
from derive.errors import AccuracyError
from derive.solve.centre import Unsupported

PERTURBATIVE_LIMIT = 0.1


def minkowski_gaussian_response(gaps, sigma: float) -> np.ndarray:
    """Flat 3+1, massless, inertial, Gaussian switching: F = [e^{-s^2 W^2} - sqrt(pi) s W erfc(s W)]/(4 pi)
    (PHYSICS.md section 8; from the Minkowski Wightman function, Birrell & Davies 1982, ch. 3), at 30 digits
    (the two terms cancel for large s W)."""
    out = []
    with mpmath.workdps(30):
        for gap in np.asarray(gaps, dtype=float):
            x = mpmath.mpf(sigma) * mpmath.mpf(gap)
            out.append(float((mpmath.exp(-x * x) - mpmath.sqrt(mpmath.pi) * x * mpmath.erfc(x)) / (4 * mpmath.pi)))
    return np.array(out)


def proper_density(problem, tolerance, r0: float = 0.0):
    """S(nu) per unit proper frequency at r0 and its error: sqrt(f(r0)) density(sqrt(f(r0)) nu)."""
    from derive.solve.api import density_function

    sqrt_f0 = float(np.sqrt(problem.regions[0].metric_f(np.array([r0]))[0]))
    solve = density_function(problem, r0, tolerance)

    def density_at(nu):
        result = solve(sqrt_f0 * np.asarray(nu))
        if not result.ok:
            raise AccuracyError("the spectral density did not reach its tolerance: " + result.message(),
                                {"tolerance": tolerance})
        return sqrt_f0 * result.density, sqrt_f0 * result.error
    return density_at, sqrt_f0


def detector_response(problem, detector, tolerance: float = 1e-10, gaps=None):
    """F(Omega) with errors for a detector at the centre of ``problem`` (see module docstring)."""
    if detector.radius != 0.0:
        raise Unsupported("the detector must sit at the regular centre r = 0, so far (the l-summed spectral "
                          "density off the centre is available through derive spectrum --at)")
    if detector.state != "vacuum":
        raise Unsupported(f"state {detector.state!r}: only the static vacuum of a regular spacetime, so far")
    switching = switching_from_spec({"shape": detector.shape}, detector.switching)
    gaps = np.asarray(detector.gaps if gaps is None else gaps, dtype=float)
    density_at, sqrt_f0 = proper_density(problem, tolerance, detector.radius)
    return response(gaps, switching, density_at), switching, sqrt_f0


def study(problem, detector, reference_problem=None, tolerance: float = 1e-10, gaps=None) -> dict:
    """Response, comparison with the reference (Minkowski in closed form, or another problem), locality, trials."""
    ours, switching, sqrt_f0 = detector_response(problem, detector, tolerance, gaps)
    gaps = ours.gaps
    out = {"gaps": gaps, "response": ours.response, "error": ours.error, "switching": switching,
           "state": detector.state, "coupling": detector.coupling, "sigmas": detector.sigmas, "notes": []}
    with_ = detector.compare_with
    if with_ is not None:
        if with_ == "minkowski":
            ref = minkowski_gaussian_response(gaps, switching.width)
            ref_err = 1e-15 * np.abs(ref)
        else:
            reference, _, _ = detector_response(reference_problem, detector, tolerance, gaps)
            ref, ref_err = reference.response, reference.error
        difference = (ours.response - ref) / ref
        difference_error = ours.error / np.abs(ref) + np.abs(ours.response) * ref_err / ref ** 2
        out["reference"] = {"with": with_, "response": ref, "error": ref_err}
        out["relative_difference"] = difference
        out["relative_difference_error"] = difference_error
        out.update(_trials(ours.response, ref, ours.error + ref_err, detector))
    trip = round_trip(problem, sqrt_f0, detector.radius)
    duration = switching.duration
    out["locality"] = {"duration": duration, "round_trip": trip, "local": bool(duration < trip),
                       "tail": switching.tail}
    if not out["locality"]["local"]:
        out["notes"].append(f"not local: the switching lasts {duration:.4g} (all but {switching.tail:g} of "
                            f"chi^2) but light returns from the nearest structure after {trip:.4g}")
    if detector.coupling is not None:
        largest = float(np.max(detector.coupling ** 2 * ours.response))
        if largest > PERTURBATIVE_LIMIT:
            out["notes"].append(f"lambda^2 F reaches {largest:.3g}: not small, so leading-order perturbation "
                                "theory may not hold")
    return out


def _trials(F_a, F_b, difference_error, detector) -> dict:
    if detector.coupling is None:
        return {"trials_to_distinguish": None,
                "trials_note": "no [detector] coupling given: the number of runs needs lambda"}
    lam2 = detector.coupling ** 2
    p_a, p_b = lam2 * F_a, lam2 * F_b
    resolved = np.abs(F_a - F_b) > 2 * difference_error
    trials = np.where(resolved, trials_to_distinguish(p_a, p_b, detector.sigmas), np.nan)
    # where the difference is not resolved, the honest statement is a lower bound on the runs needed
    bound = trials_to_distinguish(p_a, p_a + lam2 * (np.abs(F_a - F_b) + 2 * difference_error), detector.sigmas)
    return {"trials_to_distinguish": trials, "trials_lower_bound": np.where(resolved, np.nan, bound),
            "difference_resolved": resolved}
