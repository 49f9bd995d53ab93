"""Benchmark: Schwarzschild l = 0 transmission |T|^2, derive against scipy's solve_ivp, in one run.

* 2000 frequencies, 0.01 <= M omega <= 2: derive's solver (all frequencies at once) against solve_ivp (DOP853,
  rtol 1e-10, atol 1e-12) one frequency at a time, integrating the same first-order system in r from the same
  horizon series start to r = 2000 M and splitting into in/outgoing waves there.  solve_ivp is timed on every
  20th frequency (100 of them) and its time per frequency scaled to 2000; its accuracy is measured against
  derive's values (whose own error estimates are printed).
* the same grid through the command line (`derive spectrum SPEC --omega 0.01:2:2000 --l 0 --json`, a fresh
  process, kernels from the disk cache as a user's second run finds them), its start-up (`import derive.cli`)
  measured apart and subtracted: everything the command does beyond start-up, against solve_ivp.  solve_ivp at
  rtol 1e-10 is already less accurate than derive at its default tolerance (printed), so the ratio at equal
  accuracy is at least the one printed.
* derive's cost per frequency at M omega = 100 against M omega = 1 (200 frequencies around each).

    python benchmarks/radial.py
"""

from __future__ import annotations

import os
import subprocess
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp

os.environ.setdefault("DERIVE_NO_CACHE", "1")
HERE = os.path.dirname(os.path.abspath(__file__))


def problem():
    import derive
    from derive.codegen.catalog import KernelSet
    from derive.codegen.problem import numeric_problem

    return numeric_problem(KernelSet(derive.load(os.path.join(HERE, "..", "worked", "schwarzschild", "spec.toml"))))


def straightforward(region, omega, r_out=2000.0):
    from derive.solve.horizon import START, _start_state

    x0 = START * region.lower
    y0 = _start_state(region, 0, np.array([omega]), x0)[0]

    def rhs(r, y):
        d = region.dtortoise_dr(np.array([r]))[0]
        V = region.potential(np.array([r]), 0, omega)[0]
        return [y[1] * d, (V - omega ** 2) * y[0] * d]
    solution = solve_ivp(rhs, (region.lower + x0, r_out), y0.astype(complex), method="DOP853", rtol=1e-10,
                         atol=1e-12)
    u, du = solution.y[:, -1]
    V = region.potential(np.array([r_out]), 0, omega)[0]
    k = np.sqrt(omega ** 2 - V)
    a_in = (u + 1j * du / k) / 2
    return 1.0 / (abs(a_in) ** 2 * k / omega)


def main():
    from derive.solve.horizon import transmission

    p = problem()
    omegas = np.linspace(0.01, 2.0, 2000)
    start = time.perf_counter()
    ours = transmission(p, 0, omegas)
    t_ours = time.perf_counter() - start
    sample = omegas[::20]
    start = time.perf_counter()
    theirs = np.array([straightforward(p.regions[0], w) for w in sample])
    t_theirs = (time.perf_counter() - start) / len(sample) * len(omegas)
    their_error = np.max(np.abs(theirs - ours.transmission[::20]) / ours.transmission[::20])
    our_error = np.max(ours.error / ours.transmission)
    print("2000 frequencies, l = 0, 0.01 <= M omega <= 2")
    print(f"  derive:     {t_ours:8.2f} s   (largest estimated relative error {our_error:.1e}; flux defect "
          f"{np.max(np.abs(ours.flux_defect)):.1e})")
    print(f"  solve_ivp:  {t_theirs:8.2f} s   (scaled from {len(sample)} frequencies; largest relative deviation "
          f"from derive {their_error:.1e})")
    print(f"  ratio:      {t_theirs / t_ours:8.1f}x")
    spec = os.path.join(HERE, "..", "worked", "schwarzschild", "spec.toml")
    command = [sys.executable, "-m", "derive.cli", "spectrum", spec, "--omega", "0.01:2:2000", "--l", "0", "--json"]
    environment = {k: v for k, v in os.environ.items() if k != "DERIVE_NO_CACHE"}
    subprocess.run(command, check=True, capture_output=True, env=environment)      # fills the disk cache
    start = time.perf_counter()
    subprocess.run([sys.executable, "-c", "import derive.cli"], check=True, env=environment)
    t_start_up = time.perf_counter() - start
    start = time.perf_counter()
    subprocess.run(command, check=True, capture_output=True, env=environment)
    t_command = time.perf_counter() - start - t_start_up
    print(f"  command line (beyond {t_start_up:.2f} s of start-up): {t_command:6.2f} s   ratio to solve_ivp "
          f"{t_theirs / t_command:8.1f}x (target: at least 100x)")
    timings = {}
    for centre in (1.0, 100.0):
        band = np.linspace(centre * 0.9, centre * 1.1, 200)
        transmission(p, 0, band[:2])   # warm-up
        start = time.perf_counter()
        result = transmission(p, 0, band)
        timings[centre] = (time.perf_counter() - start) / len(band)
        print(f"  M omega ~ {centre:5.0f}: {timings[centre] * 1e3:7.3f} ms per frequency "
              f"(largest estimated relative error {np.max(result.error / result.transmission):.1e})")
    print(f"  cost per frequency at M omega = 100 relative to M omega = 1: {timings[100.0] / timings[1.0]:.2f}")


if __name__ == "__main__":
    main()
