"""Static figure export (PNG, SVG) of a widget's panels, drawn with matplotlib in the kernel."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["export_panels"]


def export_panels(panels, path, title="", footer="", dpi=150):
    """Draw ``panels`` (a list of :class:`~mwkin.widgets._base.Panel`) side by side and save to ``path``.

    The format follows the suffix (.png or .svg). Returns the path.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    suffix = path.suffix.lower().lstrip(".")
    if suffix not in ("png", "svg"):
        raise ValueError(f"figure export supports .png and .svg, got {path.name!r}")
    n = max(len(panels), 1)
    ncols = min(n, 3)
    nrows = math.ceil(n / ncols)
    fig = Figure(figsize=(4.6 * ncols, 4.0 * nrows + 0.6))
    for index, panel in enumerate(panels):
        ax = fig.add_subplot(nrows, ncols, index + 1)
        for layer in panel.layers:
            x = np.asarray(layer["x"], dtype=float)
            y = np.asarray(layer["y"], dtype=float)
            if layer.get("kind", "scatter") == "line":
                ax.plot(x, y, color=layer.get("color"), label=layer.get("label"), lw=layer.get("width", 1.5))
            else:
                c = layer.get("c")
                art = ax.scatter(x, y, s=layer.get("size", 2), c=c if c is not None else layer.get("color"),
                                 label=layer.get("label"), marker=layer.get("marker", "o"),
                                 linewidths=0, rasterized=len(x) > 5000)
                if c is not None:
                    fig.colorbar(art, ax=ax, label=layer.get("c_label", ""))
        ax.set_title(panel.title, fontsize=10)
        ax.set_xlabel(panel.x_label)
        ax.set_ylabel(panel.y_label)
        if panel.equal_aspect:
            ax.set_aspect("equal", adjustable="datalim")
        if any(layer.get("label") for layer in panel.layers):
            if getattr(panel, "legend_outside", False):
                ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
            else:
                ax.legend(fontsize=7, loc="best")
        if panel.notes:
            ax.text(0.0, -0.22, "\n".join(panel.notes), transform=ax.transAxes, fontsize=7, va="top")
    if title:
        fig.suptitle(title, fontsize=11)
    if footer:
        fig.text(0.01, 0.005, footer, fontsize=6, va="bottom")
    fig.tight_layout(rect=(0, 0.03, 1, 0.97))
    fig.savefig(path, format=suffix, dpi=dpi)
    return path
