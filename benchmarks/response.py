"""Benchmark: 64 gaps for a thin-shell spacetime (worked/static_shell), modes included, derive against the
straightforward way in the same run: scipy's quad over frequency, each integrand value from a solve_ivp
(DOP853, rtol 1e-10) solution of the radial problem from the centre to r = 200 R.  The straightforward way is
timed on one gap with a cap (--cap seconds, default 120) and scaled to 64; when it does not finish within the
cap, the printed time and ratio are lower bounds.

    python benchmarks/response.py
"""

from __future__ import annotations

import os
import time

import numpy as np
from scipy.integrate import quad, solve_ivp

os.environ.setdefault("DERIVE_NO_CACHE", "1")
HERE = os.path.dirname(os.path.abspath(__file__))


def straightforward_density(problem, omega, r_out=200.0):
    inside, outside = problem.regions
    transfer = problem.interfaces[0].transfer

    def rhs_for(region):
        def rhs(r, y):
            d = region.dtortoise_dr(np.array([r]))[0]
            V = region.potential(np.array([r]), 0, omega)[0]
            return [y[1] * d, (V - omega ** 2) * y[0] * d]
        return rhs
    y = solve_ivp(rhs_for(inside), (1e-12, inside.upper), [1e-12, 1.0], method="DOP853", rtol=1e-10,
                  atol=1e-13).y[:, -1]
    y = np.asarray(transfer(0, np.array([omega])), dtype=float)[:, :, 0] @ y
    y = solve_ivp(rhs_for(outside), (inside.upper, r_out), y, method="DOP853", rtol=1e-10, atol=1e-13).y[:, -1]
    V = outside.potential(np.array([r_out]), 0, omega)[0]
    amplitude2 = y[0] ** 2 + y[1] ** 2 / (omega ** 2 - V)
    slope = inside.dtortoise_dr(np.array([0.0]))[0]
    return slope ** 2 / (4 * np.pi ** 2 * omega * amplitude2)


def main():
    import derive
    from derive.codegen.catalog import KernelSet
    from derive.codegen.problem import numeric_detector, numeric_problem
    from derive.detector.study import detector_response

    st = derive.load(os.path.join(HERE, "..", "worked", "static_shell", "spec.toml"))
    start = time.perf_counter()
    problem = numeric_problem(KernelSet(st))
    detector = numeric_detector(st)
    gaps = np.linspace(-10, 10, 64)
    result, switching, sqrt_f0 = detector_response(problem, detector, 1e-9, gaps)
    t_ours = time.perf_counter() - start
    cap = float(os.environ.get("DERIVE_BENCH_CAP", "120"))
    gap = gaps[40]
    evaluations = [0]
    start = time.perf_counter()

    class Stop(Exception):
        pass

    def integrand(nu):
        if time.perf_counter() - start > cap:
            raise Stop
        evaluations[0] += 1
        return sqrt_f0 * straightforward_density(problem, sqrt_f0 * nu) * switching.power(gap + nu)
    upper = max(0.0, -gap) + switching.reach
    try:
        value, _ = quad(integrand, 1e-9, upper, epsrel=1e-9, limit=200)
        finished = True
    except Stop:
        value, finished = float("nan"), False
    t_theirs = (time.perf_counter() - start) * len(gaps)
    deviation = abs(value - result.response[40]) / result.response[40] if finished else float("nan")
    print("64 gaps, static shell, Gaussian switching, tolerance 1e-9, modes included")
    print(f"  derive:         {t_ours:9.2f} s (kernels, modes and quadrature; largest estimated relative error "
          f"{np.max(result.error / result.response):.1e})")
    bound = "" if finished else "> "
    print(f"  straightforward:{bound}{t_theirs:9.1f} s (solve_ivp per frequency + quad, {evaluations[0]} solves on one "
          f"gap, scaled to 64{'' if finished else '; stopped at the cap'}; deviation from derive {deviation:.1e})")
    print(f"  ratio:          {bound}{t_theirs / t_ours:9.1f}x")


if __name__ == "__main__":
    main()
