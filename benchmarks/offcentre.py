"""Benchmark: the l-summed spectral density off the centre (a detector at r = R/2 inside worked/static_shell),
this code against the previous code path in the same run.

The previous code path is the solver as it was at git revision BASE (default: the commit before the l-sum was
made per-frequency): its derive/solve/offcentre.py and derive/solve/propagation.py are read with `git show`
into a temporary folder and imported beside today's, on the same numeric problem.  Both sum the same
frequencies to the same tolerance; the script prints each time, the ratio, and the largest difference of the
two results in units of their error estimates.  With --response it also times today's whole detector response
of the issue's example (r = R/2, Gaussian width 0.1, gaps -5, 0, 5; the previous path took several minutes,
so it is not rerun).

    python benchmarks/offcentre.py [--base REV] [--count 48] [--tolerance 1e-8] [--response]
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)
os.environ.setdefault("DERIVE_NO_CACHE", "1")


def previous_offcentre(base: str):
    """The module derive.solve.offcentre as it was at ``base``, using that revision's propagation module."""
    folder = tempfile.mkdtemp(prefix="derive-bench-")
    sources = {}
    for name in ("offcentre", "propagation"):
        sources[name] = subprocess.run(["git", "show", f"{base}:derive/solve/{name}.py"], cwd=ROOT, check=True,
                                       capture_output=True, text=True).stdout
    sources["offcentre"] = sources["offcentre"].replace("from derive.solve.propagation import",
                                                        "from previous_propagation import")
    modules = {}
    sys.path.insert(0, folder)
    for name in ("propagation", "offcentre"):
        path = os.path.join(folder, f"previous_{name}.py")
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(sources[name])
        spec = importlib.util.spec_from_file_location(f"previous_{name}", path)
        modules[name] = importlib.util.module_from_spec(spec)
        sys.modules[f"previous_{name}"] = modules[name]
        spec.loader.exec_module(modules[name])
    return modules["offcentre"]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--base", default="cd42c3a", help="git revision of the previous code path")
    parser.add_argument("--count", type=int, default=48, help="frequencies (1 to 100 in units of 1/R)")
    parser.add_argument("--tolerance", type=float, default=1e-8)
    parser.add_argument("--response", action="store_true", help="also time the whole response of the example")
    args = parser.parse_args()

    import derive
    from derive.solve import offcentre

    st = derive.load(os.path.join(ROOT, "worked", "static_shell", "spec.toml"))
    problem = st.numeric_problem
    omegas = np.linspace(1.0, 100.0, args.count)
    r0 = 0.5
    previous = previous_offcentre(args.base)

    os.environ["DERIVE_WORKERS"] = "1"      # one core for both paths first (a previous path may split too)
    start = time.perf_counter()
    old = previous.density_off_centre(problem, omegas, r0, args.tolerance)
    old_time = time.perf_counter() - start
    timings = {}
    for workers in ("1", "2"):
        os.environ["DERIVE_WORKERS"] = workers
        start = time.perf_counter()
        new = offcentre.density_off_centre(problem, omegas, r0, args.tolerance)
        timings[workers] = time.perf_counter() - start
    gap = np.max(np.abs(new.density - old.density) / (new.error + old.error))
    print(f"l-summed density at r = R/2, {args.count} frequencies in [1, 100]/R, tolerance {args.tolerance:g}")
    print(f"  previous code path ({args.base}), 1 worker: {old_time:8.2f} s")
    for workers, seconds in timings.items():
        print(f"  this code, {workers} worker(s):      {seconds:8.2f} s   ratio {old_time / seconds:5.2f}x")
    print(f"  largest |difference| / (sum of the two error estimates): {gap:.2f} (below 1: they agree)")

    if args.response:
        os.environ.pop("DERIVE_WORKERS", None)
        text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml")).read()
        text = text.replace('at = "r = 0"', 'at = "r = R/2"').replace('width = "0.2"', 'width = "0.1"')
        with tempfile.NamedTemporaryFile("w", suffix=".toml", delete=False) as handle:
            handle.write(text)
        half = derive.load(handle.name)
        half.numeric_problem  # noqa: B018 (kernels built before the clock starts)
        start = time.perf_counter()
        result = half.response(gaps=[-5.0, 0.0, 5.0], tolerance=args.tolerance)
        print(f"detector at r = R/2, width 0.1, gaps -5, 0, 5, tolerance {args.tolerance:g}: "
              f"{time.perf_counter() - start:.1f} s, status {result.status}, largest relative error "
              f"{np.max(result.error / result.response):.1e}")


if __name__ == "__main__":
    main()
