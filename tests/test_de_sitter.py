"""The de Sitter static patch: a cosmological horizon at the outer end, the Bunch-Davies state.

Sources named beside each check.  The conformally coupled massless field is the sharp test: its Bunch-Davies
Wightman function along a static worldline is the flat thermal one at the local temperature
T = sqrt(1/L^2 + a^2)/(2 pi) = 1/(2 pi L sqrt(f)) (Gibbons & Hawking, Phys. Rev. D 15, 2738 (1977); Narnhofer,
Peter & Thirring, Int. J. Mod. Phys. B 10, 1507 (1996); Deser & Levin, Class. Quantum Grav. 14, L163 (1997)),
so the static vacuum's density per unit proper frequency is nu/(4 pi^2) everywhere in the patch.
"""

import mpmath
import numpy as np
import pytest

import derive
from derive.errors import NotSupported

L = 1.0


def patch(mass="0", coupling="conformal", at="r = 0", width="1", state="bunch-davies"):
    return f"""
format = 1
title = "de Sitter static patch"
[parameters]
L = {{ value = {L}, positive = true }}
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[definitions]
f = "1 - r**2/L**2"
[[region]]
name = "patch"
where = "r < L"
line_element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "{mass}"
coupling = "{coupling}"
[detector]
at = "{at}"
switching = {{ shape = "gaussian", width = "{width}" }}
gaps = [-2.0, -1.0, 0.0, 1.0, 2.0]
state = "{state}"
coupling = 0.01
"""


def thermal_gaussian_response(gap, sigma, temperature):
    """Flat 3+1, massless, thermal at T, Gaussian switching exp(-tau^2/(2 sigma^2)): the integral over all nu
    of sigma^2/(2 pi) nu/(1 - e^{-nu/T}) e^{-sigma^2 (gap + nu)^2} (the Planck-weighted flat density nu/(4 pi^2)
    times |chi_hat|^2), by mpmath at 30 digits: an independent quadrature."""
    with mpmath.workdps(30):
        T, s, W = mpmath.mpf(temperature), mpmath.mpf(sigma), mpmath.mpf(gap)

        def integrand(v):
            planck = v / -mpmath.expm1(-v / T) if v != 0 else T
            return s ** 2 / (2 * mpmath.pi) * planck * mpmath.exp(-s ** 2 * (W + v) ** 2)
        return float(mpmath.quad(integrand, [-mpmath.inf, -W - 5 / s, -W, -W + 5 / s, mpmath.inf]))


def static_centre_density(omega, m2L2, xi):
    """The static vacuum's density at the centre from the hypergeometric modes (derived here): with z = r^2/L^2
    the regular l = 0 solution is psi = (1 - z)^(-i omega L/2) F(a, b; 3/2; z), a, b = (3/2 +- nu - i omega L)/2,
    nu^2 = 9/4 - (m^2 + 12 xi/L^2) L^2; Gauss's connection formula between z = 0 and z = 1 (DLMF section 15.8)
    gives its amplitude at the horizon, |G| = |Gamma(3/2) Gamma(i omega L)/(Gamma(3/2 - a) Gamma(3/2 - b))|, so
    the density is 1/(16 pi^2 L^2 omega |G|^2) (omega/(4 pi^2) when conformal, nu = 1/2)."""
    with mpmath.workdps(30):
        nu = mpmath.sqrt(mpmath.mpf(9) / 4 - (m2L2 + 12 * mpmath.mpf(xi)))
        w = mpmath.mpf(omega) * L
        a, b, c = (1.5 + nu - 1j * w) / 2, (1.5 - nu - 1j * w) / 2, mpmath.mpf(1.5)
        G = mpmath.gamma(c) * mpmath.gamma(1j * w) / (mpmath.gamma(c - a) * mpmath.gamma(c - b))
        return float(1 / (16 * mpmath.pi ** 2 * L ** 2 * w * abs(G) ** 2))


def test_cosmological_horizon_found_with_its_temperature(write_spec):
    st = derive.load(write_spec(patch()))
    (horizon,) = st.field_problem.horizons
    assert horizon.kind == "cosmological" and horizon.side == "upper" and horizon.value == L
    assert horizon.surface_gravity == pytest.approx(1 / L, rel=1e-15)      # kappa_c = 1/L (Gibbons & Hawking 1977)


@pytest.mark.parametrize("mass,coupling,m2,xi", [("0", "conformal", 0.0, 1 / 6), ("1", "conformal", 1.0, 1 / 6),
                                                 ("0", "0", 0.0, 0.0), ("1/2", "0", 0.25, 0.0)])
def test_static_density_at_the_centre_against_the_hypergeometric_modes(write_spec, mass, coupling, m2, xi):
    st = derive.load(write_spec(patch(mass, coupling)))
    omegas = np.array([0.1, 1.0, 5.0])
    result = st.spectrum(omegas, tolerance=1e-10)
    assert result.ok, result.message()
    expected = np.array([static_centre_density(w, m2, xi) for w in omegas])
    np.testing.assert_array_less(np.abs(result.density - expected), result.error["density"] + 1e-14 * expected)
    np.testing.assert_allclose(result.density, expected, rtol=1e-9)
    assert result.cosmological_temperature == pytest.approx(1 / (2 * np.pi * L), rel=1e-15)


def test_conformal_static_density_off_the_centre_is_flat_in_proper_frequency(write_spec):
    # Per unit omega of t at r0: nu/(4 pi^2) per unit proper frequency nu = omega/sqrt(f) means omega/(4 pi^2 f).
    st = derive.load(write_spec(patch()))
    r0 = 0.5 * L
    omegas = np.array([0.5, 2.0, 8.0])
    result = st.spectrum(omegas, at=r0, tolerance=1e-9)
    assert result.ok, result.message()
    expected = omegas / (4 * np.pi ** 2 * (1 - r0 ** 2 / L ** 2))
    np.testing.assert_array_less(np.abs(result.density - expected), result.error["density"] + 1e-14 * expected)


@pytest.mark.parametrize("r0", [0.0, pytest.param(0.5, marks=pytest.mark.slow)])
def test_bunch_davies_response_is_thermal_at_the_local_temperature(write_spec, r0):
    # Narnhofer, Peter & Thirring (1996); Deser & Levin (1997): T = sqrt(1/L^2 + a^2)/(2 pi), a the proper
    # acceleration r/(L^2 sqrt(f)) of the static detector; equal to 1/(2 pi L sqrt(f)).
    st = derive.load(write_spec(patch(at=f"r = {r0}")))
    result = st.response(tolerance=1e-9)
    assert result.ok, result.message
    f = 1 - r0 ** 2 / L ** 2
    acceleration = r0 / (L ** 2 * np.sqrt(f))
    temperature = np.sqrt(1 / L ** 2 + acceleration ** 2) / (2 * np.pi)
    assert result.local_temperature == pytest.approx(temperature, rel=1e-14)
    expected = np.array([thermal_gaussian_response(g, 1.0, temperature) for g in result.gaps])
    np.testing.assert_array_less(np.abs(result.response - expected), result.error + 1e-13 * expected)
    np.testing.assert_allclose(result.response, expected, rtol=1e-8)


def test_detailed_balance_for_long_switching(write_spec):
    # KMS: for a switching long against 1/T, F(-Omega)/F(Omega) -> e^{Omega/T} (Unruh, Phys. Rev. D 14, 870
    # (1976), the detailed-balance form of thermality); the Gaussian's correction is O((sigma T)^-2).
    st = derive.load(write_spec(patch(width="1")))
    temperature = 1 / (2 * np.pi * L)
    gap = 1.0
    misses = []
    for width in (10.0, 40.0):
        result = st.response(gaps=[-gap, gap], switching={"width": width}, tolerance=1e-8)
        assert result.ok, result.message
        misses.append(abs(np.log(result.response[0] / result.response[1]) * temperature / gap - 1))
    assert misses[1] < misses[0] / 10 and misses[1] < 2e-2


def test_vacuum_is_ambiguous_inside_a_cosmological_horizon(write_spec):
    st = derive.load(write_spec(patch(state="vacuum")))
    with pytest.raises(NotSupported) as caught:
        st.response()
    assert "bunch-davies" in str(caught.value)



def test_the_infrared_divergence_of_a_massless_minimally_coupled_field_is_refused(write_spec):
    # psi = const solves the l = 0 equation at omega = 0 and is bounded at the centre and at the horizon, so the
    # density grows like 1/omega (test above: 0.2558 at omega = 0.1) and every response diverges in the infrared
    # (the Bunch-Davies state does not exist for this field: Allen, Phys. Rev. D 32, 3136 (1985), from memory).
    # Refused as a divergence, not as a missing feature; the same check guards Schwarzschild-de Sitter.
    st = derive.load(write_spec(patch(coupling="0")))
    with pytest.raises(NotSupported) as caught:
        st.response()
    assert "infrared" in str(caught.value) and "yet" not in str(caught.value)


def test_effective_temperature_against_the_thermal_reference(write_spec):
    # T_eff = Omega / ln(F(-Omega)/F(Omega)) from derive's response at the centre (Bunch-Davies, conformal) against
    # the same ratio of the independent thermal flat quadrature above (thermality: Narnhofer, Peter & Thirring
    # 1996; Deser & Levin 1997); for a switching of width 1 it is not yet the KMS temperature 1/(2 pi L), and
    # for long switching it tends to it (Unruh 1976, detailed balance).
    st = derive.load(write_spec(patch(width="1")))
    result = st.response(tolerance=1e-9)
    teff = result.effective_temperature
    assert list(teff["gap"]) == [1.0, 2.0]
    temperature = 1 / (2 * np.pi * L)
    for gap, value, error in zip(teff["gap"], teff["value"], teff["error"]):
        expected = gap / np.log(thermal_gaussian_response(-gap, 1.0, temperature)
                                / thermal_gaussian_response(gap, 1.0, temperature))
        assert abs(value - expected) <= error + 1e-12 * expected
        assert error < 1e-7 * value
    long = st.response(gaps=[-1.0, 1.0], switching={"width": 40.0}, tolerance=1e-8).effective_temperature
    assert long["value"][0] == pytest.approx(temperature, rel=2e-2)
