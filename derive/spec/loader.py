"""Read and validate a spec file (format 1, README.md) into a :class:`~derive.spec.model.Spacetime`.

Every problem is an :class:`~derive.errors.InputError` naming the file, the key and what was expected; an
unknown key suggests the nearest valid one.  Expressions go through :class:`ExpressionParser` only.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import os
import stat
import tomllib
from typing import Any, Mapping

import mpmath
import sympy as sp

from derive.errors import ExpressionError, InputError, SpecError
from derive.spec.expressions import ExpressionParser, is_identifier, substitute_bounded
from derive.spec.line_element import differential_name, metric_from_line_element
from derive.spec.model import (ArrayDetectorSpec, CompareSpec, DesignSpec, DetectorSpec, Domain, FieldSpec,
                               Interface, Parameter, Region, Spacetime)

MAX_SPEC_BYTES = 1_000_000
MAX_NESTING = 8              # tables and arrays inside each other (format 1 needs 4)
MAX_MAGNITUDE = 1e12         # largest |value| of a parameter, a gap or any other number a spec gives
ASSUMPTIONS = ("positive", "nonnegative", "negative", "nonpositive", "real", "integer", "nonzero")
TOP_KEYS = ("format", "title", "parameters", "coordinates", "definitions", "functions", "region",
            "interface", "field", "detector", "detectors", "compare", "numerics", "design")
REGION_KEYS = ("name", "where", "line_element", "metric", "unknowns")
INTERFACE_KEYS = ("between", "at")
FIELD_KEYS = ("mass", "coupling", "boundary")
BOUNDARIES = ("dirichlet", "neumann", "transparent")
DETECTOR_KEYS = ("at", "switching", "gaps", "state", "coupling")
ARRAY_KEYS = ("name", "at", "gap", "switching")      # each [[detectors]] entry
MAX_DETECTORS = 64
UNKNOWNS_HINT = ("; or, if a junction condition fixes it, list it in this region's unknowns, "
                 "unknowns = [\"{name}\"]")
COMPARE_KEYS = ("with", "sigmas")
NUMERICS_KEYS = ("tolerance",)
DESIGN_KEYS = ("gaps", "shapes", "locality", "shortest", "longest", "radii", "region", "positions", "delays")
DESIGN_SHAPES = ("gaussian", "bump", "cos2", "sin4")   # the shapes derive design can scale to a duration
CHOSEN_BY_DERIVE = ("l_max", "omega_max", "outer_radius")   # read by no solver: refused with the reason
SWITCHING_SHAPES = ("gaussian", "sharp", "bump", "cos2", "sin4", "expression")
SHAPE_KEYS = {"gaussian": ("width",), "sharp": ("duration",), "bump": ("duration",), "cos2": ("duration", "ramp"),
              "sin4": ("duration", "ramp"), "expression": ("expression", "duration")}   # what each shape takes
SWITCHING_KEYS = ("shape", "width", "duration", "ramp", "expression", "tail")
STATES = ("vacuum", "boulware", "hartle-hawking", "unruh", "bunch-davies")
RESERVED = ("l", "omega", "tau")   # symbols derive introduces itself


def suggest(name: str, options) -> str | None:
    """The nearest valid name, case-insensitively, or None."""
    options = list(options)
    lowered = {str(o).lower(): o for o in options}
    close = difflib.get_close_matches(str(name).lower(), list(lowered), n=1, cutoff=0.6)
    return lowered[close[0]] if close else None


class _Reader:
    """Validation helpers bound to one file."""

    def __init__(self, path: str):
        self.path = path

    def fail(self, problem: str, key: str | None = None, cls=SpecError):
        raise cls(problem, file=self.path, key=key)

    def check_keys(self, table: Mapping, allowed, key: str):
        if not isinstance(table, Mapping):
            self.fail(f"expected a table, got {type(table).__name__}", key)
        for k in table:
            if k not in allowed:
                close = suggest(k, allowed)
                hint = f"; did you mean '{close}'?" if close else f" (allowed: {', '.join(allowed)})"
                self.fail(f"unknown key '{k}'{hint}", f"{key}.{k}" if key else str(k))

    def text(self, value, key: str) -> str:
        if isinstance(value, bool):
            self.fail("expected an expression (string or number), got a boolean", key)
        if isinstance(value, (int, float)):
            return repr(value)
        if not isinstance(value, str):
            self.fail(f"expected an expression (string or number), got {type(value).__name__}", key)
        return value

    def expression(self, parser: ExpressionParser, value, key: str) -> sp.Expr:
        try:
            return parser.parse(self.text(value, key))
        except ExpressionError as exc:
            raise exc.located(self.path, key) from None

    def substitute(self, expr, definitions, key: str):
        """The definitions substituted into ``expr``, with the parser's cost bounds on the result."""
        try:
            return substitute_bounded(expr, definitions)
        except ExpressionError as exc:
            raise exc.located(self.path, key) from None

    def number(self, value, key: str) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(f"expected a number, got {value!r}", key)
        return float(value)

    def name(self, value, key: str) -> str:
        if isinstance(value, str) and not value.isascii():
            import unicodedata

            plain = unicodedata.normalize("NFKC", value)
            looks = f" (it looks like {plain!r}, which Python would silently read instead)" if plain.isascii() else ""
            self.fail(f"{value!r} is not a valid name: names are plain ASCII{looks}", key)
        if not is_identifier(value):
            self.fail(f"{value!r} is not a valid name (a letter, then letters, digits or underscores; not a "
                      "Python keyword, not a reserved function or constant name such as pi, E, I, sin)", key)
        return value


def load(path: str | os.PathLike, overrides: Mapping[str, float] | None = None,
         origin: str = "override of parameter") -> Spacetime:
    """Read a spec file.

    Parameters
    ----------
    path : path-like
        The TOML spec file (format 1).
    overrides : mapping of str to float, optional
        Parameter values that replace those in the file (``--set NAME=VALUE``).
    origin : str
        How a bad override is named in the message ("--set" on the command line).
    """
    path = os.fspath(path)
    reader = _Reader(path)
    try:
        info = os.stat(path)
    except (OSError, ValueError) as exc:
        raise SpecError(f"cannot read the spec file ({getattr(exc, 'strerror', None) or exc})", file=path) from None
    if stat.S_ISDIR(info.st_mode):
        reader.fail("is a folder, not a spec file")
    if not stat.S_ISREG(info.st_mode):
        reader.fail("is not a regular file (a pipe, device or socket); give the path of a TOML spec file")
    if info.st_size > MAX_SPEC_BYTES:
        reader.fail(f"spec file is {info.st_size} bytes; the limit is {MAX_SPEC_BYTES}")
    try:
        with open(path, "rb") as handle:
            raw = handle.read(MAX_SPEC_BYTES + 1)
    except OSError as exc:
        raise SpecError(f"cannot read the spec file ({exc.strerror})", file=path) from None
    if len(raw) > MAX_SPEC_BYTES:
        reader.fail(f"spec file is larger than {MAX_SPEC_BYTES} bytes")
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        reader.fail("spec file is not UTF-8 text")
    except tomllib.TOMLDecodeError as exc:
        reader.fail(f"not valid TOML: {exc}")
    except (RecursionError, MemoryError):
        reader.fail(f"the TOML is nested too deeply (the limit is {MAX_NESTING} levels)")
    return from_mapping(data, path=path, overrides=overrides, raw=raw, origin=origin)


def _nesting(value, key: str = "") -> tuple[int, str]:
    """The deepest nesting of tables and arrays in a parsed TOML value, and the key where it occurs."""
    best, where = 0, key
    stack = [(value, 0, key)]
    while stack:
        item, depth, at = stack.pop()
        if depth > best:
            best, where = depth, at
        if depth > MAX_NESTING:
            break
        if isinstance(item, Mapping):
            stack.extend((v, depth + 1, f"{at}.{k}" if at else str(k)) for k, v in item.items())
        elif isinstance(item, list):
            stack.extend((v, depth + 1, f"{at}[{i}]") for i, v in enumerate(item))
    return best, where


def _plain_text(reader, value, key: str, limit: int) -> str:
    """Free text of a spec (a title, a region's name): any printable characters, no control characters."""
    if not isinstance(value, str):
        reader.fail("expected a string", key)
    if not value.strip():
        reader.fail("expected a non-empty string", key)
    if len(value) > limit:
        reader.fail(f"is {len(value)} characters long; the limit is {limit}", key)
    bad = next((ch for ch in value if not ch.isprintable()), None)
    if bad is not None:
        reader.fail(f"holds the control character {bad!r}; use printable text on one line", key)
    return value


def _override_number(value) -> float | None:
    """A parameter override as a float: a real number (not a bool) or a string that reads as one; else None."""
    import numbers

    if isinstance(value, bool):
        return None
    if isinstance(value, numbers.Real):
        return float(value)
    if isinstance(value, str):
        try:
            return float(value)
        except ValueError:
            return None
    return None


def from_mapping(data: Mapping[str, Any], path: str = "<spec>", overrides: Mapping[str, float] | None = None,
                 raw: bytes | None = None, origin: str = "override of parameter") -> Spacetime:
    """Build a Spacetime from an already parsed TOML mapping (see :func:`load`)."""
    reader = _Reader(path)
    depth, deepest = _nesting(data)
    if depth > MAX_NESTING:
        reader.fail(f"tables and arrays nested more than {MAX_NESTING} deep", deepest)
    reader.check_keys(data, TOP_KEYS, "")
    for section in ("parameters", "coordinates", "definitions", "functions", "field", "detector", "compare",
                    "numerics"):
        if section in data and not isinstance(data[section], Mapping):
            reader.fail(f"expected a table [{section}], got {type(data[section]).__name__}", section)
    for section in ("region", "interface"):
        if section in data and not (isinstance(data[section], list)
                                    and all(isinstance(t, Mapping) for t in data[section])):
            reader.fail(f"expected an array of tables [[{section}]]", section)
    if data.get("format") != 1:
        reader.fail(f"expected format = 1, got {data.get('format')!r}", "format")
    title = _plain_text(reader, data.get("title", os.path.basename(path) or "spec"), "title", 300)

    taken: dict[str, str] = {name: "derive (the field's labels and the detector's proper time)"
                             for name in RESERVED}

    def claim(name: str, key: str):
        if name in taken:
            reader.fail(f"name '{name}' is already used by {taken[name]}", key)
        taken[name] = key

    # parameters ---------------------------------------------------------------------------------
    parameters: dict[str, Parameter] = {}
    for name, spec in (data.get("parameters") or {}).items():
        key = f"parameters.{name}"
        reader.name(name, key)
        claim(name, key)
        if isinstance(spec, (int, float)) and not isinstance(spec, bool):
            spec = {"value": spec}
        if not isinstance(spec, Mapping):
            reader.fail(f"expected a number or a table such as {{ value = 1.0, positive = true }}, got {spec!r}",
                        key)
        reader.check_keys(spec, ("value",) + ASSUMPTIONS, key)
        assumptions = {k: bool(v) for k, v in spec.items() if k in ASSUMPTIONS}
        for k, v in spec.items():
            if k in ASSUMPTIONS and not isinstance(v, bool):
                reader.fail("expected true or false", f"{key}.{k}")
        if not assumptions:
            assumptions = {"real": True}
        value = spec.get("value")
        if value is not None:
            value = reader.number(value, f"{key}.value")
        try:
            symbol = sp.Symbol(name, **assumptions)
        except Exception as exc:  # inconsistent assumptions
            reader.fail(f"inconsistent assumptions: {exc}", key)
        parameters[name] = Parameter(name, symbol, value, assumptions)
    for name, value in (overrides or {}).items():
        if name not in parameters:
            close = suggest(name, parameters)
            hint = f"; did you mean '{close}'?" if close else ""
            raise SpecError(f"{origin} {name}: no such parameter{hint}", file=path, key=f"parameters.{name}")
        number = _override_number(value)
        if number is None:
            raise SpecError(f"{origin} {name}: expected a number, got {value!r}", file=path,
                            key=f"parameters.{name}.value")
        p = parameters[name]
        parameters[name] = Parameter(name, p.symbol, number, p.assumptions)
    for p in parameters.values():
        if p.value is not None:
            _check_value(reader, p)

    # coordinates --------------------------------------------------------------------------------
    coord_table = data.get("coordinates")
    if coord_table is None:
        reader.fail("missing section [coordinates] with names = [...]", "coordinates")
    reader.check_keys(coord_table, ("names", "positive"), "coordinates")
    names = coord_table.get("names")
    if not isinstance(names, list) or len(names) < 2:
        reader.fail("expected a list of at least two coordinate names", "coordinates.names")
    for i, name in enumerate(names):
        reader.name(name, f"coordinates.names[{i}]")
        claim(name, f"coordinates.names[{i}]")
    positive = coord_table.get("positive", [])
    if not isinstance(positive, list) or any(not isinstance(p, str) or p not in names for p in positive):
        reader.fail("expected a list of coordinate names", "coordinates.positive")
    coordinates = []
    for name in names:
        coordinates.append(sp.Symbol(name, positive=True) if name in positive else sp.Symbol(name, real=True))
    coordinates = tuple(coordinates)

    symbols: dict[str, sp.Expr] = {p.name: p.symbol for p in parameters.values()}
    symbols.update({c.name: c for c in coordinates})

    # functions ----------------------------------------------------------------------------------
    functions: dict[str, object] = {}
    for name, spec in (data.get("functions") or {}).items():
        key = f"functions.{name}"
        reader.name(name, key)
        claim(name, key)
        if not isinstance(spec, list) or not all(isinstance(a, str) and a in symbols for a in spec):
            reader.fail("expected the list of coordinate names the function depends on, e.g. [\"r\"]", key)
        functions[name] = sp.Function(name, real=True)
    parser = ExpressionParser(symbols, functions)

    # definitions --------------------------------------------------------------------------------
    definitions: dict[sp.Symbol, sp.Expr] = {}
    display_symbols: dict[str, sp.Expr] = dict(symbols)
    for name, text in (data.get("definitions") or {}).items():
        key = f"definitions.{name}"
        reader.name(name, key)
        claim(name, key)
        value = reader.expression(ExpressionParser(display_symbols, functions), text, key)
        value = reader.substitute(value, definitions, key)
        symbol = sp.Symbol(name)
        definitions[symbol] = value
        display_symbols[name] = symbol


    # regions ------------------------------------------------------------------------------------
    region_list = data.get("region")
    if not isinstance(region_list, list) or not region_list:
        reader.fail("at least one [[region]] with a line_element or a metric is required", "region")
    regions: dict[str, Region] = {}
    for i, table in enumerate(region_list):
        key = f"region[{i}]"
        reader.check_keys(table, REGION_KEYS, key)
        name = _plain_text(reader, table.get("name", f"region{i}" if len(region_list) > 1 else "spacetime"),
                           f"{key}.name", 64)
        if name in regions:
            reader.fail(f"two regions are named '{name}'", f"{key}.name")
        unknowns = []
        local = dict(display_symbols)
        listed = table.get("unknowns", [])
        if not isinstance(listed, list):
            reader.fail('expected a list of names, e.g. unknowns = ["alpha"]', f"{key}.unknowns")
        for j, u in enumerate(listed):
            reader.name(u, f"{key}.unknowns[{j}]")
            if u in local:
                reader.fail(f"unknown '{u}' clashes with a name declared elsewhere", f"{key}.unknowns[{j}]")
            symbol = sp.Symbol(u, positive=True)
            unknowns.append(symbol)
            local[u] = symbol
        has_le, has_matrix = "line_element" in table, "metric" in table
        if has_le == has_matrix:
            reader.fail("give exactly one of line_element or metric", key)
        le_text = None
        if has_le:
            le_text = reader.text(table["line_element"], f"{key}.line_element")
            differentials = []
            for c in coordinates:
                dname = differential_name(c)
                if dname in local:
                    reader.fail(f"the name '{dname}' is taken, but it is the differential of '{c.name}'",
                                f"{key}.line_element")
                differentials.append(sp.Symbol(dname))
            le_symbols = dict(local)
            le_symbols.update({d.name: d for d in differentials})
            expr = reader.expression(ExpressionParser(le_symbols, functions, UNKNOWNS_HINT), le_text,
                                     f"{key}.line_element")
            try:
                display = metric_from_line_element(expr, coordinates, differentials, le_text)
            except ExpressionError as exc:
                raise exc.located(path, f"{key}.line_element") from None
        else:
            rows = table["metric"]
            n = len(coordinates)
            if not isinstance(rows, list) or len(rows) != n or any(not isinstance(r, list) or len(r) != n
                                                                     for r in rows):
                reader.fail(f"expected a {n}x{n} list of lists of expressions", f"{key}.metric")
            region_parser = ExpressionParser(local, functions, UNKNOWNS_HINT)
            display = sp.Matrix(n, n, lambda a, b: reader.expression(region_parser, rows[a][b],  # noqa: B023
                                                                       f"{key}.metric[{a}][{b}]"))  # noqa: B023
            if display != display.T:
                diff = [(a, b) for a in range(n) for b in range(a + 1, n) if display[a, b] != display[b, a]]
                a, b = diff[0]
                reader.fail(f"metric matrix is not symmetric: [{a}][{b}] = {display[a, b]} but "
                            f"[{b}][{a}] = {display[b, a]}", f"{key}.metric")
        metric = display.applyfunc(lambda e: reader.substitute(e, definitions, f"{key}.line_element"  # noqa: B023
                                                                   if has_le else f"{key}.metric"))  # noqa: B023
        _check_not_degenerate(reader, metric, coordinates, f"{key}", name)
        where_text, where, domains = None, None, ()
        if "where" in table:
            where_text = reader.text(table["where"], f"{key}.where")
            # 'horizon' may stand for a bound at a root of f (found at 40 digits below)
            where_names = dict(local) if "horizon" in local else {**local, "horizon": HORIZON}
            try:
                where = ExpressionParser(where_names, functions).parse_relation(where_text)
            except ExpressionError as exc:
                raise exc.located(path, f"{key}.where") from None
            where = reader.substitute(where, definitions, f"{key}.where")
            domains = _domains(reader, where, coordinates, f"{key}.where")
            if "horizon" not in local and where.has(HORIZON):
                domains = _resolve_horizons(reader, domains, metric, coordinates, parameters, f"{key}.where")
        regions[name] = Region(name, metric, display, le_text, where, where_text, domains, tuple(unknowns))

    # interfaces ---------------------------------------------------------------------------------
    interfaces = []
    for i, table in enumerate(data.get("interface") or []):
        key = f"interface[{i}]"
        reader.check_keys(table, INTERFACE_KEYS, key)
        between = table.get("between")
        if (not isinstance(between, list) or len(between) != 2 or not all(isinstance(b, str) for b in between)):
            reader.fail("expected two region names", f"{key}.between")
        for j, b in enumerate(between):
            if b not in regions:
                close = suggest(b, regions)
                hint = f"; did you mean '{close}'?" if close else ""
                reader.fail(f"no region named '{b}'{hint}", f"{key}.between[{j}]")
        if between[0] == between[1]:
            reader.fail("an interface joins two different regions", f"{key}.between")
        coordinate, value, text = _equation(reader, parser, table.get("at"), coordinates, f"{key}.at", definitions)
        interfaces.append(Interface((between[0], between[1]), coordinate, value, text))
    if len(regions) > 1 and not interfaces:
        reader.fail("several regions need [[interface]] entries saying where they meet", "interface")

    field = _field(reader, parser, data.get("field"), len(coordinates), definitions)
    detector = _detector(reader, parser, data.get("detector"), coordinates, definitions)
    detectors = _detectors(reader, parser, data.get("detectors"), definitions)
    compare = None
    if "compare" in data:
        table = data["compare"]
        reader.check_keys(table, COMPARE_KEYS, "compare")
        with_ = table.get("with")
        if not isinstance(with_, str) or not with_:
            reader.fail('expected "minkowski" or the path of another spec file', "compare.with")
        if with_ != "minkowski":
            with_ = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(path)), with_))
            if not os.path.isfile(with_):
                reader.fail(f"no spec file at {with_}", "compare.with")
        sigmas = reader.number(table.get("sigmas", 3.0), "compare.sigmas")
        if not (math.isfinite(sigmas) and 0 < sigmas <= 100):
            reader.fail(f"expected a positive number of standard deviations (at most 100), got {sigmas}",
                        "compare.sigmas")
        compare = CompareSpec(with_, sigmas)
    design = _design(reader, data.get("design"), list(regions))
    numerics = {}
    if "numerics" in data:
        for k in data["numerics"] if isinstance(data["numerics"], Mapping) else ():
            if k in CHOSEN_BY_DERIVE:
                reader.fail(f"derive chooses {k} itself from the tolerance (and reports it); remove the key and "
                            "set numerics.tolerance instead", f"numerics.{k}")
        reader.check_keys(data["numerics"], NUMERICS_KEYS, "numerics")
        for k, v in data["numerics"].items():
            numerics[k] = reader.number(v, f"numerics.{k}")
        if "tolerance" in numerics and not (0 < numerics["tolerance"] < 1):
            reader.fail("expected a relative tolerance between 0 and 1", "numerics.tolerance")
    _check_joined(reader, regions, interfaces)
    values = {p.symbol: p.value for p in parameters.values() if p.value is not None}
    _check_numbers(reader, values, coordinates, coord_table.get("positive", []), interfaces, field, detector)
    _check_static_shells(reader, values, regions, interfaces)

    digest = hashlib.sha256()
    digest.update(raw if raw is not None else repr(sorted(data.items(), key=str)).encode())
    digest.update(repr(sorted((overrides or {}).items())).encode())
    spacetime = Spacetime(path=path, title=title, source_hash=digest.hexdigest(), parameters=parameters,
                          coordinates=coordinates, definitions=definitions, functions=functions, regions=regions,
                          interfaces=tuple(interfaces), field=field, detector=detector, compare=compare,
                          numerics=numerics, detectors=detectors, design_settings=design)
    if detectors:
        from derive.spec.positions import parse_position

        for i, entry in enumerate(detectors):     # positions read now, so that check names a bad one
            parse_position(spacetime, entry.at, key=f"detectors[{i}].at")
    return spacetime


def _check_joined(reader, regions, interfaces) -> None:
    """Every region is reached from the first through the interfaces."""
    if len(regions) < 2:
        return
    names = list(regions)
    reached, frontier = {names[0]}, [names[0]]
    while frontier:
        here = frontier.pop()
        for interface in interfaces:
            if here in interface.between:
                other = interface.between[1] if interface.between[0] == here else interface.between[0]
                if other not in reached:
                    reached.add(other)
                    frontier.append(other)
    alone = [n for n in names if n not in reached]
    if alone:
        reader.fail(f"no [[interface]] joins region{'s' if len(alone) > 1 else ''} "
                    f"{', '.join(repr(n) for n in alone)} to region {names[0]!r}; add one with between = "
                    f"[{names[0]!r}, {alone[0]!r}] and at = \"r = ...\"", "interface")


def _value_at(reader, expr, values, key: str) -> float | None:
    """The real value of ``expr`` at the parameters' values; None when it still holds symbols."""
    expr = sp.S(expr)
    if expr.free_symbols - set(values):
        return None
    try:
        number = sp.N(expr.subs(values), 20)
    except (TypeError, ValueError, ArithmeticError):
        reader.fail(f"{expr} cannot be evaluated at the parameters' values", key)
    if number.has(sp.zoo, sp.oo, -sp.oo, sp.nan):
        reader.fail(f"{expr} is not finite at the parameters' values", key)
    real, imag = number.as_real_imag()
    if not (real.is_number and imag.is_number):
        reader.fail(f"{expr} is not a number at the parameters' values", key)
    if abs(float(imag)) > 1e-15 * max(1.0, abs(float(real))):
        reader.fail(f"expected a real value; {expr} is complex ({complex(number)}) at the parameters' values", key)
    value = float(real)
    if not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
        reader.fail(f"{expr} = {value} at the parameters' values; expected a finite value of magnitude at most "
                    f"{MAX_MAGNITUDE:g}", key)
    return value


def _check_numbers(reader, values, coordinates, positive, interfaces, field, detector) -> None:
    """Every number the numerics will need is real, finite and in range at the parameters' values."""
    radial = {coordinates[1]} | {c for c in coordinates if c.name in positive} if len(coordinates) > 1 else set()
    for i, interface in enumerate(interfaces):
        value = _value_at(reader, interface.value, values, f"interface[{i}].at")
        if value is not None and interface.coordinate in radial and value <= 0:
            reader.fail(f"the interface is at {interface.coordinate} = {value:g}; a radius must be positive",
                        f"interface[{i}].at")
    if field is not None:
        mass = _value_at(reader, field.mass, values, "field.mass")
        if mass is not None and mass < 0:
            reader.fail(f"the mass is {mass:g} at the parameters' values; it must not be negative", "field.mass")
        _value_at(reader, field.coupling, values, "field.coupling")
    if detector is None:
        return
    if detector.position is not None:
        value = _value_at(reader, detector.position, values, "detector.at")
        if value is not None and detector.coordinate in radial and value < 0:
            reader.fail(f"the detector is at {detector.coordinate} = {value:g}; a radius must not be negative",
                        "detector.at")
    for k in ("width", "duration", "ramp", "tail"):
        if k in detector.switching:
            value = _value_at(reader, detector.switching[k], values, f"detector.switching.{k}")
            if value is not None and value <= 0:
                reader.fail(f"{k} is {value:g}; expected a positive number", f"detector.switching.{k}")
    for i, gap in enumerate(detector.gaps):
        if not math.isfinite(gap) or abs(gap) > MAX_MAGNITUDE:
            reader.fail(f"gap {gap} is not a finite number of magnitude at most {MAX_MAGNITUDE:g}",
                        f"detector.gaps[{i}]")
    if detector.coupling is not None and not (math.isfinite(detector.coupling) and 0 < detector.coupling
                                              <= MAX_MAGNITUDE):
        reader.fail(f"expected a finite positive coupling, got {detector.coupling}", "detector.coupling")


def _check_static_shells(reader, values, regions, interfaces) -> None:
    """A static shell needs a timelike t on both sides: -g_tt > 0 at the interface at the parameters' values
    (otherwise it sits at or inside a horizon of one side, and the first junction condition cannot hold)."""
    for i, interface in enumerate(interfaces):
        for name in interface.between:
            region = regions[name]
            g_tt = region.metric[0, 0]
            if g_tt.free_symbols - set(values) - {interface.coordinate}:
                continue      # unknowns (fixed by the junction) or functions: nothing to evaluate
            try:
                value = complex(sp.N(g_tt.subs(interface.coordinate, interface.value).subs(values), 20))
            except (TypeError, ValueError):
                continue
            if value.imag == 0 and -value.real <= 0:
                reader.fail(f"the shell at {interface.text} lies at or inside a horizon of region '{name}': "
                            f"-g_tt = {-value.real:.6g} there at the parameters' values, and a static shell needs "
                            "-g_tt > 0 on both sides (move it outward or lower the mass)", f"interface[{i}].at")


def _check_value(reader: _Reader, p: Parameter):
    v, a = p.value, p.assumptions
    key = f"parameters.{p.name}.value"
    if not math.isfinite(v):
        reader.fail(f"value {v} is not finite", key)
    if abs(v) > MAX_MAGNITUDE:
        reader.fail(f"value {v:g} is larger than {MAX_MAGNITUDE:g} in magnitude; rescale the units", key)
    if (a.get("positive") and v <= 0) or (a.get("negative") and v >= 0) or (a.get("nonnegative") and v < 0) \
            or (a.get("nonpositive") and v > 0) or (a.get("nonzero") and v == 0) \
            or (a.get("integer") and v != int(v)):
        shown = ", ".join(k for k, on in a.items() if on)
        reader.fail(f"value {v} contradicts the assumptions ({shown})", key)


def _check_not_degenerate(reader: _Reader, metric: sp.Matrix, coordinates, key: str, name: str):
    n = metric.shape[0]
    for i in range(n):
        if all(metric[i, j] == 0 for j in range(n)):
            raise InputError(f"region '{name}': the metric is degenerate (no term in d{coordinates[i].name})",
                             file=reader.path, key=key)


def _equation(reader, parser, text, coordinates, key, definitions):
    if text is None:
        reader.fail("expected 'coordinate = value', for example \"r = R\"", key)
    text = reader.text(text, key)
    try:
        left, right = parser.parse_equation(text)
    except ExpressionError as exc:
        raise exc.located(reader.path, key) from None
    if left not in coordinates:
        reader.fail(f"the left side of {text!r} must be a coordinate ({', '.join(c.name for c in coordinates)})",
                    key)
    right = reader.substitute(right, definitions, key)
    if right.free_symbols & set(coordinates):
        reader.fail(f"the right side of {text!r} must not depend on the coordinates", key)
    return left, right, text


HORIZON = sp.Symbol("horizon", positive=True)


def _resolve_horizons(reader, domains, metric, coordinates, parameters, key) -> tuple[Domain, ...]:
    """Bounds written as 'horizon' become the roots of f = -g_tt they stand for (30-digit numbers; the field
    stage then finds them to be horizons, names them r_h, r_c and divides them out)."""
    from derive.spec.roots import horizon_bounds

    values = {p.symbol: p.value for p in parameters.values() if p.value is not None}
    out = []
    for domain in domains:
        bounds = [domain.lower, domain.upper]
        if not any(b is not None and b.has(HORIZON) for b in bounds):
            out.append(domain)
            continue
        if domain.coordinate != coordinates[1]:
            reader.fail("'horizon' can only bound the radial coordinate", key)
        if any(b is not None and b.has(HORIZON) and b != HORIZON for b in bounds):
            reader.fail("write 'horizon' alone as a bound (e.g. 'r > horizon', 'horizon < r < horizon')", key)
        given = []
        for b in bounds:
            if b == HORIZON:
                given.append("horizon")
            elif b is None:
                given.append(None)
            else:
                value = _value_at(reader, b, values, key)
                if value is None:
                    reader.fail(f"the bound {b} needs numeric parameters to locate the horizon beside it", key)
                given.append(mpmath.mpf(value))
        try:
            lower, upper = horizon_bounds(-metric[0, 0], domain.coordinate, values, *given)
        except ValueError as exc:
            reader.fail(f"cannot place 'horizon': {exc}", key)
        out.append(Domain(domain.coordinate,
                          sp.Float(mpmath.nstr(lower, 30), 30) if lower is not None else domain.lower,
                          sp.Float(mpmath.nstr(upper, 30), 30) if upper is not None else domain.upper,
                          domain.lower_closed, domain.upper_closed))
    return tuple(out)


def _domains(reader, where, coordinates, key) -> tuple[Domain, ...]:
    """Turn a conjunction of comparisons into coordinate intervals."""
    relations = list(where.args) if isinstance(where, sp.And) else [where]
    bounds: dict[sp.Symbol, dict] = {}
    for rel in relations:
        if not isinstance(rel, sp.core.relational.Relational):
            reader.fail(f"cannot read {rel} as a bound", key)
        lhs, rhs = rel.lhs, rel.rhs
        strict = isinstance(rel, (sp.StrictLessThan, sp.StrictGreaterThan))
        less = isinstance(rel, (sp.StrictLessThan, sp.LessThan))      # lhs < rhs
        if lhs in coordinates and not (rhs.free_symbols & set(coordinates)):
            coord, value, is_upper = lhs, rhs, less
        elif rhs in coordinates and not (lhs.free_symbols & set(coordinates)):
            coord, value, is_upper = rhs, lhs, not less
        elif not (rel.free_symbols & set(coordinates)):
            continue   # a condition on the parameters only
        else:
            reader.fail(f"cannot read {rel} as a bound on one coordinate (write e.g. '2*M < r < R')", key)
        entry = bounds.setdefault(coord, {})
        side = "upper" if is_upper else "lower"
        if side in entry:
            reader.fail(f"two {side} bounds on {coord}", key)
        entry[side] = (value, not strict)
    return tuple(Domain(c, b.get("lower", (None,))[0], b.get("upper", (None,))[0],
                        b.get("lower", (None, False))[1], b.get("upper", (None, False))[1])
                 for c, b in bounds.items())


def _field(reader, parser, table, dimension, definitions):
    if table is None:
        return None
    reader.check_keys(table, FIELD_KEYS, "field")
    mass = reader.substitute(reader.expression(parser, table.get("mass", "0"), "field.mass"), definitions,
                             "field.mass")
    coupling_value = table.get("coupling", "0")
    if coupling_value in ("conformal", "minimal"):
        coupling = sp.Rational(dimension - 2, 4 * (dimension - 1)) if coupling_value == "conformal" else sp.S(0)
        text = coupling_value
    else:
        coupling = reader.substitute(reader.expression(parser, coupling_value, "field.coupling"), definitions,
                                     "field.coupling")
        text = str(coupling_value)
    for k, v in (("mass", mass), ("coupling", coupling)):
        if v.is_number and not v.is_real:
            reader.fail("expected a real value", f"field.{k}")
    if mass.is_number and mass < 0:
        reader.fail("the mass must not be negative", "field.mass")
    boundary = table.get("boundary", "dirichlet")
    if boundary not in BOUNDARIES:
        reader.fail(f"expected one of {', '.join(repr(b) for b in BOUNDARIES)} (the condition at an AdS boundary), "
                    f"got {boundary!r}", "field.boundary")
    return FieldSpec(mass, coupling, text, boundary)


def _switching(reader, parser, switching, definitions, key, extra=()):
    """A switching table: its shape and its keys as expressions (``extra``: keys allowed beside the usual)."""
    if not isinstance(switching, Mapping):
        reader.fail('expected a table such as { shape = "gaussian", width = "1" }', key)
    reader.check_keys(switching, SWITCHING_KEYS + tuple(extra), key)
    switching = dict(switching)
    shape = switching.get("shape", "gaussian")
    if shape not in SWITCHING_SHAPES:
        close = suggest(shape, SWITCHING_SHAPES)
        hint = f"; did you mean '{close}'?" if close else f" (one of {', '.join(SWITCHING_SHAPES)})"
        reader.fail(f"unknown switching shape {shape!r}{hint}", f"{key}.shape")
    switching["shape"] = shape
    takes = SHAPE_KEYS[shape]
    for k in switching:
        if k not in takes + ("shape", "tail") + tuple(extra):
            article = "an" if shape[0] in "aeiou" else "a"
            reader.fail(f"{article} {shape} switching takes {', '.join(takes)} (and tail), not {k}"
                        + ("; a gaussian's width plays the part of a duration" if k == "width" else ""), f"{key}.{k}")
    for k in ("width", "duration", "ramp", "tail") + tuple(extra):
        if k in switching:
            value = reader.substitute(reader.expression(parser, switching[k], f"{key}.{k}"),
                                      definitions, f"{key}.{k}")
            switching[k] = value
    if shape == "expression":
        if "expression" not in switching:
            reader.fail("a switching of shape 'expression' needs expression = \"...\" in tau", f"{key}.expression")
        tau = sp.Symbol("tau", real=True)
        symbols = dict(parser.symbols)
        symbols["tau"] = tau
        switching["expression"] = reader.expression(ExpressionParser(symbols, parser.functions),
                                                    switching["expression"], f"{key}.expression")
    for k in takes:
        if k not in switching:
            article = "an" if shape[0] in "aeiou" else "a"
            reader.fail(f"{article} {shape} switching needs {k}", f"{key}.{k}")
    return switching


def _detectors(reader, parser, entries, definitions):
    """[[detectors]]: each with a name, a static position (checked once the spacetime is built), one gap and a
    switching whose ``centre`` is the time of its peak in the spec's time coordinate (default 0)."""
    if entries is None:
        return ()
    if not isinstance(entries, list) or not all(isinstance(e, Mapping) for e in entries):
        reader.fail("expected an array of tables: [[detectors]] name = ..., at = ..., gap = ..., switching = {...}",
                    "detectors")
    if not 2 <= len(entries) <= MAX_DETECTORS:
        reader.fail(f"expected between 2 and {MAX_DETECTORS} detectors (one detector: use [detector] alone)",
                    "detectors")
    out, names = [], set()
    for i, table in enumerate(entries):
        key = f"detectors[{i}]"
        reader.check_keys(table, ARRAY_KEYS, key)
        for required in ("name", "at", "gap"):
            if required not in table:
                reader.fail(f"missing {required!r}", f"{key}.{required}")
        name = table["name"]
        if not isinstance(name, str) or not name.strip() or len(name) > 64:
            reader.fail("expected a name (a short string)", f"{key}.name")
        if name in names:
            reader.fail(f"the name {name!r} is used twice", f"{key}.name")
        names.add(name)
        at = table["at"]
        if isinstance(at, bool) or not isinstance(at, (str, int, float)):
            reader.fail('expected a position such as "r = 2, theta = pi/2, phi = 0"', f"{key}.at")
        gap = reader.number(table["gap"], f"{key}.gap")
        switching = _switching(reader, parser, table.get("switching", {"shape": "gaussian", "width": 1.0}),
                               definitions, f"{key}.switching", extra=("centre",))
        out.append(ArrayDetectorSpec(name, at, gap, switching))
    return tuple(out)


def _design(reader, table, region_names):
    """[design]: the probe search (derive design); every key optional."""
    if table is None:
        return None
    reader.check_keys(table, DESIGN_KEYS, "design")
    region = table.get("region")
    if region is not None:
        if not isinstance(region, str) or region not in region_names:
            close = suggest(str(region), region_names)
            hint = f"; did you mean '{close}'?" if close else f" (the regions: {', '.join(region_names)})"
            reader.fail(f"no region named {region!r}{hint}", "design.region")
        if "radii" in table:
            reader.fail("give radii or a region to search, not both", "design.region")

    def pair(key, positive=False):
        value = table.get(key)
        if value is None:
            return None
        if not (isinstance(value, list) and len(value) == 2):
            reader.fail("expected two numbers [low, high]", f"design.{key}")
        low, high = (reader.number(v, f"design.{key}") for v in value)
        if not (math.isfinite(low) and math.isfinite(high) and low < high):
            reader.fail(f"expected finite numbers with low < high, got [{low:g}, {high:g}]", f"design.{key}")
        if max(abs(low), abs(high)) > MAX_MAGNITUDE:
            reader.fail(f"expected numbers of magnitude at most {MAX_MAGNITUDE:g}", f"design.{key}")
        if positive and low < 0:
            reader.fail(f"expected radii >= 0, got [{low:g}, {high:g}]", f"design.{key}")
        return (low, high)

    def positive(key):
        if key not in table:
            return None
        value = reader.number(table[key], f"design.{key}")
        if not (math.isfinite(value) and 0 < value <= MAX_MAGNITUDE):
            reader.fail(f"expected a positive number, got {value:g}", f"design.{key}")
        return value

    shapes = table.get("shapes", ["gaussian"])
    if not (isinstance(shapes, list) and shapes and all(isinstance(s, str) for s in shapes)):
        reader.fail(f"expected a list of switching shapes (from {', '.join(DESIGN_SHAPES)})", "design.shapes")
    for shape in shapes:
        if shape not in DESIGN_SHAPES:
            close = suggest(shape, DESIGN_SHAPES)
            hint = f"; did you mean '{close}'?" if close else ""
            reader.fail(f"{shape!r} cannot be searched{hint}: the shapes scaled to a duration are "
                        f"{', '.join(DESIGN_SHAPES)} (a sharp switching diverges in 3+1; an expression has no "
                        "duration to vary)", "design.shapes")
    locality = table.get("locality", 1.0)
    locality = reader.number(locality, "design.locality")
    if not (0 < locality <= 1):
        reader.fail(f"expected the share of the light round trip the switching may last, in (0, 1], got "
                    f"{locality:g}", "design.locality")
    shortest, longest = positive("shortest"), positive("longest")
    if shortest is not None and longest is not None and shortest > longest:
        reader.fail(f"shortest ({shortest:g}) is longer than longest ({longest:g})", "design.shortest")
    positions = table.get("positions", 5)
    if isinstance(positions, bool) or not isinstance(positions, int) or not 2 <= positions <= 50:
        reader.fail(f"expected a whole number of positions from 2 to 50, got {positions!r}", "design.positions")
    return DesignSpec(pair("gaps"), tuple(dict.fromkeys(shapes)), locality, shortest, longest,
                      pair("radii", positive=True), positions, region, pair("delays"))


def _detector(reader, parser, table, coordinates, definitions):
    if table is None:
        return None
    reader.check_keys(table, DETECTOR_KEYS, "detector")
    coordinate = position = None
    if "at" in table:
        coordinate, position, _ = _equation(reader, parser, table["at"], coordinates, "detector.at", definitions)
    switching = _switching(reader, parser, table.get("switching", {"shape": "gaussian", "width": 1.0}),
                           definitions, "detector.switching")
    gaps = table.get("gaps", [])
    if not isinstance(gaps, list) or not all(isinstance(g, (int, float)) and not isinstance(g, bool) for g in gaps):
        reader.fail("expected a list of numbers", "detector.gaps")
    state = table.get("state", "vacuum")
    if state not in STATES:
        close = suggest(state, STATES)
        hint = f"; did you mean '{close}'?" if close else f" (one of {', '.join(STATES)})"
        reader.fail(f"unknown state {state!r}{hint}", "detector.state")
    coupling = table.get("coupling")
    if coupling is not None:
        coupling = reader.number(coupling, "detector.coupling")
    return DetectorSpec(coordinate, position, switching, tuple(float(g) for g in gaps), state, coupling)
