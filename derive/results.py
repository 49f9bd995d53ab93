"""Result objects of the public API: what a notebook holds after ``st.spectrum(...)`` or ``st.response(...)``.

Each result keeps the JSON of the matching command (``derive spectrum --json``, ``derive response --json``) and
reads it back as attributes named as the JSON keys, numbers as numpy arrays: a response has ``.gaps``,
``.response``, ``.error``, ``.locality``, ...; a spectrum ``.omega``, ``.density``, ``.error["density"]``.
Every result also has

* ``.ok`` and ``.status`` ("ok" or "tolerance not met") and ``.message`` (what was missed, by how much),
* ``.tolerance``, ``.method`` and ``.provenance`` (spec path and hash, parameters, derive's version),
* ``.to_json()`` (what the command prints), ``.to_dataframe()`` (pandas), ``.plot()`` (a matplotlib Figure),
* a short ``repr`` and an HTML table for notebooks.
"""

from __future__ import annotations

import html

import numpy as np

from derive import __version__

STATUS_OK = "ok"
STATUS_SHORT = "tolerance not met"


def plain(value, nonfinite_as_none: bool = False):
    """numpy scalars and arrays inside nested dicts and lists as plain Python numbers and lists (what json
    writes); with ``nonfinite_as_none``, inf and nan become None (JSON null)."""
    if isinstance(value, dict):
        return {str(k): plain(v, nonfinite_as_none) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v, nonfinite_as_none) for v in value]
    if isinstance(value, np.ndarray):
        return plain(value.tolist(), nonfinite_as_none)
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (np.floating, float)):
        return None if nonfinite_as_none and not np.isfinite(value) else float(value)
    return value


def _arrays(value):
    """Lists of numbers (or None) become float arrays (None as nan); dicts are read recursively."""
    if isinstance(value, dict):
        return {k: _arrays(v) for k, v in value.items()}
    if isinstance(value, list) and value and all(v is None or isinstance(v, (int, float)) and not isinstance(v, bool)
                                                 for v in value):
        return np.array([np.nan if v is None else v for v in value], dtype=float)
    return value


class Result:
    """The common part of every numeric result (see the module docstring)."""

    kind = "result"
    _tables = ("", "")  # names in derive.report.tables: data -> (header, columns), and (data, title) -> Figure

    def _table(self, data):
        from derive.report import tables

        return getattr(tables, self._tables[0])(data)

    def _figure(self, data, title):
        from derive.report import tables

        return getattr(tables, self._tables[1])(data, title)

    def __init__(self, data: dict, spacetime, ok: bool = True, message: str = "", tolerance: float | None = None):
        self._data = data
        self.ok = bool(ok)
        self.message = message if not ok else (message or "ok")
        self.tolerance = tolerance
        self.title = spacetime.title
        self.provenance = {"spec": spacetime.path, "spec_hash": spacetime.source_hash,
                           "parameters": {p.name: p.value for p in spacetime.parameters.values()},
                           "derive": __version__}

    @property
    def status(self) -> str:
        return STATUS_OK if self.ok else STATUS_SHORT

    @property
    def method(self) -> str | None:
        return self._data.get("method")

    def __getattr__(self, name):
        if name.startswith("_"):
            raise AttributeError(name)
        data = self.__dict__.get("_data", {})
        if name in data:
            return _arrays(data[name])
        raise AttributeError(f"{type(self).__name__} has no {name!r} (its keys: {', '.join(data)})")

    def __getitem__(self, name):
        """result["key"] is result.key (the JSON's keys)."""
        try:
            return getattr(self, name)
        except AttributeError:
            raise KeyError(name) from None

    def get(self, name, default=None):
        return _arrays(self._data[name]) if name in self._data else default

    def __contains__(self, name) -> bool:
        return name in self._data

    def __dir__(self):
        return sorted(set(super().__dir__()) | set(self._data))

    def keys(self) -> list[str]:
        return list(self._data)

    def to_json(self) -> dict:
        """The JSON of the matching command, with "status" (and "message" when the tolerance was missed)."""
        out = dict(self._data)
        out["status"] = self.status
        if not self.ok:
            out["message"] = self.message
        return out

    def to_dataframe(self):
        """The table of the result (the CSV the command writes), as a pandas DataFrame."""
        import pandas as pd

        header, columns = self._table(self._data)
        return pd.DataFrame({h: [np.nan if x is None or x == "" else x for x in c] for h, c in zip(header, columns)})

    def plot(self):
        """The figure the command writes, as a matplotlib Figure."""
        return self._figure(self._data, self.title)

    def _summary(self) -> str:
        return ""

    def __repr__(self) -> str:
        return f"<{type(self).__name__} of {self.title!r}: {self._summary()}; status {self.status}>"

    def _repr_html_(self) -> str:
        frame = self.to_dataframe()
        table = frame.to_html(max_rows=12, float_format=lambda x: f"{x:.10g}", index=False)
        note = "" if self.ok else f"<p><b>{html.escape(self.message)}</b></p>"
        return (f"<p><b>{html.escape(type(self).__name__)}</b> of {html.escape(self.title)}: "
                f"{html.escape(self._summary())}; status <b>{self.status}</b></p>{note}{table}")


def _worst_relative(values, errors) -> float:
    values, errors = np.asarray(values, dtype=float), np.asarray(errors, dtype=float)
    keep = np.isfinite(values) & (values != 0)
    if not np.any(keep):
        return 0.0
    return float(np.nanmax(errors[keep] / np.abs(values[keep])))


class Spectrum(Result):
    """The spectral density at a static point (or, around a horizon, the scattering of one l and the density)."""

    kind = "spectrum"

    @property
    def _tables(self):
        if "transmission" in self._data:
            return ("scattering_table", "scattering_figure")
        return ("spectrum_table", "spectrum_figure")

    def _summary(self) -> str:
        data = self._data
        where = f"r = {data.get('at') or 0:g}" if data.get("at") is not None else "no point (scattering only)"
        which = f"l = {data['l']}" if data.get("l") is not None else "summed over l"
        text = f"{len(data['omega'])} frequencies at {where}, {which}"
        if data.get("density") is not None:
            text += f", largest relative error {_worst_relative(data['density'], data['error']['density']):.1e}"
        return text


class Response(Result):
    """The static detector's response F(Omega), the comparison, locality and the runs to tell apart."""

    kind = "response"
    _tables = ("response_table", "response_figure")

    def _summary(self) -> str:
        data = self._data
        verdict = "local" if data["locality"]["local"] else "not local"
        return (f"{len(data['gaps'])} gaps at r = {data['at']:g}, {data['switching']['shape']} switching, "
                f"{data['state']} state, {verdict}, largest relative error "
                f"{_worst_relative(data['response'], data['error']):.1e}")


class Correlations(Result):
    """Several detectors: each one's probability, and every pair's joint state (L, M, entanglement, signalling)."""

    kind = "correlations"
    _tables = ("correlations_table", "correlations_figure")

    def _summary(self) -> str:
        data = self._data
        entangled = sum(1 for p in data["pairs"] if p["concurrence"] > 0)
        return (f"{len(data['detectors'])} detectors, {len(data['pairs'])} pairs ({entangled} entangled), "
                f"{data['state']} state")


class TwoPoint(Result):
    """The field's spectral two-point function between two static points (per unit omega), with errors."""

    kind = "two-point"
    _tables = ("two_point_table", "two_point_figure")

    def _summary(self) -> str:
        data = self._data
        points = " and ".join(p["text"] for p in data["between"])
        scale = np.asarray(data["scale"], dtype=float)
        error = np.asarray(data["error"]["wightman"], dtype=float)
        worst = float(np.nanmax(error / np.where(scale > 0, scale, np.inf))) if len(scale) else 0.0
        return (f"{len(data['omega'])} frequencies between {points} (cos angle {data['cos_angle']:.6g}), "
                f"{data['state']} state, largest error / scale {worst:.1e}")


class PairDesign(Result):
    """Where and when to switch the second of two detectors so that their joint state tells the spacetime from
    its reference fastest: the best and the spec's placements, and the scan over the radius."""

    kind = "design"
    _tables = ("pair_design_table", "pair_design_figure")

    def _summary(self) -> str:
        best, default = self._data["pair"]["best"], self._data["pair"]["default"]
        return (f"best pair: second detector at r = {best['radius']:.4g}, delay {best['delay']:.4g}, "
                f"{best['runs']:.3g} runs (counting {best['counting_runs']:.3g}; the spec's placement "
                f"{default['runs']:.3g})")


class Design(Result):
    """The probe that tells the spacetime from its reference fastest while local, the trade-off of runs against
    the switching's duration, and the quantum limit."""

    kind = "design"
    _tables = ("design_table", "design_figure")

    def _summary(self) -> str:
        best, default = self._data["best"], self._data["default"]
        return (f"best probe: gap {best['gap']:.4g}, {best['switching']['shape']} lasting "
                f"{best['duration']:.4g}, {best['runs']:.3g} runs (default probe {default['runs']:.3g})")
