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


def spectrum_off_centre(problem, omegas, r0: float, tolerance: float = 1e-10) -> dict:
    """The l-summed spectral density per unit omega at radius r0 > 0 (derive.solve.offcentre)."""
    from derive.solve.offcentre import density_off_centre

    result = density_off_centre(problem, np.asarray(omegas, dtype=float), r0, tolerance)
    return {"l": None, "at": r0, "omega": result.omega, "density": result.density, "error": result.error,
            "ok": result.ok, "message": result.message(), "minkowski": minkowski_density(result.omega)}


def density_function(problem, r0: float, tolerance: float):
    """omega -> DensityResult at radius r0 (the centre, or the l-sum off it)."""
    if r0 == 0.0:
        return lambda omegas: centre_density(problem, omegas, tolerance)
    from derive.solve.offcentre import density_off_centre

    return lambda omegas: density_off_centre(problem, omegas, r0, tolerance)


def scattering(problem, omegas, l: int, tolerance: float = 1e-10) -> dict:
    """|T|^2 and |R|^2 for a black-hole spacetime (see derive.solve.horizon)."""
    from derive.solve.horizon import transmission

    result = transmission(problem, l, np.asarray(omegas, dtype=float), tolerance)
    return {"l": l, "omega": result.omega, "transmission": result.transmission, "reflection": result.reflection,
            "error": result.error, "flux_defect": result.flux_defect, "ok": result.ok, "message": result.message()}
