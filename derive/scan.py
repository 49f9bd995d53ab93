"""`derive scan`: sweep parameters, resumably, on local cores or a dask cluster.

Each parameter point is computed by :func:`scan_point` (a top-level function, so it pickles to worker
processes and dask workers) and written atomically to DIR/points/NNNNNN.json as soon as it finishes.  A scan
that is interrupted (even by kill -9) and started again with the same command skips the points already on
disk, computes only the rest, and then writes DIR/scan.csv with exactly one row per point (and scan.png).
DIR/manifest.json records the spec's hash and the sweep; a different spec or sweep in the same DIR is refused
rather than mixed in.
"""

from __future__ import annotations

import itertools
import json
import os
import sys
import uuid

import numpy as np

from derive.errors import InputError
from derive.outputs import write_atomic
from derive.parallel import die_with_parent


def parse_vary(items, parameters) -> list[tuple[str, np.ndarray]]:
    """--vary NAME=FROM:TO:COUNT (or NAME=a,b,c) into [(name, values)]."""
    out = []
    for item in items or []:
        name, sep, rest = item.partition("=")
        name = name.strip()
        if not sep or name not in parameters:
            known = ", ".join(parameters)
            raise InputError(f"--vary {item!r}: expected NAME=FROM:TO:COUNT with NAME one of {known}", key="--vary")
        from derive.values import parse_values

        values = parse_values(rest, f"--vary {name}")
        out.append((name, values))
    if not out:
        raise InputError("give at least one --vary NAME=FROM:TO:COUNT", key="--vary")
    if len({n for n, _ in out}) != len(out):
        raise InputError("each parameter may be varied once", key="--vary")
    return out


def grid_points(vary) -> list[dict]:
    names = [n for n, _ in vary]
    return [dict(zip(names, map(float, combo))) for combo in itertools.product(*(v for _, v in vary))]


def scan_point(spec_path: str, overrides: dict, tolerance: float) -> dict:
    """Everything numeric derive can say at one parameter point (each value with its error)."""
    from derive import load
    from derive.errors import AccuracyError, DeriveError

    row: dict = {}
    try:
        st = load(spec_path, overrides)
        values = st.parameter_values
        for index, shell in enumerate(st.shells):
            for key, expr in (("sigma", shell.surface_energy_density), ("pressure", shell.surface_pressure)):
                if expr is not None:
                    number = expr.subs(values)
                    row[f"shell{index}_{key}"] = float(number) if number.is_number else None
                    row[f"shell{index}_{key}_error"] = 0.0
        if st.field is not None and st.detector is not None and st.detector.gaps:
            from derive.errors import NotSupported

            try:
                result = st.response(tolerance=tolerance)
                for i, gap in enumerate(result.gaps):
                    row[f"F[{gap:g}]"] = float(result.response[i])
                    row[f"F[{gap:g}]_error"] = float(result.error[i])
                    if "relative_difference" in result:
                        row[f"reldiff[{gap:g}]"] = float(result.relative_difference[i])
                        row[f"reldiff[{gap:g}]_error"] = float(result.relative_difference_error[i])
                for name, value in (result.get("states") or {}).items():   # outside a horizon: all three states
                    for i, gap in enumerate(result.gaps):
                        row[f"F_{name}[{gap:g}]"] = float(value["response"][i])
                        row[f"F_{name}[{gap:g}]_error"] = float(value["error"][i])
                row["local"] = bool(result.locality["local"])
                if not result.ok:
                    raise AccuracyError(result.message)
            except NotSupported as exc:
                row["response_skipped"] = str(exc)
        row["status"] = f"refused: {row['response_skipped']}" if "response_skipped" in row else "ok"
    except AccuracyError as exc:
        row["status"] = f"accuracy not reached: {exc}"
    except DeriveError as exc:
        row["status"] = f"error: {exc}"
    return row


class _Progress:
    def __init__(self, total: int, done: int, enabled: bool):
        self.total, self.done, self.enabled = total, done, enabled

    def step(self):
        self.done += 1
        if self.enabled:
            width = 30
            filled = int(width * self.done / max(self.total, 1))
            sys.stderr.write(f"\rscan [{'#' * filled}{'.' * (width - filled)}] {self.done}/{self.total}")
            sys.stderr.flush()
            if self.done == self.total:
                sys.stderr.write("\n")


def run_scan(spacetime, vary, out: str, tolerance: float = 1e-10, executor: str = "local", workers: int = 0,
             scheduler: str | None = None, progress: bool | None = None) -> dict:
    """Compute every missing point and write scan.csv; returns {"points", "computed", "reused", "csv"}."""
    from derive.outputs import prepare_folder

    points = grid_points(vary)
    out = prepare_folder(out, "scan")
    points_dir = os.path.join(out, "points")
    os.makedirs(points_dir, exist_ok=True)
    manifest = {"spec": os.path.abspath(spacetime.path), "spec_hash": spacetime.source_hash,
                "vary": {n: list(map(float, v)) for n, v in vary}, "tolerance": tolerance}
    manifest_path = os.path.join(out, "manifest.json")
    if os.path.exists(manifest_path):
        try:
            with open(manifest_path, encoding="utf-8") as handle:
                earlier = json.load(handle)
        except (OSError, ValueError) as exc:
            raise InputError(f"{manifest_path} cannot be read ({exc}); use another --out", key="--out") from None
        if not isinstance(earlier, dict) or {k: earlier.get(k) for k in manifest} != manifest:
            raise InputError(f"{out} holds a different scan (spec or --vary differ); use another --out",
                             key="--out")
    else:
        write_atomic(manifest_path, json.dumps(manifest, indent=2))
    run_id = uuid.uuid4().hex[:12]
    missing = [i for i in range(len(points)) if not os.path.exists(_point_file(points_dir, i))]
    bar = _Progress(len(points), len(points) - len(missing), sys.stderr.isatty() if progress is None else progress)

    def record(index, row):
        write_atomic(_point_file(points_dir, index),
                     json.dumps({"index": index, "parameters": points[index], "result": row, "run": run_id}))
        bar.step()

    base = {n: p.value for n, p in spacetime.parameters.items()}
    jobs = [(i, {**base, **points[i]}) for i in missing]
    if executor == "dask":
        _run_dask(jobs, spacetime.path, tolerance, scheduler, record)
    else:
        _run_local(jobs, spacetime.path, tolerance, workers, record)
    csv_path = _write_csv(out, points, points_dir)
    _write_plot(out, vary, points, points_dir)
    statuses = {}        # the points whose status is not "ok", by kind: accuracy, refused, error
    for row in _rows(points, points_dir):
        status = str(row["result"].get("status", "ok"))
        if status != "ok":
            kind = ("accuracy" if status.startswith("accuracy") else "refused" if status.startswith("refused")
                    else "error")
            statuses.setdefault(kind, []).append((row["index"], status))
    return {"points": len(points), "computed": len(missing), "reused": len(points) - len(missing),
            "csv": csv_path, "run": run_id, "not_ok": statuses}


def _point_file(points_dir, index) -> str:
    return os.path.join(points_dir, f"{index:06d}.json")


def _run_local(jobs, spec_path, tolerance, workers, record):
    if workers == 1 or len(jobs) <= 1:
        for index, overrides in jobs:
            record(index, scan_point(spec_path, overrides, tolerance))
        return
    from concurrent.futures import ProcessPoolExecutor, as_completed

    count = min(workers or os.cpu_count() or 1, os.cpu_count() or 1, len(jobs))
    with ProcessPoolExecutor(max_workers=count, initializer=die_with_parent, initargs=(os.getpid(),)) as pool:
        futures = {pool.submit(scan_point, spec_path, overrides, tolerance): index for index, overrides in jobs}
        for future in as_completed(futures):
            record(futures[future], future.result())


def _run_dask(jobs, spec_path, tolerance, scheduler, record):
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("--executor dask needs the cluster extra: pip install 'derive[cluster]'",
                         key="--executor") from None
    if not scheduler:
        raise InputError("--executor dask needs --scheduler ADDRESS (host:port of a dask scheduler)",
                         key="--scheduler")
    client = Client(scheduler) if isinstance(scheduler, str) else Client(scheduler)
    try:
        futures = {client.submit(scan_point, spec_path, overrides, tolerance, pure=False): index
                   for index, overrides in jobs}
        for future in as_completed(futures):
            record(futures[future], future.result())
    finally:
        client.close()


def _rows(points, points_dir):
    rows = []
    for index in range(len(points)):
        with open(_point_file(points_dir, index)) as handle:
            rows.append(json.load(handle))
    return rows


def _write_csv(out, points, points_dir) -> str:
    import csv
    import io

    rows = _rows(points, points_dir)
    names = list(points[0])
    keys = []
    for row in rows:
        for key in row["result"]:
            if key not in keys:
                keys.append(key)
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["index"] + names + keys)
    for row in rows:
        writer.writerow([row["index"]] + [repr(row["parameters"][n]) for n in names]
                        + [_cell(row["result"].get(k)) for k in keys])
    path = os.path.join(out, "scan.csv")
    write_atomic(path, buffer.getvalue())
    return path


def _cell(value):
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.17g}"
    return value


def _legend(key: str) -> str:
    """A readable legend entry for a scan.csv column: reldiff[-8] -> "gap -8", F[2] -> "F at gap 2"."""
    if key.startswith("reldiff[") and key.endswith("]"):
        return f"gap {key[8:-1]}"
    if key.startswith("F[") and key.endswith("]"):
        return f"F at gap {key[2:-1]}"
    return key.replace("_", " ")


def _axis_label(keys) -> str:
    if keys and keys[0].startswith("reldiff["):
        return "relative difference from the reference\n(F - F_ref)/F_ref"
    if keys and keys[0].startswith("F["):
        return "response F (P = lambda^2 F)"
    return "shell surface energy density and pressure"


def _write_plot(out, vary, points, points_dir):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from derive.report.tables import _png

    rows = _rows(points, points_dir)
    name = vary[0][0]
    keys = [k for k in rows[0]["result"] if k.startswith(("reldiff[", "F[")) and not k.endswith("_error")]
    keys = [k for k in keys if k.startswith("reldiff[")] or keys
    if not keys:
        keys = [k for k in rows[0]["result"] if k.endswith(("_sigma", "_pressure"))]
    figure, axis = plt.subplots(figsize=(7.2, 4.4))
    x = [row["parameters"][name] for row in rows]
    for index, key in enumerate(keys):       # every gap (the colours cycle; the legend sits outside)
        # the points that have the value (one not ok, or from another part of the grid, has none)
        kept = [(xi, row["result"].get(key), row["result"].get(key + "_error") or 0.0)
                for xi, row in zip(x, rows) if row["result"].get(key) is not None]
        if kept:
            xs, y, e = zip(*kept)
            axis.errorbar(xs, y, yerr=e, fmt="o", ms=3, label=_legend(key), color=f"C{index % 10}",
                          ls="-" if index < 10 else "--")
    axis.set_xlabel(f"parameter {name}")
    axis.set_ylabel(_axis_label(keys))
    if axis.get_legend_handles_labels()[0]:
        axis.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    axis.set_title(f"derive scan over {name}: {len(rows)} points (error bars: derive's estimates)", fontsize=9)
    figure.tight_layout()
    write_atomic(os.path.join(out, "scan.png"), _png(figure))
    plt.close(figure)
