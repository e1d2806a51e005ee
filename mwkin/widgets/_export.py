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
            _draw_layer(fig, ax, layer)
        ax.set_title(panel.title, fontsize=10)
        ax.set_xlabel(panel.x_label)
        ax.set_ylabel(panel.y_label)
        if getattr(panel, "x_range", None) is not None:
            ax.set_xlim(*panel.x_range)
        if getattr(panel, "y_range", None) is not None:
            ax.set_ylim(*panel.y_range)
        if panel.equal_aspect:  # with a fixed region (the live view's), the box takes the aspect
            fixed = getattr(panel, "x_range", None) is not None and getattr(panel, "y_range", None) is not None
            ax.set_aspect("equal", adjustable="box" if fixed else "datalim")
        if any(layer.get("label") for layer in panel.layers):
            if getattr(panel, "legend_outside", False):
                ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
            else:
                ax.legend(fontsize=7, loc="best")
        if panel.notes:  # under the x axis label, whatever the height of the axes
            ax.annotate(
                "\n".join(panel.notes),
                xy=(0.0, 0.0),
                xycoords="axes fraction",
                xytext=(0, -34),
                textcoords="offset points",
                fontsize=7,
                va="top",
            )
    if title:
        fig.suptitle(title, fontsize=11)
    if footer:
        fig.text(0.01, 0.005, footer, fontsize=6, va="bottom")
    fig.tight_layout(rect=(0, 0.03, 1, 0.97))
    fig.savefig(path, format=suffix, dpi=dpi)
    return path


def _draw_layer(fig, ax, layer):
    """Draw one :class:`~mwkin.widgets._base.Panel` layer on matplotlib axes."""
    kind = layer.get("kind", "scatter")
    x = np.asarray(layer["x"], dtype=float)
    colour, alpha, label = layer.get("color"), layer.get("opacity"), layer.get("label") or None
    if kind == "line":
        ax.plot(
            x,
            np.asarray(layer["y"], dtype=float),
            color=colour,
            label=label,
            lw=layer.get("width", 1.5),
            ls="--" if layer.get("dashed") else "-",
            alpha=alpha,
        )
    elif kind == "band":
        ax.fill_between(
            x,
            np.asarray(layer["y_low"], dtype=float),
            np.asarray(layer["y_high"], dtype=float),
            color=colour,
            alpha=0.25 if alpha is None else alpha,
            lw=0,
            label=label,
        )
    elif kind == "arrow":
        y = np.asarray(layer["y"], dtype=float)
        ax.annotate(
            "",
            xy=(x[1], y[1]),
            xytext=(x[0], y[0]),
            arrowprops={
                "arrowstyle": "-|>",
                "color": colour,
                "lw": layer.get("width", 1.5),
                "shrinkA": 0,
                "shrinkB": 0,
            },
        )
    elif kind == "text":
        ax.text(
            x[0],
            float(np.asarray(layer["y"], dtype=float)[0]),
            layer["text"],
            color=colour,
            fontsize=7,
            ha=layer.get("align", "left"),
            va="center",
        )
    else:
        y = np.asarray(layer["y"], dtype=float)
        c = layer.get("c")
        marker = layer.get("marker", "o")
        line_marker = marker in ("+", "x", "|", "_")  # drawn with lines only: they need a line width
        art = ax.scatter(
            x,
            y,
            s=layer.get("size", 2),
            c=c if c is not None else colour,
            label=label,
            marker=marker,
            alpha=alpha,
            edgecolors=None if line_marker else layer.get("edgecolor", "face"),
            linewidths=1.5 if line_marker else (0.5 if layer.get("edgecolor") else 0),
            rasterized=len(x) > 5000,
        )
        if c is not None:
            fig.colorbar(art, ax=ax, label=layer.get("c_label", ""))
