"""Displayed forms for the derivation document: term order, line breaking and named radicals.

Everything here is exact rewriting of what the symbolic stages computed, for reading only:

* :func:`tex` and :func:`text` print a sympy object with the terms of every sum in the order a physicist
  writes them (:class:`_Ordered`: ``1 - 2M/r + Q^2/r^2``, ``r^2 - 2Mr + Q^2``); domains print as chains
  (``0 \\le r < R``).
* :func:`width` estimates the printed width of a LaTeX formula in points (10 pt Computer Modern, display
  style), from the formula's text alone; it is calibrated against pdflatex's own measurements and errs wide.
* :func:`display_lines` breaks a long right-hand side at the terms of its sums into lines that fit the page,
  opening a product or a fraction when one term alone is too wide.
* :func:`with_named_radicals` names the square roots of a long expression (each ``b^{k/2}`` becomes
  ``S^k``, exact on the principal branch), reduces powers of each name against its square and cancels; the
  document shows the shorter of the two forms, with the names defined beside it.
* :func:`with_eliminated_root` names the one square root of a sum of parameters after the sum normalised to its
  dominant term (``S = sqrt(1 - 2M/R)``) and eliminates a parameter through it (``M = R (1 - S^2)/2``), so a
  coefficient built from that root becomes a short rational function of S.
* :func:`one_root` writes a product of square roots as one root of a ratio of normalised sums.
"""

from __future__ import annotations

import re

import sympy as sp
from sympy.printing.latex import LatexPrinter
from sympy.printing.str import StrPrinter

from derive.geometry.checks import vanishes
from derive.spec.roots import exact_values

# the text block of the document (6.5 in) less room for the equation number and the alignment's indent
LINE_WIDTH_PT = 400.0
# a line estimated wider than this would run into the margin (the estimate errs by about 13% at worst)
OVERFULL_PT = 415.0
# more lines than this and the named-radical form is tried; more than MAX_LINES and the form is not shown
TRY_NAMES_LINES = 3
MAX_LINES = 24
# the CPU time one display rewriting may take, and all of them in one document (the forms as computed are exact;
# a rewriting only shortens them, so it is dropped rather than waited for).  Schwarzschild-de Sitter's document
# spends 17 s, 16 of them on four series coefficients whose rewritings never finish; on a loaded machine (two
# hyperthreads of one core) the same work takes more CPU time, and 20 s in all cut later equations short.  The
# constant-density star's longest rewritings that finish take 0.6 s here: 3 s leaves a machine five times slower
# the same document (with the limits scaled down as for a machine four times slower, 2 s omitted its potential)
REWRITE_SECONDS = 3.0
SIMPLIFY_SECONDS = 50.0
_RADICAL_NAME = r"\mathcal{{S}}_{{{}}}"


# -- printing ---------------------------------------------------------------------------------------------------
class _Ordered:
    """The order of a sum's terms that papers use (mixed into sympy's LaTeX and string printers):

    * with a number term, from the constant up: the terms free of the variables (the number first, then by the
      degree of their denominators: 1 - 2M/R + Q^2/R^2), then by the magnitude of the variables' power,
      inverse powers first (1 - 2M/r + Q^2/r^2, 1 - 2M/r - r^2/L^2), then functions of the variables;
    * a polynomial in the variables without a number term, from its highest power (r^2 - 2Mr + Q^2, r - L);
    * positive terms before negative ones where the rest ties (R - 2M)."""

    _variables: tuple = ()

    def _classify(self, term):
        """(class, power of the variables, negative, degree of the denominator): class 0 free of the variables
        (-1 for a number), 1 a power of the variables, 2 a function of them."""
        negative = bool(term.could_extract_minus_sign())
        variables = set(self._variables)
        if not (term.free_symbols & variables):
            denominator = sp.fraction(term)[1]
            degree = sum(int(p) for p in denominator.as_powers_dict().values() if p.is_Integer)
            return (-1 if term.is_Number else 0, 0, negative, degree if denominator != 1 else 0)
        power = 0
        for factor, exponent in term.as_powers_dict().items():
            if factor in variables and exponent.is_Integer:
                power += int(exponent)
            elif factor.free_symbols & variables:
                return (2, 0, negative, 0)
        return (1, power, negative, 0)

    def _as_ordered_terms(self, expr, order=None):
        terms = list(super()._as_ordered_terms(expr, order=order))
        kinds = [self._classify(term) for term in terms]
        powers = [k[1] for k in kinds if k[0] == 1]
        descending = (powers and min(powers) >= 0 and max(powers) > 0
                      and all(k[0] in (0, 1) for k in kinds))
        if descending:
            keys = [(-power, negative) for _, power, negative, _ in kinds]
        else:
            keys = [(max(kind, 0), kind, denominator, abs(power), power > 0, negative)
                    for kind, power, negative, denominator in kinds]
        ranked = sorted(enumerate(terms), key=lambda item: (keys[item[0]], item[0]))
        return [term for _, term in ranked]


class _Printer(_Ordered, LatexPrinter):
    """sympy's LaTeX printer with the order of terms and the domains a reader expects."""

    def __init__(self, variables=(), **settings):
        super().__init__(settings)
        self._variables = tuple(variables)

    def _print_And(self, expr, *args):
        chain = _chain(expr)
        if chain is not None:
            return chain
        return super()._print_And(expr, *args)


class _TextPrinter(_Ordered, StrPrinter):
    def __init__(self, variables=()):
        super().__init__()
        self._variables = tuple(variables)


def text(expr, variables=()) -> str:
    """str() of a sympy object with the terms of every sum in the order of :func:`tex` (sympy reads it back
    as the same expression)."""
    if not isinstance(expr, (sp.Basic, sp.MatrixBase)):
        return str(expr)
    return _TextPrinter(variables).doprint(expr)


_RELATION = {"<": "<", "<=": r"\le", ">": ">", ">=": r"\ge"}
_FLIP = {"<": ">", "<=": ">=", ">": "<", ">=": "<="}


def _chain(expr):
    """``a < x \\wedge x <= b`` as ``a < x \\le b`` when the two relations share one side."""
    relations = [a for a in expr.args if isinstance(a, sp.core.relational.Relational) and a.rel_op in _RELATION]
    if len(relations) != 2 or len(expr.args) != 2:
        return None

    def upward(rel):      # written as lhs < rhs or lhs <= rhs
        return (rel.lhs, rel.rel_op, rel.rhs) if rel.rel_op in ("<", "<=") else (rel.rhs, _FLIP[rel.rel_op], rel.lhs)

    (a1, op1, b1), (a2, op2, b2) = upward(relations[0]), upward(relations[1])
    if b1 == a2:
        low, op_low, middle, op_high, high = a1, op1, b1, op2, b2
    elif b2 == a1:
        low, op_low, middle, op_high, high = a2, op2, b2, op1, b1
    else:
        return None
    printer = _Printer()
    return (f"{printer.doprint(low)} {_RELATION[op_low]} {printer.doprint(middle)} "
            f"{_RELATION[op_high]} {printer.doprint(high)}")


def tex(obj, variables=()) -> str:
    """LaTeX of a sympy object (a string is returned as it is), terms ordered by the powers of ``variables``."""
    if isinstance(obj, str):
        return obj
    return _Printer(variables, long_frac_ratio=3).doprint(obj)


# -- width ---------------------------------------------------------------------------------------------------
_LETTER, _UPPER, _DIGIT, _OPERATOR, _PAREN, _SMALL = 5.4, 8.4, 5.0, 12.0, 3.9, 2.8
_NAMED = {"log": 15.0, "sin": 14.0, "cos": 16.0, "tan": 16.0, "exp": 16.0, "cot": 16.0, "sinh": 20.0,
          "cosh": 22.0, "tanh": 22.0, "operatorname": 0.0, "mathcal": 0.0, "mathrm": 0.0, "text": 0.0}
_SPACES = {",": 1.7, ";": 2.8, ":": 2.2, "quad": 10.0, "qquad": 20.0, "!": -1.7, " ": 3.3}
_OPERATORS = {"cdot", "times", "le", "leq", "ge", "geq", "sim", "approx", "equiv", "neq", "pm", "mp", "to"}


class _Reader:
    def __init__(self, text: str):
        self.text, self.i = text, 0

    def group(self, scale: float) -> float:
        """Width of a braced group or a single token, the reader standing at it."""
        self._skip()
        if self.i < len(self.text) and self.text[self.i] == "{":
            self.i += 1
            w = self.run(scale, closing="}")
            return w
        return self.token(scale)

    def _skip(self):
        while self.i < len(self.text) and self.text[self.i] == " ":
            self.i += 1

    def run(self, scale: float, closing: str | None = None) -> float:
        total = 0.0
        while self.i < len(self.text):
            if closing and self.text[self.i] == closing:
                self.i += 1
                return total
            total += self.token(scale)
        return total

    def token(self, scale: float) -> float:
        text = self.text
        if self.i >= len(text):
            return 0.0
        ch = text[self.i]
        self.i += 1
        if ch == " ":
            return 0.0
        if ch == "{":
            return self.run(scale, closing="}")
        if ch in "^_":
            return self.group(scale * 0.72)
        if ch in "+-=<>":
            return _OPERATOR * scale
        if ch in "()[]|":
            return _PAREN * scale
        if ch in ",;.!'":
            return _SMALL * scale
        if ch == "&":
            return 0.0
        if ch.isdigit():
            return _DIGIT * scale
        if ch != "\\":
            return (_UPPER if ch.isupper() else _LETTER) * scale
        match = re.match(r"[A-Za-z]+|.", text[self.i:])
        if match is None:
            return 0.0
        name = match.group(0)
        self.i += len(name)
        if name in ("frac", "dfrac", "tfrac"):
            inner = scale if scale == 1.0 else scale * 0.72
            numerator = self.group(inner)
            denominator = self.group(inner)
            return max(numerator, denominator) + 2.0 * scale
        if name == "sqrt":
            self._skip()
            if self.i < len(text) and text[self.i] == "[":
                end = text.index("]", self.i)
                self.i = end + 1
            return self.group(scale) + 9.0 * scale
        if name in ("left", "right", "bigl", "bigr", "Bigl", "Bigr", "biggl", "biggr", "big", "Big"):
            self._skip()
            if self.i < len(text):
                if text[self.i] == "\\":
                    match = re.match(r"\\([A-Za-z]+|.)", text[self.i:])
                    self.i += len(match.group(0))
                else:
                    self.i += 1
            return (_PAREN + 1.5) * scale
        if name in _SPACES:
            return _SPACES[name] * scale
        if name in _OPERATORS:
            return _OPERATOR * scale
        if name in ("label", "notag", "nonumber"):
            if name == "label":
                self.group(0.0)
            return 0.0
        if name in _NAMED:
            width = _NAMED[name] * scale
            if name in ("operatorname", "mathrm", "text"):
                return width + self.group(scale) * 0.95
            if name == "mathcal":
                return self.group(scale) * 1.3
            return width + 2.0 * scale
        if name in ("displaystyle", "limits", "nolimits"):
            return 0.0
        if len(name) == 1:         # \{ \} \, handled above; other symbols
            return _LETTER * scale
        return 6.5 * scale          # a Greek letter or another symbol


def width(latex: str) -> float:
    """Estimated printed width of a display formula, in points."""
    return _Reader(latex).run(1.0)


# -- breaking -------------------------------------------------------------------------------------------------
def _signed_terms(expr, printer):
    """The terms of a sum in display order, each as (sign, LaTeX of its magnitude, the term)."""
    out = []
    for k, term in enumerate(printer._as_ordered_terms(expr)):
        sign = "+"
        if term.could_extract_minus_sign():
            sign, term = "-", -term
        body = printer.doprint(term)
        if printer._needs_add_brackets(term):
            body = rf"\left({body}\right)"
        out.append((sign if k or sign == "-" else "", body, term))
    return out


def _wrapped(expr, printer, budget, opening=r"\Bigl(", closing=r"\Bigr)"):
    """A sum broken over lines inside big brackets (one line when it fits)."""
    inner = _break_sum(expr, printer, budget - 2 * _PAREN) if width(printer.doprint(expr)) > budget else None
    if inner is None:
        inner = [printer.doprint(expr)]
    inner[0] = opening + inner[0]
    inner[-1] = inner[-1] + closing
    return inner


def _open_product(term, printer, budget):
    r"""A product too wide for a line over several lines: its small factors as one fraction in front, each wide
    sum in the numerator broken inside big brackets, each wide sum in the denominator on lines of its own as
    ``\times\Bigl[d_1 + ...\Bigr]^{-p}``.  None when no factor is a wide sum."""
    small = {True: [], False: []}     # numerator factors (True) and denominator factors (False)
    wide = {True: [], False: []}
    for base, power in sp.Mul(term).as_powers_dict().items():
        upper = not (power.is_number and power < 0)
        power = power if upper else -power
        if isinstance(base, sp.Add) and power.is_Integer and width(printer.doprint(base)) > budget / 3:
            wide[upper].append((base, power))
        else:
            small[upper].append(base ** power)
    if not wide[True] and not wide[False]:
        return None
    top, bottom = sp.Mul(*small[True]), sp.Mul(*small[False])
    prefix = printer.doprint(top / bottom) if (top, bottom) != (1, 1) else ""
    if isinstance(top / bottom, sp.Add):
        prefix = rf"\left({prefix}\right)"
    lines: list[str] = []
    for base, power in wide[True]:
        closing = r"\Bigr)" + (f"^{{{printer.doprint(power)}}}" if power != 1 else "")
        lines += _wrapped(base, printer, budget - (width(prefix) if not lines else 0.0), r"\Bigl(", closing)
    if lines:
        lines[0] = prefix + lines[0]
    elif prefix:
        lines = [prefix]
    for base, power in wide[False]:
        lines += _wrapped(base, printer, budget - 30.0, r"\times\Bigl[", rf"\Bigr]^{{-{printer.doprint(power)}}}")
    return lines


def _break_sum(expr, printer, budget):
    """Lines (LaTeX fragments, the later ones starting with their sign) of a sum, or None."""
    if not isinstance(expr, sp.Add):
        return _open_product(expr, printer, budget) if isinstance(expr, (sp.Mul, sp.Pow)) else None
    lines: list[str] = []
    current = ""
    for sign, body, term in _signed_terms(expr, printer):
        piece = (f" {sign} " if sign else "") + body
        if current and width(current + piece) > budget:
            lines.append(current)
            current = ""
        if not current and width(piece) > budget and isinstance(term, (sp.Mul, sp.Pow)):
            opened = _open_product(term, printer, budget - 2 * _OPERATOR)
            if opened is not None:
                opened[0] = (f"{sign} " if sign else "") + opened[0]
                lines.extend(opened[:-1])
                current = opened[-1]
                continue
        current += piece
    if current:
        lines.append(current)
    return lines


def display_lines(expr, lhs_width: float = 0.0, variables=(), budget: float = LINE_WIDTH_PT) -> list[str]:
    """The right-hand side as one or more lines of LaTeX, each within ``budget`` points where the form allows."""
    printer = _Printer(variables, long_frac_ratio=3)
    whole = printer.doprint(expr)
    if width(whole) + lhs_width <= budget:
        return [whole]
    lines = _break_sum(expr, printer, budget - lhs_width)
    if lines is None or len(lines) < 2:
        return [whole]
    return lines


# -- named radicals -------------------------------------------------------------------------------------------
def _is_radical(node) -> bool:
    return (isinstance(node, sp.Pow) and node.exp.is_Rational and node.exp.q == 2 and not node.base.is_Number)


def with_named_radicals(expr, registry: dict, size_limit: int = 3000):
    """(form, names): ``expr`` rewritten with each square root named, names as [(symbol, sqrt(base))].

    ``registry`` (base -> symbol) is shared by one document, so a root keeps its name throughout; new roots
    are added to it.  Returns (expr, []) when there is nothing to name or the expression is too large to
    cancel quickly (``size_limit`` operations: the rewriting is for display and must never hold up a
    derivation)."""
    if not isinstance(expr, sp.Expr) or sp.count_ops(expr) > size_limit:
        return expr, []
    # roots of sums only: a name for sqrt(R) would be longer than what it names
    bases = sorted({node.base for node in expr.atoms(sp.Pow) if _is_radical(node) and isinstance(node.base, sp.Add)},
                   key=sp.default_sort_key)
    if not bases:
        return expr, []
    for base in bases:
        if base not in registry:
            registry[base] = sp.Symbol(_RADICAL_NAME.format(len(registry) + 1), positive=True)
    symbols = {b: registry[b] for b in bases}

    def rename(node):
        whole, odd = divmod(int(node.exp * 2), 2)
        return node.base ** whole * symbols[node.base] ** odd

    renamed = expr.replace(lambda node: _is_radical(node) and node.base in symbols, rename)
    numerator, denominator = sp.fraction(sp.cancel(sp.together(renamed)))
    form = sp.factor(_reduce(numerator, symbols)) / sp.factor(_reduce(denominator, symbols))
    used = [(symbols[b], sp.sqrt(b)) for b in bases if symbols[b] in form.free_symbols]
    return form, used


def with_eliminated_root(expr, registry: dict, values: dict, size_limit: int = 20000):
    """(form, names): ``expr`` with its one square root of a sum of parameters named after the sum normalised to
    its dominant term, S = sqrt(1 - 2M/R) for sqrt(R - 2M), and a parameter in which that sum is linear
    eliminated through S (M = R (1 - S^2)/2), so that the rest is a rational function of S and the other
    symbols, cancelled and factored. For the coefficients of a metric built from such a root (the interior of a
    constant-density star), the thousand-term forms as computed collapse to a few lines.

    Exact where S is the principal root; accepted only if ``form`` with S put back agrees with ``expr`` at 30
    digits at the spec's values (and at sample values of the other symbols), else (expr, [])."""
    if not isinstance(expr, sp.Expr) or not values or sp.count_ops(expr) > size_limit:
        return expr, []
    bases = {node.base for node in expr.atoms(sp.Pow) if _is_radical(node) and isinstance(node.base, sp.Add)}
    if len(bases) != 1:
        return expr, []
    base = bases.pop()
    parameters = set(values)
    if not base.free_symbols <= parameters or not base.is_polynomial(*base.free_symbols):
        return expr, []
    lead, ratio = _normalised(base, values)
    lead_value = _number_at(lead, values)
    if lead == 1 or lead_value is None or lead_value <= 0:
        return expr, []
    symbol = registry.get(ratio) or sp.Symbol(_RADICAL_NAME.format(len(registry) + 1), positive=True)
    numerator, denominator = sp.fraction(sp.together(ratio))
    eliminated = None
    for parameter in sorted(base.free_symbols, key=sp.default_sort_key):
        if sp.degree(numerator, parameter) == 1 and not denominator.has(parameter):
            eliminated = (parameter, sp.solve(sp.Eq(ratio, symbol ** 2), parameter)[0])
            break
    if eliminated is None:
        return expr, []

    def rename(node):
        whole, odd = divmod(int(node.exp * 2), 2)
        return node.base ** whole * (sp.sqrt(lead) * symbol) ** odd

    renamed = expr.replace(lambda node: _is_radical(node) and node.base == base, rename)
    substituted = sp.powsimp(sp.together(renamed.subs(*eliminated)), force=True)
    if any(_is_radical(node) for node in substituted.atoms(sp.Pow)):
        return expr, []
    others = sorted(expr.free_symbols - parameters, key=sp.default_sort_key)
    form = _collected(sp.factor(sp.cancel(substituted)), others)
    points = [{s: sp.Rational(7 + 3 * k + j, 10) for j, s in enumerate(others)} for k in range(2)]
    if not vanishes(form.subs(symbol, sp.sqrt(ratio)) - expr, values, points, simplify=False):
        return expr, []
    registry[ratio] = symbol     # the same name as sqrt(1 - 2M/R) written so elsewhere
    return form, [(symbol, sp.sqrt(ratio))]


def _collected(expr, symbols):
    """A factored ratio with its numerator by powers of ``symbols`` (l, omega, r), each coefficient factored;
    l^2 and l with equal coefficients as l (l + 1)."""
    numerator, denominator = sp.fraction(expr)
    if not symbols:
        return expr
    numerator = sp.expand(numerator)
    keys, back = list(symbols), {}
    for symbol in symbols:
        if symbol.name == "l" and numerator.is_polynomial(symbol) and sp.degree(numerator, symbol) == 2:
            coefficients = sp.Poly(numerator, symbol).all_coeffs()
            if sp.expand(coefficients[0] - coefficients[1]) == 0:
                eigenvalue = sp.Dummy("lambda")
                numerator = sp.expand(coefficients[0] * eigenvalue + coefficients[2])
                keys[keys.index(symbol)] = eigenvalue
                back[eigenvalue] = sp.Mul(symbol, symbol + 1, evaluate=False)
    numerator = sp.collect(numerator, keys, func=sp.factor)
    return numerator.subs(back) / denominator


def collected(expr, values, size_limit: int = 3000):
    """``expr`` (a rational function) as one factored denominator under a numerator collected in the symbols
    without values (l, omega, the coordinates), each coefficient factored, or None."""
    if not isinstance(expr, sp.Expr) or sp.count_ops(expr) > size_limit or not expr.free_symbols:
        return None
    if not expr.is_rational_function(*sorted(expr.free_symbols, key=sp.default_sort_key)):
        return None
    others = sorted(expr.free_symbols - set(values), key=sp.default_sort_key)
    return _collected(sp.factor(sp.cancel(expr)), others) if others else None


def factored(expr, size_limit: int = 3000):
    """``expr`` as one factored ratio when it is a rational function small enough to cancel quickly, else None."""
    if not isinstance(expr, sp.Expr) or sp.count_ops(expr) > size_limit or not expr.free_symbols:
        return None
    if not expr.is_rational_function(*sorted(expr.free_symbols, key=sp.default_sort_key)):
        return None
    return sp.factor(sp.cancel(expr))


def _reduce(polynomial, symbols):
    """Powers of each named root above the first replaced by its square's base (exact)."""
    out = sp.expand(polynomial)
    for base, symbol in symbols.items():
        if out.has(symbol):
            out = sp.expand(out.replace(lambda node, s=symbol: isinstance(node, sp.Pow) and node.base == s
                                        and node.exp.is_Integer and node.exp > 1,
                                        lambda node, b=base, s=symbol: b ** (int(node.exp) // 2)
                                        * s ** (int(node.exp) % 2)))
    return out


# -- one root of a ratio ----------------------------------------------------------------------------------------
def _number_at(expr, values):
    """``expr`` at the parameters' values to 30 digits, or None where it is not a real number."""
    try:
        value = sp.N(sp.S(expr).subs(exact_values(values)), 30)
    except (TypeError, ValueError):
        return None
    return value if value.is_number and value.is_real else None


def _normalised(factor, values):
    """A sum written as its dominant term (largest at the spec's values) times 1 + the rest over it:
    R - 2M -> R (1 - 2M/R), L^2 - R^2 -> L^2 (1 - R^2/L^2).  Returns (monomial, normalised sum)."""
    terms = sp.Add.make_args(sp.expand(factor))
    sizes = [_number_at(t, values) for t in terms]
    if len(terms) < 2 or any(s is None for s in sizes):
        return sp.S(1), factor
    lead = terms[max(range(len(terms)), key=lambda k: abs(sizes[k]))]
    return lead, sp.expand(factor / lead)


def one_root(expr, values):
    """A product of square roots and powers as one root of a ratio of sums normalised to their dominant terms:
    L sqrt(-(2M - R)/(L - R))/(sqrt(R) sqrt(L + R)) -> sqrt((1 - 2M/R)/(1 - R^2/L^2)).  Exact where ``expr`` is
    real (it is sign(expr) sqrt(expr^2)); accepted only if it agrees with ``expr`` at 30 digits at the spec's
    parameter values (``values``; geometry.checks.vanishes), else None.  Sums of several terms are left alone (None)."""
    if not isinstance(expr, sp.Mul) or not values or not any(_is_radical(f) for f in sp.Mul.make_args(expr)):
        return None
    here = _number_at(expr, values)
    if here is None or here == 0:
        return None
    square = sp.cancel(sp.together(expr ** 2))
    if any(_is_radical(node) for node in square.atoms(sp.Pow)):
        return None
    numerator, denominator = sp.fraction(square)
    parts = []
    for side in (numerator, denominator):
        monomial, sums = sp.S(1), sp.S(1)
        for base, power in sp.Mul(sp.factor(side)).as_powers_dict().items():
            if isinstance(base, sp.Add):
                sums = sums * base ** power
            else:
                monomial = monomial * base ** power
        lead, rest = _normalised(sums, values) if sums != 1 else (sp.S(1), sp.S(1))
        parts.append((monomial * lead, rest))
    (m_num, s_num), (m_den, s_den) = parts
    ratio = s_num if s_den == 1 else sp.Mul(s_num, sp.Pow(s_den, -1, evaluate=False), evaluate=False)
    root = sp.Pow(ratio, sp.Rational(1, 2), evaluate=False) if ratio != 1 else sp.S(1)
    prefactor = sp.sign(here) * sp.sqrt(sp.cancel(m_num / m_den))
    form = root if prefactor == 1 else (-root if prefactor == -1 else sp.Mul(prefactor, root, evaluate=False))
    return form if vanishes(form - expr, values, simplify=False) else None


def merged_roots(expr, values):
    """Every product of square roots in ``expr`` as one root of the expanded product: M + sqrt(M - Q) sqrt(M + Q)
    -> M + sqrt(M^2 - Q^2).  Accepted only where it agrees with ``expr`` at 30 digits at the spec's values (the
    roots of negative numbers would not), else ``expr`` unchanged."""
    def merge(node):
        if not isinstance(node, sp.Mul):
            return node
        roots = [f for f in node.args if isinstance(f, sp.Pow) and f.exp == sp.Rational(1, 2)]
        if len(roots) < 2:
            return node
        rest = sp.Mul(*[f for f in node.args if f not in roots])
        return rest * sp.sqrt(sp.expand(sp.Mul(*[f.base for f in roots])))
    form = expr.replace(lambda node: isinstance(node, sp.Mul), merge)
    if form == expr or not values:
        return expr
    return form if vanishes(form - expr, values, simplify=False) else expr
