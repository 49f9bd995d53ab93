"""The solver's entry points for the command line and notebooks (numeric only: no sympy here)."""

from __future__ import annotations

import numpy as np

from derive.solve.centre import centre_density, minkowski_density

METHOD = ("modified Magnus propagation in the tortoise coordinate (exact frozen-potential steps with a "
          "first-order interaction-picture correction); error from grid doubling, far-radius tail and rounding")


def spectrum_at_centre(problem, omegas, l: int = 0, tolerance: float = 1e-10) -> dict:
    """Spectral density per unit omega at r = 0 for the angular label l (only l = 0 is nonzero there)."""
    omegas = np.asarray(omegas, dtype=float)
    if l != 0:
        zeros = np.zeros_like(omegas)
        return {"l": l, "at": 0.0, "omega": omegas, "density": zeros, "error": zeros, "ok": True,
                "message": "modes with l > 0 vanish at the centre (u ~ r^(l+1)): their density there is zero",
                "minkowski": minkowski_density(omegas) * 0}
    result = centre_density(problem, omegas, tolerance)
    return {"l": 0, "at": 0.0, "omega": omegas, "density": result.density, "error": result.error,
            "ok": result.ok, "message": result.message(), "minkowski": minkowski_density(omegas),
            "tail_error": result.tail_error, "propagation_error": result.propagation_error}


def spectrum_off_centre(problem, omegas, r0: float, tolerance: float = 1e-10, progress=None) -> dict:
    """The l-summed spectral density per unit omega at radius r0 > 0 (derive.solve.offcentre)."""
    from derive.solve.offcentre import density_off_centre

    result = density_off_centre(problem, np.asarray(omegas, dtype=float), r0, tolerance, progress=progress)
    return {"l": None, "at": r0, "omega": result.omega, "density": result.density, "error": result.error,
            "ok": result.ok, "message": result.message(), "minkowski": minkowski_density(result.omega)}


def local_comparison(problem, omegas, r0: float, density, error) -> dict:
    """The density at r0 against Minkowski's at equal local (proper) frequency: with the redshift factor
    alpha = sqrt(-g_tt(r0)) (proper time per unit of the spec's time), the density per unit proper frequency
    nu = omega/alpha is alpha S(omega), and the ratio is alpha S(omega) / S_flat(nu) with S_flat the flat density
    of the same dimension and mass (nu/(4 pi^2) massless in 3+1).  At the same coordinate frequency the ratio
    would plateau at 1/alpha^2, the redshift, not an enhancement.  Below the mass (S_flat = 0) the ratio is nan."""
    from derive.detector.study import _sqrt_f, flat_density

    omegas = np.asarray(omegas, dtype=float)
    alpha = _sqrt_f(problem, r0)
    flat, _ = flat_density(problem.dimension, problem.mass)(omegas / alpha)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(flat > 0, alpha * np.asarray(density, dtype=float) / flat, np.nan)
        ratio_error = np.where(flat > 0, alpha * np.asarray(error, dtype=float) / flat, np.nan)
    return {"redshift_factor": alpha, "ratio_to_minkowski": ratio, "ratio_to_minkowski_error": ratio_error}


def density_function(problem, r0: float, tolerance: float, progress=None):
    """omega -> DensityResult at radius r0 (the centre, or the l-sum off it)."""
    if r0 == 0.0:
        return lambda omegas: centre_density(problem, omegas, tolerance)
    from derive.solve.offcentre import density_off_centre

    return lambda omegas: density_off_centre(problem, omegas, r0, tolerance, progress=progress)


def scattering(problem, omegas, l: int, tolerance: float = 1e-10) -> dict:
    """|T|^2 and |R|^2 for a black-hole spacetime (see derive.solve.horizon)."""
    from derive.solve.horizon import transmission

    result = transmission(problem, l, np.asarray(omegas, dtype=float), tolerance)
    return {"l": l, "omega": result.omega, "transmission": result.transmission, "reflection": result.reflection,
            "error": result.error, "flux_defect": result.flux_defect, "ok": result.ok, "message": result.message()}


def bound_state_table(problem, l: int, r0: float, tolerance: float):
    """The lowest bound states (or, with a reflecting AdS boundary, normal modes) of angular label l
    (frequencies, weights at r0, errors) as plain data, or None where the field has none (derive.solve.bound)."""
    from derive.solve.bound import LEVELS, bound_states, is_ads
    from derive.solve.centre import bound_states_possible

    if not is_ads(problem) and (problem.regions[0].lower_kind != "regular centre"
                                or not bound_states_possible(problem)):
        return None
    found = bound_states(problem, l, r0, tolerance, count=LEVELS)
    floats = lambda values: list(map(float, values))
    return {"l": l, "at": r0, "omega": floats(found.omega), "weight": floats(found.weight),
            "error": {"omega": floats(found.omega_error), "weight": floats(found.weight_error)},
            "truncated": found.truncated, "ok": found.ok, "message": found.message(),
            "units": "omega of the spec's time coordinate; weight: the level's delta-function coefficient in the "
                     "spectral density at r0 (sum over m of |phi_n(r0)|^2, phi_n Klein-Gordon normalised)"}


def resonance_table(problem, l: int):
    """The lowest quasi-bound resonances of angular label l outside a horizon (frequencies, widths, errors) as
    plain data, or None where there are none to list (massless, a reflecting AdS boundary, a cosmological
    horizon; derive.solve.resonances)."""
    from derive.solve.bound import is_ads
    from derive.solve.centre import continuum_threshold, has_coulomb_tail
    from derive.solve.cosmological import has_cosmological_horizon
    from derive.solve.resonances import LEVELS, quasi_bound

    if (problem.regions[0].lower_kind != "horizon" or is_ads(problem) or has_cosmological_horizon(problem)
            or continuum_threshold(problem) == 0.0 or not has_coulomb_tail(problem)):
        return None
    found = quasi_bound(problem, l, LEVELS)
    floats = lambda values: list(map(float, values))
    return {"l": l, "omega": floats(found.omega), "width": floats(found.width),
            "error": {"omega": floats(found.omega_error), "width": floats(found.width_error)},
            "resolved": [bool(v) for v in found.resolved()], "truncated": found.truncated,
            "units": "omega of the spec's time coordinate; the resonance is the complex frequency omega - i width/2 "
                     "(width: the decay rate of the mode's energy); a width not resolved is bounded by its error; "
                     "resonances wider than about a sixth of the level spacing merge into a smooth density and are "
                     "not listed"}
