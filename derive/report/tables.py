"""Tables (CSV) and figures (PNG) of numeric results, written atomically."""

from __future__ import annotations

import csv
import io
import os

from derive.report.json_output import write_atomic


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


def write_spectrum_files(out: str, data: dict, title: str) -> list[str]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    rows = zip(data["omega"], data["density"], data["error"]["density"], data["minkowski_density"])
    csv_path = os.path.join(out, "spectrum.csv")
    write_atomic(csv_path, _csv(["omega", "density", "density_error", "minkowski_density"], rows))
    figure, axes = plt.subplots(2, 1, figsize=(6.4, 6.4), sharex=True)
    axes[0].plot(data["omega"], data["density"], label="derive")
    axes[0].plot(data["omega"], data["minkowski_density"], "--", label=r"Minkowski $\omega/4\pi^2$")
    axes[0].set_ylabel(r"density per unit $\omega$")
    axes[0].legend()
    ratio = [d / m if m else float("nan") for d, m in zip(data["density"], data["minkowski_density"])]
    axes[1].plot(data["omega"], ratio)
    axes[1].set_ylabel("ratio to Minkowski")
    axes[1].set_xlabel(r"$\omega$ (spec's time coordinate; $G=c=\hbar=1$)")
    axes[0].set_title(f"{title}: l = {data['l']} at r = {data['at']:g}", fontsize=10)
    png_path = os.path.join(out, "spectrum.png")
    write_atomic(png_path, _png(figure))
    plt.close(figure)
    return [csv_path, png_path]
