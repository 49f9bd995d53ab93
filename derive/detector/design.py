"""Designing the probe: the static detector that tells the spec's spacetime from its [compare] reference in the
fewest runs while its measurement stays local, and the quantum limit (docs/conventions.md section 12).  Numeric
only.

The family searched: the gap Omega in a range, the switching's shape (gaussian, bump, cos2, sin4) and its
effective duration d (the shortest interval holding all but the tail of int chi^2, the quantity the locality
condition bounds: d <= locality x the light round trip to the nearest interface or reflecting boundary), and
optionally the detector's radius.  The runs at z standard deviations (derive.detector.response) are the
objective, in log.

Speed: at one position the spectral density does not depend on the gap or the switching.  Every candidate is
integrated on Gauss-Legendre panels of one width (that of the longest switching searched, fine enough for all:
derive.detector.response ``panel``), so that every candidate's frequency nodes are a subset of one grid, on
which the density is computed once (:class:`Memo`) and read back for every candidate; each candidate's own
quadrature error estimate is kept.  The best probe and the spec's default probe are then recomputed through the
response's ordinary path (its own panels), and those are the numbers reported.

The optimiser: for each shape a grid over (Omega, log d) picks the starting points, and bounded Nelder-Mead
(scipy.optimize) refines the best two, stopping when log(runs) changes by less than the relative error of the
runs themselves (the response's errors drive the tolerance).  Deterministic: no random starts.  The trade-off
curve (best runs at each duration, over the gap and the shapes) is the locality budget's price: durations from
the shortest searched to twice the budget (1.5 times away from a regular centre), those past it marked not
local.  With a range of radii, a grid of positions, each optimised, and a bounded scalar search between the best
one's neighbours.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from functools import lru_cache

import numpy as np
from scipy.optimize import minimize, minimize_scalar
from scipy.special import erfcinv

from derive.detector.quantum import SecondOrder, ordered_kernel
from derive.detector.response import round_trip, trials_to_distinguish
from derive.detector.switching import SMOOTH_CAP, CompactSwitching, Switching, gauss_panels, switching_from_spec
from derive.detector.study import detector_response, reference_response

DESIGN_SHAPES = ("gaussian", "bump", "cos2", "sin4")
GAP_GRID = 9          # starting grid: gaps x durations per shape
DURATION_GRID = 5
TRADEOFF_POINTS = 10  # durations on the trade-off curve (about a third of them past the budget)


TABLE_PANEL = 0.5     # panels of the tabulated unit transform, in x = k T
TABLE_NODES = 20      # Chebyshev nodes per panel


class ChebyshevTable:
    """A real even (``odd = False``) or odd function of x, tabulated for x >= 0 on Chebyshev panels over
    [0, top] (20 nodes on panels of 0.5:
    the functions tabulated here are entire of exponential type at most 1, which this interpolates to rounding),
    with the interpolation error measured against direct evaluation at four points inside every panel
    (``error``).  Beyond ``top`` the function is evaluated directly."""

    def __init__(self, top: float):
        count = max(1, int(np.ceil(float(top) / TABLE_PANEL)))
        self.top = count * TABLE_PANEL
        j = np.arange(TABLE_NODES)
        self.t = np.cos(np.pi * (2 * j + 1) / (2 * TABLE_NODES))
        self.weights = (-1.0) ** j * np.sin(np.pi * (2 * j + 1) / (2 * TABLE_NODES))
        mid = TABLE_PANEL * (np.arange(count) + 0.5)
        self.values = self._direct(mid[:, None] + TABLE_PANEL / 2 * self.t[None, :])
        check = (mid[:, None] + TABLE_PANEL / 2 * np.array([-0.93, -0.41, 0.17, 0.66])[None, :]).ravel()
        self.error = float(np.max(np.abs(self(check) - self._direct(check))))

    odd = False

    def _direct(self, x):
        raise NotImplementedError

    def __call__(self, x):
        signed = np.asarray(x, dtype=float)
        x = np.abs(signed)
        flat = x.ravel()
        out = np.empty(flat.shape)
        inside = flat < self.top
        if np.any(inside):
            xs = flat[inside]
            panel = np.minimum((xs / TABLE_PANEL).astype(int), len(self.values) - 1)
            local = (xs - TABLE_PANEL * (panel + 0.5)) / (TABLE_PANEL / 2)
            difference = local[:, None] - self.t[None, :]
            exact = difference == 0.0
            difference[exact] = 1.0
            terms = self.weights[None, :] / difference
            value = np.sum(terms * self.values[panel], axis=1) / np.sum(terms, axis=1)
            hit = np.any(exact, axis=1)
            if np.any(hit):
                value[hit] = self.values[panel[hit], np.argmax(exact[hit], axis=1)]
            out[inside] = value
        if np.any(~inside):
            out[~inside] = self._direct(flat[~inside])
        out = out.reshape(x.shape)
        return np.where(signed < 0, -out, out) if self.odd else out


def _chunked(x, nodes, weights, trig):
    flat = np.asarray(x, dtype=float).ravel()
    out = np.empty(flat.shape)
    for start in range(0, len(flat), 512):
        out[start:start + 512] = trig(flat[start:start + 512, None] * nodes[None, :]) @ weights
    return out.reshape(np.shape(x))


class UnitTransform(ChebyshevTable):
    """chi_hat_1(x) of a shape's switching with unit support (real and even: chi is), so that a switching of
    any support T has chi_hat(k) = T chi_hat_1(k T) without a new transform."""

    def __init__(self, unit: CompactSwitching, top: float):
        self.unit = unit
        # 2 int_0^{1/2} chi cos(x tau): as many panels on the half support as the switching's own transform has
        # on the whole (twice its resolution)
        tau, weight = gauss_panels(0.0, 0.5, unit.panels)
        self.nodes, self.node_weights = tau, 2 * weight * unit.chi(tau)
        super().__init__(top)
        self.peak = float(abs(self._direct(np.array([0.0]))[0]))

    def _direct(self, x):
        return _chunked(x, self.nodes, self.node_weights, np.cos)

    @property
    def power_error(self) -> float:
        """An absolute bound on |chi_hat_1|^2 from the table: the transform's own (two resolutions) and the
        interpolation's."""
        return float(self.unit.power_error + 2 * self.peak * self.error + self.error ** 2)


class UnitOrdered(ChebyshevTable):
    """h_1(x) = int_0^1 A(s) sin(x s) ds for the unit-support switching, A(s) = int chi(u) chi(u - s) du its
    autocorrelation: minus the imaginary part of the time-ordered double integral
    int int_{tau > tau'} chi(tau) chi(tau') e^{-i k (tau - tau')} (derive.detector.quantum), h_T(k) = T^2 h_1(k T).
    A is computed by Gauss-Legendre on the overlap of the two supports; ``quadrature_error`` compares the sine
    transform on two resolutions at the check points.  h is odd in x."""

    odd = True

    def __init__(self, unit: CompactSwitching, top: float):
        self.unit = unit
        panels = max(32, unit.panels // 4)
        self.nodes, self.node_weights = self._rule(panels)
        coarse = self._rule(panels // 2)
        super().__init__(top)
        check = np.linspace(0.0, self.top, 97)
        self.quadrature_error = float(np.max(np.abs(self._direct(check)
                                                    - _chunked(check, coarse[0], coarse[1], np.sin))))

    def _rule(self, panels):
        s, w = gauss_panels(0.0, 1.0, panels)
        u_unit, u_weight = gauss_panels(-1.0, 1.0, 2 * panels)
        # the overlap of chi(u) and chi(u - s) is u in [s - 1/2, 1/2]: mapped from [-1, 1] for each s
        lo, hi = s - 0.5, np.full_like(s, 0.5)
        u = (lo + hi)[:, None] / 2 + (hi - lo)[:, None] / 2 * u_unit[None, :]
        A = ((hi - lo) / 2) * np.sum(u_weight[None, :] * self.unit.chi(u) * self.unit.chi(u - s[:, None]), axis=1)
        return s, w * A

    def _direct(self, x):
        return _chunked(x, self.nodes, self.node_weights, np.sin)

    @property
    def bound(self) -> float:
        return float(self.error + self.quadrature_error)


@dataclass(frozen=True)
class TabulatedSwitching(CompactSwitching):
    """A compact switching whose |chi_hat|^2 comes from its shape's :class:`UnitTransform`."""

    table: UnitTransform | None = field(default=None, compare=False, repr=False)

    def power(self, k):
        T = self.support_length
        return T * T * self.table(np.asarray(k, dtype=float) * T) ** 2

    @property
    def power_error(self) -> float:
        return self.support_length ** 2 * self.table.power_error


_TABLES: dict = {}


def unit_transform(shape: str, tail: float, top: float, kind=UnitTransform):
    """The shape's tabulated unit transform (or, with ``kind=UnitOrdered``, its ordered kernel) reaching at least
    ``top`` (kept per shape, tail and kind)."""
    key = (shape, float(tail), kind.__name__)
    table = _TABLES.get(key)
    if table is None or table.top < top:
        table = _TABLES[key] = kind(_unit(shape, float(tail)), top)
    return table


@lru_cache(maxsize=32)
def _unit(shape: str, tail: float) -> CompactSwitching:
    """The shape's switching with unit support."""
    return switching_from_spec({"shape": shape}, {"duration": 1.0, "tail": tail})


@lru_cache(maxsize=32)
def _unit_duration(shape: str, tail: float) -> float:
    """The effective duration of the unit-support switching (a scan of chi^2: computed once per shape)."""
    return _unit(shape, tail).duration


def make_switching(shape: str, duration: float, tail: float, table: UnitTransform | None = None) -> Switching:
    """The switching of ``shape`` whose effective duration is ``duration`` (every shape scales with its
    support; a Gaussian's effective duration is 2 sigma erfcinv(tail)); a compact shape with ``table`` takes
    its transform from it."""
    if shape == "gaussian":
        return Switching("gaussian", float(duration / (2 * erfcinv(tail))), tail)
    plain = switching_from_spec({"shape": shape}, {"duration": float(duration / _unit_duration(shape, float(tail))),
                                                   "tail": tail})
    if table is None:
        return plain
    return TabulatedSwitching(**{f.name: getattr(plain, f.name) for f in fields(plain)}, table=table)


def describe(switching: Switching) -> dict:
    """A switching as the spec would write it, with its effective duration."""
    out = {"shape": switching.shape}
    if switching.shape == "gaussian":
        out["width"] = float(switching.width)
    else:
        out["duration"] = float(switching.support_length)
    out["effective_duration"] = float(switching.duration)
    out["tail"] = float(switching.tail)
    return out


class Memo:
    """The density at the frequency nodes computed so far, for one position, state and problem: ``wrap``
    returns a density function that computes only the nodes it has not seen (in one call) and reads the rest
    back."""

    def __init__(self):
        self.values: dict = {}
        self.calls = 0

    def wrap(self, density_at):
        self.source = density_at

        def memoised(nu):
            nu = np.asarray(nu, dtype=float)
            missing = np.unique([x for x in nu.tolist() if x not in self.values])
            if len(missing):
                self.calls += 1
                parts = density_at(missing)
                rows = np.stack([np.broadcast_to(np.asarray(p, dtype=float), missing.shape) for p in parts], axis=1)
                for x, row in zip(missing.tolist(), rows):
                    self.values[x] = row
            table = np.array([self.values[x] for x in nu.tolist()])
            return tuple(table[:, j] for j in range(table.shape[1]))
        return memoised

    def at(self, nu) -> tuple:
        """The density at ``nu`` (computing what is not known yet with the last density function wrapped)."""
        return self.wrap(self.source)(nu)


@dataclass
class Evaluation:
    """One candidate probe: its response and the reference's with errors, and the runs."""

    shape: str
    gap: float
    duration: float
    radius: float
    switching: Switching
    response: float
    error: float
    reference: float
    reference_error: float
    runs: float
    runs_error: float
    resolved: bool
    local: bool

    def record(self, round_trip_time: float) -> dict:
        return {"gap": self.gap, "switching": describe(self.switching), "at": self.radius,
                "runs": self.runs, "runs_error": self.runs_error, "duration": self.duration,
                "round_trip": round_trip_time, "local": self.local, "response": self.response,
                "error": self.error, "reference_response": self.reference, "reference_error": self.reference_error,
                "resolved": self.resolved}


def runs_of(F, F_err, F_ref, F_ref_err, coupling: float, sigmas: float) -> tuple[float, float, bool]:
    """(runs, their error, whether the difference is resolved): the counting measurement's runs
    (derive.detector.response.trials_to_distinguish) and a first-order error, runs x 2 (e + e_ref)/|F - F_ref|
    (N goes as the inverse square of the difference)."""
    lam2 = coupling ** 2
    difference = abs(F - F_ref)
    carried = F_err + F_ref_err
    runs = float(trials_to_distinguish(lam2 * F, lam2 * F_ref, sigmas))
    resolved = bool(difference > 2 * carried)
    error = runs * 2 * carried / difference if difference > 0 else float("inf")
    return runs, float(error), resolved


class Site:
    """One detector position: the round trip, the locality budget, and the shared nodes of both densities."""

    def __init__(self, problem, detector, reference_problem, radius, tolerance, family, progress=None):
        from derive.detector.study import _sqrt_f, has_horizon
        from derive.solve.centre import Unsupported, bound_states_possible

        for each in (problem, reference_problem):
            if each is not None and not has_horizon(each) and bound_states_possible(each):
                # the response adds the bound levels' share, but the second-order numbers (C, the shift) are
                # quadratures over the continuum's nodes only
                raise Unsupported("probe design for a massive field with bound levels is not built: its "
                                  "second-order numbers would miss the levels (derive response includes them)")
        self.problem, self.reference_problem = problem, reference_problem
        self.detector = replace(detector, radius=float(radius))
        self.radius, self.tolerance, self.family = float(radius), tolerance, family
        self.sqrt_f0 = _sqrt_f(problem, self.radius)
        self.round_trip = round_trip(problem, self.sqrt_f0, self.radius)
        if not np.isfinite(self.round_trip) and family.longest is None:
            from derive.errors import InputError

            raise InputError("nothing sends light back to a detector here (no interface or reflecting boundary), "
                             "so locality sets no longest duration: give [design] longest = ...",
                             key="design.longest")
        budget = family.locality * self.round_trip
        longest = family.longest if family.longest is not None else budget * (1 - 1e-9)
        self.budget = budget if np.isfinite(budget) else longest
        self.longest = min(longest, budget * (1 - 1e-9)) if np.isfinite(budget) else longest
        # the density's cost: at a regular centre one l per frequency; anywhere else an l-sum per frequency,
        # growing with the frequency.  The shortest duration sets the highest frequency and the longest the
        # panel width, so away from a centre the range is narrower (a quarter of the longest to 1.5 times it,
        # against an eighth to twice): measured on Schwarzschild at r = 6M, 14 minutes with the wide range
        cheap = self.radius == 0.0 and problem.regions[0].lower_kind == "regular centre"
        if family.radii is not None:
            default = self.longest / 2
        else:
            default = self.longest / (8 if cheap else 4)
        self.shortest = family.shortest if family.shortest is not None else default
        self.shortest = min(self.shortest, self.longest)
        # the trade-off runs past the budget (to twice it at a centre, 1.5 times elsewhere): the panel width must
        # serve the longest switching there
        self.top = (2.0 if cheap else 1.5) * self.longest
        self.tables = {}
        for shape in family.shapes:
            if shape != "gaussian":   # x = k T reaches the unit reach's search plus twice the gaps: 2 x 200 for
                # an algebraic decay, 3 x SMOOTH_CAP for a smooth one (its tail is read out to three reaches)
                longest_support = make_switching(shape, self.top, family.tail).support_length
                gap = max(abs(family.gaps[0]), abs(family.gaps[1]))
                reach = 400.0 if _unit(shape, family.tail).algebraic is not None else 3 * SMOOTH_CAP
                self.tables[shape] = unit_transform(shape, family.tail, reach + 4 * gap * longest_support)
        self.panel = min(self.switching(shape, self.top).panel_width for shape in family.shapes)
        self.memo, self.reference_memo = Memo(), Memo()
        self.shortfalls: list = []
        self.progress = progress
        self.evaluations = 0
        for shape in family.shapes:    # the widest frequency range first: later candidates read their nodes back
            self._responses(self.switching(shape, self.shortest), list(family.gaps))

    def switching(self, shape: str, duration: float) -> Switching:
        return make_switching(shape, duration, self.family.tail, self.tables.get(shape))

    def _responses(self, switching, gaps):
        ours, _, _ = detector_response(self.problem, self.detector, self.tolerance, gaps, progress=self.progress,
                                       shortfalls=self.shortfalls, switching=switching, panel=self.panel,
                                       memo=self.memo)
        ref, ref_err = reference_response(self.problem, self.detector, self.reference_problem, self.tolerance,
                                          gaps, switching, self.shortfalls, panel=self.panel,
                                          memo=self.reference_memo)
        return ours.response, ours.error, np.asarray(ref), np.asarray(ref_err)

    def evaluate(self, shape: str, gap: float, duration: float) -> Evaluation:
        switching = self.switching(shape, duration)
        F, e, R, eR = (float(x[0]) for x in self._responses(switching, [gap]))
        self.evaluations += 1
        runs, error, resolved = runs_of(F, e, R, eR, self.family.coupling, self.family.sigmas)
        local = bool(switching.duration < self.family.locality * self.round_trip)
        return Evaluation(shape, float(gap), float(switching.duration), self.radius, switching, F, e, R, eR, runs,
                          error, resolved, local)


@dataclass(frozen=True)
class Family:
    """What is searched: shapes, the gap range, the duration range (None: from the locality budget), the share
    of the round trip allowed (``locality``), the radii (None: the detector's own), and the spec's coupling and
    sigmas (the runs are counted at those)."""

    shapes: tuple
    gaps: tuple
    locality: float
    coupling: float
    sigmas: float
    tail: float
    shortest: float | None = None
    longest: float | None = None
    radii: tuple | None = None
    positions: int = 5


def _objective(site: Site, shape: str, record: list):
    def value(x):
        gap, log_d = float(x[0]), float(x[1])
        evaluation = site.evaluate(shape, gap, float(np.exp(log_d)))
        record.append(evaluation)
        return np.log(evaluation.runs) if np.isfinite(evaluation.runs) and evaluation.runs > 0 else 1e3
    return value


def best_of_shape(site: Site, shape: str) -> tuple[Evaluation, list]:
    """The fewest runs over (gap, duration) for one shape at one site: the grid, then Nelder-Mead from its two
    best points (bounded, deterministic; fatol the runs' own relative error).  Returns the best evaluation and
    every evaluation made (the grid's among them)."""
    record: list = []
    objective = _objective(site, shape, record)
    lo, hi = site.family.gaps
    bounds = [(lo, hi), (float(np.log(site.shortest)), float(np.log(site.longest)))]
    if bounds[1][1] - bounds[1][0] <= 1e-12:     # one duration: a search in the gap alone
        for g in np.linspace(lo, hi, GAP_GRID):
            objective((g, bounds[1][0]))
        minimize_scalar(lambda g: objective((g, bounds[1][0])), bounds=(lo, hi), method="bounded",
                        options={"xatol": 1e-4 * max(hi - lo, 1e-12)})
        return _fewest(record), record
    values = {}
    for g in np.linspace(lo, hi, GAP_GRID):
        for d in np.linspace(bounds[1][0], bounds[1][1], DURATION_GRID):
            values[(float(g), float(d))] = objective((g, d))
    step = np.array([(hi - lo) / (GAP_GRID - 1), (bounds[1][1] - bounds[1][0]) / (DURATION_GRID - 1)])
    low, high = np.array([b[0] for b in bounds]), np.array([b[1] for b in bounds])
    for start in sorted(values, key=values.get)[:2]:
        here = _fewest(record)
        relative = here.runs_error / here.runs if here.runs > 0 and np.isfinite(here.runs_error) else 1e-6
        start = np.array(start)
        simplex = np.array([start, start + [step[0] / 2, 0.0], start + [0.0, step[1] / 2]])
        for row in simplex[1:]:     # a vertex past a bound steps the other way
            over = row > high
            row[over] -= step[over]
        simplex = np.clip(simplex, low, high)
        minimize(objective, start, method="Nelder-Mead", bounds=bounds,
                 options={"initial_simplex": simplex, "fatol": float(np.clip(relative, 1e-9, 1e-2)),
                          "xatol": 1e-5, "maxiter": 120})
    return _fewest(record), record


def _fewest(record) -> Evaluation:
    return min(record, key=lambda e: e.runs if np.isfinite(e.runs) else np.inf)


def grid_search(site: Site, shape: str, gaps: int, durations: int) -> Evaluation:
    """The best of a plain grid over the same family (for checks: the optimiser must do at least as well)."""
    lo, hi = site.family.gaps
    record = [site.evaluate(shape, g, d) for g in np.linspace(lo, hi, gaps)
              for d in np.geomspace(site.shortest, site.longest, durations)]
    return _fewest(record)


def tradeoff(site: Site) -> list[dict]:
    """The best runs at each duration (over the gap and the shapes): durations geometric from the shortest
    searched to the site's top (twice or 1.5 times the budget); past the budget the probe is not local."""
    lo, hi = site.family.gaps
    rows = []
    for duration in np.geomspace(site.shortest, site.top, TRADEOFF_POINTS):
        best, shapes = None, {}
        for shape in site.family.shapes:
            record = [site.evaluate(shape, g, duration) for g in np.linspace(lo, hi, GAP_GRID)]
            start = _fewest(record).gap
            width = (hi - lo) / (GAP_GRID - 1)
            a, b = max(lo, start - width), min(hi, start + width)
            if b > a:
                minimize_scalar(lambda g, s=shape, d=duration, r=record: _log_runs(site.evaluate(s, g, d), r),
                                bounds=(a, b), method="bounded", options={"xatol": 1e-4 * (hi - lo)})
            candidate = _fewest(record)
            shapes[shape] = {"runs": candidate.runs, "runs_error": candidate.runs_error, "gap": candidate.gap}
            if best is None or candidate.runs < best.runs:
                best = candidate
        rows.append({"duration": float(best.duration), "runs": best.runs, "runs_error": best.runs_error,
                     "gap": best.gap, "shape": best.shape, "switching": describe(best.switching),
                     "local": best.local, "resolved": best.resolved, "per_shape": shapes})
    return rows


def _log_runs(evaluation: Evaluation, record: list) -> float:
    record.append(evaluation)
    return float(np.log(evaluation.runs)) if np.isfinite(evaluation.runs) and evaluation.runs > 0 else 1e3


def optimise_site(site: Site) -> tuple[Evaluation, dict]:
    """The best probe at one site over every shape; also each shape's best."""
    per_shape = {}
    for shape in site.family.shapes:
        per_shape[shape], _ = best_of_shape(site, shape)
    return min(per_shape.values(), key=lambda e: e.runs), per_shape


def search(problem, detector, reference_problem, tolerance, family: Family, progress=None) -> dict:
    """The whole search: sites (the detector's radius, or a grid over ``family.radii`` and a bounded search
    between the best one's neighbours), each optimised.  Returns {"site", "best", "per_shape", "sites"}: the
    winning site and its optimum, and every site tried (radius, runs)."""
    def run(radius):
        site = Site(problem, detector, reference_problem, radius, tolerance, family, progress)
        best, per_shape = optimise_site(site)
        tried.append((float(radius), best.runs, site, best, per_shape))
        return best.runs

    tried: list = []
    if family.radii is None:
        run(detector.radius)
    else:
        a, b = family.radii
        radii = np.linspace(a, b, max(family.positions, 2))
        for radius in radii:
            run(radius)
        k = int(np.argmin([t[1] for t in tried]))
        lo, hi = radii[max(k - 1, 0)], radii[min(k + 1, len(radii) - 1)]
        if hi > lo:
            minimize_scalar(lambda r: np.log(run(r)), bounds=(lo, hi), method="bounded",
                            options={"xatol": (b - a) * 1e-3, "maxiter": 6})
    radius, _, site, best, per_shape = min(tried, key=lambda t: t[1])
    return {"site": site, "best": best, "per_shape": per_shape,
            "sites": [{"at": r, "runs": n, "round_trip": s.round_trip} for r, n, s, _, _ in
                      sorted(tried, key=lambda t: t[0])]}


# -- the quantum limit ---------------------------------------------------------------------------------------
SHIFT_DOUBLINGS = 3     # the shift's frequency range may be doubled this often to bring its tail down


def _parts(values: tuple, n: int):
    """(S(nu), error, S(-nu), error) from a density's 2 or 4 arrays (a vacuum has no negative part)."""
    if len(values) == 4:
        return values
    return values[0], values[1], np.zeros(n), np.zeros(n)


def ordered_kernels(site: Site, switching: Switching):
    """(chi_hat(k), h(k), an absolute error bound on h) for a switching of the search: the Gaussian's closed
    forms (derive.detector.quantum), or a compact shape's tables scaled to its support T (chi_hat(k) =
    T chi_hat_1(k T), h(k) = T^2 h_1(k T))."""
    if switching.shape == "gaussian":
        sigma = switching.width
        return (lambda k: np.sqrt(switching.power(k)), lambda k: -ordered_kernel(k, sigma).imag, 0.0)
    T = switching.support_length
    transform = site.tables[switching.shape]
    ordered = unit_transform(switching.shape, site.family.tail, transform.top, UnitOrdered)
    return (lambda k: T * transform(np.asarray(k) * T), lambda k: T * T * ordered(np.asarray(k) * T),
            T * T * ordered.bound)


def second_order(site: Site, gap: float, switching: Switching):
    """The second-order numbers (derive.detector.quantum.SecondOrder) of the spacetime and of the reference for a
    switching of the search at one gap: F(+-Omega) through the response, C and the renormalised shift delta by
    the response's quadrature on the shared panels (fine and coarse rules), with the density's error carried
    and, for delta, an estimate of the part beyond the last node (:func:`_shift_tail`; the range is doubled
    until it is below the tolerance of the scale, at most SHIFT_DOUBLINGS times)."""
    from derive.detector.response import cutoff, frequency_nodes
    from derive.detector.study import flat_density, frequency_threshold

    problem = site.problem
    F, e, R, eR = site._responses(switching, [gap, -gap])
    chi_hat, h, h_error = ordered_kernels(site, switching)
    flat = flat_density(problem.dimension, problem.mass)
    threshold = frequency_threshold(problem, site.sqrt_f0)
    upper = cutoff(np.array([gap, -gap]), switching, True, threshold)[0]
    out = []
    for memo, values in ((site.memo, (F, e)), (site.reference_memo, (R, eR))):
        minkowski = memo is site.reference_memo and site.detector.compare_with == "minkowski"
        top = upper
        for doubling in range(SHIFT_DOUBLINGS + 1):
            nu, w_f, w_c = frequency_nodes(np.array([gap, -gap]), switching, True, threshold, top, site.panel)
            if minkowski:
                S_p, e_p, S_m, e_m = flat(nu)[0], np.zeros_like(nu), np.zeros_like(nu), np.zeros_like(nu)
            else:
                S_p, e_p, S_m, e_m = _parts(memo.at(nu), len(nu))
            density = S_p + S_m
            excess = S_p - flat(nu)[0] + S_m              # renormalised against the flat vacuum
            weight_c = chi_hat(gap + nu) * chi_hat(gap - nu)
            kernel = h(nu + gap) - h(nu - gap)
            C_f, C_c = w_f @ (density * weight_c), w_c @ (density * weight_c)
            d_f, d_c = w_f @ (excess * kernel), w_c @ (excess * kernel)
            carried = w_f @ ((e_p + e_m) * np.abs(kernel)) + 2 * h_error * (w_f @ np.abs(excess))
            tail = _shift_tail(nu, w_f, excess, top, gap, h)
            scale = w_f @ np.abs(excess * kernel)
            if tail <= site.tolerance * max(scale, 1e-300) or doubling == SHIFT_DOUBLINGS:
                break
            top *= 2
        C_err = abs(C_f - C_c) + w_f @ ((e_p + e_m) * np.abs(weight_c))
        d_err = abs(d_f - d_c) + carried + tail
        Fv, Fe = values
        out.append(SecondOrder(float(gap), float(Fv[0]), float(Fv[1]), float(C_f), float(d_f),
                               (float(Fe[0]), float(Fe[1]), float(C_err), float(d_err))))
    return out[0], out[1]


def _shift_tail(nu, weights, excess, top, gap, h) -> float:
    """An estimate of int_top^inf (S - S_flat)(nu) K(nu) dnu, K = h(nu + Omega) - h(nu - Omega): by parts,
    with Phi the running integral of the excess, |tail| <= 2 B |K(top)| when |Phi - c| <= B beyond top and K is
    monotone there (it is, past the switching's scale).  B is what Phi - c reaches over the upper half of the
    range (c its mid-range): the estimate assumes the excess keeps oscillating about zero as it does there (a
    density that settles to the local flat one; a non-zero mean would show as a growing Phi, and a large
    estimate).  The cruder bound, max |excess| over the upper half times |int_top^inf K|, is the fallback when
    that is smaller."""
    from derive.detector.quantum import shift_tail

    order = np.argsort(nu)
    nu, running = nu[order], np.cumsum((weights * excess)[order])
    upper = nu >= top / 2
    if not np.any(upper):
        return float("inf")
    phi = running[upper]
    B = float(np.max(phi) - np.min(phi)) / 2
    K = float(abs(h(np.array([top + gap]))[0] - h(np.array([top - gap]))[0]))
    crude = float(np.max(np.abs(excess[order][upper]))) * shift_tail(top, gap, h)
    return min(2 * B * K, crude)


def _moved(values: SecondOrder, towards: SecondOrder, sign: float) -> SecondOrder:
    """``values`` moved by its errors away from (sign +1) or towards (-1) ``towards``, component by
    component."""
    def step(a, b, err):
        direction = np.sign(a - b) if a != b else 1.0
        return a + sign * direction * err
    fields = ("excite", "relax", "coherence", "shift")
    moved = [step(getattr(values, f), getattr(towards, f), err) for f, err in zip(fields, values.errors)]
    return SecondOrder(values.gap, *moved, errors=values.errors)


def quantum_limit(site: Site, probe: Evaluation) -> dict:
    """For the probe: the second-order states of both spacetimes, and for the ground state and for the
    best initial state the runs of counting, of the best single-qubit measurement and of the quantum Chernoff
    bound (derive.detector.quantum), each with an error from moving the inputs by their errors."""
    from derive.detector.quantum import best_initial_state, compare_states

    ours, theirs = second_order(site, probe.gap, probe.switching)
    coupling, sigmas = site.family.coupling, site.family.sigmas
    ground = compare_states(ours, theirs, coupling, sigmas, np.array([1.0, 0.0]))
    best = best_initial_state(ours, theirs, coupling, sigmas)
    vector = np.array([complex(*best["vector"]["g"]), complex(*best["vector"]["e"])])

    for entry, initial in ((ground, np.array([1.0, 0.0])), (best, vector)):
        moved = [compare_states(_moved(ours, theirs, s), _moved(theirs, ours, s), coupling, sigmas, initial)
                 for s in (-1.0, 1.0)]
        for key in ("counting", "best_measurement"):
            entry[f"{key}_error"] = float(max(abs(m[key] - entry[key]) for m in moved))

    def numbers(v: SecondOrder) -> dict:
        return {"excite": v.excite, "relax": v.relax, "coherence": v.coherence, "shift": v.shift,
                "errors": dict(zip(("excite", "relax", "coherence", "shift"), v.errors))}
    return {"runs": best["best_measurement"], "runs_error": best["best_measurement_error"],
            "gap": probe.gap, "switching": describe(probe.switching), "at": probe.radius,
            "initial_state": {"theta": best["theta"], "phi": best["phi"], "vector": best["vector"]},
            "counting": {"runs": best["counting"], "error": best["counting_error"]},
            "best_measurement": {"runs": best["best_measurement"], "error": best["best_measurement_error"],
                                 "basis": "the eigenbasis of the symmetric logarithmic derivative"},
            "chernoff": best["chernoff"],
            "ground_state": {"counting": {"runs": ground["counting"], "error": ground["counting_error"]},
                             "best_measurement": {"runs": ground["best_measurement"],
                                                  "error": ground["best_measurement_error"]},
                             "chernoff": ground["chernoff"]},
            "second_order": numbers(ours), "reference_second_order": numbers(theirs)}
