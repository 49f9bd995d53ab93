"""Benchmark: the probe search's candidates on one shared frequency grid, against the straightforward way (each
candidate through the ordinary response: its own panels, its own density evaluations), in one run.

The demo's charged shell, a detector at its centre, against Minkowski, tolerance 1e-9: the same candidates
(gap, duration) of a 6 x 4 grid, Gaussian and sin4 switchings.  Prints each way's time, the ratio, and the
largest difference of the two runs counts in units of their error estimates.  Then the whole `derive design` of
worked/probe_design (three shapes).  Nothing is asserted: the script prints.

    python benchmarks/design.py
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)


def main() -> None:
    from dataclasses import replace

    import derive
    from derive.codegen.problem import numeric_detector
    from derive.demo import demo_spec_path
    from derive.detector import design as D
    from derive.detector.study import detector_response, reference_response

    spacetime = derive.load(demo_spec_path())
    problem = spacetime.numeric_problem
    detector = numeric_detector(spacetime)
    tolerance = 1e-9
    for shape in ("gaussian", "sin4"):
        family = D.Family((shape,), (-8.0, 8.0), 1.0, detector.coupling, detector.sigmas, 1e-12)
        candidates = [(g, d) for g in np.linspace(-8, 8, 6) for d in np.geomspace(0.25, 2.0, 4)]
        start = time.perf_counter()
        site = D.Site(problem, detector, None, 0.0, tolerance, family)
        shared = [site.evaluate(shape, g, d) for g, d in candidates]
        t_shared = time.perf_counter() - start
        start = time.perf_counter()
        plain = []
        for g, d in candidates:
            switching = D.make_switching(shape, d, 1e-12)      # the switching's own transform and panels
            ours, _, _ = detector_response(problem, replace(detector, radius=0.0), tolerance, [g],
                                           switching=switching)
            ref, ref_err = reference_response(problem, detector, None, tolerance, [g], switching)
            plain.append(D.runs_of(float(ours.response[0]), float(ours.error[0]), float(ref[0]), float(ref_err[0]),
                                   family.coupling, family.sigmas))
        t_plain = time.perf_counter() - start
        worst = max(abs(a.runs - b[0]) / (a.runs_error + b[1]) for a, b in zip(shared, plain))
        print(f"{shape:8s} {len(candidates)} candidates: shared grid {t_shared:6.2f} s (site set-up included), "
              f"each through the ordinary response {t_plain:6.2f} s, ratio {t_plain / t_shared:5.1f}x; "
              f"largest |difference| of the runs / their errors {worst:.2f}")
    start = time.perf_counter()
    result = derive.load(os.path.join(ROOT, "worked", "probe_design", "spec.toml")).design()
    print(f"derive design worked/probe_design (gaussian, bump, sin4): {time.perf_counter() - start:.1f} s, "
          f"{result.search['evaluations']} candidates, best {result.best['switching']['shape']} "
          f"{result.best['runs']:.4e} runs; status {result.status}")


if __name__ == "__main__":
    main()
