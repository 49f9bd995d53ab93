"""A detector's whole answer: its response, the comparison, locality and the runs needed (numeric only).

Supported: a static detector, asymptotically flat, in any dimension: at a regular centre (vacuum) or off it
(the l-sum), massless or massive where there are no bound states (the continuum above the mass); outside a
horizon, massless (Boulware, Hartle-Hawking or Unruh state).  Every switching of derive.detector.switching whose
transform decays fast enough for the dimension.  Refused, with the reason: bound states below the mass
(regular centre) and quasi-bound resonances (massive field outside a horizon), whose discrete or very narrow
spectral weight the frequency quadrature would miss.
"""

from __future__ import annotations

import mpmath
import numpy as np

from derive.detector.response import response, round_trip, trials_to_distinguish
from derive.detector.switching import switching_from_spec
from derive.errors import AccuracyError
from derive.solve.centre import (Divergent, Unsupported, bound_states_possible, continuum_threshold,
                                 finite_at_threshold, has_coulomb_tail, shortfall, threshold_log_period,
                                 traps_below_threshold)

PERTURBATIVE_LIMIT = 0.1


def minkowski_gaussian_response(gaps, sigma: float) -> np.ndarray:
    """Flat 3+1, massless, inertial, Gaussian switching: F = [e^{-s^2 W^2} - sqrt(pi) s W erfc(s W)]/(4 pi)
    (docs/conventions.md section 8; from the Minkowski Wightman function, Birrell & Davies 1982, ch. 3), at 30 digits
    (the two terms cancel for large s W)."""
    out = []
    with mpmath.workdps(30):
        for gap in np.asarray(gaps, dtype=float):
            x = mpmath.mpf(sigma) * mpmath.mpf(gap)
            out.append(float((mpmath.exp(-x * x) - mpmath.sqrt(mpmath.pi) * x * mpmath.erfc(x)) / (4 * mpmath.pi)))
    return np.array(out)


_EXTERIOR_CACHE: dict = {}


def _exterior(problem, omegas, r0, tolerance, progress):
    """The in and up densities, kept for the last problem and frequency set: the three states of a black hole
    share them (a thermal state and the Boulware state use the same frequency nodes)."""
    from derive.solve.exterior import exterior_density

    key = (id(problem), r0, tolerance, omegas.tobytes())
    if key not in _EXTERIOR_CACHE:
        _EXTERIOR_CACHE.clear()
        _EXTERIOR_CACHE[key] = (problem, exterior_density(problem, omegas, r0, tolerance, progress=progress))
    return _EXTERIOR_CACHE[key][1]


def flat_density(dimension: int, mu: float):
    """Minkowski's spectral density per unit proper frequency in D dimensions, from
    W = int d^(D-1)k/((2 pi)^(D-1) 2 omega_k) e^{-i omega_k t}: S = area(S^(D-2)) k^(D-3)/(2 (2 pi)^(D-1)) for
    nu > mu, k = sqrt(nu^2 - mu^2); sqrt(nu^2 - mu^2)/(4 pi^2) in 3+1 and 1/(4 pi) in 2+1
    (docs/conventions.md section 7; Birrell & Davies 1982, ch. 3)."""
    from derive.solve.centre import sphere_area

    factor = sphere_area(dimension - 2) / (2 * (2 * np.pi) ** (dimension - 1))

    def density(nu):
        k = np.sqrt(np.maximum(nu * nu - mu * mu, 0.0))
        return np.where(nu > mu, factor * k ** (dimension - 3), 0.0), np.zeros_like(nu)
    return density


def _sqrt_f(problem, r0: float) -> float:
    from derive.solve.centre import region_at

    region = region_at(problem, r0)
    return float(np.sqrt(np.asarray(region.metric_f(np.array([r0]))).reshape(-1)[0]))


def has_horizon(problem) -> bool:
    return problem.regions[0].lower_kind == "horizon"


def _missed(shortfalls, result, tolerance: float, exempt=None) -> None:
    """A density that missed its tolerance: recorded in ``shortfalls`` as (message, largest relative error
    reached) (the response goes on with the errors it reached, and says so), or an AccuracyError when no list is
    given.  Frequencies marked ``exempt`` (nodes next to a threshold that no double-precision march resolves to
    the tolerance, whose errors the response carries at their small weights) are not counted."""
    density, error = np.asarray(result.density, dtype=float), np.asarray(result.error, dtype=float)
    counted = np.ones(len(density), dtype=bool) if exempt is None else ~np.asarray(exempt)
    if np.all(error[counted] <= tolerance * np.abs(density[counted])):
        return
    message = shortfall(np.asarray(result.omega)[counted], np.abs(density[counted]), error[counted], tolerance)
    if shortfalls is None:
        raise AccuracyError("the spectral density did not reach its tolerance: " + message, {"tolerance": tolerance})
    density, error = density[counted], error[counted]
    keep = density > 0
    worst = float(np.max(error[keep] / density[keep])) if np.any(keep) else float("inf")
    if all(message != m for m, _ in shortfalls):
        shortfalls.append((message, worst if np.isfinite(worst) else float("inf")))


def passing_tolerance(shortfalls) -> float | None:
    """A tolerance the densities did reach (the next power of ten above the largest relative error), or None."""
    worst = max((w for _, w in shortfalls), default=0.0)
    if not np.isfinite(worst) or worst >= 0.1:
        return None
    return float(10.0 ** np.ceil(np.log10(worst * 1.01)))


def proper_density(problem, tolerance, r0: float = 0.0, state: str = "vacuum", progress=None, shortfalls=None):
    """S(nu) per unit proper frequency at r0 and its error: sqrt(f(r0)) density(sqrt(f(r0)) nu).

    Returns (density_at, sqrt_f0, thermal); for a thermal state density_at also gives S(-nu) and its error.
    Where the density misses its tolerance the message goes to ``shortfalls`` (a list), else AccuracyError."""
    sqrt_f0 = _sqrt_f(problem, r0)
    if has_horizon(problem):
        if state == "vacuum":
            raise Unsupported("outside a horizon 'vacuum' is ambiguous: set [detector] state to 'boulware', "
                              "'hartle-hawking' or 'unruh'")
        refuse_trapped_resonances(problem)

        def density_at(nu):
            result = _exterior(problem, sqrt_f0 * np.asarray(nu), r0, tolerance, progress)
            if not result.ok:
                _missed(shortfalls, result, tolerance)
            return tuple(sqrt_f0 * part for part in result.state(state))
        # every state uses the thermal nodes (Boulware's negative part is zero), so that they share one solve
        return density_at, sqrt_f0, True
    from derive.solve.api import density_function
    from derive.solve.cosmological import has_cosmological_horizon

    if has_cosmological_horizon(problem):
        if state != "bunch-davies":
            raise Unsupported(f"state {state!r}: inside a cosmological horizon set [detector] state to "
                              "'bunch-davies' (the Euclidean state: thermal, with respect to the static time, at "
                              "the horizon's temperature kappa_c/(2 pi))")
        solve = density_function(problem, r0, tolerance, progress)
        temperature = cosmological_temperature(problem, 1.0)

        def thermal_density_at(nu):
            omega = sqrt_f0 * np.asarray(nu)
            result = solve(omega)
            if not result.ok:
                _missed(shortfalls, result, tolerance)
            with np.errstate(over="ignore"):      # far above the temperature the occupation is 0
                n = 1.0 / np.expm1(omega / temperature)
            return (sqrt_f0 * (1 + n) * result.density, sqrt_f0 * (1 + n) * result.error,
                    sqrt_f0 * n * result.density, sqrt_f0 * n * result.error)
        return thermal_density_at, sqrt_f0, True
    if state != "vacuum":
        raise Unsupported(f"state {state!r} needs a horizon; this spacetime has none (use 'vacuum')")

    solve = density_function(problem, r0, tolerance, progress)
    # at a supercritical inverse-square threshold the response's nodes reach k = 1e-5 mu (derive.detector.response):
    # where the march's rounding (omega^2 - V against k^2: about 1e4 eps mu^2/k^2 over its steps) is above the
    # tolerance no node can meet it, and its error is carried at those nodes' weights (k^2/nu) instead
    threshold = continuum_threshold(problem) if threshold_log_period(problem) is not None else None

    def density_at(nu):
        omega = sqrt_f0 * np.asarray(nu)
        result = solve(omega)
        if not result.ok:
            exempt = (None if threshold is None else
                      (omega ** 2 - threshold ** 2) * tolerance < 1e4 * np.finfo(float).eps * threshold ** 2)
            _missed(shortfalls, result, tolerance, exempt)
        return sqrt_f0 * result.density, sqrt_f0 * result.error
    return density_at, sqrt_f0, False


def missing_resonances(problem) -> str:
    """The quasi-bound resonances a response outside a horizon would need, in words: the lowest of l = 0 and
    l = 1 (frequency of the spec's time and width), and that every l has infinitely many."""
    from derive.solve.resonances import quasi_bound

    from derive.solve.centre import continuum_threshold, efimov_exponent, has_coulomb_tail

    if not has_coulomb_tail(problem):
        # an inverse-square tail: the l whose tail is supercritical hold a geometric series each (not listed)
        series = []
        for l in range(0, 64):
            s = efimov_exponent(problem, l)
            if s is None:
                break
            series.append(f"l = {l} (kappa_(n+1)/kappa_n -> {np.exp(-np.pi / s):.4g}, s = {s:.6g})")
        threshold = continuum_threshold(problem)
        if series:
            return ("missing are the resonances of " + ", ".join(series) + ": infinitely many of each, accumulating "
                    f"at omega = {threshold:.10g} in a geometric series of kappa = sqrt(mu^2 - omega^2) (their "
                    "inverse-square tail is supercritical), and any held by a well beyond a barrier in other l")
        return (f"missing are the resonances held by a well beyond the potential's barrier, below omega = "
                f"{threshold:.10g} (derive lists resonances of a Coulomb-like well only)")
    try:
        found = [quasi_bound(problem, l, 3) for l in (0, 1)]
    except Exception:       # noqa: BLE001 (the message only; the refusal stands either way)
        return "any resonances below the mass, of every l, are missing (they are listed for a Coulomb-like well only)"
    listed = [f"l = {r.l}: " + ("omega = " if len(r.omega) else "") + r.describe() for r in found]
    return "missing are the resonances of every l; of the lowest, " + "; ".join(listed)


def local_temperature(problem, sqrt_f0: float) -> float | None:
    """The local (Tolman) temperature of the horizon's thermal state in the detector's proper time,
    kappa/(2 pi sqrt(f(r0))), or None without a horizon."""
    if has_horizon(problem):
        return problem.regions[0].surface_gravity / (2 * np.pi) / sqrt_f0
    return cosmological_temperature(problem, sqrt_f0)


def cosmological_temperature(problem, sqrt_f0: float) -> float | None:
    """kappa_c/(2 pi sqrt(f(r0))) of a cosmological horizon, or None."""
    from derive.solve.cosmological import temperature

    value = temperature(problem)
    return None if value is None else value / sqrt_f0


def detector_response(problem, detector, tolerance: float = 1e-10, gaps=None, state=None, progress=None,
                      shortfalls=None, switching=None, panel=None, memo=None):
    """F(Omega) with errors for a static detector (see module docstring).  ``switching`` (a Switching) replaces
    the detector's; ``panel`` and ``memo`` let several switchings share the frequency nodes and the density
    computed there (derive.detector.design: ``memo.wrap(density_at)`` returns the density on those nodes)."""
    state = detector.state if state is None else state
    if switching is None:
        switching = switching_from_spec({"shape": detector.shape}, detector.switching, detector.profile)
    D = problem.dimension
    if switching.decay is not None and switching.decay <= D - 2:
        raise Divergent(f"|chi_hat|^2 of this switching falls only like k^-{switching.decay} (a jump in chi or "
                          f"a low derivative), while the density grows like nu^{D - 3} in D = {D}: the response "
                          "diverges in the ultraviolet (logarithmically for a sharp switching in 3+1; Svaiter & "
                          "Svaiter, Phys. Rev. D 46, 5267 (1992), from memory): choose a smoother switching "
                          "(gaussian, bump, cos2, sin4)")
    gaps = np.asarray(detector.gaps if gaps is None else gaps, dtype=float)
    from derive.solve.bound import is_ads

    if is_ads(problem) and not has_horizon(problem):   # reflecting boundary: discrete spectrum, a sum over modes
        if state != "vacuum":
            raise Unsupported(f"state {state!r}: an AdS spacetime without a horizon has its global vacuum only "
                              "(use 'vacuum')")
        from derive.detector.response import normal_mode_response

        sqrt_f0 = _sqrt_f(problem, detector.radius)
        return (normal_mode_response(problem, gaps, switching, sqrt_f0, tolerance, detector.radius, progress),
                switching, sqrt_f0)
    from derive.solve.cosmological import constant_zero_mode, has_cosmological_horizon

    if has_cosmological_horizon(problem) and constant_zero_mode(problem):
        raise Divergent("inside a cosmological horizon a massless field without curvature coupling has a constant "
                          "l = 0 solution at zero frequency, bounded at both ends: its density grows like 1/omega at "
                          "low frequency and the response diverges in the infrared (the static patch's infrared "
                          "problem; in de Sitter the Bunch-Davies state does not exist for such a field). Give the "
                          "field a mass or a curvature coupling (conformal, for example); derive spectrum gives the "
                          "density at any omega > 0")
    density_at, sqrt_f0, thermal = proper_density(problem, tolerance, detector.radius, state, progress, shortfalls)
    if memo is not None:
        density_at = memo.wrap(density_at)
    threshold = frequency_threshold(problem, sqrt_f0)
    # the frequency cut-off follows the hottest bath the detector sees (both horizons' in Schwarzschild-de Sitter)
    temperatures = [t for t in (local_temperature(problem, sqrt_f0), cosmological_temperature(problem, sqrt_f0))
                    if t is not None]
    temperature = max(temperatures) if temperatures else None
    levels = not has_horizon(problem) and bound_states_possible(problem)
    continuum = response(gaps, switching, density_at, thermal, threshold, D, tolerance, temperature,
                         vacuum_part_only=state == "boulware", panel=structure_panel(problem, sqrt_f0,
                                                                                    detector.radius, panel),
                         graded=not (levels and finite_at_threshold(problem)),
                         log_period=threshold_log_period(problem) if levels else None)
    if levels:
        continuum = with_levels(problem, continuum, switching, sqrt_f0, tolerance, shortfalls, detector.radius)
    return continuum, switching, sqrt_f0


def with_levels(problem, continuum, switching, sqrt_f0: float, tolerance: float, shortfalls=None, r0: float = 0.0):
    """The response with the bound levels' share added (derive.solve.levels; off the centre the levels of every
    l), their error in the density's part of the error."""
    from derive.detector.response import Response, normal_mode_terms
    from derive.solve.levels import level_sum, sum_over_l

    gaps = continuum.gaps

    def power(omega):
        return switching.power(gaps[:, None] + np.asarray(omega)[None, :] / sqrt_f0)

    scale = np.abs(continuum.response)

    def share_of(l):     # at the centre l = 0 only; off it every l until two in a row add below 1e-2 of the tolerance
        levels = level_sum(problem, power, lambda modes: normal_mode_terms(modes, gaps, switching, sqrt_f0)[:2],
                           tolerance, scale, l, r0)
        # a level counts at its share of F: one that weighs 1e-8 of the first need not meet the tolerance itself
        miss = levels.error / np.maximum(scale + np.abs(levels.value), 1e-300)
        if shortfalls is not None and np.any(~(miss <= tolerance)):
            shortfalls.append((f"the bound levels of l = {l} reach their share of F to a relative "
                               f"{float(np.max(miss)):.2g} only (" + levels.states.message() + ")",
                               float(np.max(miss))))
        return levels
    sums, _ = sum_over_l(share_of, scale, tolerance, r0 == 0.0)
    share, share_error = sum(s.value for s in sums), sum(s.error for s in sums)
    joined = {key: np.concatenate([getattr(s.states, key) for s in sums])
              for key in ("omega", "omega_error", "weight", "weight_error")}
    report = {"found": int(sum(len(s.states.omega) for s in sums)),
              "l": np.concatenate([np.full(len(s.states.omega), k) for k, s in enumerate(sums)]), **joined,
              "share": share, "share_error": share_error, "tail": sum(s.tail for s in sums),
              "tail_error": sum(s.tail_error for s in sums), "threshold_density": sums[0].threshold_density(),
              # how the levels beyond the found ones are summed: a hydrogen-like series (a Coulomb-like tail), a
              # geometric one (a supercritical inverse-square tail), or none (every level found)
              "series": ("quantum-defect" if has_coulomb_tail(problem) else
                         "geometric" if threshold_log_period(problem) is not None else None)}
    return Response(gaps, continuum.response + share, continuum.error + share_error,
                    continuum.quadrature_error, continuum.density_error + share_error, report)


def structure_panel(problem, sqrt_f0: float, r0: float, panel=None):
    """The widest frequency panel the density itself allows: light returning from an interface or a reflecting
    boundary after the round trip T makes the density ripple with period 2 pi/T in proper frequency, and panels
    wider than that period alias the ripple (both quadrature rules then err alike and their difference misses
    it: measured 1.6e-8 against an estimate of 3e-12 for a Gaussian of width 0.025 at the centre of a shell, whose
    own panels are 20 wide against a period of 3.1).  Returns the smaller of ``panel`` and 2 pi/T (None when
    neither bounds it)."""
    trip = round_trip(problem, sqrt_f0, r0)
    bound = 2 * np.pi / trip if np.isfinite(trip) and trip > 0 else None
    if bound is None:
        return panel
    return bound if panel is None else min(panel, bound)


def refuse_trapped_resonances(problem) -> None:
    """Unsupported, naming what is missing, for a massive field outside a horizon whose potential can trap waves
    below the mass (quasi-bound resonances, too narrow for any frequency quadrature; their share is not built)."""
    from derive.solve.bound import is_ads
    from derive.solve.cosmological import has_cosmological_horizon

    # a reflecting AdS boundary has no well and no continuum; between a black hole's and a cosmological
    # horizon V falls to zero at both ends, so nothing is trapped below the mass: no resonances there either;
    # nor where the potential rises from the horizon to the mass with no well beyond its barrier (a 4+1 black
    # hole's repulsive inverse-square tail: m mu^2 < 3/4), and the density below the mass is smooth
    if (problem.mass != 0.0 and not is_ads(problem) and not has_cosmological_horizon(problem)
            and traps_below_threshold(problem)):
        well = ("the Coulomb-like well of a 3+1 black hole, infinitely many" if has_coulomb_tail(problem)
                else "wherever the potential has a well")
        raise Unsupported("a massive field outside a horizon has quasi-bound resonances below the mass (" + well
                          + "; widths can be many orders below their frequency), which the frequency "
                          "quadrature of the response would not resolve, and their share is not built: "
                          + missing_resonances(problem) + ". The response is not computed; derive spectrum "
                          "gives the density at any frequency (and lists the resonances of a Coulomb-like "
                          "well)")


def frequency_threshold(problem, sqrt_f0: float) -> float:
    """The lowest proper frequency of the continuum the response integrates over: the mass (over the clock rate)
    without a horizon, zero with one."""
    from derive.solve.centre import continuum_threshold

    return 0.0 if has_horizon(problem) else continuum_threshold(problem) / sqrt_f0


def reference_response(problem, detector, reference_problem, tolerance, gaps, switching, shortfalls=None,
                       panel=None, memo=None):
    """(F, error) of the reference ``detector.compare_with`` at the same gaps and switching: Minkowski (the closed
    form for a Gaussian switching, massless, 3+1; else the same quadrature with the exact flat density) or
    another problem's detector at the same position."""
    gaps = np.asarray(gaps, dtype=float)
    if detector.compare_with == "minkowski":
        mu = problem.mass
        if switching.shape == "gaussian" and mu == 0.0 and problem.dimension == 4:
            ref = minkowski_gaussian_response(gaps, switching.width)
            return ref, 1e-15 * np.abs(ref)
        # the same quadrature with the exact flat density (docs/conventions.md section 7)
        flat = response(gaps, switching, flat_density(problem.dimension, mu), threshold=mu,
                        dimension=problem.dimension, panel=panel)
        return flat.response, flat.error
    reference, _, _ = detector_response(reference_problem, detector, tolerance, gaps, shortfalls=shortfalls,
                                        switching=switching, panel=panel, memo=memo)
    return reference.response, reference.error


def study(problem, detector, reference_problem=None, tolerance: float = 1e-10, gaps=None, progress=None) -> dict:
    """Response, comparison with the reference (Minkowski in closed form, or another problem), locality, trials.
    Outside a horizon the response in all three states comes along (they share one solve) under "states".

    A spectral density that misses its tolerance does not stop the study: every value is computed with the error
    it reached, ``"ok"`` is False and ``"message"`` says what was missed."""
    shortfalls: list = []
    ours, switching, sqrt_f0 = detector_response(problem, detector, tolerance, gaps, progress=progress,
                                                 shortfalls=shortfalls)
    gaps = ours.gaps
    _check_response(ours, tolerance, shortfalls)
    out = {"gaps": gaps, "response": ours.response, "error": ours.error, "switching": switching,
           "state": detector.state, "at": detector.radius, "coupling": detector.coupling,
           "sigmas": detector.sigmas, "notes": [],
           "effective_temperature": effective_temperature(gaps, ours.response, ours.error)}
    if ours.levels is not None:
        out["bound_levels"] = ours.levels
    if has_horizon(problem):
        from derive.solve.exterior import states_of

        out["states"] = {}
        for name in states_of(problem):
            other = ours if name == detector.state else detector_response(problem, detector, tolerance, gaps,
                                                                           state=name, shortfalls=shortfalls)[0]
            out["states"][name] = {"response": other.response, "error": other.error,
                                   "effective_temperature": effective_temperature(gaps, other.response,
                                                                                  other.error)}
    if local_temperature(problem, sqrt_f0) is not None:
        out["local_temperature"] = local_temperature(problem, sqrt_f0)
    if has_horizon(problem) and cosmological_temperature(problem, sqrt_f0) is not None:
        out["local_cosmological_temperature"] = cosmological_temperature(problem, sqrt_f0)
    with_ = detector.compare_with
    if with_ is not None:
        ref, ref_err = reference_response(problem, detector, reference_problem, tolerance, gaps, switching,
                                          shortfalls)
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
    out["ok"] = not shortfalls
    out["message"] = "ok"
    if shortfalls:
        passing = passing_tolerance(shortfalls)
        out["message"] = ("the spectral density did not reach its tolerance " + f"{tolerance:.0e}: "
                          + "; ".join(m for m, _ in shortfalls)
                          + (f". Every value is reported with the error it reached; --tolerance {passing:.0e} "
                             "would pass" if passing else ""))
        out["passing_tolerance"] = passing
    return out


def effective_temperature(gaps, F, error) -> dict:
    """T_eff(Omega) = Omega / ln(F(-Omega)/F(Omega)) for every gap Omega > 0 whose opposite -Omega is also a gap
    (the temperature at which a thermal state would give the same ratio of excitation to de-excitation; for a
    state that is KMS at T along the worldline it tends to T as the switching grows long: the detailed-balance
    form of thermality).  Its error to first order: T^2/Omega (e(-Omega)/F(-Omega) + e(Omega)/F(Omega)).  Where
    the ratio is not above 1 (no de-excitation excess) the value is None.  Returns {"gap", "value", "error"}
    (lists, in the order of the gaps)."""
    gaps, F, error = (np.asarray(a, dtype=float) for a in (gaps, F, error))
    out = {"gap": [], "value": [], "error": []}
    for i, gap in enumerate(gaps):
        if not gap > 0:
            continue
        match = np.nonzero(np.abs(gaps + gap) <= 1e-12 * gap)[0]
        if not len(match):
            continue
        j = int(match[0])
        out["gap"].append(float(gap))
        if F[i] > 0 and F[j] > F[i]:
            T = gap / np.log(F[j] / F[i])
            out["value"].append(float(T))
            out["error"].append(float(T * T / gap * (error[j] / F[j] + error[i] / F[i])))
        else:
            out["value"].append(None)
            out["error"].append(None)
    return out


def _check_response(result, tolerance: float, shortfalls: list) -> None:
    """The response's own error (the density's carried through the quadrature, plus the quadrature's and the
    tails') against the tolerance, with a factor 2 of slack for what the quadrature adds to densities that just
    met it: a response that is not known to its tolerance is a shortfall, not a result (an infrared divergence,
    a switching too short for the panels)."""
    F, error = np.abs(np.asarray(result.response)), np.asarray(result.error)
    relative = error / np.maximum(F, 1e-300)
    bad = ~(relative <= 2 * tolerance)
    if np.any(bad):
        worst = int(np.argmax(np.where(np.isfinite(relative), relative, np.inf)))
        shortfalls.append((f"the response at gap {result.gaps[worst]:g} is known only to a relative "
                           f"{relative[worst]:.1e} (its density, quadrature and tails)", float(relative[worst])))


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
