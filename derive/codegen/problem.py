"""From verified kernels to the numeric problem the solver reads (the symbolic-to-numeric boundary).

Regions are put in order from the innermost end outward by following the interfaces; parameters are bound to
the spec's values.  Only kernels that passed verification are used: ``require_verified`` is called on exactly
the ones the solver needs, so a flagged kernel the solver does not use (a closed-form tortoise coordinate near
r = 0, say) does not block it.
"""

from __future__ import annotations

import numpy as np

from derive.codegen.catalog import radial_bounds
from derive.errors import AccuracyError, InputError
from derive.solve.problem import NumericInterface, NumericProblem, NumericRegion


def _bind(kernel, values):
    function = kernel.function
    return lambda *args: function(*args, *values)


def numeric_problem(kernel_set) -> NumericProblem:
    st = kernel_set.spacetime
    if st.field is None:
        raise InputError("no [field] section: the solver needs the field's mass and coupling", file=st.path,
                         key="field")
    field = st.field_problem
    values = tuple(kernel_set.values[p] for p in kernel_set.parameters)
    needed = []
    for name in field.regions:
        for quantity in ("potential", "dtortoise_dr", "metric_f"):
            needed.append(kernel_set.get(quantity, name))
    for matching in field.interfaces:
        needed.append(kernel_set.get("transfer_matrix", f"{matching.between[0]}|{matching.between[1]}"))
    for entry in needed:
        if entry.verification is None:
            kernel_set.verify(entry)
    bad = [e for e in needed if e.verification.status != "verified"]
    if bad:
        raise AccuracyError("the solver refuses unverified kernels: " + ", ".join(e.name for e in bad),
                            {e.name: e.verification.reason for e in bad})

    regions = {}

    def verified(quantity, name, gravity=None):
        """The bound kernel of an end (with its surface gravity's value), or None when missing or unverified."""
        try:
            entry = kernel_set.get(quantity, name)
            kappa = kernel_set.get(gravity, name) if gravity else None
        except KeyError:
            return None
        if entry.verification is None:
            kernel_set.verify(entry)
        if entry.verification.status != "verified":
            return None
        bound = _bind(entry.kernel, values)
        return bound if kappa is None else (bound, float(np.asarray(kappa.kernel.function(*values))))

    series, centre, outer = {}, {}, {}
    for name, region in field.regions.items():
        kinds = (region.ends["lower"]["kind"], region.ends["upper"]["kind"])
        found = {"series": verified("horizon_series", name, "surface_gravity") if kinds[0] == "horizon" else None,
                 "centre": verified("centre_series", name) if kinds[0] == "regular centre" else None,
                 "outer": verified("outer_series", name, "outer_surface_gravity") if kinds[1] == "horizon" else None}
        for store, key in ((series, "series"), (centre, "centre"), (outer, "outer")):
            if found[key] is not None:
                store[name] = found[key]
    for name, region in field.regions.items():
        lower, upper = radial_bounds(region, st.parameter_values)
        ends = region.ends
        regions[name] = NumericRegion(
            name, lower, upper, ends["lower"]["kind"], ends["upper"]["kind"], ends["upper"].get("tail"),
            _bind(kernel_set.get("potential", name).kernel, values),
            _bind(kernel_set.get("dtortoise_dr", name).kernel, values),
            _bind(kernel_set.get("metric_f", name).kernel, values),
            *(series.get(name, (None, None))), centre.get(name), *(outer.get(name, (None, None))),
            {c: verified(f"boundary_series_{c}", name) for c in ("dirichlet", "neumann")}
            if ends["upper"].get("tail") == "AdS-like" else None, _lapse(region, st.parameter_values))
    order = sorted(regions.values(), key=lambda reg: reg.lower)
    if st.field.boundary != "dirichlet" and order[-1].tail != "AdS-like":
        raise InputError(f"boundary = {st.field.boundary!r} is a condition at an AdS boundary, and this spacetime "
                         "has none (its outermost region does not end on one)", file=st.path, key="field.boundary")
    interfaces = []
    for matching in field.interfaces:
        first, second = matching.between
        radius = float(matching.shell.position.subs(st.parameter_values))
        kernel = _bind(kernel_set.get("transfer_matrix", f"{first}|{second}").kernel, values)
        if regions[first].lower < regions[second].lower:
            interfaces.append(NumericInterface(radius, first, second, kernel))
        else:
            interfaces.append(NumericInterface(radius, second, first, _inverse(kernel)))
    mass = float(st.field.mass.subs(st.parameter_values))
    return NumericProblem(st.title, tuple(order), tuple(interfaces), mass, kernel_set._length_scale(),
                          len(st.coordinates), st.field.boundary)


def _lapse(region, values) -> float | None:
    """The constant lapse of a flat region as a number (derive.fields.radial.RegionField.flat_lapse), or None."""
    lapse = region.flat_lapse
    if lapse is None:
        return None
    number = complex(lapse.subs(values).evalf(30))
    return number.real if number.imag == 0 and number.real > 0 else None


def _inverse(transfer):
    import numpy as np

    def inverse(l, omega):
        m = np.asarray(transfer(l, omega), dtype=float)
        det = m[0, 0] * m[1, 1] - m[0, 1] * m[1, 0]
        return np.array([[m[1, 1], -m[0, 1]], [-m[1, 0], m[0, 0]]]) / det
    return inverse


def numeric_detector(spacetime):
    """The detector and comparison settings as plain numbers."""
    from derive.solve.problem import NumericDetector

    d = spacetime.detector
    if d is None:
        raise InputError("no [detector] section: position, switching and gaps are needed", file=spacetime.path,
                         key="detector")
    values = spacetime.parameter_values
    radius = 0.0 if d.position is None else float(d.position.subs(values))
    switching = {}
    for key, value in d.switching.items():
        if key in ("shape", "expression"):
            continue
        number = value.subs(values)
        if not number.is_number:
            raise InputError(f"switching {key} = {value} has no numeric value", file=spacetime.path,
                             key=f"detector.switching.{key}")
        switching[key] = float(number)
    compare = spacetime.compare
    profile = None
    if "expression" in d.switching:
        profile = _switching_profile(spacetime, d.switching["expression"])
    return NumericDetector(radius, d.switching.get("shape", "gaussian"), switching, tuple(d.gaps), d.state,
                           d.coupling, None if compare is None else compare.with_,
                           3.0 if compare is None else compare.sigmas, profile)


def _switching_profile(spacetime, expression):
    """A user switching chi(tau) lowered to a numpy kernel (parameters bound), checked against its mpmath twin."""
    import sympy as sp

    from derive.codegen.kernel import lower

    tau = sp.Symbol("tau", real=True)
    numeric = expression.subs(spacetime.parameter_values)
    stray = numeric.free_symbols - {tau}
    if stray:
        raise InputError(f"the switching expression depends on {', '.join(map(str, stray))}, not only tau",
                         file=spacetime.path, key="detector.switching.expression")
    kernel = lower(numeric, [tau], "switching_profile").kernel.function
    twin = lower(numeric, [tau], "switching_profile", backend="mpmath").kernel.function
    import mpmath

    for point in (-0.37, 0.0, 0.21):
        with mpmath.workdps(30):
            exact = float(twin(mpmath.mpf(point)))
        value = float(np.asarray(kernel(np.array([point]))).reshape(-1)[0])
        if abs(value - exact) > 1e-12 * max(1.0, abs(exact)):
            raise AccuracyError("the switching expression's kernel disagrees with its mpmath twin",
                                {"at": point, "numpy": value, "mpmath": exact})
    return kernel


def numeric_switchings(spacetime) -> list[dict]:
    """The [[detectors]] switchings as plain numbers: {"shape", "width", "centre", ...} per detector, in order."""
    values = spacetime.parameter_values
    out = []
    for i, entry in enumerate(spacetime.detectors):
        numbers = {"shape": entry.switching.get("shape", "gaussian"), "centre": 0.0}
        for key, value in entry.switching.items():
            if key in ("shape", "expression"):
                continue
            number = value.subs(values)
            if not number.is_number or not np.isfinite(float(number)):
                raise InputError(f"switching {key} = {value} has no finite numeric value", file=spacetime.path,
                                 key=f"detectors[{i}].switching.{key}")
            numbers[key] = float(number)
        out.append(numbers)
    return out
