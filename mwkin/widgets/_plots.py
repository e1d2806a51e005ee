"""Small plot helpers for the analysis widgets: whole-sample views, curves, bands, binned medians.

Whole samples go through :class:`SampleView`, which holds the canvas view
:class:`mwkin.widgets.views.SampleScatter` (fast for 1e4-1e6 stars; box and lasso selection of every
star). It is the one implementation of the whole-sample scatter: the live view and the static export
(:func:`panel_from_view`) both read it. Curves, binned medians, bands and small plots are bqplot
figures.

Everything takes numpy arrays; nothing loops over points in Python.
"""

from __future__ import annotations

import warnings

import bqplot as bq
import ipywidgets as widgets
import numpy as np

__all__ = [
    "SampleView",
    "binned_quantiles",
    "small_figure",
    "line_mark",
    "band_mark",
    "error_bar_mark",
    "points_mark",
    "legend_html",
    "layers_from_marks",
    "layers_from_view",
    "panel_from_figure",
    "panel_from_view",
    "view_axis_titles",
    "view_ranges",
    "COLOURS",
    "ORBIT_COLOURS",
    "CLOUD_OPACITY",
]

#: Colours used across the widgets (our own choice).
COLOURS = {
    "points": "#5b7fa6",
    "selected": "#d0661f",
    "model": "#b3202a",
    "median": "#1f1f1f",
    "band": "#8c8c8c",
    "potential": "#2f7d3a",
    "A": "#2b59a8",
    "B": "#c04a1d",
    "guide": "#9a9a9a",
}

#: Colours of the orbit views -- the face-on canvas (``GalaxyView.colors``), the meridional figure, their
#: key and the exported figure all take them from here (our own choice).
ORBIT_COLOURS = {
    "track": "#1f5fa8",  # the orbit (forward in time in the meridional view)
    "backward": "#d0661f",  # the orbit backward in time (meridional view)
    "cloud": "#9fb6d3",  # orbits drawn from the uncertainties
    "sun": "#e0a800",
    "centre": "#222222",
    "rotation": "#6a6a6a",  # the sense of Galactic rotation
    "star": "#1f5fa8",  # the star now
    "arrow": "#d6275a",  # the star's initial velocity in the plane
}

#: Opacity of the faint orbits drawn from the uncertainties, in every view and in the export.
CLOUD_OPACITY = 0.35


def binned_quantiles(x, y, edges, quantiles=(0.16, 0.5, 0.84)):
    """Quantiles of ``y`` in bins of ``x``, fully vectorised (one sort, no loop over points).

    Parameters
    ----------
    x, y : array-like
        Non-finite pairs are ignored.
    edges : array-like
        Increasing bin edges; a point belongs to ``edges[i] <= x < edges[i+1]`` (the last bin is closed).
    quantiles : sequence of float
        In [0, 1]; linear interpolation between order statistics (numpy's default method).

    Returns
    -------
    centres : numpy.ndarray, shape (nbins,)
    values : numpy.ndarray, shape (len(quantiles), nbins)
        NaN in empty bins.
    counts : numpy.ndarray of int, shape (nbins,)
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    edges = np.asarray(edges, dtype=float)
    nbins = len(edges) - 1
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    b = np.searchsorted(edges, x, side="right") - 1
    b[x == edges[-1]] = nbins - 1
    inside = (b >= 0) & (b < nbins)
    b, y = b[inside], y[inside]
    order = np.lexsort((y, b))
    y_sorted = y[order]
    counts = np.bincount(b, minlength=nbins)
    starts = np.cumsum(counts) - counts
    values = np.full((len(quantiles), nbins), np.nan)
    filled = counts > 0
    for row, q in enumerate(quantiles):  # a handful of quantiles, not points
        pos = starts[filled] + q * (counts[filled] - 1)
        lo = np.floor(pos).astype(np.int64)
        hi = np.minimum(lo + 1, starts[filled] + counts[filled] - 1)
        frac = pos - lo
        values[row, filled] = y_sorted[lo] * (1.0 - frac) + y_sorted[hi] * frac
    centres = 0.5 * (edges[:-1] + edges[1:])
    return centres, values, counts


# ---------------------------------------------------------------------- small figures and marks
def small_figure(title, x_label, y_label, *, width="360px", height="300px", x_range=None, y_range=None):
    """A bqplot Figure with linear x and y scales and labelled axes; returns (figure, x_scale, y_scale)."""
    xs = bq.LinearScale(**_range_kwargs(x_range))
    ys = bq.LinearScale(**_range_kwargs(y_range))
    axes = [
        bq.Axis(scale=xs, label=x_label, grid_lines="none"),
        bq.Axis(scale=ys, label=y_label, side="left", grid_lines="none", label_offset="45px"),
    ]
    fig = bq.Figure(
        marks=[],
        axes=axes,
        title=title,
        title_style={"font-size": "13px"},
        fig_margin={"top": 30, "bottom": 45, "left": 60, "right": 15},
        layout=widgets.Layout(width=width, height=height),
        padding_y=0.05,
    )
    return fig, xs, ys


def _range_kwargs(value_range):
    if value_range is None:
        return {}
    return {"min": float(value_range[0]), "max": float(value_range[1])}


def line_mark(xs, ys, color, *, label="", width=2.0, dashed=False):
    """An empty line mark; fill it with ``mark.x, mark.y = ...``. The label is for :func:`legend_html`."""
    return bq.Lines(
        x=np.zeros(0),
        y=np.zeros(0),
        scales={"x": xs, "y": ys},
        colors=[color],
        stroke_width=width,
        labels=[label] if label else [],
        display_legend=False,
        line_style="dashed" if dashed else "solid",
    )


def band_mark(xs, ys, color, *, opacity=0.25):
    """A filled band between two curves; set ``mark.x`` (n,) and ``mark.y`` (2, n) = (low, high)."""
    return bq.Lines(
        x=np.zeros(0),
        y=np.zeros((2, 0)),
        scales={"x": xs, "y": ys},
        colors=[color],
        fill="between",
        fill_colors=[color],
        fill_opacities=[opacity],
        stroke_width=0.5,
        opacities=[0.0, 0.0],
    )


def error_bar_mark(xs, ys, color, *, width=1.5):
    """Vertical error bars as one line per point: ``set_error_bars(mark, x, low, high)``."""
    return bq.Lines(
        x=np.zeros((0, 2)), y=np.zeros((0, 2)), scales={"x": xs, "y": ys}, colors=[color], stroke_width=width
    )


def set_error_bars(mark, x, low, high):
    """Fill an :func:`error_bar_mark` from arrays (non-finite bars are left out)."""
    x, low, high = (np.asarray(a, dtype=float) for a in (x, low, high))
    ok = np.isfinite(x) & np.isfinite(low) & np.isfinite(high)
    with mark.hold_sync():
        mark.x = np.stack([x[ok], x[ok]], axis=1)
        mark.y = np.stack([low[ok], high[ok]], axis=1)
        mark.colors = [mark.colors[0]] * int(ok.sum()) if ok.any() else mark.colors[:1]


def points_mark(xs, ys, color, *, size=30, label="", marker="circle"):
    """A small scatter mark (binned values, reference points), not for whole samples."""
    return bq.Scatter(
        x=np.zeros(0),
        y=np.zeros(0),
        scales={"x": xs, "y": ys},
        colors=[color],
        default_size=size,
        marker=marker,
        labels=[label] if label else [],
        display_legend=False,
        stroke="white",
    )


_SYMBOLS = {"line": "&#8212;", "dashed": "- -", "point": "&#9679;", "square": "&#9632;", "band": "&#9608;"}


def legend_html(items, width="420px"):
    """A small HTML legend under a bqplot figure (bqplot's own legend box overlaps the data).

    Parameters
    ----------
    items : sequence of (colour, kind, text)
        ``kind`` is one of "line", "dashed", "point", "square", "band".
    """
    import html as _html

    parts = [
        f'<span style="color:{colour};font-weight:bold">{_SYMBOLS[kind]}</span>&nbsp;{_html.escape(text)}'
        for colour, kind, text in items
    ]
    return f'<div style="font-size:11px;max-width:{width};line-height:1.5">' + " &nbsp; ".join(parts) + "</div>"


# ---------------------------------------------------------------------- one description: live -> export
#: bqplot marker names -> matplotlib's.
_MARKERS = {
    "circle": "o",
    "square": "s",
    "cross": "P",
    "diamond": "D",
    "triangle-up": "^",
    "triangle-down": "v",
    "cross-filled": "P",
    "plus": "+",
}


def _joined(x, y):
    """Rows of 2-d x, y (one line each) as one NaN-separated polyline (1-d arrays pass through)."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    if x.ndim < 2 and y.ndim < 2:
        return x, y
    x, y = np.broadcast_to(np.atleast_2d(x), np.shape(np.atleast_2d(y))), np.atleast_2d(y)
    gap = np.full((x.shape[0], 1), np.nan)
    return np.hstack([x, gap]).ravel(), np.hstack([y, gap]).ravel()


def layers_from_marks(marks):
    """Export layers (see :class:`~mwkin.widgets._base.Panel`) that redraw bqplot marks as they are shown.

    The data, colours, line widths and styles, marker sizes and labels are read from the marks
    themselves, so the static export is a copy of the live figure, never a second description of it.
    Lines with several rows (one per orbit, one per error bar) become one NaN-separated line; a band
    (``fill="between"``) becomes a filled band; empty marks are left out.
    """
    layers = []
    for mark in marks:
        if not getattr(mark, "visible", True) or mark.x is None or np.size(mark.x) == 0:
            continue
        colours = list(mark.colors or ["#000000"])
        label = (mark.labels or [""])[0] if getattr(mark, "labels", None) else ""
        if isinstance(mark, bq.Lines):
            opacity = (mark.opacities or [None])[0]
            if mark.fill == "between":
                y = np.asarray(mark.y, dtype=float)
                if y.ndim == 2 and y.shape[0] == 2 and y.shape[1]:
                    layers.append(
                        {
                            "kind": "band",
                            "x": np.asarray(mark.x, dtype=float),
                            "y_low": y[0],
                            "y_high": y[1],
                            "color": (mark.fill_colors or colours)[0],
                            "opacity": (mark.fill_opacities or [0.25])[0],
                            "label": label,
                        }
                    )
                continue
            x, y = _joined(mark.x, mark.y)
            if not np.isfinite(y).any():
                continue
            layers.append(
                {
                    "kind": "line",
                    "x": x,
                    "y": y,
                    "color": colours[0],
                    "width": float(mark.stroke_width),
                    "dashed": mark.line_style == "dashed",
                    "opacity": opacity,
                    "label": label,
                }
            )
        elif isinstance(mark, bq.Scatter):
            x, y = np.asarray(mark.x, dtype=float), np.asarray(mark.y, dtype=float)
            if not (np.isfinite(x) & np.isfinite(y)).any():
                continue
            layers.append(
                {
                    "kind": "scatter",
                    "x": x,
                    "y": y,
                    "color": colours[0],
                    "label": label,
                    "size": 0.66 * float(mark.default_size),
                    "marker": _MARKERS.get(mark.marker, "o"),
                    "edgecolor": mark.stroke or None,
                }
            )
        elif isinstance(mark, bq.Label):
            for xi, yi, text in zip(np.atleast_1d(mark.x), np.atleast_1d(mark.y), np.atleast_1d(mark.text)):
                if np.isfinite(xi) and np.isfinite(yi):
                    layers.append(
                        {
                            "kind": "text",
                            "x": [float(xi)],
                            "y": [float(yi)],
                            "text": str(text),
                            "color": colours[0],
                            "align": "center" if mark.align == "middle" else "left",
                        }
                    )
    return layers


def layers_from_view(view, *, size=1.0):
    """Export layers of a whole-sample view (:class:`SampleView`) as it is shown.

    The points it holds -- coloured by their colour values with the view's colour label when it has
    them, else in the points' colour -- and its selection on top, in the selection colour.
    """
    data = view.data()
    x, y, c = (None if v is None else np.asarray(v, dtype=float) for v in (data["x"], data["y"], data["c"]))
    inner = getattr(view, "view", view)
    if c is not None:
        label, unit = inner.c_label, inner.c_unit
        layers = [{"kind": "scatter", "x": x, "y": y, "c": c, "c_label": _axis_title(label, unit), "size": size}]
    else:
        layers = [{"kind": "scatter", "x": x, "y": y, "color": COLOURS["points"], "size": size}]
    selected = np.asarray(view.selected_indices, dtype=np.int64)
    if selected.size:
        layers.append(
            {
                "kind": "scatter",
                "x": x[selected],
                "y": y[selected],
                "color": COLOURS["selected"],
                "size": 2 * size,
                "label": f"selected ({selected.size})",
            }
        )
    return layers


def view_axis_titles(view):
    """('x [unit]', 'y [unit]') of a whole-sample view, as its axes show them."""
    inner = getattr(view, "view", view)
    return _axis_title(inner.x_label, inner.x_unit), _axis_title(inner.y_label, inner.y_unit)


def view_ranges(view):
    """The region a whole-sample view shows, ((x0, x1), (y0, y1)), or (None, None) when it follows the data."""
    inner = getattr(view, "view", view)
    shown = list(getattr(inner, "view_range", []) or [])
    if len(shown) == 4:
        return (shown[0], shown[1]), (shown[2], shown[3])
    return None, None


def panel_from_view(view, *, last=(), notes=()):
    """A :class:`~mwkin.widgets._base.Panel` copying a whole-sample :class:`SampleView` as it is shown:
    its title, points, colours, selection, axis titles, region and aspect; ``last`` adds layers on top."""
    from ._base import Panel

    x_range, y_range = view_ranges(view)
    return Panel(
        view.title_text,
        *view_axis_titles(view),
        [*layers_from_view(view), *last],
        equal_aspect=view.equal_aspect,
        notes=notes,
        x_range=x_range,
        y_range=y_range,
    )


def panel_from_figure(figure, title=None, *, first=(), last=(), notes=(), equal_aspect=False, legend_outside=False):
    """A :class:`~mwkin.widgets._base.Panel` copying a bqplot figure: its marks, axis labels and ranges.

    ``first`` / ``last`` are extra layers drawn under / over the marks (e.g. the whole-sample points
    shown beside the figure, :func:`layers_from_view`).
    """
    from ._base import Panel

    x_axis, y_axis = figure.axes[0], figure.axes[1]

    def scale_range(scale):
        lo, hi = getattr(scale, "min", None), getattr(scale, "max", None)
        return None if lo is None or hi is None else (lo, hi)

    return Panel(
        title if title is not None else figure.title,
        x_axis.label,
        y_axis.label,
        [*first, *layers_from_marks(figure.marks), *last],
        equal_aspect=equal_aspect,
        notes=notes,
        legend_outside=legend_outside,
        x_range=scale_range(x_axis.scale),
        y_range=scale_range(y_axis.scale),
    )


# ---------------------------------------------------------------------- the whole-sample view
def warn_if_bqplot_fallback_asked(use_canvas, stacklevel=3):
    """The deprecation of ``use_canvas=False`` (the removed bqplot fallback of the whole-sample view)."""
    if use_canvas is not None and not use_canvas:
        warnings.warn(
            "use_canvas=False is deprecated and has no effect: the bqplot fallback of the whole-sample "
            "view was a second implementation of the canvas view and has been removed",
            DeprecationWarning,
            stacklevel=stacklevel,
        )


def _axis_title(label, unit):
    return f"{label} [{unit}]" if unit else label


class SampleView(widgets.VBox):
    """A titled whole-sample scatter: the canvas view :class:`~mwkin.widgets.views.SampleScatter`.

    Delegates ``set_data``, ``data()``, ``n_points``, ``selected_indices``, ``on_select`` and
    ``clear_selection`` to the view in :attr:`view`.

    Parameters
    ----------
    title : str
    equal_aspect : bool
    width, height : int
        CSS pixels.
    use_canvas : None or True
        Deprecated: ``False`` used to choose a bqplot fallback, a second implementation of the same
        view that is gone; it now warns and the canvas view is used.
    selection_mode : {"brush", "lasso", "pan"}
        What a drag does at first.
    """

    def __init__(self, title, *, equal_aspect=False, width=400, height=340, use_canvas=None, selection_mode="brush"):
        from .views import SampleScatter

        warn_if_bqplot_fallback_asked(use_canvas)
        # The box width lets the view's toolbar wrap instead of widening the view past the plot.
        self.view = SampleScatter(
            width=width,
            height=height,
            equal_aspect=equal_aspect,
            selection_mode=selection_mode,
            point_size=2,
            layout=widgets.Layout(width=f"{width + 4}px"),
        )
        self.is_canvas = True
        self.equal_aspect = bool(equal_aspect)
        self.title = widgets.HTML()
        self.set_title(title)
        super().__init__([self.title, self.view])
        self.add_class("mwkin-sample-view")

    def set_title(self, text):
        """Show ``text`` (plain text) as the title; :attr:`title_text` keeps it for the export."""
        import html as _html

        self.title_text = str(text)
        self.title.value = f"<b>{_html.escape(self.title_text)}</b>"

    def set_data(self, x, y, c=None, **kwargs):
        """See ``SampleScatter.set_data``."""
        self.view.set_data(x, y, c, **kwargs)

    def data(self):
        """The arrays as drawn (float32): dict with x, y, c."""
        return self.view.data()

    @property
    def n_points(self):
        return self.view.n_points

    @property
    def selected_indices(self):
        """Selected points (uint32 indices into the ``set_data`` arrays); assign to select from Python."""
        return self.view.selected_indices

    @selected_indices.setter
    def selected_indices(self, indices):
        self.view.selected_indices = indices

    def on_select(self, callback, remove=False):
        self.view.on_select(callback, remove=remove)

    def clear_selection(self):
        self.view.clear_selection()
