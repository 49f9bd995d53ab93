"""Lowering a sympy result to a numeric kernel, in named stages that are all kept.

    expression  ->  rewritten (common subexpressions)  ->  source (a readable .py file)  ->  callable

:func:`lower` returns a :class:`Lowered` record holding every stage; its ``kernel`` is the frozen
:class:`Kernel` that crosses from the symbolic to the numeric side of derive.  Source files are named by a hash
of what made them (expression, arguments, backend, derive's version), live in a cache directory, are reused when
the hash matches, and are registered in ``linecache`` so tracebacks show the generated lines.  Modules are
loaded from their files with importlib; nothing is passed to eval or exec.
"""

from __future__ import annotations

import hashlib
import importlib.abc
import importlib.util
import keyword
import linecache
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import sympy as sp

from derive import __version__
from derive.codegen.printers import CodegenError, printer_for

GENERATOR_VERSION = "1"


@dataclass(frozen=True)
class Kernel:
    """A generated numeric function and what it was made from."""

    name: str
    quantity: str
    owner: str | None              # the region or interface it belongs to
    owner_kind: str | None         # "region" or "interface"
    arguments: tuple[str, ...]
    backend: str                   # "numpy" or "mpmath"
    expression: str                # str() of the sympy expression or matrix
    shape: tuple[int, ...]         # () for a scalar, (rows, cols) for a matrix, (n,) for a list
    source: str
    hash: str
    path: str
    function: Callable = field(compare=False, repr=False)

    def __call__(self, *args):
        return self.function(*args)


@dataclass(frozen=True)
class Lowered:
    """Every stage of one lowering."""

    expression: object
    replacements: tuple
    reduced: tuple
    kernel: Kernel


def check_identifier(name: str, what: str = "name") -> str:
    """A name that may appear in generated code: an identifier, not a keyword, no leading underscore."""
    if not (isinstance(name, str) and name.isidentifier() and name.isascii() and not keyword.iskeyword(name)
            and not name.startswith("_")):
        raise CodegenError(f"{what} {name!r} cannot be used in generated code")
    return name


def kernel_directory() -> str:
    """Where generated kernel files are written for people to read: the (trusted) cache, else a private
    temporary folder removed at exit.  The files are never what runs (see :class:`_SourceLoader`)."""
    from derive.cache import _private, cache_root

    root = cache_root()
    if root is not None:
        path = os.path.join(str(root), "kernels")
        try:
            os.makedirs(path, mode=0o700, exist_ok=True)
        except OSError:
            path = None
        if path is not None and not _private(Path(path), folder=True):
            return path
    global _TEMPORARY
    if _TEMPORARY is None:
        import atexit
        import shutil

        _TEMPORARY = tempfile.mkdtemp(prefix="derive-kernels-")
        atexit.register(shutil.rmtree, _TEMPORARY, True)
    return _TEMPORARY


_TEMPORARY: str | None = None


def _as_components(expression):
    if isinstance(expression, sp.MatrixBase):
        return list(expression), tuple(expression.shape)
    if isinstance(expression, (list, tuple)):
        return [sp.S(e) for e in expression], (len(expression),)
    return [sp.S(expression)], ()


def _force_power_bases(exprs, symbols):
    """Give every non-atomic base of an integer power its own temporary, so unrolled powers stay cheap."""
    extra = []
    mapping = {}

    def visit(e):
        if e.is_Atom:
            return e
        args = [visit(a) for a in e.args]
        e = e.func(*args) if args != list(e.args) else e
        if e.is_Pow and e.exp.is_Integer and abs(int(e.exp)) >= 2 and not e.base.is_Atom:
            if e.base not in mapping:
                name = next(symbols)
                mapping[e.base] = name
                extra.append((name, e.base))
            return mapping[e.base] ** e.exp
        return e
    return [visit(e) for e in exprs], extra


def lower(expression, arguments, name: str, quantity: str = "expression", backend: str = "numpy",
          owner: str | None = None, owner_kind: str | None = None, directory: str | None = None) -> Lowered:
    """Lower a sympy expression (or Matrix, or list) to a kernel.

    Parameters
    ----------
    expression : sympy.Expr, Matrix or list of Expr
    arguments : sequence of sympy.Symbol
        The kernel's arguments, in order; every free symbol of the expression must be among them.
    name : str
        The function's name (a Python identifier).
    backend : "numpy" or "mpmath"
    """
    check_identifier(name, "kernel name")
    names = tuple(check_identifier(a.name, "argument") for a in arguments)
    if len(set(names)) != len(names):
        raise CodegenError(f"kernel {name}: two arguments share a name ({', '.join(names)})")
    components, shape = _as_components(expression)
    free = set().union(*(c.free_symbols for c in components)) if components else set()
    missing = free - set(arguments)
    if missing:
        raise CodegenError(f"kernel {name}: {', '.join(sorted(map(str, missing)))} not among its arguments "
                           f"({', '.join(names)})")
    temporaries = sp.numbered_symbols("_t")
    replacements, reduced = sp.cse(components, symbols=temporaries, optimizations="basic")
    if backend == "numpy":
        reduced, extra = _force_power_bases(reduced, temporaries)
        replacements = list(replacements) + extra
    printer = printer_for(backend)
    body = [f"    {temp} = {printer.doprint(value)}" for temp, value in replacements]
    printed = [printer.doprint(c) for c in reduced]
    body += _return_lines(printed, shape, backend, names, [c.free_symbols for c in components], set(arguments))
    expression_text = str(expression if not isinstance(expression, list) else list(expression))
    digest = hashlib.sha256("\x00".join([GENERATOR_VERSION, __version__, backend, name, ",".join(names),
                                          sp.srepr(sp.Tuple(*components)), repr(shape)]).encode()).hexdigest()[:20]
    source = _source(name, quantity, owner, owner_kind, names, backend, expression_text, digest, body)
    directory = directory or kernel_directory()
    path = os.path.join(directory, f"kernel_{name}_{digest}.py")
    if not (os.path.isfile(path) and _read(path) == source):
        fd, tmp = tempfile.mkstemp(dir=directory, prefix=".tmp-", suffix=".py")
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(source)
        os.replace(tmp, path)
    function = load_function(path, name, source)
    kernel = Kernel(name, quantity, owner, owner_kind, names, backend, expression_text, shape, source, digest,
                    path, function)
    return Lowered(expression, tuple(replacements), tuple(reduced), kernel)


def _return_lines(printed, shape, backend, names, frees, arguments):
    if backend == "numpy":
        if shape == ():
            value = printed[0]
            if frees[0] != arguments and names:   # keep the broadcast shape of all arguments
                return [f"    return {value} + _np.zeros(_np.broadcast({', '.join(names)}).shape)"]
            return [f"    return {value}"]
        lines = [f"    _parts = _np.broadcast_arrays({', '.join(printed)}, *[_np.asarray(_a) for _a in "
                 f"({', '.join(names)}{',' if len(names) == 1 else ''})])[:{len(printed)}]"]
        if len(shape) == 2:
            rows = ", ".join("[" + ", ".join(f"_parts[{i * shape[1] + j}]" for j in range(shape[1])) + "]"
                             for i in range(shape[0]))
            lines.append(f"    return _np.array([{rows}])")
        else:
            lines.append("    return _np.array(_parts)")
        return lines
    if shape == ():
        return [f"    return {printed[0]}"]
    if len(shape) == 2:
        rows = ", ".join("[" + ", ".join(printed[i * shape[1]:(i + 1) * shape[1]]) + "]" for i in range(shape[0]))
        return [f"    return [{rows}]"]
    return [f"    return [{', '.join(printed)}]"]


def _source(name, quantity, owner, owner_kind, names, backend, expression_text, digest, body) -> str:
    """The generated module.  Only derive's own text (the kernel's and arguments' names, checked identifiers,
    the backend, the hash, the version) is written as code or comment; everything that may come from a spec
    (a region's name, the expression's text) is written as escaped string literals (``repr``), which Python
    reads back as data and never runs."""
    module = "import numpy as _np" if backend == "numpy" else "import mpmath as _mp"
    where = f"; {owner_kind} {owner}" if owner else ""
    header = [f"# derive kernel {name} ({backend} backend), generated by derive {__version__} "
              f"(code generator {GENERATOR_VERSION}); sha256 {digest}",
              "# QUANTITY and EXPRESSION below say what it computes and the expression it came from."]
    arguments = ", ".join(names)
    if backend == "mpmath":
        convert = [f"    {n} = _mp.mpmathify({n})" for n in names]
    else:
        convert = []
    doc = "    " + repr(f"{quantity}{where}. Arguments: {arguments or 'none'}.")
    constants = [f"QUANTITY = {quantity + where!r}", f"EXPRESSION = {_wrapped_literal(expression_text)}"]
    return "\n".join(header + ["", module, "", *constants, "", "",
                               f"def {name}({arguments}):", doc] + convert + body) + "\n"


def _wrapped_literal(text: str, width: int = 96) -> str:
    """A string literal of ``text`` split over lines (implicit concatenation), each piece ``repr``-escaped."""
    pieces = [text[i:i + width] for i in range(0, len(text), width)] or [""]
    if len(pieces) == 1:
        return repr(pieces[0])
    return "(\n" + "\n".join(f"    {piece!r}" for piece in pieces) + "\n)"


def _read(path: str) -> str:
    with open(path, encoding="utf-8") as handle:
        return handle.read()


class _SourceLoader(importlib.abc.SourceLoader):
    """Loads a generated module from the source derive has just generated and holds in memory.

    The file on disk is there to be read by people (and shown in tracebacks through ``linecache``); it is
    never what runs, and no bytecode is read or written, so a file changed on disk, or a stale or foreign
    ``.pyc`` beside it, is never executed.
    """

    def __init__(self, path: str, source: str):
        self.path = path
        self.source = source

    def get_filename(self, fullname):
        return self.path

    def get_data(self, path):
        if path != self.path:
            raise OSError("no bytecode is used for generated kernels")
        return self.source.encode("utf-8")

    def path_stats(self, path):
        raise OSError("no bytecode is used for generated kernels")


def load_function(path: str, name: str, source: str):
    """Import the generated module from ``source`` (its file's path names it) and return its function."""
    module_name = f"derive_generated_{os.path.basename(path)[:-3]}"
    spec = importlib.util.spec_from_loader(module_name, _SourceLoader(path, source), origin=path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    linecache.cache[path] = (len(source), None, source.splitlines(True), path)
    return getattr(module, name)
