"""Tables (CSV) and figures (PNG) of numeric results, written atomically."""

from __future__ import annotations

import csv
import io
import os

import numpy as np

from derive.outputs import write_atomic


def _csv(header, rows) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(header)
    for row in rows:
        writer.writerow([f"{x:.17g}" if isinstance(x, float) else x for x in row])
    return buffer.getvalue()


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=120, bbox_inches="tight")
    return buffer.getvalue()


COLUMN_WIDTH = 3.4    # inches: one column of a two-column journal page (Physical Review's 8.6 cm)
PAGE_WIDTH = 7.0      # the full width of such a page (17.8 cm), for figures with panels side by side
SMALLEST_FONT = 5.5   # points: the smallest text a journal accepts after reduction (common practice: 5-6 pt)


def _save(figure, out: str, stem: str, pdf: bool) -> list[str]:
    """The figure as PNG (screen size, with its title) and, with ``pdf``, as a vector PDF laid out for a journal
    column (:func:`for_column`)."""
    paths = [os.path.join(out, stem + ".png")]
    write_atomic(paths[0], _png(figure))
    if pdf:
        import matplotlib

        for_column(figure)
        buffer = io.BytesIO()
        # TrueType (Type 42) fonts embedded: journals' production systems refuse Type 3 bitmap fonts
        with matplotlib.rc_context({"pdf.fonttype": 42}):
            figure.savefig(buffer, format="pdf", bbox_inches="tight", pad_inches=0.02)
        paths.append(os.path.join(out, stem + ".pdf"))
        write_atomic(paths[1], buffer.getvalue())
    return paths


def for_column(figure) -> None:
    """Lay a screen figure out for a paper, in place: one column wide (the full page width when its panels stand
    side by side), the height in proportion, text scaled to the width but never below SMALLEST_FONT, lines and
    markers thinner, and the axes' titles dropped (a paper's caption says what they said)."""
    from matplotlib.lines import Line2D
    from matplotlib.text import Text

    width, height = figure.get_size_inches()
    target = PAGE_WIDTH if width > 8.0 else COLUMN_WIDTH
    figure.set_size_inches(target, height * target / width)
    for axis in figure.axes:
        axis.set_title("")
        axis.tick_params(labelsize=max(SMALLEST_FONT, 7.0), length=2.5, width=0.6, pad=2)
    shrink = 0.75
    for text in figure.findobj(Text):
        if text.get_text():
            text.set_fontsize(max(SMALLEST_FONT, min(8.0, text.get_fontsize() * shrink)))
    for line in figure.findobj(Line2D):
        line.set_linewidth(line.get_linewidth() * 0.7)
        line.set_markersize(line.get_markersize() * 0.6)
    figure.tight_layout(pad=0.3)


def _pyplot():
    import matplotlib

    if matplotlib.get_backend().lower() not in ("agg", "pdf", "svg") and not _interactive():
        matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _interactive() -> bool:
    """True inside IPython/Jupyter, where the notebook's own backend shows figures."""
    import sys

    return "IPython" in sys.modules or "ipykernel" in sys.modules


# -- tables: (header, columns) of each result, shared by the CSV files and the notebook's data frames --------
def spectrum_table(data: dict) -> tuple[list[str], list[list]]:
    header = ["omega", "density", "density_error", "minkowski_density"]
    columns = [data["omega"], data["density"], data["error"]["density"], data["minkowski_density"]]
    if data.get("ratio_to_minkowski") is not None:
        header += ["ratio_to_minkowski", "ratio_to_minkowski_error"]
        columns += [data["ratio_to_minkowski"], data["ratio_to_minkowski_error"]]
    return header, columns


def bound_state_table(levels: dict) -> tuple[list[str], list[list]]:
    return (["omega", "omega_error", "weight", "weight_error"],
            [levels["omega"], levels["error"]["omega"], levels["weight"], levels["error"]["weight"]])


def response_table(data: dict) -> tuple[list[str], list[list]]:
    header = ["gap", "response", "error"]
    columns = [data["gaps"], data["response"], data["error"]]
    reference = data.get("reference")
    if reference:
        header += ["reference_response", "reference_error", "relative_difference", "relative_difference_error",
                   "trials_to_distinguish", "trials_lower_bound"]
        columns += [reference["response"], reference["error"], data["relative_difference"],
                    data["relative_difference_error"],
                    [x if x is not None else "" for x in data["trials_to_distinguish"] or [None] * len(data["gaps"])],
                    [x if x is not None else "" for x in data.get("trials_lower_bound") or [None] * len(data["gaps"])]]
    for name, value in (data.get("states") or {}).items():
        header += [f"response_{name}", f"error_{name}"]
        columns += [value["response"], value["error"]]
    return header, columns


def scattering_table(data: dict) -> tuple[list[str], list[list]]:
    header = ["omega", "transmission", "transmission_error", "reflection", "flux_defect"]
    columns = [data["omega"], data["transmission"], data["error"]["transmission"], data["reflection"],
               data["flux_defect"]]
    if data.get("density") is not None:
        header += ["density", "density_error", "density_in", "density_up"]
        columns += [data["density"], data["error"]["density"], data["density_in"], data["density_up"]]
        for name, value in data["states"].items():
            header += [f"{name}_positive", f"{name}_negative"]
            columns += [value["positive"], value["negative"]]
    return header, columns


def two_point_table(data: dict) -> tuple[list[str], list[list]]:
    header = ["omega", "wightman_re", "wightman_im", "error", "scale"]
    columns = [data["omega"], data["wightman"]["re"], data["wightman"]["im"], data["error"]["wightman"],
               data["scale"]]
    for name, value in (data.get("states") or {}).items():
        name = name.replace("-", "_")
        header += [f"{name}_positive_re", f"{name}_positive_im", f"{name}_negative_re", f"{name}_negative_im"]
        columns += [value["positive"]["re"], value["positive"]["im"], value["negative"]["re"],
                    value["negative"]["im"]]
    return header, columns


# -- figures -------------------------------------------------------------------------------------------------
def spectrum_figure(data: dict, title: str):
    plt = _pyplot()
    figure, axes = plt.subplots(2, 1, figsize=(6.4, 6.4), sharex=True)
    axes[0].plot(data["omega"], data["density"], label="derive")
    axes[0].plot(data["omega"], data["minkowski_density"], "--", label=r"Minkowski $\omega/4\pi^2$")
    axes[0].set_ylabel(r"density per unit $\omega$")
    axes[0].legend()
    if data.get("ratio_to_minkowski") is not None:
        # equal local (proper) frequency: the plateau is 1 in a flat region, not the redshift 1/alpha^2
        ratio = np.array([np.nan if v is None else v for v in data["ratio_to_minkowski"]], dtype=float)
        error = np.array([np.nan if v is None else v for v in data["ratio_to_minkowski_error"]], dtype=float)
        axes[1].plot(data["omega"], ratio)
        axes[1].fill_between(data["omega"], ratio - error, ratio + error, alpha=0.3, linewidth=0)
        axes[1].axhline(1.0, color="0.6", linewidth=0.8)
        axes[1].set_ylabel("ratio to Minkowski\nat equal proper frequency")
        axes[1].text(0.98, 0.05, f"redshift factor sqrt(-g_tt) = {data['redshift_factor']:.6g}",
                     transform=axes[1].transAxes, ha="right", va="bottom", fontsize=8)
    else:
        ratio = [d / m if m else float("nan") for d, m in zip(data["density"], data["minkowski_density"])]
        axes[1].plot(data["omega"], ratio)
        axes[1].set_ylabel("ratio to Minkowski\nat equal coordinate frequency")
    axes[1].set_xlabel(r"$\omega$ (spec's time coordinate; $G=c=\hbar=1$)")
    label = f"l = {data['l']}" if data["l"] is not None else "summed over l"
    axes[0].set_title(f"{title}: {label} at r = {data['at']:g}", fontsize=10)
    return figure


def response_figure(data: dict, title: str):
    plt = _pyplot()
    reference = data.get("reference")
    rows = 2 if reference else 1
    figure, axes = plt.subplots(rows, 1, figsize=(6.4, 3.4 * rows), sharex=True, squeeze=False)
    axes = axes[:, 0]
    label = f"this spacetime, {data['state']} state" if data.get("states") else "this spacetime"
    axes[0].errorbar(data["gaps"], data["response"], yerr=data["error"], fmt="o-", label=label)
    for name, value in (data.get("states") or {}).items():
        if name != data["state"]:
            axes[0].plot(data["gaps"], value["response"], ".:", label=f"{name} state")
    values = [v for v in data["response"] if v is not None]
    if values and min(values) > 0 and max(values) > 1e3 * min(values):
        axes[0].set_yscale("log")   # responses spanning decades (excitation at large gaps) read better so
    if reference:
        axes[0].plot(data["gaps"], reference["response"], "s--", label=f"reference: {reference['with']}")
        axes[1].errorbar(data["gaps"], data["relative_difference"], yerr=data["relative_difference_error"], fmt="o-")
        axes[1].axhline(0.0, color="grey", lw=0.5)
        axes[1].set_ylabel(r"$(F - F_{\rm ref})/F_{\rm ref}$")
    axes[0].set_ylabel(r"$F(\Omega)$  ($P = \lambda^2 F$)")
    axes[0].legend(fontsize=8)
    axes[-1].set_xlabel(r"gap $\Omega$ (detector's proper time; $G=c=\hbar=1$)")
    axes[0].set_title(f"{title}: static detector, {data['switching']['shape']} switching, "
                      f"{data['state']} state", fontsize=9)
    axes[0].text(0.98, 0.97, _response_box(data), transform=axes[0].transAxes, ha="right", va="top", fontsize=7,
                 bbox={"boxstyle": "round", "facecolor": "white", "alpha": 0.85, "edgecolor": "0.7"})
    figure.tight_layout()
    return figure


def _response_box(data: dict) -> str:
    """Where the detector is, how it is switched, whether that is local, and how large the error bars are (at
    this accuracy they are far below the markers)."""
    import numpy as np

    s, loc = data["switching"], data["locality"]
    size = f"width {s['width']:g}" if s["shape"] == "gaussian" else f"support {s['support'][1] - s['support'][0]:g}"
    F = np.asarray([v for v in data["response"] if v is not None], dtype=float)
    e = np.asarray([v for v in data["error"] if v is not None], dtype=float)
    worst = float(np.max(e / np.abs(F))) if len(F) and np.all(F != 0) else float("nan")
    verdict = "local" if loc["local"] else "NOT local"
    return (f"detector at r = {data['at']:g}\n{s['shape']} switching, {size}\n"
            f"lasts {loc['duration']:.4g}; light round trip {loc['round_trip']:.4g}: {verdict}\n"
            f"errors up to {worst:.0e} of F (bars below the markers)")


def scattering_figure(data: dict, title: str):
    plt = _pyplot()
    figure, axis = plt.subplots(figsize=(6.4, 4.0))
    axis.plot(data["omega"], data["transmission"], label=r"$|T|^2$")
    axis.plot(data["omega"], data["reflection"], "--", label=r"$|R|^2$")
    axis.set_xlabel(r"$\omega$ (spec's time coordinate; $G=c=\hbar=1$)")
    axis.set_title(f"{title}: l = {data['l']}", fontsize=10)
    axis.legend()
    return figure


def two_point_figure(data: dict, title: str):
    """The real part of the two-point function with its error band, against the scale that bounds it."""
    import numpy as np

    plt = _pyplot()
    figure, axis = plt.subplots(figsize=(6.4, 4.2))
    omega = np.asarray(data["omega"], dtype=float)
    value = np.asarray(data["wightman"]["re"], dtype=float)
    error = np.asarray(data["error"]["wightman"], dtype=float)
    scale = np.asarray(data["scale"], dtype=float)
    axis.plot(omega, value, label=r"Re $S_+(\omega; x_1, x_2)$")
    axis.fill_between(omega, value - error, value + error, alpha=0.3, label="error")
    if np.any(np.asarray(data["wightman"]["im"], dtype=float) != 0):
        axis.plot(omega, data["wightman"]["im"], label=r"Im $S_+$")
    axis.plot(omega, scale, ":", color="grey", label="scale (bound on |S|)")
    axis.plot(omega, -scale, ":", color="grey")
    axis.set_xlabel(r"$\omega$ (spec's time coordinate; $G=c=\hbar=1$)")
    axis.set_ylabel(r"two-point function per unit $\omega$")
    points = " and ".join(p["text"] for p in data["between"])
    axis.set_title(f"{title}: {data['state']} state, between {points}", fontsize=10)
    axis.legend(fontsize=8)
    return figure


def correlations_table(data: dict) -> tuple[list[str], list[list]]:
    """One row per pair: L, M, their errors, the entanglement measures and the signalling read-outs."""
    pairs = data["pairs"]
    header = ["first", "second", "L_re", "L_im", "L_error", "M_re", "M_im", "M_error", "concurrence",
              "concurrence_error", "negativity", "negativity_error", "mutual_information", "mutual_information_error",
              "light_time", "overlap", "commutator_part_re", "commutator_part_im"]
    columns = [[p["between"][0] for p in pairs], [p["between"][1] for p in pairs],
               [p["L"][0] for p in pairs], [p["L"][1] for p in pairs], [p["error"]["L"] for p in pairs],
               [p["M"][0] for p in pairs], [p["M"][1] for p in pairs], [p["error"]["M"] for p in pairs]]
    columns += [[p[k] for p in pairs] for k in ("concurrence", "concurrence_error", "negativity", "negativity_error",
                                                "mutual_information", "mutual_information_error")]
    columns += [[p["signalling"]["light_time"] for p in pairs], [p["signalling"]["overlap"] for p in pairs],
                [p["signalling"]["commutator_part"][0] for p in pairs],
                [p["signalling"]["commutator_part"][1] for p in pairs]]
    return header, columns


def detectors_table(data: dict) -> tuple[list[str], list[list]]:
    names = list(data["detectors"])
    rows = [data["detectors"][n] for n in names]
    return (["name", "at", "gap", "width", "centre", "redshift_factor", "probability", "error"],
            [names, [r["at"]["text"] for r in rows]] + [[r[k] for r in rows] for k in
                                                        ("gap", "width", "centre", "redshift_factor", "probability",
                                                         "error")])


def correlations_figure(data: dict, title: str):
    """|M| against sqrt(L_AA L_BB) per pair (entanglement where the first is larger), with error bars."""
    import numpy as np

    plt = _pyplot()
    multipoles = data.get("multipoles")
    if multipoles:
        figure, (axis, right) = plt.subplots(1, 2, figsize=(10.0, 4.2))
        _multipole_panel(right, data)
    else:
        figure, axis = plt.subplots(figsize=(6.4, 4.2))
    pairs = data["pairs"]
    labels = [f"{p['between'][0]}-{p['between'][1]}" for p in pairs]
    x = np.arange(len(pairs))
    M = [float(np.hypot(*p["M"])) for p in pairs]
    noise = [float(np.sqrt(data["detectors"][p["between"][0]]["probability"]
                           * data["detectors"][p["between"][1]]["probability"])) for p in pairs]
    axis.errorbar(x - 0.1, M, yerr=[p["error"]["M"] for p in pairs], fmt="o", capsize=3, label="|M|")
    axis.plot(x + 0.1, noise, "s", label=r"$\sqrt{L_{AA} L_{BB}}$")
    axis.set_xticks(x, labels, rotation=30 if len(pairs) > 4 else 0, fontsize=8)
    axis.set_xlim(-0.6, len(pairs) - 0.4)
    axis.set_yscale("log")
    axis.set_ylabel("second-order matrix elements (with $\\lambda^2$)")
    axis.set_title(f"{title}: {data['state']} state; entangled where |M| is above", fontsize=10)
    axis.legend(fontsize=8)
    figure.tight_layout()
    return figure


def _multipole_panel(axis, data: dict) -> None:
    """The weight each l contributes to L_ij on the array's sphere, against the reference's when there is one."""
    import numpy as np

    ours = data["multipoles"]
    l = np.asarray(ours["l"])
    axis.errorbar(l, np.abs(ours["weight"]), yerr=ours["error"], fmt="o", ms=4, capsize=2, label="this spacetime")
    theirs = (data.get("reference") or {}).get("multipoles")
    if theirs:
        axis.plot(theirs["l"], np.abs(theirs["weight"]), "x", label=f"reference ({data['reference']['with']})")
    axis.set_yscale("log")
    axis.set_xlabel(r"multipole $l$")
    axis.set_ylabel(r"$|w_l|$: $L_{ij} = \sum_l w_l P_l(\cos\gamma_{ij})$")
    axis.set_title(f"array on the sphere r = {ours['radius']:g}", fontsize=10)
    axis.legend(fontsize=8)


def multipole_table(data: dict) -> tuple[list[str], list[list]]:
    ours = data["multipoles"]
    header, columns = ["l", "weight", "error"], [ours["l"], ours["weight"], ours["error"]]
    if "difference_from_reference" in ours:
        count = len(ours["difference_from_reference"])
        pad = [""] * (len(ours["l"]) - count)
        header += ["difference_from_reference", "difference_error", "significance"]
        columns += [ours["difference_from_reference"] + pad, ours["difference_error"] + pad,
                    ours["significance"] + pad]
    return header, columns


def write_correlations_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    paths = _write_table_and_figure(out, "correlations", correlations_table(data), correlations_figure(data, title),
                                    pdf)
    for stem, table in (("detectors", detectors_table), ("multipoles", multipole_table)):
        if stem == "multipoles" and not data.get("multipoles"):
            continue
        header, columns = table(data)
        path = os.path.join(out, f"{stem}.csv")
        write_atomic(path, _csv(header, zip(*columns)))
        paths.append(path)
    return paths


def design_table(data: dict) -> tuple[list[str], list[list]]:
    """The trade-off curve: for each duration the best probe over the gap and the shapes."""
    rows = data["tradeoff"]
    header = ["duration", "runs", "runs_error", "gap", "shape", "width_or_duration", "local", "resolved"]
    columns = [[r["duration"] for r in rows], [r["runs"] for r in rows], [r["runs_error"] for r in rows],
               [r["gap"] for r in rows], [r["shape"] for r in rows],
               [r["switching"].get("width", r["switching"].get("duration")) for r in rows],
               [r["local"] for r in rows], [r["resolved"] for r in rows]]
    return header, columns


def design_figure(data: dict, title: str):
    """Runs against the switching's duration: the best probe at each duration (filled where local), the locality
    budget, the best and default probes and the quantum limit."""
    plt = _pyplot()
    figure, axis = plt.subplots(figsize=(6.6, 4.4))
    rows = data["tradeoff"]
    for local, style, label in ((True, "o-", "best probe at each duration (local)"),
                                (False, "o--", "past the locality budget")):
        chosen = [r for r in rows if r["local"] == local]
        if chosen:
            axis.errorbar([r["duration"] for r in chosen], [r["runs"] for r in chosen],
                          yerr=[r["runs_error"] for r in chosen], fmt=style, capsize=2, label=label,
                          mfc=None if local else "none", color="C0")
    shapes = data["search"]["shapes"]
    if len(shapes) > 1:          # each shape's own best at every duration, faintly
        for k, shape in enumerate(shapes):
            axis.plot([r["duration"] for r in rows], [r["per_shape"][shape]["runs"] for r in rows], ":",
                      lw=1.2, color=("C4", "C8", "C9", "C5")[k % 4], label=f"{shape} only")
    budget = data["search"]["budget"]
    axis.axvline(budget, color="0.4", lw=1, ls=":", label=f"locality budget {budget:.3g}")
    best, default = data["best"], data["default"]
    axis.plot([best["duration"]], [best["runs"]], "*", ms=13, color="C3",
              label=f"best: gap {best['gap']:.3g}, {best['switching']['shape']}, {best['runs']:.2g} runs")
    axis.plot([default["duration"]], [default["runs"]], "s", ms=7, color="C2",
              label=f"spec's probe: gap {default['gap']:.3g}, {default['runs']:.2g} runs")
    limit = data.get("quantum_limit") or {}
    if "runs" in limit:
        axis.plot([limit["switching"]["effective_duration"]], [limit["runs"]], "v", ms=8, color="C1",
                  mfc="none", label=f"quantum limit: {limit['runs']:.2g} runs")
    axis.set_xscale("log")
    axis.set_yscale("log")
    from matplotlib.ticker import LogLocator, NullFormatter, ScalarFormatter

    axis.xaxis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
    axis.xaxis.set_major_formatter(ScalarFormatter())
    axis.xaxis.set_minor_formatter(NullFormatter())
    return _runs_axes(figure, axis, data, title, "switching duration (detector's proper time)")


def write_design_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    paths = _write_table_and_figure(out, "design", design_table(data), design_figure(data, title), pdf)
    sites = data["search"]["sites"]
    if len(sites) > 1:
        path = os.path.join(out, "sites.csv")
        write_atomic(path, _csv(["at", "runs", "round_trip"], [(s["at"], s["runs"], s["round_trip"])
                                                                for s in sites]))
        paths.append(path)
    return paths


def pair_design_table(data: dict) -> tuple[list[str], list[list]]:
    """One row per radius of the second detector evaluated, at its best delay."""
    rows = data["pair"]["scan"]
    header = ["radius", "delay", "runs", "runs_error", "counting_runs", "counting_runs_error", "local", "resolved"]
    columns = [[r[k] for r in rows] for k in header]
    return header, columns


def pair_design_figure(data: dict, title: str):
    """Runs against the second detector's radius (each at its best delay): the joint state's best measurement
    and counting both detectors, the best and the spec's own placements."""
    plt = _pyplot()
    figure, axis = plt.subplots(figsize=(6.6, 4.4))
    rows = data["pair"]["scan"]
    radius = [r["radius"] for r in rows]
    axis.errorbar(radius, [r["runs"] for r in rows], yerr=[r["runs_error"] for r in rows], fmt="o-", capsize=2,
                  color="C0", label="best joint measurement (joint state)")
    axis.errorbar(radius, [r["counting_runs"] for r in rows], yerr=[r["counting_runs_error"] for r in rows],
                  fmt="s--", capsize=2, color="C2", mfc="none", label="counting both detectors")
    far = [r["radius"] for r in rows if not r["local"]]
    if far:   # from the last local radius evaluated (the limit lies between) to the farthest
        near = [r["radius"] for r in rows if r["local"] and r["radius"] < min(far)]
        axis.axvspan(max(near, default=min(far)), max(far), color="0.9", label="second detector not local")
    best, default = data["pair"]["best"], data["pair"]["default"]
    axis.plot([best["radius"]], [best["runs"]], "*", ms=13, color="C3",
              label=f"best: r = {best['radius']:.3g}, delay {best['delay']:.3g}, {best['runs']:.2g} runs")
    axis.plot([default["radius"]], [default["runs"]], "D", ms=7, color="C1",
              label=f"spec's placement: {default['runs']:.2g} runs")
    axis.set_yscale("log")
    return _runs_axes(figure, axis, data, title, "radius of the second detector")


def _runs_axes(figure, axis, data, title, xlabel):
    """The labels, title and legend of a design figure (runs against what was searched)."""
    axis.set_xlabel(xlabel)
    axis.set_ylabel(f"runs to tell apart at {data['sigmas']:g} sigma")
    axis.set_title(f"{title}: against {data['compare']}, coupling {data['coupling']:g}", fontsize=9)
    axis.legend(fontsize=7, loc="best")
    figure.tight_layout()
    return figure


def write_pair_design_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    return _write_table_and_figure(out, "pair_design", pair_design_table(data), pair_design_figure(data, title),
                                   pdf)


# -- files ---------------------------------------------------------------------------------------------------
def _write_table_and_figure(out, stem, table, figure, pdf) -> list[str]:
    header, columns = table
    csv_path = os.path.join(out, f"{stem}.csv")
    write_atomic(csv_path, _csv(header, zip(*columns)))
    paths = _save(figure, out, stem, pdf)
    _pyplot().close(figure)
    return [csv_path] + paths


def write_spectrum_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    paths = _write_table_and_figure(out, "spectrum", spectrum_table(data), spectrum_figure(data, title), pdf)
    if data.get("bound_states"):      # the discrete spectrum below the mass, one row per level
        header, columns = bound_state_table(data["bound_states"])
        bound_path = os.path.join(out, "bound_states.csv")
        write_atomic(bound_path, _csv(header, zip(*columns)))
        paths.append(bound_path)
    return paths


def write_response_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    return _write_table_and_figure(out, "response", response_table(data), response_figure(data, title), pdf)


def write_two_point_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    paths = _write_table_and_figure(out, "two_point", two_point_table(data), two_point_figure(data, title), pdf)
    if data.get("bound_states"):      # the discrete part between the two points, one row per level
        levels = data["bound_states"]
        header, columns = bound_state_table(levels)
        path = os.path.join(out, "bound_states.csv")
        write_atomic(path, _csv(["l"] + header, zip(levels["l"], *columns)))
        paths.append(path)
    return paths


def write_scattering_files(out: str, data: dict, title: str, pdf: bool = False) -> list[str]:
    paths = _write_table_and_figure(out, "spectrum", scattering_table(data), scattering_figure(data, title), pdf)
    if data.get("quasi_bound"):       # the resonances below the mass outside a horizon, one row per resonance
        table = data["quasi_bound"]
        columns = [table["omega"], table["error"]["omega"], table["width"], table["error"]["width"], table["resolved"]]
        path = os.path.join(out, "quasi_bound.csv")
        write_atomic(path, _csv(["omega", "omega_error", "width", "width_error", "width_resolved"], zip(*columns)))
        paths.append(path)
    return paths
