"""Black-hole transmission (greybody factors) against published limits (sources named beside each check)."""

import os

import numpy as np
import pytest

import derive
from derive.codegen.catalog import KernelSet
from derive.codegen.problem import numeric_problem
from derive.solve.horizon import transmission

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
M = 1.0


@pytest.fixture(scope="module")
def schwarzschild():
    return numeric_problem(KernelSet(derive.load(os.path.join(ROOT, "worked", "schwarzschild", "spec.toml"))))


def test_flux_is_conserved(schwarzschild):
    # |R|^2 + |T|^2 = 1 (docs/conventions.md section 4: a check, not an assumption).
    result = transmission(schwarzschild, 1, np.array([0.05, 0.2, 0.35, 0.8]))
    assert result.ok, result.message()
    assert np.max(np.abs(result.flux_defect)) < 1e-10


def test_low_frequency_absorption_cross_section(schwarzschild):
    # Source: Das, Gibbons & Mathur, Phys. Rev. Lett. 78, 417 (1997): sigma_abs = pi |T_0|^2/omega^2 -> 16 pi M^2
    # (the horizon area) as omega -> 0; Page, Phys. Rev. D 13, 198 (1976): |T_0|^2 ~ 16 M^2 omega^2.
    omegas = np.array([1e-5, 1e-4])
    result = transmission(schwarzschild, 0, omegas)
    sigma = np.pi * result.transmission / omegas ** 2
    np.testing.assert_allclose(sigma / (16 * np.pi * M ** 2), 1.0, rtol=1e-3)
    assert abs(sigma[0] / (16 * np.pi) - 1) < abs(sigma[1] / (16 * np.pi) - 1)   # and approaches it


def test_low_frequency_l1(schwarzschild):
    # Source: Page, Phys. Rev. D 13, 198 (1976); Starobinsky & Churilov (1973) (formula from memory):
    # |T_1|^2 ~ (16/9) M^4 omega^4 (1 + 16 M^2 omega^2) at low frequency.
    omega = np.array([1e-3])
    result = transmission(schwarzschild, 1, omega)
    expected = 16 / 9 * M ** 4 * omega ** 4 * (1 + 16 * M ** 2 * omega ** 2)
    np.testing.assert_allclose(result.transmission, expected, rtol=2e-2)


@pytest.mark.slow
def test_high_frequency_absorption_cross_section(schwarzschild):
    # Source: Decanini, Esposito-Farese & Folacci, Phys. Rev. D 83, 044032 (2011):
    # sigma_abs ~ 27 pi M^2 [1 - 8 pi e^{-pi} sinc(2 pi 3 sqrt(3) M omega)]; Sanchez, Phys. Rev. D 18, 1030 (1978).
    omega = np.array([2.0])
    total = 0.0
    for l in range(0, 30):
        total += (2 * l + 1) * transmission(schwarzschild, l, omega, tolerance=1e-8).transmission[0]
    sigma = np.pi * total / omega[0] ** 2
    x = 2 * np.pi * 3 * np.sqrt(3) * M * omega[0]
    expected = 27 * np.pi * M ** 2 * (1 - 8 * np.pi * np.exp(-np.pi) * np.sin(x) / x)
    assert sigma == pytest.approx(expected, rel=2e-3)


@pytest.mark.slow
def test_hawking_emission_rate_of_a_massless_scalar(schwarzschild):
    # dE/dt = 7.44e-5/M^2 for a massless scalar (from memory;
    # recomputed independently as 7.4387e-5), about 90% from l = 0 (Page, Phys. Rev. D 13, 198 (1976)):
    # dE/dt = sum_l (2l+1) int domega/(2 pi) omega |T_l|^2/(e^{8 pi M omega} - 1).
    x, w = np.polynomial.legendre.leggauss(16)
    edges = np.array([0.0, 0.05, 0.15, 0.3, 0.5, 0.8])      # e^{-8 pi 0.8} < 2e-9: the rest is negligible
    nodes = np.concatenate([(a + b) / 2 + (b - a) / 2 * x for a, b in zip(edges[:-1], edges[1:])])
    weights = np.concatenate([(b - a) / 2 * w for a, b in zip(edges[:-1], edges[1:])])
    terms = []
    for l in range(4):
        T = transmission(schwarzschild, l, nodes, tolerance=1e-7)
        assert T.ok, T.message()
        terms.append((2 * l + 1) * np.sum(weights * nodes * T.transmission / np.expm1(8 * np.pi * M * nodes))
                     / (2 * np.pi))
    assert sum(terms) * M ** 2 == pytest.approx(7.4387e-5, rel=1e-4)
    assert terms[0] / sum(terms) == pytest.approx(0.90, abs=0.01)
