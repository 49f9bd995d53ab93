"""Benchmark: the engine's speed targets in one run, each printed beside its target.

* A detector at r = R/2 inside the static shell of worked/static_shell (Gaussian width 0.1, gaps -5, 0, 5): the whole
  response at 1e-8 (target: under 10 s) and at 1e-10 (target: under 30 s), and the same detector at the centre
  of the same spec (target: off the centre at most 5 times the centred cost).
* Beside them the previous code paths: every multipole marched to the far radius (no far form,
  derive.solve.farform), and the march through the shell's flat interior instead of its closed form.
* The Schwarzschild example's response in its three states (worked/schwarzschild; target: under 10 s).

Kernels are built before each clock starts; the l-sums use both cores.  Nothing is asserted: the script prints.

    python benchmarks/targets.py [--skip-slow]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)


def _detector_at(position: str):
    import derive

    text = open(os.path.join(ROOT, "worked", "static_shell", "spec.toml"), encoding="utf-8").read()
    text = text.replace('at = "r = 0"', f'at = "{position}"').replace('width = "0.2"', 'width = "0.1"')
    with tempfile.NamedTemporaryFile("w", suffix=".toml", delete=False) as handle:
        handle.write(text)
    st = derive.load(handle.name)
    st.numeric_problem  # noqa: B018 (kernels built before the clock starts)
    return st


def _fresh():
    """Empty the solver's in-memory stores (propagators, grids, far forms, closed-form interiors) so that no run
    reuses another's work."""
    from derive.solve import farform, offcentre, propagation

    propagation._PROPAGATORS.clear()
    propagation._GRIDS.clear()
    farform._FORMS.clear()
    offcentre._INTERIORS.clear()


def _timed(st, tolerance):
    _fresh()
    start = time.perf_counter()
    result = st.response(gaps=[-5.0, 0.0, 5.0], tolerance=tolerance)
    seconds = time.perf_counter() - start
    worst = float(np.max(result.error / np.abs(result.response)))
    return seconds, result.status, worst


def _multipoles_per_node(st, tolerance):
    """(the mean number of multipoles summed per frequency node, the largest l) of the off-centre response: what
    its cost is made of, against the centre's, which sums l = 0 alone."""
    from derive.solve import offcentre

    seen, original = {}, offcentre._term_values

    def counting(problem, l, omegas, *args):     # every frequency that sums this l (one call holds only those
        seen.setdefault(l, set()).update(np.asarray(omegas).tolist())    # refined from one step count)
        return original(problem, l, omegas, *args)
    offcentre._term_values = counting
    workers = os.environ.get("DERIVE_WORKERS")
    os.environ["DERIVE_WORKERS"] = "1"      # in this process, where the count is kept
    try:      # (a tolerance a hair tighter: a new computation, not the one just timed)
        st.response(gaps=[-5.0, 0.0, 5.0], tolerance=tolerance * (1 - 1e-9))
    finally:
        offcentre._term_values = original
        if workers is None:
            del os.environ["DERIVE_WORKERS"]
        else:
            os.environ["DERIVE_WORKERS"] = workers
    return sum(map(len, seen.values())) / max(len(seen.get(0, ())), 1), max(seen)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--skip-slow", action="store_true", help="leave out the 1e-10 off-centre response")
    args = parser.parse_args()
    import derive

    from derive.solve import flat, offcentre

    off, centre = _detector_at("r = R/2"), _detector_at("r = 0")
    print("static shell, Gaussian width 0.1, gaps -5, 0, 5")
    for tolerance, target in ((1e-8, 10.0), (1e-10, 30.0)):
        if args.skip_slow and tolerance < 1e-8:
            continue
        t_off, status, worst = _timed(off, tolerance)
        t_centre, _, _ = _timed(centre, tolerance)
        print(f"  tolerance {tolerance:g}: r = R/2 {t_off:7.1f} s (target {target:g} s: "
              f"{'met' if t_off <= target else 'not met'}; {status}, largest relative error {worst:.1e}); "
              f"centre {t_centre:6.1f} s; ratio {t_off / t_centre:5.1f}x (target at most 5x: "
              f"{'met' if t_off <= 5 * t_centre else 'not met'})")
        mean, top = _multipoles_per_node(off, tolerance)
        print(f"    the l-sum at r = R/2: {mean:.1f} multipoles per frequency node on average, up to l = {top} "
              "(the centre sums l = 0 alone)")
        # the previous code path: every multipole marched to the far radius (no far form)
        offcentre.FAR_FORM = False
        t_marched, _, worst_marched = _timed(off, tolerance)
        offcentre.FAR_FORM = True
        print(f"    every multipole marched to the far radius instead (the previous path, no far form): r = R/2 "
              f"{t_marched:7.1f} s ({t_marched / t_off:.1f}x the far form's; largest relative error "
              f"{worst_marched:.1e})")
        # an older path: the march through the flat interior instead of its closed form
        flat.ENABLED = False
        t_marched, _, _ = _timed(off, tolerance)
        t_centre_marched, _, _ = _timed(centre, tolerance)
        flat.ENABLED = True
        print(f"    marching through the flat interior instead (the previous path): r = R/2 {t_marched:7.1f} s "
              f"({t_marched / t_off:.1f}x the closed form's), centre {t_centre_marched:6.1f} s")
    st = derive.load(os.path.join(ROOT, "worked", "schwarzschild", "spec.toml"))
    st.numeric_problem  # noqa: B018
    start = time.perf_counter()
    result = st.response()
    seconds = time.perf_counter() - start
    print(f"Schwarzschild example, three states at tolerance {result.tolerance:g}: {seconds:.1f} s (target 10 s: "
          f"{'met' if seconds <= 10 else 'not met'}; {result.status})")


if __name__ == "__main__":
    main()
