"""Modes across a thin shell, from the weak (distributional) form of the Klein-Gordon equation.

Multiply (Box - mu^2 - xi R) phi = 0 by sqrt(-g) and integrate in r across the shell at r = R.  Only two terms
survive as the interval shrinks (docs/conventions.md section 5):

* the radial flux term d_r(sqrt(-g) g^rr d_r psi) integrates to the jump of P psi_r, P = W h, W = sqrt(f/h) r^n;
* the delta part of the Ricci scalar, R = -2 [K] delta(l), with delta(l) = sqrt(h) delta(r - R), gives
  -2 xi [K] w psi with w = W sqrt(h) = sqrt(f) r^n (continuous when f is).

Integrating in the direction of increasing r, with s = +1 when the second region of ``between`` lies at
larger r: psi is continuous and (P psi_r)(second) = (P psi_r)(first) - 2 s xi [K] w psi.
(Orientation: [K] is unchanged when the normal and the sides are both swapped, so -2[K]delta is too.)
With psi = r^{-n/2} u and u_r = u'/F (u' = du/dr*), this is solved by sympy for u' on the second side, giving
the transfer matrix on the column (u, du/dr*).  docs/conventions.md's [d psi/dl] = -2 xi [K] psi is the check.
"""

from __future__ import annotations

from functools import cached_property

import sympy as sp

from derive.errors import JunctionError
from derive.geometry.checks import simplify_checked, vanishes


class Matching:
    """The transfer matrix across one interface, from ``between[0]`` to ``between[1]``."""

    def __init__(self, problem, shell):
        self.problem = problem
        self.shell = shell
        self.between = shell.interface.between

    def _side(self, name):
        return self.problem.regions[name]

    @cached_property
    def pieces(self) -> dict:
        """P, w, F and the orientation on each side at the shell."""
        first, second = (self._side(n) for n in self.between)
        if first.r != self.shell.coordinate:
            raise JunctionError(f"the interface {self.shell.interface.text} is not at constant {first.r}; modes are "
                                "matched across shells at constant radius only", file=self.problem.spacetime.path)
        R = self.shell.position
        out = {}
        for label, side in (("first", first), ("second", second)):
            n = side.form.n
            W = sp.sqrt(side.f / side.h) * side.r ** n
            out[label] = {
                "P": sp.simplify((W * side.h).subs(side.r, R)),
                "w": sp.simplify((W * sp.sqrt(side.h)).subs(side.r, R)),
                "F": sp.simplify(side.F.subs(side.r, R)),
                "n": n,
            }
        if not vanishes(out["first"]["w"] - out["second"]["w"], self.problem.spacetime.parameter_values):
            raise JunctionError(f"at {self.shell.interface.text} the weight sqrt(f) r^n of the delta term differs "
                                "between the sides (g_tt is not continuous)", file=self.problem.spacetime.path)
        out["orientation"] = self.shell.orientation
        return out

    @cached_property
    def transfer_matrix(self) -> sp.Matrix:
        """T with (u, du/dr*)_second = T (u, du/dr*)_first, as a sympy Matrix in l, omega and the parameters:
        :attr:`named_transfer_matrix` with its named quantities substituted, then shortened where a bounded
        rewriting finds a shorter exact form (checked at the spec's values).  Built from the named form rather
        than by solving the matching condition and simplifying the solution: that simplification took 2 s alone
        and more than 40 s of CPU time on a loaded machine, so the form a document showed depended on the load
        (tests/test_fields.py solves the condition independently and checks the two agree)."""
        named, quantities = self.named_transfer_matrix
        entry = named[1, 0].subs(quantities)
        return sp.Matrix([[1, 0], [simplify_checked(entry, self.problem.spacetime.parameter_values), 1]])

    @cached_property
    def named_transfer_matrix(self) -> tuple[sp.Matrix, dict]:
        """(T written through named quantities at the shell, {symbol: its value}).  Since P_i = F_i R^n and
        w = sqrt(f) R^n (:attr:`pieces`), the matching condition gives

            T = [[1, 0], [n (F_2 - F_1)/(2R) - 2 s xi [K] N, 1]],

        F_i = sqrt(f h) on side i (1 the first region, 2 the second), N = sqrt(f) (the lapse, equal on both
        sides), [K] the jump of the extrinsic curvature's trace, all at the shell, s the normal's orientation.
        These are what a reader checks against the two metrics; the substituted matrix is
        :attr:`transfer_matrix` (tests/test_fields.py checks the two agree)."""
        p = self.pieces
        R = self.shell.position
        n = p["first"]["n"]
        xi = self.problem.spacetime.field.coupling
        F1, F2, N, K = sp.symbols("F_1 F_2 N [K]")
        entry = sp.Rational(n, 2) * (F2 - F1) / R - 2 * p["orientation"] * xi * K * N
        matrix = sp.Matrix([[1, 0], [entry, 1]])
        values = {F1: p["first"]["F"], F2: p["second"]["F"], N: p["first"]["w"] / R ** n,
                  K: self.shell.extrinsic_curvature["trace_jump"]}
        return matrix, {k: v for k, v in values.items() if matrix.has(k)}

    @cached_property
    def derivative_jump(self):
        """[d psi/dl]/psi implied by the transfer matrix (docs/conventions.md section 5: -2 xi [K])."""
        xi = self.problem.spacetime.field.coupling
        return sp.simplify(-2 * xi * self.shell.extrinsic_curvature["trace_jump"])
