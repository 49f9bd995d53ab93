"""derive's own safe expression parser: a whitelist over Python's ``ast``.

Spec text never reaches ``eval``, ``exec``, ``sympify`` or ``parse_expr``.  The text is parsed by
``ast.parse(mode="eval")`` (which only builds a syntax tree and runs nothing) and the tree is walked by
:class:`ExpressionParser`, which accepts exactly

* numbers (integers of at most 100 digits, finite decimals, taken as exact rationals),
* names the caller declares (parameters, coordinates, definitions, differentials, ...),
* the constants ``pi``, ``E``, ``I``,
* ``+ - * / **``, unary ``-`` and ``+``, parentheses,
* calls of a fixed list of functions (and of functions the spec declares) with positional arguments,

and for relations (``where`` keys) also the comparisons ``< <= > >=`` and ``and``.  Everything else
(attributes, subscripts, lambdas, strings, keyword arguments, undeclared names, dunder names) is refused with
an :class:`~derive.errors.ExpressionError` that points at the offending part.

The cost of hostile input is bounded before sympy sees anything: the text length, the nesting depth, the
number of nodes, the size of integer literals and of numeric powers (``10**10**10`` is refused, not computed).
"""

from __future__ import annotations

import ast
import math
from dataclasses import dataclass, field
from typing import Callable, Mapping

import sympy as sp

from derive.errors import ExpressionError

MAX_LENGTH = 20_000
MAX_DEPTH = 80
MAX_NODES = 20_000
MAX_INTEGER_DIGITS = 100
MAX_EXPONENT = 256          # largest |integer exponent| allowed on a symbolic base
MAX_RESULT_DIGITS = 2_000   # largest number of digits a numeric power may produce

#: Functions a spec may call, with the number of arguments each takes.
FUNCTIONS: dict[str, tuple[Callable, int]] = {
    "sin": (sp.sin, 1), "cos": (sp.cos, 1), "tan": (sp.tan, 1),
    "cot": (sp.cot, 1), "sec": (sp.sec, 1), "csc": (sp.csc, 1),
    "asin": (sp.asin, 1), "acos": (sp.acos, 1), "atan": (sp.atan, 1), "atan2": (sp.atan2, 2),
    "sinh": (sp.sinh, 1), "cosh": (sp.cosh, 1), "tanh": (sp.tanh, 1), "coth": (sp.coth, 1),
    "sech": (sp.sech, 1), "csch": (sp.csch, 1),
    "asinh": (sp.asinh, 1), "acosh": (sp.acosh, 1), "atanh": (sp.atanh, 1),
    "exp": (sp.exp, 1), "log": (sp.log, 1), "sqrt": (sp.sqrt, 1),
    "Abs": (sp.Abs, 1), "sign": (sp.sign, 1), "Heaviside": (sp.Heaviside, 1),
    "erf": (sp.erf, 1), "erfc": (sp.erfc, 1),
}

#: Named constants a spec may use.
CONSTANTS: dict[str, sp.Expr] = {"pi": sp.pi, "E": sp.E, "I": sp.I}

_BINARY = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}
_COMPARE = {ast.Lt: sp.StrictLessThan, ast.LtE: sp.LessThan,
            ast.Gt: sp.StrictGreaterThan, ast.GtE: sp.GreaterThan}


def _describe(node: ast.AST) -> str:
    names = {
        ast.Attribute: "attribute access", ast.Subscript: "subscripts", ast.Lambda: "lambda",
        ast.Call: "this call", ast.Starred: "starred arguments", ast.JoinedStr: "f-strings",
        ast.List: "lists", ast.Tuple: "tuples", ast.Dict: "dicts", ast.Set: "sets",
        ast.ListComp: "comprehensions", ast.GeneratorExp: "generators", ast.IfExp: "conditional expressions",
        ast.NamedExpr: "assignment expressions", ast.Await: "await", ast.Yield: "yield",
        ast.BoolOp: "boolean operators", ast.Compare: "comparisons",
    }
    for kind, text in names.items():
        if isinstance(node, kind):
            return text
    return type(node).__name__


@dataclass
class ExpressionParser:
    """Parse spec text into sympy expressions over a fixed, declared vocabulary.

    Parameters
    ----------
    symbols : mapping of str to sympy.Expr
        Every name the text may use and what it stands for (a Symbol, or any expression).
    functions : mapping of str to callable
        Extra functions the text may call (for example undefined functions ``f(r)`` a spec declares).
        Each is called with sympy arguments.
    where : str
        Where else an undeclared name may be declared in this context (added to the message, ``{name}``
        replaced by the name), e.g. a region's ``unknowns``.
    """

    symbols: Mapping[str, sp.Expr] = field(default_factory=dict)
    functions: Mapping[str, Callable] = field(default_factory=dict)
    where: str = ""

    # -- public entry points -------------------------------------------------------------------------
    def parse(self, text: str) -> sp.Expr:
        """Parse an arithmetic expression."""
        tree = self._tree(text)
        return self._Walker(self, text, relations=False).visit(tree.body, 0)

    def parse_relation(self, text: str):
        """Parse a condition such as ``"r > 2*M"`` or ``"0 <= r < R and M > 0"`` into a sympy Boolean."""
        tree = self._tree(text)
        return self._Walker(self, text, relations=True).visit(tree.body, 0)

    def parse_equation(self, text: str) -> tuple[sp.Expr, sp.Expr]:
        """Parse ``"lhs = rhs"`` (a single ``=``) into the pair (lhs, rhs)."""
        if not isinstance(text, str):
            raise ExpressionError("expected a string 'lhs = rhs'", text=str(text))
        pieces = _split_single_equals(text)
        if pieces is None:
            raise ExpressionError("expected exactly one '=' separating two sides, as in 'r = R'", text=text)
        left, right = pieces
        return self.parse(left), self.parse(right)

    # -- internals --------------------------------------------------------------------------------
    def _tree(self, text: str) -> ast.Expression:
        if not isinstance(text, str):
            raise ExpressionError(f"expected an expression as a string, got {type(text).__name__}",
                                  text=repr(text)[:100])
        if len(text) > MAX_LENGTH:
            raise ExpressionError(f"expression is {len(text)} characters long; the limit is {MAX_LENGTH}",
                                  text=text[:60] + "...")
        if not text.strip():
            raise ExpressionError("empty expression", text=text)
        if "\x00" in text:
            raise ExpressionError("NUL character in expression", text=text.replace("\x00", "\\0"))
        for column, ch in enumerate(text):
            if not ch.isascii():
                # Python reads identifiers in NFKC form, so a look-alike such as a full-width letter would
                # silently become another name: every non-ASCII character is refused, with what it resembles.
                import unicodedata

                plain = unicodedata.normalize("NFKC", ch)
                looks = f"; it looks like {plain!r}: type that instead" if plain.isascii() and plain != ch else ""
                raise ExpressionError(f"character {ch!r} (U+{ord(ch):04X}) is not ASCII{looks}", text=text,
                                      column=column, fragment=ch)
        depth, deepest = 0, 0
        for ch in text:
            if ch in "([{":
                depth += 1
                deepest = max(deepest, depth)
            elif ch in ")]}":
                depth -= 1
        if deepest > MAX_DEPTH:
            raise ExpressionError(f"brackets nested {deepest} deep; the limit is {MAX_DEPTH}", text=text)
        try:
            tree = ast.parse(text.strip(), mode="eval")
        except SyntaxError as exc:
            col = (exc.offset or 1) - 1
            frag = text.strip()[max(col - 5, 0):col + 5] if exc.offset else None
            raise ExpressionError(f"not a valid expression ({exc.msg})", text=text, column=col,
                                  fragment=frag) from None
        except (RecursionError, MemoryError, ValueError) as exc:
            raise ExpressionError(f"expression too complex to parse ({type(exc).__name__})",
                                  text=text[:60]) from None
        count = sum(1 for _ in ast.walk(tree))
        if count > MAX_NODES:
            raise ExpressionError(f"expression has {count} syntax nodes; the limit is {MAX_NODES}",
                                  text=text[:60] + "...")
        return tree

    class _Walker:
        def __init__(self, parser: "ExpressionParser", text: str, relations: bool):
            self.parser = parser
            self.text = text.strip()
            self.relations = relations

        def fail(self, problem: str, node: ast.AST):
            col = getattr(node, "col_offset", None)
            end = getattr(node, "end_col_offset", None)
            fragment = self.text[col:end] if col is not None and end is not None else None
            raise ExpressionError(problem, text=self.text, column=col, fragment=fragment)

        def visit(self, node: ast.AST, depth: int):
            if depth > MAX_DEPTH:
                self.fail(f"expression nested more than {MAX_DEPTH} deep", node)
            if isinstance(node, ast.Constant):
                return self.constant(node)
            if isinstance(node, ast.Name):
                return self.name(node)
            if isinstance(node, ast.UnaryOp):
                if isinstance(node.op, ast.USub):
                    return -self.visit(node.operand, depth + 1)
                if isinstance(node.op, ast.UAdd):
                    return self.visit(node.operand, depth + 1)
                if isinstance(node.op, ast.Not):
                    self.fail("'not' is not allowed", node)
                self.fail("this unary operator is not allowed (only - and +)", node)
            if isinstance(node, ast.BinOp):
                return self.binary(node, depth)
            if isinstance(node, ast.Call):
                return self.call(node, depth)
            if self.relations and isinstance(node, ast.Compare):
                return self.compare(node, depth)
            if self.relations and isinstance(node, ast.BoolOp) and isinstance(node.op, ast.And):
                return sp.And(*[self.visit(v, depth + 1) for v in node.values])
            self.fail(f"{_describe(node)} not allowed in a spec expression", node)

        def constant(self, node: ast.Constant):
            value = node.value
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                self.fail(f"{type(value).__name__} literals are not allowed (only numbers)", node)
            if isinstance(value, int):
                if value.bit_length() > MAX_INTEGER_DIGITS * 3.33:
                    self.fail(f"integer literal longer than {MAX_INTEGER_DIGITS} digits", node)
                return sp.Integer(value)
            if not math.isfinite(value):
                self.fail("number literal is not finite", node)
            # repr gives the shortest decimal that round-trips; read it exactly as a rational.
            return sp.Rational(repr(value))

        def name(self, node: ast.Name):
            ident = node.id
            if ident.startswith("_"):
                self.fail("names starting with an underscore are not allowed", node)
            if ident in self.parser.symbols:
                return self.parser.symbols[ident]
            if ident in CONSTANTS:
                return CONSTANTS[ident]
            if ident in FUNCTIONS or ident in self.parser.functions:
                self.fail(f"'{ident}' is a function; call it with an argument", node)
            self.fail(f"undeclared name '{ident}' (declare it under [parameters], [coordinates], "
                      f"[definitions] or [functions]{self.parser.where.replace('{name}', ident)})", node)

        def binary(self, node: ast.BinOp, depth: int):
            op = _BINARY.get(type(node.op))
            if op is None:
                hint = "; for a power write ** (as in r**2)" if isinstance(node.op, ast.BitXor) else ""
                self.fail(f"this operator is not allowed (only + - * / **){hint}", node)
            left = self.visit(node.left, depth + 1)
            right = self.visit(node.right, depth + 1)
            if op == "+":
                return left + right
            if op == "-":
                return left - right
            if op == "*":
                return left * right
            if op == "/":
                if right == 0:
                    self.fail("division by zero", node)
                return left / right
            return self.power(left, right, node)

        def power(self, base, exponent, node):
            if exponent.is_Number:
                if abs(exponent) > MAX_EXPONENT:
                    self.fail(f"exponent {exponent} is larger than {MAX_EXPONENT}", node)
                if base.is_Number and base != 0:
                    digits = abs(float(exponent)) * abs(math.log10(abs(float(base))) if abs(base) != 1 else 0)
                    if not math.isfinite(digits) or digits > MAX_RESULT_DIGITS:
                        self.fail(f"numeric power too large (about {digits:.3g} digits)", node)
                if base == 0 and exponent.is_negative:
                    self.fail("zero to a negative power", node)
            elif base.is_Number and abs(base) > 1 and not exponent.free_symbols:
                # a numeric exponent that is not a plain number (for example pi or 10**(1/2)): bound it too
                try:
                    size = abs(float(exponent)) * math.log10(abs(float(base)))
                except (TypeError, ValueError):
                    size = math.inf
                if not math.isfinite(size) or size > MAX_RESULT_DIGITS:
                    self.fail("numeric power too large", node)
            return sp.Pow(base, exponent)

        def call(self, node: ast.Call, depth: int):
            if not isinstance(node.func, ast.Name):
                self.fail("only calls of named functions are allowed", node)
            ident = node.func.id
            if node.keywords:
                self.fail("keyword arguments are not allowed", node)
            if any(isinstance(a, ast.Starred) for a in node.args):
                self.fail("starred arguments are not allowed", node)
            if ident.startswith("_"):
                self.fail("names starting with an underscore are not allowed", node.func)
            args = [self.visit(a, depth + 1) for a in node.args]
            if ident in self.parser.functions:
                return self.parser.functions[ident](*args)
            if ident not in FUNCTIONS:
                self.fail(f"unknown function '{ident}' (allowed: {', '.join(sorted(FUNCTIONS))})", node.func)
            function, arity = FUNCTIONS[ident]
            if len(args) != arity:
                self.fail(f"'{ident}' takes {arity} argument{'s' if arity > 1 else ''}, got {len(args)}", node)
            return function(*args)

        def compare(self, node: ast.Compare, depth: int):
            terms = [self.visit(node.left, depth + 1)] + [self.visit(c, depth + 1) for c in node.comparators]
            relations = []
            for op, left, right in zip(node.ops, terms, terms[1:]):
                kind = _COMPARE.get(type(op))
                if kind is None:
                    self.fail("only the comparisons < <= > >= are allowed", node)
                relations.append(kind(left, right, evaluate=False))
            return sp.And(*relations) if len(relations) > 1 else relations[0]


def _split_single_equals(text: str) -> tuple[str, str] | None:
    """Split at the one '=' that is not part of '==', '<=', '>=' or '!='; None if there is not exactly one."""
    positions = []
    for i, ch in enumerate(text):
        if ch != "=":
            continue
        before = text[i - 1] if i > 0 else ""
        after = text[i + 1] if i + 1 < len(text) else ""
        if before in "=<>!" or after == "=":
            return None
        positions.append(i)
    if len(positions) != 1:
        return None
    i = positions[0]
    left, right = text[:i].strip(), text[i + 1:].strip()
    if not left or not right:
        return None
    return left, right


def is_identifier(name: str) -> bool:
    """True when ``name`` may be used as a spec symbol: a Python identifier, not a keyword, no underscore
    prefix, not a reserved constant or function name."""
    import keyword

    return (isinstance(name, str) and name.isidentifier() and name.isascii() and not keyword.iskeyword(name)
            and not name.startswith("_") and name not in CONSTANTS and name not in FUNCTIONS
            and len(name) <= 64)


# -- substituting definitions, with the parser's cost bounds applied to the result ------------------------
MAX_SUBSTITUTED_NODES = 50_000   # nodes of the result written out as a tree (shared parts counted each time)
MAX_SUBSTITUTED_DEPTH = 200


def substitute_bounded(expr, definitions):
    """``expr`` with ``definitions`` (symbol -> expression) substituted, refused when the result is too costly.

    Each text was bounded when it was parsed, but definitions compose: ``a = 10**100``, ``b = a**a`` or a
    tower of definitions that each double the size pass every bound on their own.  The substitution is
    therefore made without evaluation, the unevaluated result is measured (its size written out as a tree,
    its depth, every numeric power and every integer exponent on a symbolic base, with the same limits as
    the parser), and only then evaluated.  Raises :class:`~derive.errors.ExpressionError`.
    """
    if not definitions or not (getattr(expr, "free_symbols", set()) & set(definitions)):
        return expr
    with sp.evaluate(False):
        raw = expr.xreplace(definitions)
    _check_cost(raw)
    return _rebuild(raw)


def _check_cost(expr) -> None:
    sizes: dict = {}
    depths: dict = {}
    stack = [(expr, False)]
    while stack:
        node, done = stack.pop()
        if node in sizes:
            continue
        if not done:
            stack.append((node, True))
            stack.extend((a, False) for a in node.args if a not in sizes)
            continue
        sizes[node] = 1 + sum(sizes[a] for a in node.args)
        depths[node] = 1 + max((depths[a] for a in node.args), default=0)
        if sizes[node] > MAX_SUBSTITUTED_NODES:
            raise ExpressionError(f"with the definitions substituted the expression grows past "
                                  f"{MAX_SUBSTITUTED_NODES} terms; simplify the definitions")
        if depths[node] > MAX_SUBSTITUTED_DEPTH:
            raise ExpressionError(f"with the definitions substituted the expression is nested more than "
                                  f"{MAX_SUBSTITUTED_DEPTH} deep")
        if isinstance(node, sp.Pow):
            _check_power(node.args[0], node.args[1])
        elif isinstance(node, sp.Integer) and abs(int(node)).bit_length() > MAX_RESULT_DIGITS * 3.33:
            raise ExpressionError(f"an integer of more than {MAX_RESULT_DIGITS} digits")


def _numeric(value):
    """A low-precision mpmath value of a numeric expression whose parts were already bounded, or None."""
    import mpmath

    if value.free_symbols:
        return None
    try:
        with sp.evaluate(True):
            number = sp.N(value, 15)
        if not number.is_number:
            return None
        real, imag = number.as_real_imag()
        return mpmath.mpc(mpmath.mpf(str(sp.N(real, 15))), mpmath.mpf(str(sp.N(imag, 15))))
    except (TypeError, ValueError, ArithmeticError, RecursionError):
        return None


def _check_power(base, exponent) -> None:
    import mpmath

    exp_value = _numeric(exponent)
    if exp_value is None:
        return
    if base.free_symbols:
        if exp_value.imag == 0 and abs(exp_value.real) > MAX_EXPONENT:
            raise ExpressionError(f"with the definitions substituted an exponent is {mpmath.nstr(exp_value.real, 6)}; "
                                  f"the limit is {MAX_EXPONENT}")
        return
    base_value = _numeric(base)
    if base_value is None or base_value == 0:
        return
    digits = abs(exp_value) * abs(mpmath.log10(abs(base_value)))
    if not mpmath.isfinite(digits) or digits > MAX_RESULT_DIGITS:
        raise ExpressionError(f"with the definitions substituted a numeric power is too large (about "
                              f"{mpmath.nstr(digits, 3)} digits)")


def _rebuild(expr):
    """Evaluate an expression built without evaluation (children first; shared parts once)."""
    done: dict = {}
    stack = [(expr, False)]
    while stack:
        node, ready = stack.pop()
        if node in done:
            continue
        if not node.args:
            done[node] = node
            continue
        if not ready:
            stack.append((node, True))
            stack.extend((a, False) for a in node.args if a not in done)
            continue
        with sp.evaluate(True):
            done[node] = node.func(*[done[a] for a in node.args])
    return done[expr]
