"""Exact rational-function arithmetic for curvature: the structure-aware simplifier.

Curvature of a metric whose components are rational in the coordinates, the parameters and a few
transcendental atoms (``sin(theta)``, ``cos(theta)``, ``f(r)``, ``sqrt(...)``, ``exp(...)``) is computed in the
field of rational functions over the rationals, with every such atom as one more generator.  Sums and
products there are sparse-polynomial operations with a gcd after each step, so expressions never swell, and
zero is recognised exactly.  Derivatives are taken in the field by the chain rule, with the derivative of
each atom precomputed once (``d sin(theta)/d theta = cos(theta)``, ``d f(r)/dr = f'(r)``...).

The relations between atoms (``sin^2 + cos^2 = 1``, ``cosh^2 - sinh^2 = 1``) are applied as a normal form:
a numerator is reduced to at most linear order in one member of each pair, so a quantity that vanishes only
through the identity is recognised as zero.  For display, both directions of each relation are tried and the
shorter form kept.

If a metric holds anything the field cannot represent, :class:`RationalEngine` raises
:class:`Unrepresentable` and the caller falls back to expression-level arithmetic.
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy as sp
from sympy.polys.domains import QQ
from sympy.polys.fields import field as make_field

CLOSURE_DEPTH = 3        # derivatives of atoms kept as generators (Riemann needs second derivatives)
MAX_ATOMS = 40
FACTOR_MAX_TERMS = 400   # polynomials larger than this are shown expanded, not factored


class Unrepresentable(Exception):
    """The expressions hold something the rational engine cannot represent."""


def _split_power(expr: sp.Pow):
    """Write b**(p/q) as (b**(1/q))**p so that sqrt(x) and 1/sqrt(x) share the atom sqrt(x)."""
    base, exponent = expr.as_base_exp()
    if exponent.is_Integer:
        return None
    if exponent.is_Rational:
        return sp.Pow(base, sp.Rational(1, exponent.q), evaluate=False), int(exponent.p)
    return None


def find_atoms(expr: sp.Expr, atoms: set) -> None:
    """Collect the non-rational building blocks of ``expr`` into ``atoms``."""
    if expr.is_Symbol or expr.is_Rational:
        return
    if expr.is_Add or expr.is_Mul:
        for arg in expr.args:
            find_atoms(arg, atoms)
        return
    if expr.is_Pow:
        base, exponent = expr.as_base_exp()
        if exponent.is_Integer:
            find_atoms(base, atoms)
            return
        split = _split_power(expr)
        if split is not None:
            atoms.add(split[0])
            find_atoms(base, atoms)
            return
    if expr.is_Float:
        raise Unrepresentable("floating-point number in a symbolic expression")
    atoms.add(expr)
    for arg in getattr(expr, "args", ()):
        if isinstance(arg, sp.Expr) and not isinstance(expr, (sp.Derivative, sp.core.function.AppliedUndef)):
            find_atoms(arg, atoms)


_PAIRS = ((sp.sin, sp.cos, 1), (sp.sinh, sp.cosh, -1))   # s^2 + sign*c^2 ... see _relation


@dataclass(frozen=True)
class _Relation:
    """first**2 = constant - sign * second**2, i.e. sin^2 = 1 - cos^2 or sinh^2 = cosh^2 - 1."""

    first: int    # generator index of sin / sinh
    second: int   # generator index of cos / cosh
    kind: int     # 1 for (sin, cos), -1 for (sinh, cosh)


class RationalEngine:
    """The field Q(coordinates, parameters, atoms) with derivatives along the coordinates.

    Parameters
    ----------
    expressions : iterable of sympy.Expr
        Everything that will be converted (the metric components).
    coordinates : sequence of sympy.Symbol
        Derivatives are taken along these.
    """

    def __init__(self, expressions, coordinates):
        self.coordinates = tuple(coordinates)
        atoms: set = set()
        for expr in expressions:
            find_atoms(sp.S(expr), atoms)
        atoms = self._close(atoms)
        if len(atoms) > MAX_ATOMS:
            raise Unrepresentable(f"{len(atoms)} transcendental atoms")
        ordered = sorted(atoms, key=sp.default_sort_key)
        self.atom_symbols = {atom: sp.Dummy(f"atom{i}") for i, atom in enumerate(ordered)}
        self.symbol_atoms = {s: a for a, s in self.atom_symbols.items()}
        free = set()
        for expr in list(expressions) + ordered:
            free |= sp.S(expr).free_symbols
        free -= set(self.atom_symbols.values())
        params = sorted(free - set(self.coordinates), key=sp.default_sort_key)
        self.symbols = list(self.coordinates) + params + [self.atom_symbols[a] for a in ordered]
        self.field, *self.gens = make_field(self.symbols, QQ)
        self.ring = self.field.ring
        self.index = {s: i for i, s in enumerate(self.symbols)}
        self.zero = self.field.zero
        self.one = self.field.one
        self.atom_derivatives: dict[str, list] = {str(x): [] for x in self.coordinates}
        self.missing_derivatives: dict[str, list] = {str(x): [] for x in self.coordinates}
        for atom in ordered:
            i = self.index[self.atom_symbols[atom]]
            for x in self.coordinates:
                d = sp.diff(atom, x)
                if d == 0:
                    continue
                try:
                    self.atom_derivatives[str(x)].append((i, self.to_field(d)))
                except Unrepresentable:
                    # only a problem if this derivative is ever needed (see diff)
                    self.missing_derivatives[str(x)].append((i, atom))
        self.relations = self._relations(ordered)

    # -- construction --------------------------------------------------------------------------------
    def _close(self, atoms: set) -> set:
        frontier = set(atoms)
        for _ in range(CLOSURE_DEPTH):
            new = set()
            for atom in frontier:
                for x in self.coordinates:
                    found: set = set()
                    find_atoms(sp.diff(atom, x), found)
                    new |= found - atoms
            atoms |= new
            frontier = new
            if not frontier or len(atoms) > MAX_ATOMS:
                break
        return atoms

    def _relations(self, ordered):
        relations = []
        for first_kind, second_kind, kind in _PAIRS:
            for atom in ordered:
                if isinstance(atom, first_kind):
                    partner = second_kind(*atom.args)
                    if partner in self.atom_symbols:
                        relations.append(_Relation(self.index[self.atom_symbols[atom]],
                                                   self.index[self.atom_symbols[partner]], kind))
        return relations

    # -- conversion ----------------------------------------------------------------------------------
    def to_field(self, expr):
        """Convert a sympy expression into the field."""
        expr = sp.S(expr)
        try:
            return self._convert(expr)
        except Unrepresentable:
            raise
        except Exception as exc:   # CoercionFailed and friends from sympy.polys
            raise Unrepresentable(f"{expr}: {exc}") from None

    def _convert(self, expr):
        if expr in self.atom_symbols:
            return self.gens[self.index[self.atom_symbols[expr]]]
        if expr.is_Symbol:
            if expr in self.index:
                return self.gens[self.index[expr]]
            raise Unrepresentable(f"unknown symbol {expr}")
        if expr.is_Rational:
            return self.field(QQ(int(expr.p), int(expr.q)))
        if expr.is_Add:
            total = self.zero
            for arg in expr.args:
                total += self._convert(arg)
            return total
        if expr.is_Mul:
            total = self.one
            for arg in expr.args:
                total *= self._convert(arg)
            return total
        if expr.is_Pow:
            base, exponent = expr.as_base_exp()
            if exponent.is_Integer:
                return self._convert(base) ** int(exponent)
            split = _split_power(expr)
            if split is not None and split[0] in self.atom_symbols:
                return self.gens[self.index[self.atom_symbols[split[0]]]] ** split[1]
        raise Unrepresentable(f"cannot represent {expr}")

    def to_expr(self, element) -> sp.Expr:
        """Convert a field element back to a sympy expression (atoms restored), without simplifying."""
        return element.as_expr().xreplace(self.symbol_atoms)

    # -- calculus ------------------------------------------------------------------------------------
    def diff(self, element, x):
        """Total derivative of a field element along coordinate ``x`` (chain rule through the atoms)."""
        result = element.diff(self.gens[self.index[x]])
        numer, denom = element.numer, element.denom
        for i, atom in self.missing_derivatives[str(x)]:
            if numer.degree(i) > 0 or denom.degree(i) > 0:
                raise Unrepresentable(f"derivative of {atom} along {x} is outside the field")
        for i, derivative in self.atom_derivatives[str(x)]:
            if numer.degree(i) > 0 or denom.degree(i) > 0:
                result += element.diff(self.gens[i]) * derivative
        return result

    # -- relations and canonical form ------------------------------------------------------------------
    def _reduce_poly(self, poly, eliminate_first: bool):
        """Reduce ``poly`` modulo the atom relations, removing squares of one member of each pair."""
        for rel in self.relations:
            target, other = (rel.first, rel.second) if eliminate_first else (rel.second, rel.first)
            if poly.degree(self.ring.gens[target]) < 2:
                continue
            gen_other = self.ring.gens[other]
            # sin^2 = 1 - cos^2, cos^2 = 1 - sin^2; sinh^2 = cosh^2 - 1, cosh^2 = 1 + sinh^2
            if rel.kind == 1:
                square = 1 - gen_other ** 2
            else:
                square = gen_other ** 2 - 1 if eliminate_first else gen_other ** 2 + 1
            powers = {0: self.ring.one}
            result = self.ring.zero
            for monom, coeff in poly.terms():
                k = monom[target]
                reduced = list(monom)
                reduced[target] = k % 2
                half = k // 2
                if half not in powers:
                    powers[half] = square ** half
                result += self.ring({tuple(reduced): coeff}) * powers[half]
            poly = result
        return poly

    def reduce(self, element, eliminate_first: bool = True):
        """Normal form modulo the relations (sin^2 -> 1 - cos^2 by default)."""
        if not self.relations:
            return element
        numer = self._reduce_poly(element.numer, eliminate_first)
        denom = self._reduce_poly(element.denom, eliminate_first)
        return self.field.new(numer, denom)

    def canonical(self, element) -> sp.Expr:
        """A readable canonical sympy form: the shorter reduction, numerator and denominator factored."""
        candidates = [element]
        if self.relations:
            candidates = [self.reduce(element, True), self.reduce(element, False)]
        best = min(candidates, key=lambda e: (len(e.numer.terms()) + len(e.denom.terms())))
        if best.numer == 0:
            return sp.Integer(0)
        expr = self._factored(best.numer) / self._factored(best.denom)
        return expr.xreplace(self.symbol_atoms)

    def _factored(self, poly) -> sp.Expr:
        if len(poly.terms()) > FACTOR_MAX_TERMS or poly.is_ground:
            return poly.as_expr()
        coeff, factors = poly.factor_list()
        expr = poly.ring.domain.to_sympy(coeff)
        for factor, power in factors:
            content, primitive = factor.primitive()
            if primitive.LC < 0:
                content, primitive = -content, -primitive
            expr *= poly.ring.domain.to_sympy(content) ** power * primitive.as_expr() ** power
        return expr
