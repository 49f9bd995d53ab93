"""Typed errors of derive.

Every error a user can cause carries what they need to fix it: the file, the key inside it, the offending
value and what was expected.  The command line maps :class:`InputError` (and subclasses) to exit code 2 and
:class:`AccuracyError` to exit code 1; anything else is a bug in derive.
"""

from __future__ import annotations


class DeriveError(Exception):
    """Base class of all errors derive raises on purpose."""


class InputError(DeriveError):
    """Bad input: a malformed spec, an unsafe expression, a degenerate metric.  Exit code 2.

    Parameters
    ----------
    problem : str
        What is wrong, in plain words.
    file : str, optional
        The spec file (or other input) at fault.
    key : str, optional
        The dotted key inside it, for example ``region[0].line_element``.
    """

    def __init__(self, problem: str, file: str | None = None, key: str | None = None):
        self.problem = problem
        self.file = file
        self.key = key
        super().__init__(self._message())

    def _message(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.key:
            where.append(f"option '{self.key}'" if self.key.startswith("--") else f"key '{self.key}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.problem}" if prefix else self.problem

    def located(self, file: str | None = None, key: str | None = None) -> "InputError":
        """Return a copy of this error with the file and key filled in where they were missing."""
        err = type(self).__new__(type(self))
        err.__dict__.update(self.__dict__)
        err.file = self.file or file
        err.key = self.key or key
        Exception.__init__(err, err._message())
        return err


class SpecError(InputError):
    """A spec file that does not follow format 1 (unknown key, wrong type, missing section)."""


class ExpressionError(InputError):
    """An expression the safe parser refuses: not allowed, undeclared, too large or malformed.

    ``column`` (0-based) and ``fragment`` point at the offending part of ``text``.
    """

    def __init__(self, problem: str, text: str = "", column: int | None = None,
                 fragment: str | None = None, file: str | None = None, key: str | None = None):
        self.text = text
        self.column = column
        self.fragment = fragment
        detail = problem
        if fragment is not None:
            detail += f" (at column {column + 1 if column is not None else '?'}: {fragment!r})"
        if text and len(text) <= 200:
            detail += f" in {text!r}"
        super().__init__(detail, file=file, key=key)


class GeometryError(InputError):
    """A metric that cannot be used: degenerate, not symmetric, wrong size, not of a required form."""


class JunctionError(InputError):
    """Regions that cannot be glued: the first junction condition fails or leaves an unknown free."""


class NotSupported(InputError):
    """A request derive understands but cannot serve yet for this spacetime (the reason says which part).  Exit 2."""


class AccuracyError(DeriveError):
    """A requested accuracy that could not be reached.  Exit code 1.

    ``reached`` holds what was obtained (for example the error estimate) so it can be reported.
    """

    def __init__(self, problem: str, reached: dict | None = None):
        self.problem = problem
        self.reached = dict(reached or {})
        super().__init__(problem)
