"""The ends of a region's radial problem (docs/conventions.md section 6).

Written as u'' + p u' + q u = 0 in r, with p = (F^2)'/(2 F^2) and q = (omega^2 - V)/F^2, each finite end r0
is classified and, where it is a regular singular point, its Frobenius exponents (roots of
s(s-1) + P0 s + Q0 = 0, P0 = lim x p, Q0 = lim x^2 q, x = r - r0) and first series coefficients are derived:

* regular centre (r0 = 0, h(0) = 1, f(0) > 0): u ~ r^{l + n/2} (1 + a_1 r + a_2 r^2 + ...);
* non-degenerate horizon (f = h = 0): u ~ x^{-+ i omega/(2 kappa)} (in/outgoing), kappa = sqrt(f' h')/2;
* an interface: matched to the next region;
* infinity: the tail of V is classified (short-range, centrifugal, Coulomb-like, AdS-like) with its leading
  coefficients V ~ V0 + V1/r + V2/r^2.
"""

from __future__ import annotations

import sympy as sp

from derive.fields.radial import L_SYMBOL, OMEGA
from derive.geometry.checks import beyond_all_orders, bounded

SERIES_ORDER = 2   # shown and exported; the solver continues the recursion numerically
TIDY_SECONDS = 5.0


def _tidy(expr):
    """sympy's simplify within a few seconds, else the form as it stands (equally exact, only longer): no
    symbolic step of the field stage may run unbounded."""
    return bounded(lambda: sp.simplify(expr), expr, seconds=TIDY_SECONDS)


def _limit(expr, x):
    try:
        value = bounded(lambda: sp.limit(expr, x, 0, "+"), None, seconds=TIDY_SECONDS)
    except Exception:   # sympy could not take the limit: treat as not finite
        return sp.zoo
    if value is None:   # not found in time: treated as not finite, as when sympy cannot take it
        return sp.zoo
    return _tidy(value)


def frobenius(p, q, r, r0, exponent, order: int = SERIES_ORDER, upper: bool = False) -> list:
    """Coefficients a_0 = 1, a_1, ... of u = x^s sum a_k x^k, x = r - r0 (x = r0 - r when ``upper``: an end
    approached from below), for the given exponent s of u'' + p u' + q u = 0.

    Computed in a field of rational functions over the rationals, with the exponent as a generator (sparse
    polynomial arithmetic with a gcd after each step: nothing swells) when p and q are rational in the symbols;
    with sympy's cancel otherwise (radicals).  The exponent, complex at a horizon, is put in at the end."""
    x = sp.Symbol("x", positive=True)
    if upper:     # in x = r0 - r: d/dx = -d/dr, so p changes sign and q does not
        p, shift = -p, r0 - x
    else:
        shift = r0 + x
    try:
        return _frobenius_in_field(p, q, r, shift, exponent, order, x)
    except (sp.PolynomialError, sp.CoercionFailed, ValueError, TypeError):
        pass
    P = sp.cancel((x * p).subs(r, shift))
    Q = sp.cancel((x ** 2 * q).subs(r, shift))
    Ps = [sp.cancel(c) for c in _taylor(P, x, order + 1)]
    Qs = [sp.cancel(c) for c in _taylor(Q, x, order + 1)]
    coefficients = [sp.Integer(1)]
    s = exponent
    for k in range(1, order + 1):
        indicial = (s + k) * (s + k - 1) + Ps[0] * (s + k) + Qs[0]
        total = sum(coefficients[k - j] * (Ps[j] * (s + k - j) + Qs[j]) for j in range(1, k + 1))
        indicial = sp.cancel(indicial)
        if indicial == 0:
            coefficients.append(sp.nan)   # resonant: a logarithm enters; not needed for the exponents we use
            break
        coefficients.append(sp.cancel(-total / indicial))
    return coefficients


def recursion_coefficients(p, q, r, r0, order: int = SERIES_ORDER, upper: bool = False) -> dict:
    """The Taylor coefficients P_j, Q_j (j = 0..order) of x p and x^2 q at x = 0 (x = r - r0, or r0 - r when
    ``upper``), through which the Frobenius coefficients follow from
    a_k = -sum_{j=1}^{k} a_{k-j} [P_j (s + k - j) + Q_j] / [(s + k)(s + k - 1) + P_0 (s + k) + Q_0]:
    {"P": [...], "Q": [...]}, each factored (with radicals in the symbols: cancelled, as the series is)."""
    x = sp.Symbol("x", positive=True)
    if upper:
        p, shift = -p, r0 - x
    else:
        shift = r0 + x
    P = (x * p).subs(r, shift)
    Q = (x ** 2 * q).subs(r, shift)
    try:
        symbols = sorted((P.free_symbols | Q.free_symbols) - {x}, key=str)
        field, *_ = sp.field([x] + symbols, sp.QQ)
        return {"P": [_factored(c) for c in _field_taylor(field.from_expr(P), field, order + 1)],
                "Q": [_factored(c) for c in _field_taylor(field.from_expr(Q), field, order + 1)]}
    except (sp.PolynomialError, sp.CoercionFailed, ValueError, TypeError):
        pass
    return {"P": [_tidy(c) for c in _taylor(sp.cancel(P), x, order + 1)],
            "Q": [_tidy(c) for c in _taylor(sp.cancel(Q), x, order + 1)]}


def _frobenius_in_field(p, q, r, shift, exponent, order, x, exact: bool = False, factored: bool = True) -> list:
    """``exact``: the exponent is put into the field itself (it must be rational in the symbols), so that a
    resonance (an exponent k above this one is also a root) is seen: where the recursion's right side vanishes
    there too, no logarithm enters and the free coefficient is set to 0; otherwise the series stops (nan)."""
    P = (x * p).subs(r, shift)
    Q = (x ** 2 * q).subs(r, shift)
    s_symbol = sp.Dummy("s")
    symbols = sorted((P.free_symbols | Q.free_symbols | (exponent.free_symbols if exact else set())) - {x}, key=str)
    field, *_ = sp.field([x, s_symbol] + symbols, sp.QQ)
    s = field.from_expr(exponent if exact else s_symbol)
    Ps = _field_taylor(field.from_expr(P), field, order + 1)
    Qs = _field_taylor(field.from_expr(Q), field, order + 1)
    coefficients = [field.one]
    for k in range(1, order + 1):
        indicial = (s + k) * (s + k - 1) + Ps[0] * (s + k) + Qs[0]
        total = sum((coefficients[k - j] * (Ps[j] * (s + k - j) + Qs[j]) for j in range(1, k + 1)), field.zero)
        if indicial == 0:
            if total == 0:
                coefficients.append(field.zero)
                continue
            coefficients.append(None)
            break
        coefficients.append(-total / indicial)
    # rational in s with real coefficients; the exponent (complex at a horizon) is put in at the end
    tidy = _factored if factored else (lambda c: c.as_expr())
    return [sp.nan if c is None else tidy(c).subs(s_symbol, exponent) for c in coefficients]


def _factored(element):
    """numerator and denominator factored over the rationals (each polynomial's factors evaluate without the
    cancellation that expanded sums of large terms suffer)."""
    def factor(poly):
        coefficient, factors = poly.factor_list()
        return poly.ring.domain.to_sympy(coefficient) * sp.Mul(*[f.as_expr() ** m for f, m in factors])
    return factor(element.numer) / factor(element.denom)


def _field_taylor(element, field, count) -> list:
    """Taylor coefficients in the field's first generator (x) at x = 0, by power-series division."""
    def by_power(poly):
        parts = [field.ring.zero for _ in range(count)]
        for monom, coefficient in poly.terms():
            if monom[0] < count:
                parts[monom[0]] += field.ring({(0,) + monom[1:]: coefficient})
        return [field(part) for part in parts]
    N, D = by_power(element.numer), by_power(element.denom)
    if D[0] == 0:
        raise ValueError("not analytic at the expansion point")
    c = []
    for k in range(count):
        c.append((N[k] - sum((D[j] * c[k - j] for j in range(1, k + 1)), field.zero)) / D[0])
    return c


def _taylor(expr, x, count):
    """First ``count`` Taylor coefficients at x = 0 of a function rational in x (power-series division)."""
    numer, denom = sp.fraction(sp.cancel(expr))
    if not (numer.is_polynomial(x) and denom.is_polynomial(x)):
        # radicals in x: Taylor coefficients by differentiation (the expression is analytic at x = 0 here)
        coefficients, term = [], expr
        for k in range(count):
            value = sp.cancel(term.subs(x, 0))
            if value.has(sp.zoo, sp.nan, sp.oo):
                raise ValueError("not analytic at the expansion point")
            coefficients.append(value / sp.factorial(k))
            term = sp.diff(term, x)
        return coefficients
    N = sp.Poly(numer, x).all_coeffs()[::-1]
    D = sp.Poly(denom, x).all_coeffs()[::-1]
    N += [sp.Integer(0)] * count
    D += [sp.Integer(0)] * count
    if sp.simplify(D[0]) == 0:
        raise ValueError("not analytic at the expansion point")
    c = []
    for k in range(count):
        c.append(sp.cancel((N[k] - sum(D[j] * c[k - j] for j in range(1, k + 1))) / D[0]))
    return c


def classify_ends(field) -> dict:
    r, f, h = field.r, field.f, field.h
    region = field.region
    domain = region.domain_of(r)
    lower = domain.lower if domain is not None and domain.lower is not None else sp.Integer(0)
    upper = domain.upper if domain is not None else None
    interfaces = {i.value: i for i in field.spacetime.interfaces if field.name in i.between and i.coordinate == r}
    F2 = sp.cancel(f * h)
    V = field.potential
    p = sp.cancel(sp.diff(F2, r) / (2 * F2))
    q = sp.cancel((OMEGA ** 2 - V) / F2)
    return {"lower": _finite_end(field, lower, interfaces, p, q, F2, "lower"),
            "upper": (_infinity(field, V, p, q) if upper is None
                      else _finite_end(field, upper, interfaces, p, q, F2, "upper"))}


def _horizon_end(field, horizon, side) -> dict:
    """A horizon end, derived from the factored form (f = (r - r_h) g(r)): rational in r_h and the parameters."""
    twin = field.factored
    r, f, h, rho = twin.r, twin.f, twin.h, horizon.symbol
    fp = sp.cancel(sp.diff(f, r).subs(r, rho))
    hp = sp.cancel(sp.diff(h, r).subs(r, rho))
    if sp.cancel(fp - hp) == 0:
        kappa = fp / 2
    else:
        kappa = sp.powdenest(sp.sqrt(sp.factor(fp * hp)), force=True) / 2
    kappa = _tidy_small(kappa)
    sign = sp.N(kappa.subs(twin.values), 20)
    if sign.is_number and sign < 0:
        kappa = _tidy_small(-kappa)
    ingoing = -sp.I * OMEGA / (2 * kappa)
    end = {"kind": "horizon", "at": rho, "horizon": horizon.kind, "radius": horizon.exact if horizon.exact is not None
           else sp.Float(horizon.digits, 30), "value": horizon.value,
           "surface_gravity": kappa, "hawking_temperature": _tidy_small(kappa / (2 * sp.pi)),
           "exponents": [ingoing, -ingoing],
           "behaviour": "u ~ exp(-+ i omega r*) ~ (r - r_h)^(-+ i omega/(2 kappa))"}
    F2 = sp.cancel(f * h)
    p = sp.cancel(sp.diff(F2, r) / (2 * F2))
    q = sp.cancel((OMEGA ** 2 - twin.potential) / F2)
    recursion = recursion_coefficients(p, q, r, rho, upper=side != "lower")
    if recursion is not None:     # the series' coefficients through the equation's own (shown when shorter)
        end["recursion"] = recursion
    if side == "lower":
        end["series_ingoing"] = frobenius(p, q, r, rho, ingoing)
    else:
        # at a cosmological horizon the series is in y = r_h - r > 0: u = y^s (1 + a_1 y + ...) with
        # s = -i omega/(2 kappa) is the wave e^{+i omega r*} that leaves through the horizon
        end["series_outgoing"] = frobenius(p, q, r, rho, ingoing, upper=True)
    return end


def _tidy_small(expr):
    expr = sp.cancel(expr)
    return min((expr, sp.factor(expr)), key=sp.count_ops)


def _finite_end(field, r0, interfaces, p, q, F2, side) -> dict:
    r, f, h = field.r, field.f, field.h
    if r0 in interfaces:
        other = [n for n in interfaces[r0].between if n != field.name][0]
        return {"kind": "interface", "at": r0, "region": other}
    horizon = {h.side: h for h in field.horizons}.get(side)
    if horizon is not None:
        return _horizon_end(field, horizon, side)
    x = sp.Symbol("x", positive=True)
    shift = (lambda e: e.subs(r, r0 + x)) if side == "lower" else (lambda e: e.subs(r, r0 - x))
    f0, h0 = _limit(shift(f), x), _limit(shift(h), x)
    if f0 == 0 and h0 == 0:
        fp = _limit(sp.diff(f, r).subs(r, r0 + (x if side == "lower" else -x)), x)
        hp = _limit(sp.diff(h, r).subs(r, r0 + (x if side == "lower" else -x)), x)
        kappa = _tidy(sp.sqrt(sp.factor(fp * hp)) / 2)
        if kappa == 0:
            return {"kind": "degenerate horizon", "at": r0}
        ingoing = -sp.I * OMEGA / (2 * kappa)
        end = {"kind": "horizon", "at": r0, "surface_gravity": kappa,
               "hawking_temperature": _tidy(kappa / (2 * sp.pi)),
               "exponents": [ingoing, -ingoing],
               "behaviour": "u ~ exp(-+ i omega r*) ~ (r - r_h)^(-+ i omega/(2 kappa))"}
        if side == "lower":
            end["series_ingoing"] = frobenius(p, q, r, r0, ingoing)
        return end
    if r0 == 0 and side == "lower":
        if sp.simplify(h0 - 1) == 0 and f0 != 0 and not f0.has(sp.oo, -sp.oo, sp.zoo, sp.nan):
            P0 = _limit(sp.cancel(x * p.subs(r, x)), x)
            Q0 = _limit(sp.cancel(x ** 2 * q.subs(r, x)), x)
            s = sp.Symbol("s")
            roots = sp.solve(sp.expand(s * (s - 1) + P0 * s + Q0), s)
            roots = sorted(roots, key=lambda e: -float(e.subs(L_SYMBOL, 1)))
            regular = _tidy(roots[0])
            end = {"kind": "regular centre", "at": 0, "exponents": [_tidy(e) for e in roots],
                   "regular_exponent": regular, "series": frobenius(p, q, r, 0, regular),
                   "behaviour": "u ~ r^(l + n/2) (1 + a_1 r + ...)"}
            recursion = recursion_coefficients(p, q, r, 0)
            if recursion is not None:
                end["recursion"] = recursion
            return end
        return {"kind": "singular", "at": 0}
    return {"kind": "boundary", "at": r0}


BOUNDARY_ORDER = 12  # terms of the series at an AdS boundary (the solver starts on them a few radii out)


def _infinity(field, V, p=None, q=None) -> dict:
    r, f = field.r, field.f
    z = sp.Symbol("z", positive=True)
    f_inf = sp.limit(f, r, sp.oo)
    if f_inf in (sp.oo, -sp.oo):
        lead = sp.limit(f / r ** 2, r, sp.oo)
        end = {"kind": "infinity", "tail": "AdS-like" if lead.is_positive else "growing",
               "f_leading": _tidy(lead) * r ** 2,
               "behaviour": "reflecting conformal boundary at finite r*: the spectrum is discrete"}
        if lead.is_positive and p is not None:
            end.update(ads_boundary_series(p, q, r))
        return end
    # exponentially small terms (e^(-r^2) r^k) vanish to every order in 1/r: the series sees the rest (sympy's
    # series at an essential singularity fails, and a Gaussian lump's tail had been left "unknown")
    V_power, f_power = (beyond_all_orders(e, r, field.values) for e in (V, f))
    try:
        expansion = sp.series(V_power.subs(r, 1 / z), z, 0, 3).removeO()
        f_expansion = sp.series(f_power.subs(r, 1 / z), z, 0, 2).removeO()
    except Exception:   # sympy could not expand: say so rather than guess
        return {"kind": "infinity", "tail": "unknown"}
    V0, V1, V2 = (_tidy(expansion.coeff(z, k)) for k in range(3))
    if V0 != 0:
        tail = "Coulomb-like (massive)" if V1 != 0 else "massive, short-range"
    elif V1 != 0:
        tail = "Coulomb-like"
    elif V2 != 0:
        tail = "centrifugal"
    else:
        tail = "short-range"
    return {"kind": "infinity", "tail": tail, "V_infinity": V0, "coulomb": V1, "centrifugal": V2,
            "f_expansion": _tidy(f_expansion.subs(z, 1 / r)),
            "behaviour": {"short-range": "free waves exp(+- i omega r*)",
                          "centrifugal": "Riccati-Bessel functions of omega r*",
                          "Coulomb-like": "Coulomb wave functions",
                          "Coulomb-like (massive)": "Coulomb wave functions; evanescent below the mass",
                          "massive, short-range": "free waves in sqrt(omega^2 - V0); evanescent below"}[tail]}


def ads_boundary_series(p, q, r, order: int = BOUNDARY_ORDER) -> dict:
    """The two falloffs at an AdS boundary as Frobenius series in z = 1/r (a regular singular point of
    u'' + p u' + q u = 0 there): with d/dr = -z^2 d/dz the equation in z has P = 2/z - p(1/z)/z^2 and
    Q = q(1/z)/z^4, exponents s of u ~ z^s, u = z^s (1 + a_1 z + ...).  The larger exponent is the faster falloff
    (Dirichlet: the field's boundary value vanishes), the smaller the slower one (Neumann), a solution only
    where both are normalisable.  Derived where the exponents are rational in the parameters (a conformally
    coupled field, for example); otherwise left out (None).  When the exponents differ by an integer the slower
    series is kept without a logarithm where the recursion allows (its free coefficient 0: the one with no
    admixture of the faster falloff), and is missing (None) where a logarithm enters."""
    z = sp.Symbol("z", positive=True)
    P = sp.cancel(2 / z - p.subs(r, 1 / z) / z ** 2)
    Q = sp.cancel(q.subs(r, 1 / z) / z ** 4)
    P0 = _limit(sp.cancel(z * P), z)
    Q0 = _limit(sp.cancel(z ** 2 * Q), z)
    if any(v.has(sp.oo, -sp.oo, sp.zoo, sp.nan) or v.free_symbols & {OMEGA, L_SYMBOL} for v in (P0, Q0)):
        return {}
    # s(s - 1) + P0 s + Q0 = 0; real where the effective mass respects the Breitenlohner-Freedman bound (the
    # solver checks that at the parameters' values)
    root = sp.sqrt(sp.factor((1 - P0) ** 2 - 4 * Q0))
    fast, slow = ((1 - P0) + root) / 2, ((1 - P0) - root) / 2
    out = {"boundary_exponents": {"dirichlet": _tidy(fast), "neumann": _tidy(slow)}}
    for name, exponent in (("dirichlet", fast), ("neumann", slow)):
        if name == "neumann" and root.is_number and root >= 2:    # nu >= 1: the slower falloff is not normalisable
            out["series_neumann"] = None
            continue
        try:
            series = _frobenius_in_field(P, Q, z, z, exponent, order, z, exact=True, factored=False)
        except (sp.PolynomialError, sp.CoercionFailed, ValueError, TypeError):
            # an irrational exponent (a generic mass or coupling): the recursion with the exponent as a symbol of
            # the field, put in at the end (as at a horizon). The exponents then differ by 2 nu, irrational, so
            # no indicial factor (s + k - s_other) vanishes and no logarithm enters; where 2 nu happens to be an
            # integer at the parameters' values the coefficients have a pole there, which the kernels'
            # verification refuses.
            try:
                series = _frobenius_in_field(P, Q, z, z, exponent, order, z, factored=False)
            except (sp.PolynomialError, sp.CoercionFailed, ValueError, TypeError):
                out[f"series_{name}"] = None
                continue
        out[f"series_{name}"] = None if any(c is sp.nan or c == sp.nan for c in series) else series
    return out
