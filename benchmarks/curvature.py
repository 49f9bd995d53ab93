"""Benchmark: derive's whole geometry against the straightforward way, in the same run.

The straightforward way is nested loops over the textbook formulas (Christoffel, Riemann, Ricci, Einstein,
Kretschmann) with ``sympy.cancel`` (or ``sympy.simplify``) on each component.  It runs in a child process
with a time limit (``--limit`` seconds, default 120); when it does not finish the ratio is printed as a lower
bound.  derive runs with its disk cache off, so every number is a cold computation.

    python benchmarks/curvature.py [--limit SECONDS] [--simplifier cancel|simplify] [--only NAME]
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import time

import sympy as sp

os.environ["DERIVE_NO_CACHE"] = "1"

t, r, th, ph, M, a, Q = sp.symbols("t r theta phi M a Q", positive=True)
SPHERE = [r ** 2, r ** 2 * sp.sin(th) ** 2]


def metrics():
    f = 1 - 2 * M / r
    rn = 1 - 2 * M / r + Q ** 2 / r ** 2
    sig = r ** 2 + a ** 2 * sp.cos(th) ** 2
    delta = r ** 2 - 2 * M * r + a ** 2
    kerr = sp.zeros(4)
    kerr[0, 0] = -(1 - 2 * M * r / sig)
    kerr[0, 3] = kerr[3, 0] = -2 * M * a * r * sp.sin(th) ** 2 / sig
    kerr[1, 1] = sig / delta
    kerr[2, 2] = sig
    kerr[3, 3] = (r ** 2 + a ** 2 + 2 * M * r * a ** 2 * sp.sin(th) ** 2 / sig) * sp.sin(th) ** 2
    F, H = sp.Function("f")(r), sp.Function("h")(r)
    return {
        "schwarzschild": sp.diag(-f, 1 / f, *SPHERE),
        "reissner-nordstrom": sp.diag(-rn, 1 / rn, *SPHERE),
        "general static f(r), h(r)": sp.diag(-F, 1 / H, *SPHERE),
        "kerr": kerr,
    }


def straightforward(metric, simplifier):
    """Textbook nested loops, simplifying every component."""
    simp = sp.cancel if simplifier == "cancel" else sp.simplify
    x = [t, r, th, ph]
    n = 4
    ginv = metric.inv()
    ginv = ginv.applyfunc(simp)
    gamma = [[[simp(sum(ginv[i, l] * (sp.diff(metric[l, j], x[k]) + sp.diff(metric[l, k], x[j])
                                      - sp.diff(metric[j, k], x[l])) for l in range(n)) / 2)
               for k in range(n)] for j in range(n)] for i in range(n)]
    riemann = [[[[simp(sp.diff(gamma[i][l][j], x[k]) - sp.diff(gamma[i][k][j], x[l])
                       + sum(gamma[i][k][m] * gamma[m][l][j] - gamma[i][l][m] * gamma[m][k][j] for m in range(n)))
                  for l in range(n)] for k in range(n)] for j in range(n)] for i in range(n)]
    ricci = sp.Matrix(n, n, lambda j, l: simp(sum(riemann[i][j][i][l] for i in range(n))))
    scalar = simp(sum(ginv[i, j] * ricci[i, j] for i in range(n) for j in range(n)))
    einstein = (ricci - scalar * metric / 2).applyfunc(simp)
    lower = [[[[sum(metric[i, m] * riemann[m][j][k][l] for m in range(n)) for l in range(n)] for k in range(n)]
              for j in range(n)] for i in range(n)]
    upper = [[[[sum(ginv[j, b] * ginv[k, c] * ginv[l, d] * riemann[i][b][c][d]
                    for b in range(n) for c in range(n) for d in range(n))
                for l in range(n)] for k in range(n)] for j in range(n)] for i in range(n)]
    kretschmann = simp(sum(lower[i][j][k][l] * upper[i][j][k][l] for i in range(n) for j in range(n)
                           for k in range(n) for l in range(n)))
    return einstein, kretschmann


def _child(name, simplifier, queue):
    start = time.process_time()
    straightforward(metrics()[name], simplifier)
    queue.put(time.process_time() - start)


def time_straightforward(name, simplifier, limit):
    queue = mp.Queue()
    proc = mp.Process(target=_child, args=(name, simplifier, queue))
    proc.start()
    proc.join(limit)
    if proc.is_alive():
        proc.terminate()
        proc.join()
        return None
    return queue.get()


def time_derive(metric):
    from derive.geometry.curvature import Curvature

    start = time.process_time()
    c = Curvature(metric, [t, r, th, ph])
    for row in c.einstein_mixed:
        for x in row:
            c.show(x)
    c.show(c.kretschmann)
    for v in c.riemann_pairs.values():
        c.show(v)
    return time.process_time() - start


def main():
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--limit", type=float, default=120.0, help="CPU-seconds cap for the straightforward way")
    parser.add_argument("--simplifier", choices=["cancel", "simplify"], default="cancel")
    parser.add_argument("--only", help="one metric")
    args = parser.parse_args()
    print(f"{'metric':<28}{'derive [s]':>12}{'straightforward [s]':>22}{'ratio':>10}")
    for name, metric in metrics().items():
        if args.only and name != args.only:
            continue
        ours = time_derive(metric)
        theirs = time_straightforward(name, args.simplifier, args.limit)
        if theirs is None:
            shown, ratio = f"> {args.limit:.0f} (stopped)", f"> {args.limit / ours:.0f}x"
        else:
            shown, ratio = f"{theirs:.2f}", f"{theirs / ours:.1f}x"
        print(f"{name:<28}{ours:>12.2f}{shown:>22}{ratio:>10}", flush=True)
    print(f"(straightforward way: nested loops with sympy.{args.simplifier} per component; derive: whole "
          "geometry incl. Kretschmann, cold cache; process CPU time)")


if __name__ == "__main__":
    main()
