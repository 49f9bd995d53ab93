"""The one place that decides the physics of a numeric request, below the command line.

A loaded spacetime (:func:`derive.load`) goes to verified kernels, then to the numeric problem, then to the
solver that fits it: a regular centre (the density at r = 0, or the sum over l anywhere else), a horizon (the
scattering of each l, and the in and up modes summed over l in the Boulware, Hartle-Hawking and Unruh states),
a reflecting AdS boundary (the normal modes), bound states of a massive field.  The command line, ``derive run``,
``derive scan`` and ``derive demo`` call only :func:`spectrum` and :func:`response` (and, in a notebook,
``st.spectrum(...)`` and ``st.response(...)`` call them too).  They return result objects
(:mod:`derive.results`) that carry their errors and whether the tolerance was met; a request the solver cannot
serve is refused with :class:`~derive.errors.InputError` (exit 2), naming why.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import replace

import numpy as np

from derive.errors import InputError, NotSupported
from derive.results import Response, Spectrum, plain
from derive.solve.cosmological import temperature as cosmological_temperature

DEFAULT_TOLERANCE = 1e-10


def tolerance_of(spacetime, tolerance=None, key: str = "--tolerance") -> float:
    """The tolerance asked for, else the spec's ``[numerics] tolerance``, else 1e-10; checked."""
    value = tolerance if tolerance is not None else spacetime.numerics.get("tolerance", DEFAULT_TOLERANCE)
    if not (isinstance(value, (int, float)) and 0 < value < 1):
        raise InputError(f"tolerance must lie between 0 and 1, got {value}", key=key)
    return float(value)


def _frequencies(omega) -> np.ndarray:
    from derive.values import parse_values

    if isinstance(omega, str):
        values = parse_values(omega, "omega")
    else:
        values = np.atleast_1d(np.asarray(omega, dtype=float))
        if values.size == 0 or not np.all(np.isfinite(values)):
            raise InputError("omega: expected finite frequencies", key="omega")
    if np.any(values <= 0):
        raise InputError(f"omega: frequencies must be positive, got {values[values <= 0][0]:g}", key="omega")
    return values


def _unsupported(spacetime, what: str, exc, key=None):
    from derive.solve.centre import Divergent

    when = "" if isinstance(exc, Divergent) else " yet"     # a divergence is not a missing feature
    return NotSupported(f"derive cannot {what}{when}: {exc}", file=spacetime.path, key=key)


def spectrum(spacetime, omega, at: float | None = None, l: int = 0, tolerance: float | None = None,
             progress=None) -> Spectrum:
    """The field's spectral density at a static point, per unit omega of the spec's time coordinate.

    Parameters
    ----------
    spacetime : Spacetime
        From :func:`derive.load`.
    omega : array-like of float, or str "FROM:TO:COUNT" / "a,b,c"
        Positive frequencies of the spec's time coordinate.
    at : float, str or mapping, optional
        The radius of the point, or the point as a spec writes it ("r = R/2", or {"r": 0.5}; only its radius
        counts: the spacetime is static and spherical).  None or 0: the centre, only l = 0; else summed over l.
        Around a horizon, without ``at`` only the scattering of ``l`` (greybody factors) is computed.
    l : int
        The angular label at the centre (the only nonzero one there is 0) and of the scattering and bound
        states.
    tolerance : float, optional
        Relative tolerance of every value (default: the spec's [numerics] tolerance, else 1e-10).
    """
    from derive.solve.bound import is_ads
    from derive.solve.centre import Unsupported

    omegas = _frequencies(omega)
    if isinstance(at, (str, Mapping)):     # a point as a spec writes it, or {coordinate: value}, as two_point's
        from derive.spec.positions import parse_position

        at = parse_position(spacetime, at, key="at").radius
    elif isinstance(at, (np.integer, np.floating)) and not isinstance(at, bool):
        at = float(at)
    if at is not None and not (isinstance(at, (int, float)) and math.isfinite(at) and at >= 0):
        raise InputError(f"at = {at}: expected a radius >= 0", key="--at")
    if not isinstance(l, (int, np.integer)) or l < 0:
        raise InputError(f"l = {l}: expected a non-negative integer", key="--l")
    tolerance = tolerance_of(spacetime, tolerance)
    problem = spacetime.numeric_problem
    if at is not None:
        _check_radius(spacetime, problem, float(at), "--at")
    try:
        if problem.regions[0].lower_kind == "horizon":
            return _scattering(spacetime, problem, omegas, at, int(l), tolerance, progress)
        if is_ads(problem):
            return _normal_modes(spacetime, problem, omegas, at, int(l), tolerance)
        return _density(spacetime, problem, omegas, at, int(l), tolerance, progress)
    except Unsupported as exc:
        raise _unsupported(spacetime, "compute this spectrum", exc) from None


def _check_radius(spacetime, problem, radius: float, key: str) -> None:
    """A radius must lie inside the spacetime: below the outer end of the last region (a cosmological horizon or
    a boundary), else exit 2 naming the key."""
    last = problem.regions[-1]
    if last.upper is not None and not radius < last.upper:
        what = "the cosmological horizon" if last.upper_kind == "horizon" else "the outer end of the spacetime"
        raise InputError(f"r = {radius:g} does not lie inside the spacetime: {what} is at r = {last.upper:g}",
                         file=spacetime.path, key=key)


def _floats(values):
    return [None if v is None or not np.isfinite(v) else float(v) for v in np.asarray(values, dtype=float)]


def _compared(comparison: dict) -> dict:
    return {"redshift_factor": comparison["redshift_factor"],
            "ratio_to_minkowski": _floats(comparison["ratio_to_minkowski"]),
            "ratio_to_minkowski_error": _floats(comparison["ratio_to_minkowski_error"])}


def _density(spacetime, problem, omegas, at, l, tolerance, progress=None) -> Spectrum:
    from derive.solve.api import METHOD, bound_state_table, local_comparison, spectrum_at_centre, spectrum_off_centre

    if at:
        result = spectrum_off_centre(problem, omegas, at, tolerance, progress)
    else:
        result = spectrum_at_centre(problem, omegas, l, tolerance)
    data = {"l": result["l"], "at": float(at or 0.0), "omega": _floats(omegas), "density": _floats(result["density"]),
            "error": {"density": _floats(result["error"])}, "tolerance": tolerance, "method": METHOD,
            "units": "per unit omega of the spec's time coordinate",
            "minkowski_density": _floats(result["minkowski"])}
    if result["l"] == 0 or at:    # the whole density at this point (l = 0 is all there is at the centre)
        data.update(_compared(local_comparison(problem, omegas, float(at or 0.0), result["density"],
                                               result["error"])))
    ok, message = bool(result["ok"]), result["message"]
    temperature = cosmological_temperature(problem)
    if temperature is not None:
        data["cosmological_temperature"] = temperature
        data["note"] = ("density of the static vacuum (positive frequencies of the static time t); the "
                        "Bunch-Davies (Euclidean) state has (1 + n(omega)) times it at +omega and n(omega) times it "
                        "at -omega, n the Planck occupation at cosmological_temperature")
    levels = bound_state_table(problem, l, float(at or 0.0), tolerance)
    if levels is not None:
        data["bound_states"] = levels
        if not levels["ok"] and ok:
            ok, message = False, levels["message"]
    return Spectrum(data, spacetime, ok, message, tolerance)


def _normal_modes(spacetime, problem, omegas, at, l, tolerance) -> Spectrum:
    """A reflecting AdS boundary: the spectrum is discrete, so the density between the normal modes is zero and
    the modes of the requested l are listed with their weights at ``at``."""
    from derive.solve.api import METHOD, bound_state_table

    r0 = float(at or 0.0)
    modes = bound_state_table(problem, l, r0, tolerance)
    zeros = [0.0] * len(omegas)
    data = {"l": l, "at": r0, "omega": _floats(omegas), "density": zeros, "error": {"density": zeros},
            "tolerance": tolerance, "method": METHOD, "minkowski_density": zeros, "normal_modes": modes,
            "bound_states": modes,
            "units": "discrete spectrum (reflecting AdS boundary): zero density between the normal modes, whose "
                     "weights are listed under normal_modes"}
    return Spectrum(data, spacetime, modes["ok"], modes["message"], tolerance)


def _scattering(spacetime, problem, omegas, at, l, tolerance, progress) -> Spectrum:
    from derive.solve.api import METHOD, scattering

    result = scattering(problem, omegas, l, tolerance)
    data = {"l": l, "omega": _floats(omegas), "transmission": _floats(result["transmission"]),
            "reflection": _floats(result["reflection"]), "density": None,
            "error": {"transmission": _floats(result["error"]), "reflection": _floats(result["error"])},
            "flux_defect": _floats(result["flux_defect"]), "tolerance": tolerance, "method": METHOD}
    ok, message = bool(result["ok"]), result["message"]
    from derive.solve.api import resonance_table

    resonances = resonance_table(problem, l)
    if resonances is not None:
        data["quasi_bound"] = resonances
    if at is None:
        data["note"] = "give --at R0 (outside the horizon) for the spectral density there"
        return Spectrum(data, spacetime, ok, message, tolerance)
    from derive.solve.centre import Unsupported
    from derive.solve.exterior import exterior_density

    try:
        outside = exterior_density(problem, omegas, at, tolerance, progress=progress)
    except Unsupported as exc:
        raise _unsupported(spacetime, "compute the density there", exc, key="--at") from None
    data.update({"at": float(at), "density": _floats(outside.density), "density_in": _floats(outside.inward),
                 "density_up": _floats(outside.outward), "hawking_temperature": outside.temperature,
                 "l_max": outside.l_max,
                 "units": "per unit omega of the spec's time coordinate; density = Boulware (in + up), "
                          "summed over l"})
    data["error"].update({"density": _floats(outside.error), "density_in": _floats(outside.inward_error),
                          "density_up": _floats(outside.outward_error)})
    from derive.solve.api import local_comparison

    data.update(_compared(local_comparison(problem, omegas, float(at), outside.density, outside.error)))
    data["states"] = {}
    if outside.outer_temperature is not None:
        data["cosmological_temperature"] = outside.outer_temperature
    for name in outside.states:
        plus, plus_error, minus, minus_error = outside.state(name)
        data["states"][name] = {"positive": _floats(plus), "negative": _floats(minus),
                                "error": {"positive": _floats(plus_error), "negative": _floats(minus_error)}}
    if not outside.ok:
        ok, message = False, outside.message()
    return Spectrum(data, spacetime, ok, message, tolerance)


TWO_POINT_CONVENTION = (
    "W(t - t'; x1, x2) = <phi(t, x1) phi(t', x2)> = integral over omega > 0 of "
    "[S_+(omega) exp(-i omega (t - t')) + S_-(omega) exp(+i omega (t - t'))], t the spec's time coordinate; "
    "S_+ = sum over modes of phi_omega(x1) conj(phi_omega(x2)) weighted by the state (1 + n in a thermal state), "
    "S_- = n conj(S_mode); per unit omega; errors absolute; the tolerance is relative to 'scale', the sum of the "
    "terms' sizes h_l (|U_l(x1)|^2 + |U_l(x2)|^2)/2, at most the mean of the two points' densities")


def two_point(spacetime, omega, between, tolerance: float | None = None, progress=None):
    """The field's spectral two-point (Wightman) function between two static points, per unit omega.

    Parameters
    ----------
    spacetime : Spacetime
        From :func:`derive.load`.
    omega : array-like of float, or str "FROM:TO:COUNT" / "a,b,c"
        Positive frequencies of the spec's time coordinate.
    between : pair of positions
        Each a radius, a text such as ``"r = 2, theta = pi/2, phi = 0"`` or a mapping {coordinate: value}
        (angles left out are zero; see :mod:`derive.spec.positions`).  The same point twice gives the density.
    tolerance : float, optional
        Relative to the scale (the mean of the two points' densities, term by term), default as for spectra.

    Returns a :class:`~derive.results.TwoPoint`: ``.omega``, ``.wightman`` ({"re", "im"}), ``.error``,
    ``.scale``, ``.cos_angle``, ``.between``; around a horizon also ``.states`` (Boulware, Hartle-Hawking,
    Unruh: positive and negative frequency parts); where a massive field has bound levels around a body,
    ``.bound_states`` (the discrete part, listed apart from the continuum: each l's lowest levels with their
    weights between the points).
    """
    from derive.results import TwoPoint
    from derive.solve.api import METHOD
    from derive.solve.centre import Unsupported
    from derive.spec.positions import cos_angle, parse_position

    omegas = _frequencies(omega)
    if isinstance(between, (str, bytes)) or not hasattr(between, "__len__") or len(between) != 2:
        raise InputError("between: expected two positions, e.g. (\"r = 1\", \"r = 2, theta = pi/3\")",
                         key="between")
    first, second = (parse_position(spacetime, p, key=f"between[{i}]") for i, p in enumerate(between))
    tolerance = tolerance_of(spacetime, tolerance)
    problem = spacetime.numeric_problem
    for i, point in enumerate((first, second)):
        _check_radius(spacetime, problem, point.radius, f"between[{i}]")
    c = cos_angle(first, second)
    data = {"between": [first.to_json(), second.to_json()], "cos_angle": c, "omega": _floats(omegas),
            "tolerance": tolerance, "method": METHOD, "convention": TWO_POINT_CONVENTION,
            "units": "per unit omega of the spec's time coordinate"}
    levels, _, _ = _pair_continuum(problem)
    try:
        result, states, default, extra = _two_point_parts(problem, omegas, first.radius, second.radius, c, tolerance,
                                                          progress, continuum_only=levels)
        discrete = _levels_between(problem, first.radius, second.radius, c, tolerance) if levels else None
    except Unsupported as exc:
        raise _unsupported(spacetime, "compute this two-point function", exc, key="between") from None
    data.update(extra)
    data["state"] = default
    if states:
        data["states"] = {name: {"positive": _complex(plus), "negative": _complex(minus),
                                 "error": {"positive": _floats(plus_error), "negative": _floats(minus_error)}}
                          for name, (plus, plus_error, minus, minus_error) in states.items()}
    data.update({"wightman": _complex(result.value), "error": {"wightman": _floats(result.error)},
                 "scale": _floats(result.scale), "l_max": result.l_max})
    ok, message = result.ok, result.message()
    if discrete is not None:
        data["bound_states"] = discrete
        if not discrete.pop("ok") and ok:
            ok, message = False, discrete["message"]
    return TwoPoint(data, spacetime, ok, message, tolerance)


def _levels_between(problem, r1: float, r2: float, c: float, tolerance: float) -> dict:
    """The discrete part of the two-point function between radii r1 and r2 an angle arccos(c) apart, as plain data:
    the lowest levels of each l with their weights between the points times G_l(cos gamma), l = 0, 1, ... until
    two l in a row have no weight above the tolerance of l = 0's largest (only l = 0 when a point is the centre)."""
    from derive.solve.bound import LEVELS, bound_states
    from derive.solve.levels import over_l
    from derive.solve.offcentre import angular_factor

    low, high = sorted((r1, r2))
    rows = {key: [] for key in ("l", "omega", "weight", "omega_error", "weight_error")}
    state = {"ok": True, "message": "ok", "largest": 0.0, "truncated": False}

    def visit(l):      # quiet: no weight of this l above the tolerance of the largest so far (l = 0's)
        found = bound_states(problem, l, low, tolerance, count=LEVELS, r1=high)
        angular = angular_factor(l, problem.dimension - 2, c) if low > 0 else 1.0
        weight = angular * found.weight
        state["truncated"] = state["truncated"] or found.truncated
        for key, values in (("l", [l] * len(found.omega)), ("omega", found.omega), ("weight", weight),
                            ("omega_error", found.omega_error), ("weight_error", abs(angular) * found.weight_error)):
            rows[key] += [int(v) if key == "l" else float(v) for v in values]
        if state["ok"] and not found.ok:
            state["ok"], state["message"] = False, found.message()
        biggest = float(np.max(np.abs(weight))) if len(weight) else 0.0
        state["largest"] = max(state["largest"], biggest)
        return biggest <= tolerance * state["largest"]
    over_l(visit, low == 0.0)
    ok, message, truncated = state["ok"], state["message"], state["truncated"]
    return {"l": rows["l"], "omega": rows["omega"], "weight": rows["weight"],
            "error": {"omega": rows["omega_error"], "weight": rows["weight_error"]}, "truncated": truncated,
            "ok": ok, "message": message,
            "units": "omega of the spec's time coordinate; weight: each level's delta-function coefficient in "
                     "S_+(omega) between the two points (sum over m of phi_n(x1) conj(phi_n(x2)), phi_n Klein-Gordon "
                     "normalised); the lowest levels of each l are listed, more accumulate at the mass"}


def _two_point_parts(problem, omegas, r1, r2, c, tolerance, progress=None, continuum_only=False):
    """The engine's two-point function between radii r1 and r2 an angle arccos(c) apart: (the result, {state:
    (S_+, its error, S_-, its error)} for the states beyond the default one, the default state's name, extra JSON
    keys).  The one place that chooses between the regular-centre and the horizon computations.  Where bound
    levels exist it refuses unless ``continuum_only`` (the caller adds the levels itself)."""
    from derive.solve.bound import is_ads
    from derive.solve.centre import Unsupported, bound_states_possible

    if is_ads(problem) and problem.regions[0].lower_kind != "horizon":
        raise Unsupported("the two-point function with a reflecting AdS boundary (normal modes) is not built")
    states, extra = {}, {}
    if problem.regions[0].lower_kind == "horizon":
        from derive.solve.exterior import exterior_two_point

        result = exterior_two_point(problem, omegas, r1, r2, c, tolerance, progress=progress)
        extra["hawking_temperature"] = result.temperature
        if result.outer_temperature is not None:
            extra["cosmological_temperature"] = result.outer_temperature
        for name in result.states:
            states[name] = result.state(name)
        return result, states, "boulware", extra
    if problem.regions[0].lower_kind == "regular centre" and bound_states_possible(problem) and not continuum_only:
        raise Unsupported("the bound states' part of this two-point function is not built")
    from derive.solve.offcentre import two_point as regular_two_point

    result = regular_two_point(problem, omegas, r1, r2, c, tolerance, progress=progress)
    default = "vacuum"
    temperature = cosmological_temperature(problem)
    if temperature is not None:   # the static vacuum, and the Bunch-Davies state built on it
        default = "static vacuum"
        extra["cosmological_temperature"] = temperature
        with np.errstate(over="ignore"):      # far above the temperature the occupation is 0
            n = 1.0 / np.expm1(np.asarray(omegas, dtype=float) / temperature)
        value, error = np.asarray(result.value), np.asarray(result.error)
        states["bunch-davies"] = ((1 + n) * value, (1 + n) * error, n * np.conj(value), n * error)
    return result, states, default, extra


def _normal_mode_multipoles(problem, probe, tolerance, progress=None):
    """w_l for an array on a sphere with a reflecting AdS boundary: each l's normal modes at the sphere's radius
    against the switching, sum_n w_nl |chi_hat(Omega + omega_nl/alpha)|^2 (the discrete form of
    derive.detector.correlations.multipole_weights), with the errors of the single detector's sum."""
    from derive.detector.response import normal_mode_cutoff, normal_mode_terms
    from derive.solve.bound import normal_modes_below

    gaps = np.array([probe.gap])
    modes = normal_modes_below(problem, normal_mode_cutoff(gaps, probe.switching, probe.alpha), tolerance,
                               probe.radius, progress=progress)
    terms, term_errors, beyond = normal_mode_terms(modes, gaps, probe.switching, probe.alpha)
    count = int(np.max(modes.l)) + 1 if len(modes.l) else 1
    weights, errors = np.zeros(count), np.zeros(count)
    np.add.at(weights, modes.l, terms[0])
    np.add.at(errors, modes.l, term_errors[0])
    reached = min(count, beyond.shape[1])
    errors[:reached] += beyond[0, :reached]       # each l's first mode left out (one entry per l reached)
    return weights, errors


def _multipole_parts(problem, r0, state, tolerance):
    """The l-th term of the density at r0 in the state, for the multipoles of an array on the sphere of radius r0:
    (density(omegas, l) -> (S_+, its error, S_-, its error), thermal, temperature of t or None).  Chooses between
    the regular-centre and the horizon computations as :func:`_two_point_parts` does."""
    from derive.solve.bound import is_ads
    from derive.solve.centre import Unsupported

    if is_ads(problem) and problem.regions[0].lower_kind != "horizon":
        raise Unsupported("the multipoles with a reflecting AdS boundary (normal modes) are not built")
    if problem.regions[0].lower_kind == "horizon":
        from derive.solve.exterior import exterior_multipole

        from derive.detector.study import refuse_trapped_resonances

        refuse_trapped_resonances(problem)
        first = exterior_multipole(problem, np.array([1.0]), r0, 0, tolerance)
        if state not in first.states:
            raise Unsupported(f"state {state!r} outside a horizon: one of {', '.join(first.states)}")
        hottest = max(t for t in (first.temperature, first.outer_temperature) if t is not None)
        return (lambda omegas, l: exterior_multipole(problem, omegas, r0, l, tolerance).state(state)), True, hottest
    from derive.solve.offcentre import multipole_density

    temperature = cosmological_temperature(problem)
    thermal = state == "bunch-davies" and temperature is not None

    def density(omegas, l):
        result = multipole_density(problem, omegas, r0, l, tolerance)
        if not thermal:
            return result.density, result.error
        with np.errstate(over="ignore"):
            n = 1.0 / np.expm1(np.asarray(omegas, dtype=float) / temperature)
        return (1 + n) * result.density, (1 + n) * result.error, n * result.density, n * result.error
    return density, thermal, temperature if thermal else None


def _complex(values) -> dict:
    values = np.asarray(values)
    return {"re": _floats(values.real), "im": _floats(np.imag(values))}


def _reference(spacetime, detector, compare):
    """(the numeric detector with its comparison, the reference problem or None) for ``compare``: None (the
    spec's [compare]), "minkowski", a loaded spacetime or the path of a spec file."""
    from derive import load
    from derive.spec.model import Spacetime

    if compare is None:
        with_ = detector.compare_with
        other = load(with_) if with_ not in (None, "minkowski") else None
    elif isinstance(compare, str) and compare == "minkowski":
        with_, other = "minkowski", None
    elif isinstance(compare, Spacetime):
        with_, other = compare.path, compare
    elif isinstance(compare, str):
        with_, other = compare, load(compare)
    else:
        raise InputError(f"compare: expected 'minkowski', a spacetime or a spec path, got {compare!r}",
                         key="compare")
    return replace(detector, compare_with=with_), (other.numeric_problem if other is not None else None)


def response(spacetime, gaps=None, tolerance: float | None = None, switching: dict | None = None,
             compare=None, progress=None) -> Response:
    """The static detector's response F(Omega) with errors, the comparison, locality and the runs needed.

    Parameters
    ----------
    spacetime : Spacetime
        With a [detector] section.
    gaps : array-like of float, optional
        Gaps Omega in the detector's proper time (default: the spec's).
    tolerance : float, optional
        Relative tolerance of the spectral density (default: the spec's, else 1e-10).
    switching : dict, optional
        Values replacing the spec's switching values, e.g. ``{"width": 0.15}``.
    compare : "minkowski", Spacetime or str, optional
        What to compare with (default: the spec's [compare]).

    A density that misses the tolerance does not stop the response: every value carries the error it reached,
    ``.ok`` is False and ``.message`` names a tolerance that would pass.
    """
    from derive.codegen.problem import numeric_detector
    from derive.detector.study import study
    from derive.detector.switching import UnsupportedSwitching
    from derive.solve.centre import Unsupported

    if spacetime.detector is None:
        raise InputError("no [detector] section: a response needs a detector", file=spacetime.path,
                         key="detector")
    if spacetime.detector.coordinate is None and spacetime.detectors:
        raise InputError("[detector] has no 'at': this spec describes several detectors ([[detectors]]), whose "
                         "joint state derive correlations gives; for one detector's response give [detector] "
                         "at = \"r = ...\", gaps and a switching", file=spacetime.path, key="detector.at")
    detector = numeric_detector(spacetime)
    _check_radius(spacetime, spacetime.numeric_problem, detector.radius, "detector.at")
    if gaps is not None:
        gaps = np.atleast_1d(np.asarray(gaps, dtype=float))
        if gaps.size == 0 or not np.all(np.isfinite(gaps)) or np.any(np.abs(gaps) > 1e12):
            raise InputError("gaps: expected finite numbers of magnitude at most 1e12", key="--gaps")
    if not ((gaps is not None and len(gaps)) or detector.gaps):
        raise InputError("no gaps: give [detector] gaps = [...] or --gaps", file=spacetime.path, key="detector.gaps")
    if switching:
        for name, value in switching.items():
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise InputError(f"switching {name} = {value!r}: expected a finite positive number",
                                 key=f"detector.switching.{name}")
        detector = replace(detector, switching={**detector.switching, **switching})
    tolerance = tolerance_of(spacetime, tolerance)
    detector, reference = _reference(spacetime, detector, compare)
    try:
        answer = study(spacetime.numeric_problem, detector, reference, tolerance, gaps, progress=progress)
    except (Unsupported, UnsupportedSwitching) as exc:
        raise _unsupported(spacetime, "compute this response", exc) from None
    except InputError as exc:
        raise exc.located(file=spacetime.path) from None
    data = response_json(answer)
    data["tolerance"] = tolerance
    return Response(data, spacetime, answer.get("ok", True), answer.get("message", ""), tolerance)


def response_json(result) -> dict:
    """The JSON of `derive response` from a study (keys documented in README.md)."""
    switching = result["switching"]
    data = {"gaps": _floats(result["gaps"]), "response": _floats(result["response"]),
            "error": _floats(result["error"]),
            "switching": {"shape": switching.shape, "width": switching.width, "tail": switching.tail,
                          "duration": switching.duration,
                          "support": None if switching.support is None else list(switching.support)},
            "state": result["state"], "at": result["at"], "coupling": result["coupling"],
            "sigmas": result["sigmas"], "locality": result["locality"], "notes": result["notes"],
            "effective_temperature": result["effective_temperature"]}
    if "states" in result:
        data["states"] = {name: {"response": _floats(value["response"]), "error": _floats(value["error"]),
                                 "effective_temperature": value["effective_temperature"]}
                          for name, value in result["states"].items()}
    for key in ("local_temperature", "local_cosmological_temperature"):
        if key in result:
            data[key] = float(result[key])
    if "bound_levels" in result:
        levels = result["bound_levels"]
        data["bound_levels"] = {key: (_floats(value) if isinstance(value, np.ndarray) else value)
                                for key, value in levels.items()}
    if "reference" in result:
        ref = result["reference"]
        data["reference"] = {"with": ref["with"], "response": _floats(ref["response"]),
                             "error": _floats(ref["error"])}
        data["relative_difference"] = _floats(result["relative_difference"])
        data["relative_difference_error"] = _floats(result["relative_difference_error"])
        trials = result.get("trials_to_distinguish")
        data["trials_to_distinguish"] = None if trials is None else _floats(trials)
        lower = result.get("trials_lower_bound")
        data["trials_lower_bound"] = [] if lower is None else _floats(lower)
        if "trials_note" in result:
            data["trials_note"] = result["trials_note"]
    return data


CORRELATIONS_CONVENTION = (
    "two-level detectors |g>, |e> with gaps Omega_i, coupled as lambda chi_i(tau) (e^{i Omega_i tau} sigma_i^+ + h.c.) "
    "phi(x_i(tau)), all in their ground states and the field in the state named; to second order in lambda the "
    "joint state of a pair in the basis |gg>, |ge>, |eg>, |ee> (the first named first) is rho = "
    "[[1 - L_AA - L_BB, 0, 0, M*], [0, L_BB, L_AB*, 0], [0, L_AB, L_AA, 0], [M, 0, 0, 0]], with "
    "L_ij = lambda^2 int dtau dtau' chi_i(tau) chi_j(tau') e^{-i (Omega_i tau - Omega_j tau')} W(x_i(tau), x_j(tau')) "
    "and M = -lambda^2 int dtau dtau' chi_A(tau) chi_B(tau') e^{i (Omega_A tau + Omega_B tau')} "
    "<T phi(x_A(tau)) phi(x_B(tau'))> (time ordering in the spec's time coordinate); concurrence "
    "2 max(0, |M| - sqrt(L_AA L_BB)), negativity max(0, sqrt((L_AA - L_BB)^2/4 + |M|^2) - (L_AA + L_BB)/2), mutual "
    "information (natural log) L_+ ln L_+ + L_- ln L_- - L_AA ln L_AA - L_BB ln L_BB with "
    "L_+- = (L_AA + L_BB +- sqrt((L_AA - L_BB)^2 + 4 |L_AB|^2))/2; light_time is the shortest coordinate time of a "
    "light signal between the two points, overlap whether some pair of instants of the two switchings' effective "
    "durations is that far apart (they can signal), commutator_part the part of M from the field's commutator "
    "(state-independent: communication rather than harvesting)")


def _array_probes(spacetime, problem):
    """The [[detectors]] as numbers: (probes, positions, (shape, switching values, profile) per detector), exit 2
    naming the key where one cannot be formed."""
    from derive.codegen.problem import _switching_profile, numeric_switchings
    from derive.detector.correlations import Probe
    from derive.detector.study import _sqrt_f
    from derive.detector.switching import switching_from_spec
    from derive.spec.positions import parse_position

    probes, points, numbers = [], [], []
    for i, (entry, switching) in enumerate(zip(spacetime.detectors, numeric_switchings(spacetime))):
        key = f"detectors[{i}]"
        point = parse_position(spacetime, entry.at, key=f"{key}.at")
        _check_radius(spacetime, problem, point.radius, f"{key}.at")
        shape, centre = switching["shape"], switching["centre"]
        values = {k: v for k, v in switching.items() if k not in ("shape", "centre")}
        values.setdefault("tail", 1e-12)
        profile = None
        if shape == "expression":
            profile = _switching_profile(spacetime, entry.switching["expression"])
        try:
            chi = switching_from_spec({"shape": shape}, values, profile)
        except InputError as exc:   # the switching's own key, under this detector's
            raise InputError(exc.problem, file=spacetime.path,
                             key=exc.key.replace("detector.", f"{key}.", 1) if exc.key else key) from None
        probes.append(Probe(entry.name, point.radius, _sqrt_f(problem, point.radius), entry.gap,
                            chi.width if shape == "gaussian" else None, centre, chi))
        numbers.append((shape, values, profile))
        points.append(point)
    return probes, points, numbers


def _pair_continuum(problem) -> tuple[bool, float, float | None]:
    """(whether bound levels enter a pair's integrals, where the continuum's begins, the period in log k of its
    oscillation there or None): around a body with a massive field (a regular centre) the levels are summed apart
    and the continuum starts at its threshold (oscillating in log k above a supercritical inverse-square tail);
    None (Minkowski) and horizons: (False, 0, None)."""
    if problem is None or problem.regions[0].lower_kind != "regular centre":
        return False, 0.0, None
    from derive.solve.bound import is_ads
    from derive.solve.centre import bound_states_possible, continuum_threshold, threshold_log_period

    if is_ads(problem):        # a discrete spectrum: summed over its modes, no continuum
        return False, 0.0, None
    levels = bound_states_possible(problem)
    return levels, continuum_threshold(problem), threshold_log_period(problem) if levels else None


def _spectrum_between(problem, first, second, state, tolerance, progress=None, continuum_only=False):
    """spectrum(omegas) -> (S_+, its error, S_-, its error) between two positions in the named state (with
    ``continuum_only``, the continuum's part where bound levels exist too)."""
    from derive.solve.centre import Unsupported
    from derive.spec.positions import cos_angle

    c = cos_angle(first, second)

    def spectrum(omegas):
        result, states, default, _ = _two_point_parts(problem, omegas, first.radius, second.radius, c, tolerance,
                                                      progress, continuum_only)
        if state in states:
            return states[state]
        if state != default and not (default == "vacuum" and state == "boulware"):
            names = ", ".join([default] + list(states))
            raise Unsupported(f"state {state!r}: here the states are {names}")
        value = np.asarray(result.value, dtype=complex)
        zero = np.zeros(len(omegas))
        return value, np.asarray(result.error, dtype=float), zero.astype(complex), zero
    return spectrum


def _single_probability(spacetime, problem, probe, numbers, state, tolerance, progress, key):
    """(F, its error) per lambda^2 of one of the [[detectors]] alone, through derive response's own code."""
    from derive.detector.study import detector_response
    from derive.solve.centre import Divergent
    from derive.solve.problem import NumericDetector

    shape, values, profile = numbers
    single = NumericDetector(probe.radius, shape, values, (probe.gap,), state, None, None, 3.0, profile)
    try:
        answer = detector_response(problem, single, tolerance, progress=progress, shortfalls=[])[0]
    except Divergent as exc:
        raise InputError(f"this detector's switching cannot be used: {exc}", file=spacetime.path,
                         key=f"{key}.switching.shape") from None
    return float(answer.response[0]), float(answer.error[0])


def correlations(spacetime, tolerance: float | None = None, progress=None, reference: bool = True):
    """Several static detectors ([[detectors]] in the spec): each one's excitation probability and, for every
    pair, L_AB, M, the concurrence, negativity and mutual information of their joint state at second order,
    and what can signal between them (see ``CORRELATIONS_CONVENTION``).

    Returns a :class:`~derive.results.Correlations`: ``.detectors`` {name: {"probability", "error", "at", "gap",
    ...}}, ``.pairs`` (every pair once, in the order the spec lists them), ``.convention``, ``.coupling``,
    ``.state``; ``.to_dataframe()`` is the table of pairs."""
    from derive.detector.correlations import light_time, pair_record, pair_terms
    from derive.results import Correlations
    from derive.solve.centre import Unsupported
    from derive.spec.positions import cos_angle

    if len(spacetime.detectors) < 2:
        raise InputError("correlations need two or more detectors: add [[detectors]] entries (name, at, gap, "
                         "switching)", file=spacetime.path, key="detectors")
    tolerance = tolerance_of(spacetime, tolerance)
    problem = spacetime.numeric_problem
    _check_flat_comparison(spacetime, reference)
    shared = spacetime.detector
    state = shared.state if shared is not None else "vacuum"
    coupling = shared.coupling if shared is not None and shared.coupling is not None else 1.0
    from derive.detector.response import round_trip

    probes, points, numbers = _array_probes(spacetime, problem)

    from derive.detector.correlations import combined, frequency_reach, pair_levels, pair_terms_discrete
    from derive.solve.bound import is_ads, normal_modes_below

    normal_modes = is_ads(problem) and problem.regions[0].lower_kind != "horizon"
    # bound levels around a body (a massive field): the continuum's pair integrals plus the levels' sums; with a
    # regular centre a massive field's continuum begins at its threshold (nothing below it but the levels): the
    # frequency panels start there, at the jump (a panel across it had left 2% in a pair's L)
    levels, start, log_period = _pair_continuum(problem)
    kink = _threshold_outside_horizon(problem)

    def spectrum_between(i, j):
        return _spectrum_between(problem, points[i], points[j], state, tolerance, progress, continuum_only=levels)

    detectors, shortfalls, lights = {}, [], {}
    try:
        for i in range(len(probes)):
            for j in range(i + 1, len(probes)):
                lights[i, j] = light_time(problem, points[i], points[j])
                if lights[i, j][0] == 0.0:
                    raise InputError(f"detectors {probes[i].name!r} and {probes[j].name!r} are at the same point: "
                                     "a pair needs two places (one detector's response is derive response)",
                                     file=spacetime.path, key=f"detectors[{j}].at")
        for i, probe in enumerate(probes):
            # L_ii is the single detector's response, through the same code as derive response
            value, error = _single_probability(spacetime, problem, probe, numbers[i], state, tolerance, progress,
                                               f"detectors[{i}]")
            duration = 2 * probe.half_duration * probe.alpha
            trip = round_trip(problem, probe.alpha, probe.radius)
            detectors[probe.name] = {"probability": coupling ** 2 * value, "error": coupling ** 2 * error,
                                     "at": points[i].to_json(), "gap": probe.gap,
                                     "switching": {"shape": numbers[i][0], **numbers[i][1]},
                                     "centre": probe.centre, "redshift_factor": probe.alpha,
                                     "locality": {"duration": duration, "round_trip": trip,
                                                  "local": bool(duration < trip), "tail": numbers[i][1]["tail"]}}
            if probe.gaussian:
                detectors[probe.name]["width"] = probe.sigma
            if error > tolerance * abs(value):
                shortfalls.append(f"{probe.name}: probability error {error / abs(value):.1e} (relative)")
        pairs = []
        for i in range(len(probes)):
            for j in range(i + 1, len(probes)):
                A, B = probes[i], probes[j]
                light, light_error = lights[i, j]
                if normal_modes:   # a discrete spectrum: the integrals are sums over the modes
                    modes = normal_modes_below(problem, frequency_reach(A, B, light), tolerance, A.radius,
                                               B.radius, cos_angle(points[i], points[j]), progress)
                    terms = pair_terms_discrete(A, B, modes, light, problem.dimension)
                else:
                    terms = pair_terms(A, B, spectrum_between(i, j), light, tolerance, problem.dimension,
                                       start=start, log_period=log_period, kink=kink)
                L_AA, L_BB = (detectors[p.name]["probability"] for p in (A, B))
                e_AA, e_BB = (detectors[p.name]["error"] for p in (A, B))
                lam2 = coupling ** 2
                share = None
                if levels:
                    share, report = pair_levels(problem, A, B, cos_angle(points[i], points[j]), light, tolerance,
                                                np.sqrt(L_AA * L_BB) / lam2)
                    terms = combined(terms, share)
                reach = A.half_duration + B.half_duration + abs(A.centre - B.centre)
                pair = pair_record(A, B, terms, L_AA, L_BB, e_AA, e_BB, lam2)
                if share is not None:   # the levels' part of L and M (in them already), as derive response reports
                    pair["bound_levels"] = {"found": report["found"], "l_max": report["l_max"],
                                            "L": [lam2 * share.L.real, lam2 * share.L.imag],
                                            "M": [lam2 * share.M.real, lam2 * share.M.imag],
                                            "error": {"L": lam2 * share.L_error, "M": lam2 * share.M_error}}
                pair["signalling"] = {"light_time": light, "light_time_error": light_error,
                                      "overlap": bool(reach >= light),
                                      "commutator_part": [lam2 * terms.commutator.real,
                                                          lam2 * terms.commutator.imag],
                                      "commutator_part_error": lam2 * terms.commutator_error}
                # the tolerance refers to sqrt(L_AA L_BB) or to the integral of |integrand|, the larger (as the
                # two-point function's refers to the sum of its terms' sizes)
                pair["scale"] = {"L": lam2 * max(terms.L_scale, np.sqrt(L_AA * L_BB) / lam2),
                                 "M": lam2 * max(terms.M_scale, np.sqrt(L_AA * L_BB) / lam2)}
                worst = max(pair["error"][k] / pair["scale"][k] for k in ("L", "M"))
                if worst > tolerance:
                    message = f"{A.name}-{B.name}: error {worst:.1e} of the scale"
                    shortest = min(2 * p.half_duration * p.alpha for p in (A, B))
                    if light is not None and light < 1e-2 * shortest:
                        # M's smoothed time ordering reaches frequencies ~ 1/(light time), where the spectral
                        # function needs ever more of its modes (measured: 1e-3 R apart in the massive shell,
                        # two minutes and 43% error)
                        message += (f" (the detectors are {light:.3g} apart in light time against switchings of "
                                    f"{shortest:.3g}: the pair's integrals reach frequencies ~ 1/(light time); "
                                    "detectors further apart, or a looser tolerance, reach it sooner)")
                    shortfalls.append(message)
                pairs.append(pair)
    except Unsupported as exc:
        raise _unsupported(spacetime, "compute these correlations", exc, key="detectors") from None
    names = [p.name for p in probes]
    matrix = np.zeros((len(probes), len(probes)), dtype=complex)
    for i, name in enumerate(names):
        matrix[i, i] = detectors[name]["probability"]
    for pair in pairs:
        i, j = names.index(pair["between"][0]), names.index(pair["between"][1])
        matrix[i, j] = complex(*pair["L"])
        matrix[j, i] = np.conj(matrix[i, j])
    L_matrix = {"names": names, "re": matrix.real.tolist(), "im": matrix.imag.tolist()}
    multipoles = None
    if _on_one_sphere(probes):
        from derive.detector.correlations import multipole_weights
        from derive.solve.offcentre import angular_factor

        try:
            if normal_modes:
                weights, errors = _normal_mode_multipoles(problem, probes[0], tolerance, progress)
            else:
                density, thermal, temperature = _multipole_parts(problem, probes[0].radius, state, tolerance)
                weights, errors = multipole_weights(problem, probes[0], tolerance, density, thermal, temperature,
                                                    levels=levels)
        except Unsupported as exc:
            raise _unsupported(spacetime, "compute the array's multipoles", exc, key="detectors") from None
        n = problem.dimension - 2
        rebuilt = [sum(w * angular_factor(l, n, cos_angle(points[names.index(p["between"][0])],
                                                          points[names.index(p["between"][1])]))
                       for l, w in enumerate(weights)) * coupling ** 2 for p in pairs]
        multipoles = {"radius": probes[0].radius, "l": list(range(len(weights))),
                      "weight": (coupling ** 2 * weights).tolist(), "error": (coupling ** 2 * errors).tolist(),
                      "largest_mismatch": max([abs(complex(*p["L"]) - b) / p["scale"]["L"]
                                               for p, b in zip(pairs, rebuilt)] or [0.0])}
    compare = spacetime.compare
    if compare is not None and reference is not False:
        other = _correlations_reference(spacetime, compare.with_, probes, points, coupling, tolerance,
                                        multipoles is not None)
        _compared_pairs(detectors, pairs, other)
        ok_reference = other.pop("ok")
        if not ok_reference:
            shortfalls.append("the reference: " + other.pop("message"))
        other.pop("message", None)
    data = {"detectors": detectors, "pairs": pairs, "L_matrix": L_matrix, "convention": CORRELATIONS_CONVENTION,
            "state": state, "coupling": coupling, "tolerance": tolerance,
            "units": "probabilities and matrix elements of the joint state (dimensionless); light times in the "
                     "spec's time coordinate; widths in each detector's proper time"}
    ok = not shortfalls
    message = "" if ok else (f"tolerance {tolerance:.0e} not met: " + "; ".join(shortfalls)
                             + f" (a tolerance of {10 * tolerance:.0e} may pass)")
    if multipoles is not None:
        if compare is not None and reference is not False and other.get("multipoles"):
            theirs = other["multipoles"]
            count = min(len(theirs["weight"]), len(multipoles["weight"]))
            ours_w, theirs_w = np.array(multipoles["weight"][:count]), np.array(theirs["weight"][:count])
            error = np.array(multipoles["error"][:count]) + np.array(theirs["error"][:count])
            multipoles["difference_from_reference"] = (ours_w - theirs_w).tolist()
            multipoles["difference_error"] = error.tolist()
            # which l tells them apart: the difference in units of its error
            multipoles["significance"] = (np.abs(ours_w - theirs_w) / np.maximum(error, 1e-300)).tolist()
        data["multipoles"] = multipoles
    if compare is not None and reference is not False:
        data["reference"] = other
    return Correlations(data, spacetime, ok, message, tolerance)


def _on_one_sphere(probes) -> bool:
    """An array on a sphere: every detector at the same radius r0 > 0 with the same gap, width and peak time."""
    first = probes[0]
    return first.radius > 0 and all((p.radius, p.gap, p.switching, p.centre) == (first.radius, first.gap,
                                                                                  first.switching, first.centre)
                                    for p in probes)


def _threshold_outside_horizon(problem) -> float | None:
    """A massive field's threshold outside a black hole (above it the in modes begin, and the spectrum's slope
    jumps: the pair integrals' panels end there), or None."""
    from derive.solve.centre import continuum_threshold

    if problem.regions[0].lower_kind != "horizon" or problem.mass == 0.0:
        return None
    threshold = continuum_threshold(problem)
    return threshold if threshold > 0 else None


def _check_flat_comparison(spacetime, reference) -> None:
    """Bad input before any work: a Minkowski [compare] of several detectors needs a massless field in 3+1."""
    compare = spacetime.compare
    if compare is None or reference is False or compare.with_ != "minkowski":
        return
    field = spacetime.numeric_problem
    if field.dimension != 4 or field.mass != 0:
        raise InputError("the Minkowski comparison of several detectors is built for a massless field in 3+1; "
                         "compare with the path of a flat spec instead", file=spacetime.path, key="compare.with")


def _correlations_reference(spacetime, with_, probes, points, coupling, tolerance, multipoles=False) -> dict:
    """The same detectors in the [compare] spacetime: in Minkowski (3+1, massless) at the same positions read as
    flat polar coordinates, with the same gaps and proper widths and the peaks at each detector's proper time
    alpha_i T_i; or in another spec, loaded with these [[detectors]] and [detector]."""
    import dataclasses

    from derive.detector.correlations import Probe, pair_record, pair_terms

    if with_ != "minkowski":
        from derive import load

        other = load(with_)
        other = dataclasses.replace(other, detectors=spacetime.detectors, detector=spacetime.detector, compare=None)
        result = correlations(other, tolerance, reference=False)
        data = result.to_json()
        return {"with": with_, "detectors": data["detectors"], "pairs": data["pairs"], "ok": result.ok,
                "message": result.message, "multipoles": data.get("multipoles")}
    _check_flat_comparison(spacetime, True)
    flat = [Probe(p.name, p.radius, 1.0, p.gap, p.sigma, p.alpha * p.centre, p.switching) for p in probes]
    position = [point.radius * point.unit_vector() for point in points]

    def spectrum(i, j):
        d = float(np.linalg.norm(position[i] - position[j]))
        return _flat_spectrum(d), d
    lam2 = coupling ** 2
    detectors = {}
    for probe in flat:
        value, error = _flat_probability(probe)
        detectors[probe.name] = {"probability": lam2 * value, "error": lam2 * error}
    pairs = []
    for i in range(len(flat)):
        for j in range(i + 1, len(flat)):
            values, d = spectrum(i, j)
            terms = pair_terms(flat[i], flat[j], values, d, tolerance)
            A, B = detectors[flat[i].name], detectors[flat[j].name]
            pairs.append(pair_record(flat[i], flat[j], terms, A["probability"], B["probability"], A["error"],
                                     B["error"], lam2))
    out = {"with": "minkowski", "detectors": detectors, "pairs": pairs, "ok": True, "message": ""}
    if multipoles:
        from scipy.special import spherical_jn

        from derive.detector.correlations import multipole_weights

        r0 = flat[0].radius

        def density(omegas, l):   # flat 3+1: S_l = (2l + 1) omega j_l(omega r0)^2/(4 pi^2) (Rayleigh's expansion)
            value = (2 * l + 1) * omegas * spherical_jn(l, omegas * r0) ** 2 / (4 * np.pi ** 2)
            return value, 1e-16 * np.abs(value)
        weights, errors = multipole_weights(None, flat[0], tolerance, density=density)
        out["multipoles"] = {"radius": r0, "l": list(range(len(weights))), "weight": (lam2 * weights).tolist(),
                             "error": (lam2 * errors).tolist()}
    return out


def _compared_pairs(detectors, pairs, reference) -> None:
    """Each pair's differences from the reference (concurrence, negativity, |M|), each with its error."""
    theirs = {tuple(p["between"]): p for p in reference["pairs"]}
    for pair in pairs:
        other = theirs.get(tuple(pair["between"]))
        if other is None:
            continue
        difference = {}
        for key in ("concurrence", "negativity", "mutual_information"):
            difference[key] = pair[key] - other[key]
            difference[f"{key}_error"] = pair[f"{key}_error"] + other[f"{key}_error"]
        difference["abs_M"] = float(abs(complex(*pair["M"])) - abs(complex(*other["M"])))
        difference["abs_M_error"] = pair["error"]["M"] + other["error"]["M"]
        pair["difference_from_reference"] = difference


DESIGN_CONVENTION = (
    "runs: the number of independent runs (each one detector, switched once, then read) needed to tell the "
    "spec's spacetime from the [compare] reference at `sigmas` standard deviations with the detector's coupling "
    "lambda, counting excitations: N = z^2 (sqrt(P_A (1 - P_A)) + sqrt(P_B (1 - P_B)))^2 / (P_A - P_B)^2, "
    "P = lambda^2 F; duration: the switching's effective duration (all but its tail of int chi^2), in the "
    "detector's proper time; local: duration < locality x round_trip (the radial light round trip to the nearest "
    "interface or reflecting boundary). quantum_limit: for the best probe, to second order in lambda, the "
    "detector's reduced state after the switching for any initial qubit state; runs in the Fisher form "
    "N = 4 z^2 / I per run along the straight path between the two states (counting: the classical I of "
    "measuring |e><e|; best_measurement: the quantum (SLD) Fisher information, attained by measuring in its "
    "eigenbasis, which no measurement on the runs can beat); chernoff: Q = min_s Tr rho_A^s rho_B^(1-s), its "
    "exponent -ln Q (counting's classical exponent beside it), and the runs at which P_e <= Q^N/2 guarantees "
    "an error probability Phi(-z) (sufficient, not a lower bound); the second-order shift is renormalised "
    "against the same detector in the Minkowski vacuum")


def _design_family(spacetime, detector):
    """The searched family from [design] and the detector (exit 2 naming the key where it cannot be formed)."""
    from derive.detector.design import Family
    from derive.detector.switching import DEFAULT_TAIL
    from derive.spec.model import DesignSpec

    design = spacetime.design_settings or DesignSpec()
    gaps = design.gaps
    if gaps is None:
        if len(set(detector.gaps)) < 2:
            raise InputError("the gap range to search: give [design] gaps = [low, high] (or two or more "
                             "[detector] gaps)", file=spacetime.path, key="design.gaps")
        gaps = (min(detector.gaps), max(detector.gaps))
    radii = design.radii
    if design.region is not None:
        radii = _region_radii(spacetime, design.region)
    return Family(tuple(design.shapes), (float(gaps[0]), float(gaps[1])), design.locality, detector.coupling,
                  detector.sigmas, float(detector.switching.get("tail", DEFAULT_TAIL)), design.shortest,
                  design.longest, radii, design.positions)


def _region_radii(spacetime, name: str) -> tuple[float, float]:
    """The radii a detector may take in the named region: from a regular centre (included) or a thousandth of
    the region's width above a lower end, to a thousandth below its upper end (a shell, a horizon, a boundary
    are not places for a static detector); an unbounded region needs [design] radii."""
    problem = spacetime.numeric_problem
    region = next(r for r in problem.regions if r.name == name)
    if region.upper is None:
        raise InputError(f"region {name!r} reaches infinity: give [design] radii = [low, high] instead",
                         file=spacetime.path, key="design.region")
    margin = 1e-3 * (region.upper - region.lower)
    low = region.lower if region.lower_kind == "regular centre" else region.lower + margin
    return (float(low), float(region.upper - margin))


def _verified(problem, detector, reference, tolerance, radius, switching, gap, family, trip):
    """A probe recomputed through the response's ordinary path (its own panels): the record reported."""
    from derive.detector.design import describe, runs_of
    from derive.detector.study import study

    values = {"width": switching.width} if switching.shape == "gaussian" else {"duration": switching.support_length}
    probe = replace(detector, radius=float(radius), shape=switching.shape,
                    switching={**values, "tail": switching.tail})
    answer = study(problem, probe, reference, tolerance, np.array([gap]))
    F, e = float(answer["response"][0]), float(answer["error"][0])
    R, eR = float(answer["reference"]["response"][0]), float(answer["reference"]["error"][0])
    runs, runs_error, resolved = runs_of(F, e, R, eR, family.coupling, family.sigmas)
    return {"gap": float(gap), "switching": describe(switching), "at": float(radius), "runs": runs,
            "runs_error": runs_error, "duration": float(switching.duration), "round_trip": float(trip),
            "local": bool(answer["locality"]["local"] and switching.duration < family.locality * trip),
            "response": F, "error": e, "reference_response": R, "reference_error": eR, "resolved": resolved,
            "ok": bool(answer["ok"]), "message": answer["message"]}


def design(spacetime, tolerance: float | None = None, progress=None):
    """The probe that tells the spec's spacetime from its [compare] reference in the fewest runs while staying
    local, the trade-off of runs against the switching's duration, and the quantum limit (see
    ``DESIGN_CONVENTION`` and derive.detector.design).

    Returns a :class:`~derive.results.Design`: ``.best`` and ``.default`` (gap, switching, at, runs with their
    error, duration, round_trip, local), ``.tradeoff`` (one row per duration), ``.quantum_limit``; the best and
    default probes are recomputed through the ordinary response (their numbers are those of ``derive
    response``)."""
    from derive.codegen.problem import numeric_detector
    from derive.detector.design import DESIGN_SHAPES, quantum_limit, search, tradeoff
    from derive.detector.switching import UnsupportedSwitching, switching_from_spec
    from derive.results import Design
    from derive.solve.centre import Unsupported

    if (spacetime.detector is None or spacetime.detector.coordinate is None) and len(spacetime.detectors) == 2:
        return pair_design(spacetime, tolerance, progress)
    if spacetime.detector is None or spacetime.detector.coordinate is None:
        raise InputError("derive design searches for one detector (give [detector] with at, gaps and coupling) "
                         "or places the second of two [[detectors]]",
                         file=spacetime.path, key="detector")
    if spacetime.compare is None:
        raise InputError("derive design needs what to tell the spacetime from: give [compare] with = "
                         "\"minkowski\" or another spec", file=spacetime.path, key="compare")
    if spacetime.detector.coupling is None:
        raise InputError("the runs need the coupling: give [detector] coupling = lambda", file=spacetime.path,
                         key="detector.coupling")
    detector = numeric_detector(spacetime)
    problem = spacetime.numeric_problem
    _check_radius(spacetime, problem, detector.radius, "detector.at")
    family = _design_family(spacetime, detector)
    if family.radii is not None:
        for radius in family.radii:
            _check_radius(spacetime, problem, radius, "design.radii")
            if problem.regions[0].lower_kind == "horizon" and not radius > problem.regions[0].lower:
                raise InputError(f"r = {radius:g} is not outside the horizon at r = {problem.regions[0].lower:g}",
                                 file=spacetime.path, key="design.radii")
    if detector.shape not in DESIGN_SHAPES:
        raise InputError(f"the spec's switching {detector.shape!r} is the default probe, but design compares "
                         f"shapes it can scale ({', '.join(DESIGN_SHAPES)})", file=spacetime.path,
                         key="detector.switching.shape")
    tolerance = tolerance_of(spacetime, tolerance)
    detector, reference = _reference(spacetime, detector, None)
    try:
        found = search(problem, detector, reference, tolerance, family, progress)
        site = found["site"]
        best = _verified(problem, detector, reference, tolerance, site.radius, found["best"].switching,
                         found["best"].gap, family, site.round_trip)
        own = switching_from_spec({"shape": detector.shape}, detector.switching, detector.profile)
        from derive.detector.response import round_trip
        from derive.detector.study import _sqrt_f

        own_trip = round_trip(problem, _sqrt_f(problem, detector.radius), detector.radius)
        candidates = [_verified(problem, detector, reference, tolerance, detector.radius, own, gap, family,
                                own_trip) for gap in sorted(set(detector.gaps))]
        default = min(candidates, key=lambda c: c["runs"])
        limit = quantum_limit(site, found["best"])
        rows = tradeoff(site)
    except (Unsupported, UnsupportedSwitching) as exc:
        raise _unsupported(spacetime, "design a probe here", exc) from None
    except InputError as exc:
        raise exc.located(file=spacetime.path) from None
    shortfalls = list(site.shortfalls)
    for record in (best, default):
        if not record.pop("ok"):
            shortfalls.append((record["message"], 0.0))
        record.pop("message")
    if not best["resolved"]:
        shortfalls.append(("the best probe's difference from the reference is not resolved (|F - F_ref| is not "
                           "above twice its error): its runs are not a number derive stands behind", 0.0))
    notes = []
    lo, hi = family.gaps
    if min(abs(best["gap"] - lo), abs(best["gap"] - hi)) <= 1e-6 * max(hi - lo, 1e-12):
        notes.append(f"the best gap {best['gap']:.6g} lies at the edge of the range searched [{lo:g}, {hi:g}]: a "
                     "wider [design] gaps may do better")
    if best["duration"] >= site.longest * (1 - 1e-6):
        notes.append("the best probe lasts as long as the search allows (the locality budget, or [design] "
                     "longest): the difference grows with the time the detector has to feel the spacetime")
    if default["runs"] < best["runs"]:
        notes.append(f"the spec's own probe needs fewer runs ({default['runs']:.3g}) than the best found "
                     f"({best['runs']:.3g}): it lasts {default['duration']:.4g}, outside the durations searched "
                     f"(up to {site.longest:.4g}" + (", the locality budget" if family.longest is None else
                                                     ", [design] longest") + ")"
                     + ("" if default["local"] else ", and it is not local"))
    data = {"best": best, "default": default, "tradeoff": rows, "quantum_limit": limit, "notes": notes,
            "search": {"shapes": list(family.shapes), "gaps": list(family.gaps),
                       "durations": [site.shortest, site.longest], "locality": family.locality,
                       "budget": site.budget, "radii": None if family.radii is None else list(family.radii),
                       "sites": found["sites"], "evaluations": site.evaluations,
                       "per_shape": {shape: e.record(site.round_trip) for shape, e in found["per_shape"].items()}},
            "coupling": family.coupling, "sigmas": family.sigmas, "state": detector.state,
            "compare": detector.compare_with, "tolerance": tolerance, "convention": DESIGN_CONVENTION}
    message = "; ".join(m for m, _ in shortfalls)
    return Design(plain(data), spacetime, not shortfalls, message, tolerance)


PAIR_DESIGN_CONVENTION = (
    "two detectors in their ground states, the first ([[detectors]] entry 1) as the spec places it, the second moved "
    "along its direction (its angles kept) over the radii searched, its switching's peak at the first's plus the "
    "delay (spec's time coordinate); in a flat reference the same positions read as flat polar coordinates and the "
    "peaks at each detector's proper time. Runs at z = sigmas standard deviations: N = 4 z^2 / I, I the Fisher "
    "information per run along the straight path between the two spacetimes' joint states, at its midpoint: 'runs' "
    "the quantum (SLD) information of the joint state at leading order in lambda (the population of |gg> and the "
    "one-excitation block [[L_BB, L_AB*], [L_AB, L_AA]]; the coherence M enters only at lambda^4), attained by "
    "measuring in the block's eigenbasis; 'counting_runs' counting both detectors' excitations (sees L_AA and L_BB "
    "only); 'single_runs' each detector alone, counted. A detector is local when its switching's effective duration "
    "is at most `locality` times its light round trip; the best pair is chosen among local ones.")


class _PairSide:
    """One spacetime of the pair design: its detectors' probabilities and their L_AB at any radius and delay of
    the second detector (the spectra between the points kept per radius, shared by every delay)."""

    def __init__(self, spacetime, problem, probes, points, numbers, state, tolerance, progress, lam2):
        self.spacetime, self.problem, self.lam2 = spacetime, problem, lam2   # problem None: Minkowski
        self.base, self.points, self.numbers = probes, points, numbers
        self.state, self.tolerance, self.progress = state, tolerance, progress
        self.singles, self.spectra = {}, {}
        self.levels, self.start, self.log_period = _pair_continuum(problem)

    def probe(self, index: int, radius: float, peak: float):
        """Detector ``index`` at ``radius`` with its switching peaked at ``peak`` (spec's time)."""
        from derive.detector.correlations import Probe
        from derive.detector.study import _sqrt_f

        base = self.base[index]
        if self.problem is None:
            alpha = _sqrt_f(self.spacetime.numeric_problem, radius)   # the peak at the detector's proper time
            return Probe(base.name, radius, 1.0, base.gap, base.sigma, alpha * peak, base.switching)
        return Probe(base.name, radius, _sqrt_f(self.problem, radius), base.gap, base.sigma, peak, base.switching)

    def point(self, index: int, radius: float):
        point = self.points[index]
        return replace(point, radius=float(radius), text=f"r = {radius:.6g}" if radius != point.radius
                       else point.text)

    def single(self, index: int, radius: float) -> tuple[float, float]:
        key = (index, float(radius))
        if key not in self.singles:
            probe = self.probe(index, radius, 0.0)
            if self.problem is None:
                self.singles[key] = _flat_probability(probe)
            else:
                self.singles[key] = _single_probability(self.spacetime, self.problem, probe, self.numbers[index],
                                                        self.state, self.tolerance, self.progress,
                                                        f"detectors[{index}]")
        return self.singles[key]

    def spectrum(self, radius: float):
        key = float(radius)
        if key not in self.spectra:
            first, second = self.point(0, self.base[0].radius), self.point(1, radius)
            if self.problem is None:
                compute = _flat_spectrum(float(np.linalg.norm(first.radius * first.unit_vector()
                                                              - second.radius * second.unit_vector())))
            else:
                compute = _spectrum_between(self.problem, first, second, self.state, self.tolerance, self.progress,
                                            continuum_only=self.levels)
            memo = {}

            def remembered(w):
                token = w.tobytes()
                if token not in memo:
                    memo[token] = compute(w)
                return memo[token]
            self.spectra[key] = remembered
        return self.spectra[key]

    def joint(self, radius: float, delay: float):
        from derive.detector.correlations import pair_terms
        from derive.detector.pair_design import JointState

        A = self.probe(0, self.base[0].radius, self.base[0].centre)
        B = self.probe(1, radius, self.base[0].centre + delay)
        dimension = 4 if self.problem is None else self.problem.dimension
        terms = pair_terms(A, B, self.spectrum(radius), None, self.tolerance, dimension, time_ordered=False,
                           start=self.start, log_period=self.log_period)
        (L_AA, e_AA), (L_BB, e_BB) = self.single(0, self.base[0].radius), self.single(1, radius)
        if self.levels:      # the bound levels' share of L_AB, as derive correlations adds it
            from derive.detector.correlations import combined, pair_levels
            from derive.spec.positions import cos_angle

            share, _ = pair_levels(self.problem, A, B, cos_angle(self.point(0, self.base[0].radius),
                                                                 self.point(1, radius)), None, self.tolerance,
                                   np.sqrt(L_AA * L_BB), time_ordered=False)
            terms = combined(terms, share)
        lam2 = self.lam2      # the state's numbers at the spec's coupling
        return JointState(lam2 * L_AA, lam2 * L_BB, lam2 * terms.L, (lam2 * e_AA, lam2 * e_BB, lam2 * terms.L_error))


def _flat_spectrum(d: float):
    """spectrum(omegas) -> (S_+, its error, S_-, its error) between two points a distance d apart in Minkowski
    (3+1, massless, vacuum): S_+ = sin(omega d)/(4 pi^2 d), omega/(4 pi^2) at d = 0 (Birrell & Davies 1982,
    ch. 3), to rounding."""
    def values(w):
        zero = np.zeros_like(w)
        s_plus = np.sin(w * d) / (4 * np.pi ** 2 * d) if d > 0 else w / (4 * np.pi ** 2)
        return s_plus.astype(complex), 1e-16 * np.abs(s_plus), zero.astype(complex), zero
    return values


def _flat_probability(probe) -> tuple[float, float]:
    """(F, its error) per lambda^2 in Minkowski (3+1, massless): the Gaussian's closed form, else the response's
    quadrature with the exact flat density."""
    from derive.detector.response import response
    from derive.detector.study import flat_density, minkowski_gaussian_response

    if probe.gaussian:
        value = float(minkowski_gaussian_response([probe.gap], probe.sigma)[0])
        return value, 1e-15 * value
    flat = response(np.array([probe.gap]), probe.switching, flat_density(4, 0.0), threshold=0.0, dimension=4)
    return float(flat.response[0]), float(flat.error[0])


def pair_design(spacetime, tolerance: float | None = None, progress=None):
    """Where to put the second of two detectors, and when to switch it, so that their joint state tells the
    spacetime from its [compare] reference in the fewest runs (see ``PAIR_DESIGN_CONVENTION`` and
    derive.detector.pair_design): a grid over the radii searched ([design] radii or region, ``positions`` of
    them) refined by bounded scalar minimisation, and at each radius the delay likewise ([design] delays).

    Returns a :class:`~derive.results.PairDesign`: ``.pair`` with ``best`` and ``default`` (the spec's own
    placement): radius, delay, runs with their errors, counting_runs, single_runs, local; ``scan`` (one row per
    radius evaluated, at its best delay)."""
    from derive.detector.pair_design import compare_pairs, log_runs, search, single_runs
    from derive.detector.response import round_trip
    from derive.results import PairDesign
    from derive.solve.centre import Unsupported
    from derive.spec.model import DesignSpec

    if len(spacetime.detectors) != 2:
        raise InputError("a pair design needs exactly two [[detectors]] (the first stays, the second is moved)",
                         file=spacetime.path, key="detectors")
    if spacetime.compare is None:
        raise InputError("derive design needs what to tell the spacetime from: give [compare] with = "
                         "\"minkowski\" or another spec", file=spacetime.path, key="compare")
    shared = spacetime.detector
    if shared is None or shared.coupling is None:
        raise InputError("the runs need the coupling: give [detector] coupling = lambda", file=spacetime.path,
                         key="detector.coupling")
    tolerance = tolerance_of(spacetime, tolerance)
    problem = spacetime.numeric_problem
    probes, points, numbers = _array_probes(spacetime, problem)
    design = spacetime.design_settings or DesignSpec()
    radii = _region_radii(spacetime, design.region) if design.region is not None else design.radii
    if radii is None:
        raise InputError("the radii to move the second detector over: give [design] radii = [low, high] or "
                         "region = \"name\"", file=spacetime.path, key="design.radii")
    for radius in radii:
        _check_radius(spacetime, problem, radius, "design.radii")
    compare = spacetime.compare
    lam2 = shared.coupling ** 2
    if compare.with_ == "minkowski":
        if problem.dimension != 4 or problem.mass != 0:
            raise InputError("the Minkowski comparison of a pair is built for a massless field in 3+1; compare "
                             "with the path of a flat spec instead", file=spacetime.path, key="compare.with")
        theirs = _PairSide(spacetime, None, probes, points, numbers, shared.state, tolerance, progress, lam2)
    else:
        from derive import load

        other = load(compare.with_)
        other_problem = other.numeric_problem
        theirs = _PairSide(other, other_problem, probes, points, numbers, shared.state, tolerance, progress, lam2)
    ours = _PairSide(spacetime, problem, probes, points, numbers, shared.state, tolerance, progress, lam2)
    A, B = probes
    trips = {}

    def local(index, radius):
        alpha = ours.probe(index, radius, 0.0).alpha
        if (index, radius) not in trips:
            trips[(index, radius)] = round_trip(problem, alpha, radius)
        duration = ours.base[index].switching.duration
        return duration <= design.locality * trips[(index, radius)], duration, trips[(index, radius)]

    from derive.solve.centre import tortoise_distance

    # without an interface or a reflecting boundary (no round trip): the switchings' overlap and a light crossing
    window = A.half_duration + B.half_duration + 2 * tortoise_distance(problem, min(A.radius, radii[0]),
                                                                       max(A.radius, radii[1]))
    alpha_A = ours.probe(0, A.radius, 0.0).alpha

    def delay_range(radius):
        """The delays searched with the second detector at ``radius``: [design] delays as given, else those
        that keep the pair's span (first switching on to last off) within the locality budget of both round
        trips, so that no echo from an interface is read; (0, 0) when even simultaneous switchings do not fit."""
        if design.delays is not None:
            return design.delays
        _, first_duration, first_trip = local(0, A.radius)
        _, duration, trip = local(1, radius)
        room = (design.locality * min(first_trip, trip) - (first_duration + duration) / 2) / alpha_A
        room = min(room, window)
        return (-room, room) if room > 0 else (0.0, 0.0)
    sigmas = compare.sigmas

    def evaluate(radius, delay):
        record = compare_pairs(ours.joint(radius, delay), theirs.joint(radius, delay), sigmas)
        record.update(radius=float(radius), delay=float(delay))
        return record

    try:
        default = evaluate(B.radius, B.centre - A.centre)
        scan = search(evaluate, radii, design.positions, delay_range, lambda radius: local(1, radius)[0])
    except Unsupported as exc:
        raise _unsupported(spacetime, "design a pair of probes here", exc, key="detectors") from None
    candidates = [r for r in scan if r["local"]] or scan
    best = dict(min(candidates, key=log_runs))

    def described(record):
        out = dict(record)
        radius = record["radius"]
        ok, duration, trip = local(1, radius)
        first_ok, first_duration, first_trip = local(0, A.radius)
        out["at"] = ours.point(1, radius).to_json()
        out["local"] = bool(ok and first_ok)
        out["durations"] = [first_duration, duration]
        out["round_trips"] = [first_trip, trip]
        # the time the pair's measurement spans (first switching on to last off, in the first detector's proper
        # time): a delay near the light round trip reads an echo, which a single local switching cannot
        span = abs(record["delay"]) * alpha_A + (first_duration + duration) / 2
        out["span"] = float(span)
        out["span_within_round_trip"] = bool(span <= design.locality * first_trip)
        for side, name in ((ours, "L"), (theirs, "reference_L")):
            state = side.joint(radius, record["delay"])
            out[name] = {"AA": state.L_AA, "BB": state.L_BB, "AB": [state.L_AB.real, state.L_AB.imag],
                         "errors": list(state.errors)}
        # each detector alone, counted
        out["single_runs"] = {probe.name: single_runs(lam2 * ours.single(index, r)[0],
                                                      lam2 * theirs.single(index, r)[0], sigmas)
                              for index, (probe, r) in enumerate(((A, A.radius), (B, radius)))}
        return out

    best, default = described(best), described(default)
    scan = sorted(scan, key=lambda r: r["radius"])
    shortfalls = []
    if not best["resolved"]:
        shortfalls.append("the best pair's difference from the reference is not resolved (its information is not "
                          "above twice its error): its runs are not a number derive stands behind")
    notes = []
    if not best["local"]:
        notes.append("no radius searched keeps both detectors local: the best of all is reported")
    if min(abs(best["radius"] - radii[0]), abs(best["radius"] - radii[1])) <= 1e-6 * (radii[1] - radii[0]):
        notes.append(f"the best radius {best['radius']:.6g} lies at the edge of the range searched")
    searched = [delay_range(r) for r in (A.radius, radii[0], radii[1])]
    data = {"pair": {"detectors": [A.name, B.name], "best": best, "default": default, "scan": scan,
                     "radii": list(radii), "delays": [min(d[0] for d in searched), max(d[1] for d in searched)],
                     "delays_from": "spec" if design.delays is not None else "locality"},
            "convention": PAIR_DESIGN_CONVENTION, "compare": compare.with_, "coupling": shared.coupling,
            "sigmas": sigmas, "state": shared.state, "tolerance": tolerance, "notes": notes}
    ok = not shortfalls
    return PairDesign(data, spacetime, ok, "" if ok else "; ".join(shortfalls), tolerance)
