"""Benchmark: generated numpy kernels against sympy.lambdify (numpy, no CSE) and per-point mpmath, in one run.

Expressions: the charged-shell exterior potential (worked/charged_shell) and Kerr's Kretschmann scalar, both as
derive's canonical form and expanded over a common denominator (the "Kerr-sized" expression a straightforward
derivation hands you). 10^6 points by default; mpmath is timed on 2000 points and scaled.

    python benchmarks/kernels.py [--points N]
"""

from __future__ import annotations

import argparse
import os
import time

import mpmath
import numpy as np
import sympy as sp

os.environ.setdefault("DERIVE_NO_CACHE", "1")
HERE = os.path.dirname(os.path.abspath(__file__))


def best_of(function, repeats=3):
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        best = min(best, time.perf_counter() - start)
    return best


def cases():
    import derive
    from derive.fields.radial import L_SYMBOL, OMEGA
    from derive.geometry.curvature import Curvature

    st = derive.load(os.path.join(HERE, "..", "worked", "charged_shell", "spec.toml"))
    field = st.field_problem.regions["outside"]
    params = tuple(p.symbol for p in st.parameters.values())
    yield ("charged-shell potential", field.potential, (field.r, L_SYMBOL, OMEGA) + params,
           lambda n, rng: [rng.uniform(1.0, 50.0, n), rng.integers(0, 10, n).astype(float),
                           rng.uniform(0.1, 5, n)] + [np.full(n, v) for v in (0.2, 0.1, 1.0)])
    t, r, th, ph, M, a = sp.symbols("t r theta phi M a", positive=True)
    sig = r ** 2 + a ** 2 * sp.cos(th) ** 2
    g = sp.zeros(4)
    g[0, 0] = -(1 - 2 * M * r / sig)
    g[0, 3] = g[3, 0] = -2 * M * a * r * sp.sin(th) ** 2 / sig
    g[1, 1] = sig / (r ** 2 - 2 * M * r + a ** 2)
    g[2, 2] = sig
    g[3, 3] = (r ** 2 + a ** 2 + 2 * M * r * a ** 2 * sp.sin(th) ** 2 / sig) * sp.sin(th) ** 2
    c = Curvature(g, [t, r, th, ph])
    k = c.show(c.kretschmann)
    numer, denom = sp.fraction(sp.together(k))
    expanded = sp.expand(numer) / sp.expand(denom)

    def points(n, rng):
        return [rng.uniform(2.0, 30.0, n), rng.uniform(0.05, 3.0, n), np.full(n, 1.0), np.full(n, 0.5)]
    yield ("Kerr Kretschmann (canonical)", k, (r, th, M, a), points)
    yield ("Kerr Kretschmann (expanded)", expanded, (r, th, M, a), points)


def main():
    from derive.codegen.kernel import lower

    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--points", type=int, default=1_000_000)
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    print(f"{'expression':<32}{'derive [ms]':>13}{'lambdify [ms]':>15}{'ratio':>8}{'mpmath/pt [us]':>16}"
          f"{'vs mpmath':>11}{'max rel err':>13}")
    for label, expr, arguments, make_points in cases():
        columns = make_points(args.points, rng)
        ours = lower(expr, arguments, "bench_" + str(abs(hash(label)) % 10 ** 8), "benchmark").kernel
        twin = lower(expr, arguments, "bench_mp_" + str(abs(hash(label)) % 10 ** 8), "benchmark",
                     backend="mpmath").kernel
        plain = sp.lambdify(arguments, expr, "numpy", cse=False)
        t_ours = best_of(lambda: ours(*columns))  # noqa: B023
        t_plain = best_of(lambda: plain(*columns))  # noqa: B023
        sample = 2000
        start = time.perf_counter()
        with mpmath.workdps(30):
            reference = np.array([complex(twin(*[mpmath.mpf(float(c[i])) for c in columns]))
                                  for i in range(sample)])
        t_mp = (time.perf_counter() - start) / sample
        values = ours(*[c[:sample] for c in columns])
        error = float(np.max(np.abs(values - reference) / np.abs(reference)))
        print(f"{label:<32}{t_ours * 1e3:>13.1f}{t_plain * 1e3:>15.1f}{t_plain / t_ours:>7.1f}x"
              f"{t_mp * 1e6:>16.1f}{t_mp * args.points / t_ours:>10.0f}x{error:>13.1e}", flush=True)
    print(f"({args.points} points; best of 3 wall-clock runs; mpmath at 30 digits on 2000 points, per point; "
          "max rel err of derive's kernel against the 30-digit twin on those points)")


if __name__ == "__main__":
    main()
