"""Printers that turn sympy expressions into numpy and mpmath source.

Both are strict: a function without a numeric counterpart (an undefined function f(r), say) is an error when
the code is generated, never when it runs.  Modules are imported under names a spec cannot use (``_np``,
``_mp``: spec names never start with an underscore), so no argument can shadow them.

* numpy: integer powers up to MAX_UNROLLED are printed as products (numpy's general ``power`` is several
  times slower than a multiplication), negative ones as a reciprocal of that product.
* mpmath: rational literals are exact (``_mp.mpf(p)/_mp.mpf(q)``), so the twin evaluates the expression itself
  at any precision, not a double-precision copy of it.
"""

from __future__ import annotations

import sympy as sp
from sympy.printing.numpy import NumPyPrinter
from sympy.printing.pycode import MpmathPrinter

MAX_UNROLLED = 8


class CodegenError(Exception):
    """An expression that cannot be lowered (unsupported function, undefined function, bad identifier)."""


class _Strict:
    def _print_not_supported(self, expr):
        raise CodegenError(f"no numeric form for {expr} (in {self._backend} kernels)")

    def _print_AppliedUndef(self, expr):
        raise CodegenError(f"the undefined function {expr} has no numeric value; give it a formula in "
                           "[definitions] to generate kernels")

    def _print_Derivative(self, expr):
        raise CodegenError(f"unevaluated derivative {expr} in a kernel")


class NumpyKernelPrinter(_Strict, NumPyPrinter):
    """sympy -> numpy source, vectorised over arrays."""

    _backend = "numpy"

    def _module_format(self, fqn, register=True):
        text = super()._module_format(fqn, register)
        return "_np." + text[len("numpy."):] if text.startswith("numpy.") else text

    def _print_Pow(self, expr, rational=False):
        base, exponent = expr.as_base_exp()
        if exponent.is_Integer and 2 <= abs(int(exponent)) <= MAX_UNROLLED:
            printed = self.parenthesize(base, sp.printing.precedence.PRECEDENCE["Mul"] + 1)
            product = "*".join([printed] * abs(int(exponent)))
            return f"({product})" if exponent > 0 else f"(1/({product}))"
        if exponent == -1:
            return f"(1/{self.parenthesize(base, sp.printing.precedence.PRECEDENCE['Mul'] + 1)})"
        return super()._print_Pow(expr, rational=rational)

    def _print_ImaginaryUnit(self, expr):
        return "1j"


class MpmathKernelPrinter(_Strict, MpmathPrinter):
    """sympy -> mpmath source with exact rational literals."""

    _backend = "mpmath"

    def _module_format(self, fqn, register=True):
        text = super()._module_format(fqn, register)
        return "_mp." + text[len("mpmath."):] if text.startswith("mpmath.") else text

    def _print_ImaginaryUnit(self, expr):
        return "_mp.mpc(0, 1)"

    def _print_Integer(self, expr):
        return f"_mp.mpf({int(expr)})"


def printer_for(backend: str):
    if backend == "numpy":
        return NumpyKernelPrinter({"fully_qualified_modules": True, "inline": True, "allow_unknown_functions": False})
    if backend == "mpmath":
        return MpmathKernelPrinter({"fully_qualified_modules": True, "inline": True, "allow_unknown_functions": False})
    raise ValueError(f"unknown backend {backend!r}")
