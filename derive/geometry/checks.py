"""Deciding that a symbolic expression vanishes: exactly where sympy can, else at 30 digits.

``vanishes`` first tries ``cancel`` and ``simplify``; when they cannot settle it (radicals with sign
conditions, for instance) it evaluates the expression with mpmath at 30 significant digits at the spec's
parameter values and a few other points, and accepts it only if every value is below 1e-20 of the size of the
terms.  This is a check, not a proof, and the code that relies on it says so.
"""

from __future__ import annotations

import contextlib
import signal
import sys
import threading
import time

import mpmath
import sympy as sp

from derive.spec.roots import exact_values


def vanishes(expr, values: dict, points: list[dict] | None = None, simplify: bool = True) -> bool:
    """True when ``expr`` is zero exactly, or to 20 digits at the given parameter values and points."""
    expr = sp.S(expr)
    if expr == 0 or sp.cancel(expr) == 0:
        return True
    if simplify and expr.count_ops() < 300 and sp.simplify(expr) == 0:
        return True
    base = exact_values(values)
    trials = [dict(base)]
    for point in points or []:
        trials.append({**base, **exact_values(point)})
    terms = sp.Add.make_args(sp.expand(expr)) if expr.count_ops() < 300 else (expr,)
    with mpmath.workdps(30):
        for trial in trials:
            value = sp.N(expr.subs(trial), 30)
            if not value.is_number:
                return False
            scale = max([abs(sp.N(t.subs(trial), 30)) for t in terms] + [sp.Float(1e-30)])
            if abs(value) > 1e-20 * scale:
                return False
    return True


class SymbolicTimeout(Exception):
    """A display simplification that did not finish within its time limit (see :func:`time_limit`)."""


_LOCAL = threading.local()    # whether this thread is already inside a limit (limits do not nest)


@contextlib.contextmanager
def time_limit(seconds: float):
    """Raise SymbolicTimeout in the block after ``seconds`` of CPU time (so that what a busy machine finishes, and
    hence the forms a document shows, does not depend on the load: a real-time limit cut rewritings short under
    a parallel test run and left a transfer matrix's entry omitted).  In the main thread by a virtual timer
    (SIGVTALRM); in any other thread, where signals cannot be delivered, by a trace function that checks the
    thread's CPU time at every Python call.  Inside another limit the block runs under that one.  For
    simplifications whose fallback is the unsimplified, equally exact form: sympy's simplify and factor can run
    for many minutes on an unlucky term order."""
    if getattr(_LOCAL, "limited", False):
        yield
        return
    _LOCAL.limited = True
    try:
        if threading.current_thread() is threading.main_thread():
            with _signal_limit(seconds):
                yield
        else:
            with _traced_limit(seconds):
                yield
    finally:
        _LOCAL.limited = False


@contextlib.contextmanager
def _signal_limit(seconds: float):
    def expire(signum, frame):
        # raised inside a callback (a gc hook, a __del__) the exception is swallowed: the timer is re-armed so
        # that it fires again until it lands in the block itself (the finally below disarms it)
        signal.setitimer(signal.ITIMER_VIRTUAL, 0.05)
        raise SymbolicTimeout(f"not finished in {seconds:g} s")
    previous = signal.signal(signal.SIGVTALRM, expire)
    signal.setitimer(signal.ITIMER_VIRTUAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_VIRTUAL, 0)
        signal.signal(signal.SIGVTALRM, previous)


@contextlib.contextmanager
def _traced_limit(seconds: float):
    deadline = time.thread_time() + seconds

    def check(frame, event, arg):
        # every call after the deadline raises, so an exception swallowed by an except clause comes back
        if time.thread_time() > deadline:
            raise SymbolicTimeout(f"not finished in {seconds:g} s")
        return None
    previous = sys.gettrace()
    sys.settrace(check)
    try:
        yield
    finally:
        sys.settrace(previous)


def bounded(function, fallback, seconds: float = 10.0):
    """function() within a time limit, else ``fallback`` (an exact form that is merely longer)."""
    try:
        with time_limit(seconds):
            return function()
    except SymbolicTimeout:
        return fallback


def _far_value(g, r, values, far: float) -> float:
    """g at r = ``far`` and the spec's values as a float (0 where it is not a real number there)."""
    value = sp.N(g.subs(values).subs(r, far), 15)
    return float(value) if value.is_number and value.is_real else 0.0


def tame_exponentials(expr, r, values, far: float = 1e6):
    """exp(g(r)) with g growing (g > 1 at r = ``far`` at the spec's values) written through z = exp(-g0): the
    exponentials fall into classes of rational multiples of one argument g0 each (exp(r^2) and exp(-2 r^2) in
    one, exp(r) in another), each class gets its own z, and the expression, rational in the z's, is cancelled
    to positive powers of them, which underflow gracefully far out where exp(g) overflows
    (e^(r^2)/(e^(r^2) - a) becomes 1/(1 - a e^(-r^2)), finite at every r).  Exact; the expression unchanged where
    it has no growing exponential, or where the rewriting would take more than a few seconds."""
    expr = sp.S(expr)
    exps = [e for e in expr.atoms(sp.exp) if e.args[0].has(r)]
    classes = []                          # [first growing argument, {exp: its ratio to it}] per class
    for e in exps:
        if _far_value(e.args[0], r, values, far) > 1.0 and not any(sp.simplify(e.args[0] / c[0]).is_Rational
                                                                   for c in classes):
            classes.append([e.args[0], {}])
    if not classes:
        return expr
    for e in exps:
        for c in classes:
            ratio = sp.simplify(e.args[0] / c[0])
            if ratio.is_Rational:
                c[1][e] = ratio
                break
    # each class's unit g0: its first argument times the gcd of the ratios, so that every member is an integer
    # power of z = exp(-g0) (a fractional power would keep cancel from seeing the common factors)
    steps = [abs(sp.gcd_list(list(c[1].values()))) for c in classes]
    units = [c[0] * step for c, step in zip(classes, steps)]
    zs = [sp.Dummy(f"z{k}", positive=True) for k in range(len(units))]
    replacements = {e: z ** (-(ratio / step)) for c, step, z in zip(classes, steps, zs) for e, ratio in c[1].items()}

    def rewrite():
        rational = sp.cancel(sp.together(expr.xreplace(replacements)))
        return rational.xreplace({z: sp.exp(-unit) for z, unit in zip(zs, units)})
    return bounded(rewrite, expr, seconds=5.0)


def beyond_all_orders(expr, r, values, far: float = 1e6):
    """``expr`` (its growing exponentials tamed) with every exponential that decays at large r set to zero: the
    part that an asymptotic power series in 1/r sees (e^(-r^2) r^k vanishes to every order)."""
    expr = tame_exponentials(expr, r, values, far)
    power = expr.replace(lambda e: isinstance(e, sp.exp) and e.args[0].has(r)
                         and _far_value(e.args[0], r, values, far) < -1.0, lambda e: sp.Integer(0))
    return expr if power.has(sp.nan, sp.zoo, sp.oo, -sp.oo) else power


def simplify_checked(expr, values: dict):
    """A shorter form of ``expr`` that takes square roots of squares as positive, accepted only if it agrees
    with ``expr`` at 30 digits at the spec's parameter values (so the sign assumption is checked, not made)."""
    expr = sp.S(expr)
    radical = (lambda e: e.is_Pow and e.exp.is_Rational and not e.exp.is_Integer)
    exact = exact_values(values)

    def signed(arg):   # |a| -> a or -a, whichever is positive at the spec's values
        number = sp.N(arg.subs(exact), 30)
        return -arg if number.is_number and number.is_real and number < 0 else arg
    candidate = expr.replace(radical, lambda e: sp.factor(e.base) ** e.exp)
    candidate = sp.powdenest(candidate.replace(sp.Abs, signed), force=True).replace(sp.Abs, signed)
    candidates = [bounded(lambda: sp.simplify(candidate), candidate) if candidate.count_ops() < 200 else candidate]
    together = bounded(lambda: sp.factor(sp.together(candidate)), candidate)
    candidates += [together, bounded(lambda: radical_normal_form(together), together)]
    best = expr
    for candidate in candidates:
        if sp.count_ops(candidate) < sp.count_ops(best) and vanishes(candidate - expr, values, simplify=False):
            best = candidate
    return best


def radical_normal_form(expr):
    """With a single square root s = sqrt(X) in ``expr``: write it as (n0 + n1 s)/d with n0, n1, d free of s
    (rationalise the denominator, reduce s^2 -> X).  Exact; returns ``expr`` unchanged otherwise."""
    roots = {e for e in expr.atoms(sp.Pow) if e.exp == sp.Rational(1, 2) or e.exp == -sp.Rational(1, 2)}
    bases = {e.base for e in roots}
    if len(bases) != 1:
        return expr
    X = bases.pop()
    s = sp.Dummy("s")
    body = expr.subs({X ** sp.Rational(1, 2): s, X ** -sp.Rational(1, 2): 1 / s})
    if body.has(X ** sp.Rational(1, 2)):
        return expr
    numer, denom = sp.fraction(sp.cancel(body))
    try:
        conjugate = sp.Poly(denom, s)
    except sp.PolynomialError:
        return expr
    if conjugate.degree() > 1:
        return expr
    d0, d1 = (conjugate.all_coeffs()[::-1] + [0, 0])[:2]
    numer = sp.expand(numer * (d0 - d1 * s))
    denom = sp.expand(d0 ** 2 - d1 ** 2 * X)
    reduced = sp.rem(sp.Poly(numer, s), sp.Poly(s ** 2 - X, s))
    n0, n1 = (reduced.all_coeffs()[::-1] + [0, 0])[:2]
    common = sp.gcd_list([sp.S(n0), sp.S(n1), sp.S(denom)]) if n0 != 0 or n1 != 0 else 1
    n0, n1, denom = (sp.cancel(v / common) for v in (n0, n1, denom))
    return (sp.factor(n0) + sp.factor(n1) * sp.sqrt(X)) / sp.factor(denom)
