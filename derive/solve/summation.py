"""The two loops every two-point function runs: refinement with extrapolation of one l-term, and the sum over l.

Refinement (:func:`refine`).  The march's grids are nested (derive.solve.march: a base layout whose step counts
are multiplied), so the grids of N, 2N and 4N steps refine each other node for node and the error falls roughly
as N^-4.  Each pair extrapolates (Richardson): e(2N) = v(2N) + (v(2N) - v(N))/15.  The error of e(4N) is taken as
the larger of the last change of the extrapolations, |e(4N) - e(2N)|, and the one before over FALL = 16,
|e(2N) - e(N)|/16 (the first pass computes N/2 too, for e(N)); a frequency is accepted when it meets its
tolerance of the term's size or of ``floor`` (the size of the sum so far: tiny terms need only absolute
accuracy), whichever is larger.  The value returned is e(4N), its error that estimate plus, for each
*alternative* (the same grid with one piece moved: an earlier series start, a farther end), its change from the
plain grid, plus a rounding floor.

Why two changes.  The ratio of the raw errors per doubling is not a constant 16 on these grids: it varies between
about 12 and 26, and an error can even stall over one doubling (its coefficients oscillate with the step's phase
omega h, and two contributions of opposite sign can cancel at one N).  So two successive extrapolations can agree
by accident, far closer than either is to the limit.  The last change alone (the previous rule) understated the
true error of 109 of 2880 flat-space terms at 1e-9 (l = 0..7 at three radii against spherical Bessel functions), up
to 1700-fold, and a density's error bar up to 3.3-fold (flat space, the addition theorem).  The earlier change over
16 assumes only that an extrapolated value's error falls 16-fold over two doublings (a fourth-order scheme's
nominal fall is 256-fold); with it, 1-4 of the 2880 terms were understated, by at most 2.5-fold, and no density's
error bar (tests/test_two_point.py).  It costs 1.2-1.4x the marches of the last-change rule (benchmarks/targets.py
at r = R/2 of the static shell).

With alternatives a frequency is accepted only when every source of error counted meets its tolerance.
Frequencies that are done drop out; the rest go on to 8N, 16N, ...  A term may have several parts (the in and
up modes) that share one acceptance test on their summed sizes.

The sum over l (:func:`l_sum`).  Each frequency sums its own l: its reach (omega times the tortoise distance of
the farther point: about reach + 1 terms count) sets the error each term may carry, half the tolerance of the
larger of the term's size and the sum so far over (4 + reach); summed over the 4 + reach terms or so that a
frequency takes, that is at most the tolerance of the sum (half for the sizes, half for the sums so far).  The
early terms, with a small sum so far, are held to their own size (they were held to 1/(4 + reach) of it: 60 times
tighter than needed at the reach of 56 of a detector at r = R/2 of the static shell).  A frequency stops after
three successive terms beyond its reach whose size is below a hundredth of the tolerance of the sum so far; the
size of the last term kept is added to the error (the first neglected terms are smaller).

A term's size bounds |term| and equals it on the diagonal (one point): acceptance, tolerances and the stopping
rule refer to sizes, because an off-diagonal sum may cancel to far below its terms.
"""

from __future__ import annotations

import numpy as np

from derive.parallel import split_map

TERM_SHARE = 0.5    # an l-term's relative tolerance, as a share of the sum's (see l_sum)
SPLIT_FROM = 64     # frequencies from which a set is split in two halves (one per core)
FALL = 16           # the least fall of an extrapolated value's error over two doublings (see refine)


def settled(last, earlier, fall: float = FALL):
    """The error taken from two successive changes of a refined value: the last, or the one before over ``fall``
    (the least fall of the error assumed over the doubling between them), whichever is larger (see the module
    docstring).  Used by :func:`refine` and by the centre density's loop."""
    return np.maximum(last, earlier / fall)


def rounding_floor(steps: int) -> float:
    """Relative rounding error of a product of about 2*steps 2x2 matrices per region in double precision:
    bounded by 8 * steps * eps, and never taken below 1e-12 (what the far-field phase, omega r* ~ 1e8,
    leaves of the amplitude)."""
    return max(1e-12, 8 * steps * np.finfo(float).eps)


def refine(values, omegas, tolerance, floor, count: int = 32, max_steps: int = 8192, alternatives=None,
           rounding=None):
    """One l-term refined frequency by frequency (see the module docstring).

    ``values(w, count)`` returns (values, sizes), tuples with one array per part, on the grid of ``count`` times
    the base steps; ``alternatives(w, count)`` a list of such value tuples on that grid with one piece moved;
    ``rounding(w)`` an extra relative rounding floor per frequency.  Returns (values, sizes, errors) as tuples
    per part and the count at which each frequency was accepted."""
    n = len(omegas)
    tolerance = np.broadcast_to(np.asarray(tolerance, dtype=float), (n,))
    floor = np.broadcast_to(np.asarray(floor, dtype=float), (n,))
    half, _ = values(omegas, count // 2)     # for the change before the first (see the module docstring)
    coarse, _ = values(omegas, count)
    fine, _ = values(omegas, 2 * count)
    parts = range(len(coarse))
    with np.errstate(invalid="ignore", over="ignore"):
        before = [fine[p] + (fine[p] - coarse[p]) / 15 for p in parts]
        earlier = [np.abs(before[p] - coarse[p] - (coarse[p] - half[p]) / 15) for p in parts]
    value = tuple(np.zeros(n, dtype=np.result_type(c, float)) for c in coarse)
    size = tuple(np.zeros(n) for _ in parts)
    error = tuple(np.zeros(n) for _ in parts)
    converged = np.full(n, count)
    active = np.arange(n)
    while len(active):
        finest, finest_size = values(omegas[active], 4 * count)
        with np.errstate(invalid="ignore", over="ignore"):
            after = [finest[p] + (finest[p] - fine[p]) / 15 for p in parts]
            step = [np.abs(after[p] - before[p]) for p in parts]
            change = [settled(step[p], earlier[p]) for p in parts]
            sizes = [np.maximum(finest_size[p], np.abs(after[p])) for p in parts]
            scale = np.maximum(sum(sizes), floor[active])
            done = sum(change) <= tolerance[active] * scale
        last = 4 * count >= max_steps
        if last:
            done[:] = True
        if np.any(done):
            index = active[done]
            w = omegas[index]
            # series truncation and tail: measured on the coarsest of the three grids (they do not depend on the
            # resolution, and only the moved piece's grid differs between the two runs)
            moved = alternatives(w, count) if alternatives is not None else []
            extra = rounding(w) if rounding is not None else 0.0
            for p in parts:
                raw = coarse[p][done]
                value[p][index] = after[p][done]
                size[p][index] = sizes[p][done]
                error[p][index] = (change[p][done] + sum(np.abs(raw - alternative[p]) for alternative in moved)
                                   + (rounding_floor(4 * count) + extra) * size[p][index])
            if moved and not last:   # not there yet with every source of error counted: refine further
                short = sum(error[p][index] for p in parts) > tolerance[index] * scale[done]
                done[np.nonzero(done)[0][short]] = False
        finished = active[done]
        converged[finished] = count
        with np.errstate(invalid="ignore"):
            bad = ~np.isfinite(sum(error[p][finished] + np.abs(value[p][finished]) for p in parts))
        if np.any(bad):   # a grid too coarse for an evanescent stretch: say so rather than return a number
            error[0][finished[bad]] = np.inf
        active = active[~done]
        coarse = tuple(part[~done] for part in fine)
        fine = tuple(part[~done] for part in finest)
        before = [part[~done] for part in after]
        earlier = [part[~done] for part in step]
        count *= 2
    return value, size, error, converged


def l_sum(term, n: int, tolerance: float, reach, max_l: int, progress=None, single: bool = False):
    """The sum over l for each of n frequencies (see the module docstring).

    ``term(l, summing, share, floor)`` returns (values, sizes, errors), tuples per part, for the frequencies
    ``summing`` (indices), each to the relative tolerance ``share`` of the larger of its size and ``floor`` (the
    sum so far over 4 + reach).  ``single``: only l = 0 (a point at a regular centre, where the other l
    vanish).  Returns (values, sizes, errors) per part and the largest l reached; raises ``Unsupported`` past
    ``max_l``."""
    from derive.solve.centre import Unsupported

    reach = np.asarray(reach, dtype=float)
    total = size = error = None
    quiet = np.zeros(n, dtype=int)
    summing = np.arange(n)
    for l in range(max_l + 1):
        so_far = sum(s[summing] for s in size) if size is not None else np.zeros(len(summing))
        if single:    # one term (as before the shares below: its refinement next to a mass threshold, where the
            # tail converges erratically, needs the margin)
            values, sizes, errors = term(l, summing, tolerance / (4 + reach[summing]), so_far)
        else:
            values, sizes, errors = term(l, summing, np.full(len(summing), TERM_SHARE * tolerance),
                                         so_far / (4 + reach[summing]))
        if total is None:
            total = tuple(np.zeros(n, dtype=np.result_type(v, float)) for v in values)
            size = tuple(np.zeros(n) for _ in values)
            error = tuple(np.zeros(n) for _ in values)
        for whole, part in zip(total + size + error, values + sizes + errors):
            whole[summing] += part
        term_size = sum(sizes)
        small = term_size <= 0.01 * tolerance * sum(s[summing] for s in size)
        quiet[summing] = np.where(small & (l > reach[summing]), quiet[summing] + 1, 0)
        finished = (quiet[summing] >= 3) | single
        if not single:      # the first neglected terms are smaller than the last kept
            for whole, part in zip(error, sizes):
                whole[summing[finished]] += part[finished]
        summing = summing[~finished]
        if progress is not None:
            progress(l, 1.0 - len(summing) / n)
        if not len(summing):
            return total, size, error, l
    raise Unsupported(f"the l-sum did not converge by l = {max_l} (its terms fall off only past l ~ omega r, and, "
                      "between two points an angle gamma apart, past l ~ 1/gamma: points closer than about "
                      f"1/{max_l} of a radian, or frequencies beyond ~{max_l}/r, are beyond this sum)")


def on_both_cores(function, n: int, arguments):
    """``function(*arguments(index, first))`` on two fixed halves of n frequencies (every other one), on both
    cores where there are two (derive.parallel); below SPLIT_FROM one call.  The halves do not depend on the
    number of workers, so neither does the result.  Returns [(index, result), ...]."""
    halves = [np.arange(n)] if n < SPLIT_FROM else [np.arange(0, n, 2), np.arange(1, n, 2)]
    results = split_map(function, [arguments(index, i == 0) for i, index in enumerate(halves)])
    return list(zip(halves, results))
