"""The far form: a multipole's amplitude far away as a quadratic form of its state at one radius, interpolated
in omega.

In the outermost region of an asymptotically flat spacetime, the flux far away of a solution of angular label l
(derive.solve.centre.far_amplitude2, a^2 k) is a quadratic form of its state s = (u, du/dr*) at any radius r_q of
that region,

    a^2 k = s^T Q_l(omega) s,    Q_l = P^T G P,

with P the propagator from r_q to the far radius and G the far read-off.  Q_l depends on the region beyond r_q
alone, so every point inside r_q shares it: an l-term of the two-point function needs the march up to r_q per
frequency (nothing at all where the interior is flat and in closed form) and Q_l there.

Where every radius beyond r_q is classically allowed with room to spare, omega^2 >= 2 max V_l, Q_l is a smooth
function of omega: the phase the solution turns through out to the far radius (omega r* ~ 1e8) cancels in the
form, and what is left varies on the scale of the potential's features, not of the wavelength.  There Q_l is
computed at Chebyshev-Lobatto nodes of log omega, each node refined on nested grids like any term
(derive.solve.summation.refine), and interpolated (barycentric; scipy).  Below that frequency, where a turning
point lies beyond r_q, the caller marches as before.

What is interpolated: in the basis s~ = (u, (du/dr*)/omega) the entries (q_00, q_01, q_11) of Q~/omega, which
are of order one in that range, as functions of log omega (Chebyshev-Lobatto nodes in log omega: measured,
33 nodes give 1e-12 outside the static shell of worked/static_shell for l = 0..20 where 65 nodes uniform in omega
gave 1e-5, the range's low end varying on the scale of omega itself), so that a^2 k = omega s~^T q s~.

Errors.  Each node is refined until the changes of its three entries sum to half the accuracy, with its
read-off's tail (the flux read four times farther out) counted.  On each interval the interpolants on n and
(n + 1)/2 nested nodes are compared on a check grid eight times finer; the largest difference of each entry (the
error of the coarser one: conservative) plus the nodes' largest errors bound the entries' errors dq anywhere on
the interval.  Where the finer interpolant's own Chebyshev coefficients show it resolved (:func:`chebyshev_tail`:
the tail of its coefficients, times TAIL = 10, is a tenth of the nested spread or less), that estimate replaces
the spread as its interpolation error, and no finer set is needed (measured outside the static shell at 4.5e-11:
the 33-node interpolants of l = 0..30 differ from the 65-node ones by at most 0.57 of it; 33 nodes instead of 65
for l <= 18).  For a state s~ the relative error of a^2 k is then at most

    sum_ij |s~_i| dq_ij |s~_j| / s~^T q s~,

which :meth:`FarForm.log_flux` returns with each value.  An interval is accepted when the interpolation part alone
is within half the accuracy for every state (a generalized eigenvalue of the two forms, :func:`_worst`); the
caller checks each state's whole error against what its term may carry and marches where it is exceeded.  An
interval that fails on 65 nodes is halved (a few times at most, within a budget of nodes); one whose nodes
cannot reach the accuracy is left to the direct march at once.  Checked against closed forms (flat space:
Riccati-Bessel functions via mpmath) and against the march it replaces in tests/test_farform.py.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import BarycentricInterpolator

from derive.solve.centre import far_form_matrix
from derive.solve.march import Piece, march
from derive.solve.summation import refine

ROOM = 2.0            # omega^2 >= ROOM * max V beyond r_q: no turning point near, the form is smooth in omega
NODES = (17, 33, 65)  # nested Chebyshev-Lobatto sets tried on each interval before it is halved
DEPTH = 4             # halvings of the first interval at most
BUDGET = 200          # nodes per form at most (each costs about what one frequency's direct march does)
CHECKS = 8            # check points per node on the check grid
FLOOR = 2e-12         # no form is asked for more than this relative accuracy (double-precision marches)
TAIL = 10             # the safety factor on the Chebyshev tail's estimate of an interpolant's error


def lobatto(a: float, b: float, n: int) -> np.ndarray:
    """n Chebyshev-Lobatto points on [a, b], increasing (the set for n nests in the set for 2n - 1)."""
    return (a + b) / 2 - (b - a) / 2 * np.cos(np.pi * np.arange(n) / (n - 1))


def chebyshev_tail(values) -> np.ndarray:
    """Twice the sum of the last max(3, n/8) Chebyshev coefficients of the interpolant through ``values`` (n, m)
    at n Chebyshev-Lobatto points, per column: an estimate of its error where the coefficients decay
    geometrically (the interpolation error is at most twice the sum of the coefficients beyond the degree; common
    practice, L. N. Trefethen, Approximation Theory and Approximation Practice (2013), ch. 4 and 8)."""
    n = len(values)
    coefficients = np.polynomial.chebyshev.chebfit(lobatto(-1.0, 1.0, n), values, n - 1)
    return 2 * np.sum(np.abs(coefficients[-max(3, n // 8):]), axis=0)


def allowed_from(problem, l: int, radius: float, far: float) -> float:
    """The lowest omega at which the form is interpolated: sqrt(ROOM max V_l) over [radius, far]."""
    region = problem.regions[-1]
    r = np.geomspace(radius, far, 600)
    V = np.broadcast_to(np.asarray(region.potential(r, l, 0.0), dtype=float), r.shape)
    return float(np.sqrt(ROOM * max(float(np.max(V)), 0.0)))


def _form_values(problem, l, omegas, radius, far, count, farther=False):
    """The entries (q_00, q_01, q_11) of Q~/omega at each omega on the grid of ``count`` steps (nested: 16-step
    base pieces times count/16); with ``farther`` the same grid and one more piece out to four times the far
    radius, where the flux is read instead (the read-off's error: the tail)."""
    index = len(problem.regions) - 1
    pieces = [Piece(index, radius, far, 16, "geometric")]
    if farther:
        pieces.append(Piece(index, far, 4 * far, 4, "geometric"))
        far = 4 * far
    n = len(omegas)
    marched = march(problem, l, omegas, pieces, np.tile([1.0, 0.0], (n, 1)), marks=[0], outer=True,
                    multiple=max(1, count // 16))
    matrix, log_scale, _ = marched.outer[0]
    G = far_form_matrix(problem.regions[-1], omegas, far, l)
    Q = np.einsum("nki,nkl,nlj->nij", matrix, G, matrix) * (np.exp(2 * log_scale) / omegas)[:, None, None]
    return Q[:, 0, 0], Q[:, 0, 1] * omegas, Q[:, 1, 1] * omegas * omegas


def _worst(delta, values):
    """The largest relative error sum |s_i| dQ_ij |s_j| / s^T Q s over states s, for entry errors |delta| (m, 3)
    at Q = values (m, 3): with s' = |s| the numerator is s'^T dQ s' and the denominator at least s'^T Q' s', Q'
    the form with its off-diagonal entry -|q01|, so the largest root mu of det(dQ - mu Q') = 0 bounds it (inf
    where Q is not positive definite)."""
    q00, q01, q11 = values.T
    d00, d01, d11 = np.abs(delta).T
    det = q00 * q11 - q01 * q01
    # det(D - mu Q') = mu^2 det Q - mu (d00 q11 + d11 q00 + 2 d01 |q01|) + det D
    b = d00 * q11 + d11 * q00 + 2 * d01 * np.abs(q01)
    c = d00 * d11 - d01 * d01
    with np.errstate(divide="ignore", invalid="ignore"):
        mu = (b + np.sqrt(np.maximum(b * b - 4 * det * c, 0.0))) / (2 * det)
    return np.where((det > 0) & (q00 > 0), mu, np.inf)


@dataclass
class _Interval:
    a: float                 # omega range [a, b]
    b: float
    nodes: np.ndarray        # log omega
    values: np.ndarray       # (nodes, 3): q00, q01, q11 of Q~/omega
    delta: np.ndarray        # (3,): bounds on the entries' errors anywhere on [a, b]

    def __call__(self, omegas):
        return BarycentricInterpolator(self.nodes, self.values)(np.log(omegas))


@dataclass
class FarForm:
    """Q_l beyond ``radius``, interpolated on [low, high] to relative ``accuracy`` of a^2 k (see the module
    docstring); ``intervals`` that met it, the rest of [low, high] left to the direct march."""

    l: int
    radius: float
    far: float
    low: float
    high: float
    accuracy: float
    intervals: list = field(default_factory=list)
    nodes_used: int = 0

    def covers(self, omegas) -> np.ndarray:
        omegas = np.asarray(omegas, dtype=float)
        inside = np.zeros(omegas.shape, dtype=bool)
        for interval in self.intervals:
            inside |= (omegas >= interval.a) & (omegas <= interval.b)
        return inside

    def log_flux(self, omegas, states):
        """(log of a^2 k for each state (u, du/dr*) at ``radius``, its relative error) at the frequencies it covers
        (nan and inf elsewhere).  The error is the state's own: sum |s~_i| dQ_ij |s~_j| / s~^T Q~ s~."""
        omegas = np.asarray(omegas, dtype=float)
        log_flux, error = np.full(len(omegas), np.nan), np.full(len(omegas), np.inf)
        for interval in self.intervals:
            inside = np.nonzero((omegas >= interval.a) & (omegas <= interval.b) & np.isnan(log_flux))[0]
            if not len(inside):
                continue
            w = omegas[inside]
            q00, q01, q11 = interval(w).T
            u, v = states[inside, 0], states[inside, 1] / w
            form = q00 * u * u + 2 * q01 * u * v + q11 * v * v
            d00, d01, d11 = interval.delta
            log_flux[inside] = np.log(w * form)
            error[inside] = (d00 * u * u + 2 * d01 * np.abs(u * v) + d11 * v * v) / form
        return log_flux, error


def _node_form(problem, l, nodes, radius, far, accuracy, count):
    """Converged entries at the nodes (omega), (nodes, 3), their errors (nodes, 3) and the step counts at which
    they converged: refined on nested grids (derive.solve.summation.refine, their changes summed to accuracy/2)."""
    def values(w, steps):
        entries = _form_values(problem, l, w, radius, far, steps)
        ones = np.ones(len(w))
        return entries, (ones, ones, ones)

    def tail(w, steps):
        return [_form_values(problem, l, w, radius, far, steps, farther=True)]

    value, _, error, converged = refine(values, nodes, accuracy / 6, 0.0, count, 8192, alternatives=tail)
    return np.stack(value, axis=1), np.stack(error, axis=1), converged


def build(problem, l: int, radius: float, far: float, low: float, high: float, accuracy: float,
          count: int = 32) -> FarForm:
    """The far form of label l beyond ``radius`` on [low, high] (see the module docstring)."""
    form = FarForm(l, radius, far, low, high, accuracy)
    if not high > low:
        return form
    pending = [(low, high, 0)]
    while pending and form.nodes_used < BUDGET:
        lo, hi, depth = pending.pop()
        a, b = np.log(lo), np.log(hi)
        nodes, values, errors = np.zeros(0), np.zeros((0, 3)), np.zeros((0, 3))
        accepted = None
        for n in NODES:
            new = lobatto(a, b, n)
            fresh = new if not len(nodes) else new[1::2]
            value, error, converged = _node_form(problem, l, np.exp(fresh), radius, far, accuracy, count)
            count = max(32, int(np.max(converged)) // 2)
            form.nodes_used += len(fresh)
            merged = np.concatenate([nodes, fresh])
            order = np.argsort(merged)
            coarse = (nodes, values) if len(nodes) else None
            nodes = merged[order]
            values = np.concatenate([values, value])[order]
            errors = np.concatenate([errors, error])[order]
            if not np.all(np.isfinite(values)):
                break
            reachable = float(np.min(_worst(np.broadcast_to(np.max(errors, axis=0), values.shape), values)))
            if reachable > 2 * accuracy:   # the nodes themselves are far from accurate enough: no halving helps
                depth = DEPTH
                break
            if coarse is None:
                continue
            check = np.linspace(a, b, CHECKS * n)
            fine = BarycentricInterpolator(nodes, values)(check)
            spread = np.max(np.abs(fine - BarycentricInterpolator(*coarse)(check)), axis=0)
            # the finer interpolant's own error from its Chebyshev coefficients' tail, where the coefficients show
            # it resolved (that estimate a tenth of the nested spread or less): then it need not be checked against
            # a finer set (see the module docstring)
            tail = TAIL * chebyshev_tail(values)
            own = tail if np.all(tail <= spread / 10) else spread
            if float(np.max(_worst(np.broadcast_to(own, fine.shape), fine))) <= accuracy / 2:
                accepted = _Interval(lo, hi, nodes, values, own + np.max(errors, axis=0))
                break
        if accepted is not None:
            form.intervals.append(accepted)
        elif depth < DEPTH:
            middle = float(np.sqrt(lo * hi))
            pending += [(lo, middle, depth + 1), (middle, hi, depth + 1)]
    form.intervals.sort(key=lambda interval: interval.a)
    return form


_FORMS: dict = {}
_FORM_LIMIT = 512


def _key(problem, l, radius, far, low, high, accuracy):
    return (id(problem), int(l), float(radius), float(far), float(low), float(high), float(accuracy))


def far_form(problem, l: int, radius: float, span: float, low: float, high: float, accuracy: float) -> FarForm:
    """The far form of label l beyond ``radius`` for omega in [low, high] (from where it is smooth: ROOM) to
    relative ``accuracy``, kept for reuse (every refinement of an l-term and every later call with the same
    frequency range asks for the same one); entries are checked to belong to the same problem object.

    The flux is read at 10^3 wavelengths of the reduced wave number sqrt(l(l+1)+1)/omega (and 10^3 length
    scales) at the lowest frequency: the corrected Liouville-Green read-off's error there is of order
    V''/k^4 ~ 1e-12 (measured below 1e-12 against a read-off 10^3 times farther), and its tail error is counted
    (:func:`_form_values` with ``farther``).  ``span``: the radius out to which the potential is sampled for
    the smooth range (the direct march's far radius)."""
    accuracy = max(float(accuracy), FLOOR)
    low = max(float(low), allowed_from(problem, l, radius, span))
    far = max(10 * radius, 1e3 * problem.length_scale, 1e3 * np.sqrt(l * (l + 1) + 1.0) / max(low, 1e-300))
    key = _key(problem, l, radius, far, low, high, accuracy)
    hit = _FORMS.get(key)
    if hit is not None and hit[0] is problem:
        return hit[1]
    form = build(problem, l, radius, far, low, float(high), accuracy)
    remember(problem, form)
    return form


def remember(problem, form: FarForm) -> None:
    """Keep a form built elsewhere (in a worker process) for this problem."""
    if len(_FORMS) >= _FORM_LIMIT:
        _FORMS.clear()
    _FORMS[_key(problem, form.l, form.radius, form.far, form.low, form.high, form.accuracy)] = (problem, form)
