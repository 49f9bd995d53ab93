"""Benchmark: two detectors inside the static shell of worked/static_shell, at r = 0 and r = R/2 (Gaussian width
0.1, gap 5, simultaneous), all of `derive correlations` at 1e-8 (the several-detector issue's target: under
30 s here), beside the previous code path measured in the same run: the single detectors' probabilities through
the pair integrator on the two-point function (correlations.probability) instead of the response quadrature.

Kernels are built before each clock starts.  Nothing is asserted: the script prints.

    python benchmarks/correlations.py [--tolerance 1e-8] [--skip-previous]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

DETECTORS = """
[[detectors]]
name = "centre"
at = "r = 0"
gap = 5.0
switching = { shape = "gaussian", width = "0.1" }

[[detectors]]
name = "half"
at = "r = R/2, theta = pi/2, phi = 0"
gap = 5.0
switching = { shape = "gaussian", width = "0.1" }
"""


def _spacetime():
    import derive

    text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml"), encoding="utf-8").read()
    start, end = text.index("[detector]"), text.index("[compare]")
    text = text[:start] + '[detector]\nstate = "vacuum"\ncoupling = 0.01\n' + DETECTORS + "\n" + text[end:]
    with tempfile.NamedTemporaryFile("w", suffix=".toml", delete=False) as handle:
        handle.write(text)
    st = derive.load(handle.name)
    st.numeric_problem  # noqa: B018 (kernels built before the clock starts)
    return st


def _previous_path(monkey: bool):
    """Route L_ii through the pair integrator (the first version's path) when ``monkey``."""
    import derive.detector.study as study
    from derive.detector import correlations

    if not monkey:
        return None
    original = study.detector_response

    def through_the_integrator(problem, detector, tolerance, gaps=None, state=None, progress=None, shortfalls=None):
        from derive.detector.response import Response
        from derive.pipeline import _two_point_parts

        probe = correlations.Probe("x", detector.radius, study._sqrt_f(problem, detector.radius), detector.gaps[0],
                                   detector.switching["width"], 0.0)

        def spectrum(omegas):
            result = _two_point_parts(problem, omegas, detector.radius, detector.radius, 1.0, tolerance)[0]
            import numpy as np

            zero = np.zeros(len(omegas))
            return result.value.astype(complex), result.error, zero.astype(complex), zero
        value, error = correlations.probability(probe, spectrum, tolerance)
        import numpy as np

        return Response(np.array(detector.gaps), np.array([value]), np.array([error]), np.zeros(1),
                        np.array([error])), None, probe.alpha
    study.detector_response = through_the_integrator
    return original


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tolerance", type=float, default=1e-8)
    parser.add_argument("--skip-previous", action="store_true", help="time only today's path")
    args = parser.parse_args()
    st = _spacetime()
    start = time.perf_counter()
    result = st.correlations(tolerance=args.tolerance)
    now = time.perf_counter() - start
    pair = result.pairs[0]
    print(f"two detectors at r = 0 and R/2, width 0.1, at {args.tolerance:g}: {now:.1f} s (target: under 30 s); "
          f"status {result.status}; concurrence {pair['concurrence']:.6e} +- {pair['concurrence_error']:.1e}")
    if args.skip_previous:
        return
    import derive.detector.study as study

    original = _previous_path(True)
    try:
        st = _spacetime()
        start = time.perf_counter()
        before = st.correlations(tolerance=args.tolerance)
        then = time.perf_counter() - start
    finally:
        study.detector_response = original
    agree = max(abs(before.detectors[n]["probability"] / result.detectors[n]["probability"] - 1)
                for n in result.detectors)
    print(f"previous path (probabilities through the pair integrator): {then:.1f} s; ratio {then / now:.1f}x; "
          f"probabilities agree to {agree:.1e}")


if __name__ == "__main__":
    main()
