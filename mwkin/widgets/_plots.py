"""Small plot helpers for the analysis widgets: whole-sample views, curves, bands, binned medians.

Whole samples go through :class:`SampleView`, which holds the canvas view
:class:`mwkin.widgets.views.SampleScatter` (fast for 1e4-1e6 stars) or, when that cannot be loaded, the
bqplot :class:`PointCloud` with the same small interface (``set_data``, ``data()``,
``selected_indices``, ``on_select``). The bqplot fallback draws a deterministic subsample of at most
``max_points`` points, because bqplot's SVG marks slow down badly beyond a few thousand points in the
browser; its box selection is applied to *all* points (the box is tested against the full arrays).
Curves, binned medians, bands and small plots are bqplot figures.

Everything takes numpy arrays; nothing loops over points in Python.
"""

from __future__ import annotations

import functools

import bqplot as bq
import ipywidgets as widgets
import numpy as np

__all__ = [
    "PointCloud",
    "SampleView",
    "canvas_view_available",
    "binned_quantiles",
    "subsample_indices",
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
    "MAX_DRAWN_POINTS",
]

#: Largest number of points a bqplot scatter is given (a random, reproducible subsample beyond it).
MAX_DRAWN_POINTS = 5000

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


@functools.lru_cache(maxsize=16)
def _subsample(n, max_points, seed):
    rng = np.random.default_rng(seed)
    idx = np.sort(rng.choice(n, size=max_points, replace=False)).astype(np.int64)
    idx.setflags(write=False)
    return idx


def subsample_indices(n, max_points=MAX_DRAWN_POINTS, seed=20240607):
    """Indices of the points drawn out of ``n``: all of them, or a fixed random subset of ``max_points``.

    The subset depends only on ``(n, max_points, seed)``, so the same sample always shows the same stars.
    """
    if n <= max_points:
        return np.arange(n, dtype=np.int64)
    return _subsample(int(n), int(max_points), int(seed))


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
    """Export layers of a whole-sample view (:class:`SampleView`, canvas or bqplot) as it is shown.

    The points it holds -- coloured by their colour values with the view's colour label when it has
    them, else in the points' colour -- and its selection on top, in the selection colour.
    """
    data = view.data()
    x, y, c = (None if v is None else np.asarray(v, dtype=float) for v in (data["x"], data["y"], data["c"]))
    inner = getattr(view, "view", view)
    if c is not None:
        label, unit = (inner.c_label, inner.c_unit) if hasattr(inner, "c_label") else inner.labels["c"]
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
    if hasattr(inner, "x_label"):
        return _axis_title(inner.x_label, inner.x_unit), _axis_title(inner.y_label, inner.y_unit)
    return _axis_title(*inner.labels["x"]), _axis_title(*inner.labels["y"])


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
def _axis_title(label, unit):
    return f"{label} [{unit}]" if unit else label


class PointCloud(widgets.VBox):
    """Scatter of a whole sample in bqplot, drawn on a reproducible subsample, with a box selection.

    The fallback for :class:`mwkin.widgets.views.SampleScatter` with the same interface (``set_data``,
    ``data()``, ``n_points``, ``selected_indices``, ``on_select``, ``clear_selection``); indices always
    refer to the arrays given to :meth:`set_data`, never to the subsample, and a box selection takes
    every point inside the box, drawn or not. No lasso: bqplot's lasso reports only the drawn points.

    Parameters
    ----------
    max_points : int
        Largest number of points drawn (see :func:`subsample_indices`).
    equal_aspect : bool
        Same scale on both axes.
    width, height : int
        CSS pixels.
    """

    def __init__(
        self,
        *,
        max_points=MAX_DRAWN_POINTS,
        equal_aspect=False,
        width=400,
        height=340,
        point_size=6,
        colour=COLOURS["points"],
    ):
        self.max_points = max_points
        self.labels = {"x": ("x", ""), "y": ("y", ""), "c": ("", "")}
        self._x = np.zeros(0, dtype=np.float32)
        self._y = np.zeros(0, dtype=np.float32)
        self._c = None
        self._shown = np.zeros(0, dtype=np.int64)
        self._selected = np.zeros(0, dtype=np.uint32)
        self._callbacks = []
        self.figure, self.x_scale, self.y_scale = small_figure("", "x", "y", width=f"{width}px", height=f"{height}px")
        if equal_aspect:
            self.figure.min_aspect_ratio = self.figure.max_aspect_ratio = 1.0
        self.c_scale = bq.ColorScale(scheme="viridis")
        self.c_axis = bq.ColorAxis(scale=self.c_scale, label="", side="right", visible=False)
        self.figure.axes = [*self.figure.axes, self.c_axis]
        self.mark = bq.Scatter(
            x=np.zeros(0),
            y=np.zeros(0),
            scales={"x": self.x_scale, "y": self.y_scale},
            colors=[colour],
            default_size=point_size,
            opacities=[0.55],
            stroke=None,
            selected_style={"opacity": 1.0, "fill": COLOURS["selected"], "stroke": COLOURS["selected"]},
            unselected_style={"opacity": 0.25},
        )
        self.figure.marks = [self.mark]
        self.note = widgets.HTML()
        self.note.add_class("mwkin-cloud-note")
        self.brush = bq.interacts.BrushSelector(
            x_scale=self.x_scale, y_scale=self.y_scale, marks=[self.mark], color=COLOURS["selected"]
        )
        self.pan_zoom = bq.interacts.PanZoom(scales={"x": [self.x_scale], "y": [self.y_scale]})
        self.mode = widgets.ToggleButtons(
            options=[("box select", "brush"), ("pan / zoom", "pan")], value="brush", style={"button_width": "90px"}
        )
        self.mode.observe(self._set_mode, "value")
        self.clear_button = widgets.Button(description="clear selection", layout=widgets.Layout(width="120px"))
        self.clear_button.on_click(lambda _: self.clear_selection())
        self.figure.interaction = self.brush
        self.brush.observe(self._brushed, "brushing")
        super().__init__(children=[widgets.HBox([self.mode, self.clear_button]), self.figure, self.note])
        self.add_class("mwkin-cloud")

    # ---------------------------------------------------------------- data
    def set_data(
        self,
        x,
        y,
        c=None,
        *,
        x_label=None,
        y_label=None,
        c_label=None,
        x_unit=None,
        y_unit=None,
        c_unit=None,
        keep_selection=False,
        keep_view=False,
        **_view_options,
    ):
        """Show new arrays (one length). Same arguments as ``SampleScatter.set_data``.

        ``keep_view`` and the view options of the canvas view (``c_range``, ``view_range``) are accepted
        and ignored: bqplot rescales to the data.
        """
        x = np.asarray(getattr(x, "value", x), dtype=float)
        y = np.asarray(getattr(y, "value", y), dtype=float)
        if x.shape != y.shape or x.ndim != 1:
            raise ValueError(f"x and y must be 1-d arrays of one length, got shapes {x.shape} and {y.shape}")
        c = None if c is None else np.asarray(getattr(c, "value", c), dtype=float)
        if c is not None and c.shape != x.shape:
            raise ValueError(f"c must have the length of x ({len(x)}), got {c.shape}")
        # float32, as the canvas view stores and draws them, so data() means the same for both views
        self._x, self._y = x.astype(np.float32), y.astype(np.float32)
        self._c = None if c is None else c.astype(np.float32)
        finite = np.flatnonzero(np.isfinite(x) & np.isfinite(y))
        self._shown = finite[subsample_indices(len(finite), self.max_points)]
        for axis, label, unit in (("x", x_label, x_unit), ("y", y_label, y_unit), ("c", c_label, c_unit)):
            old_label, old_unit = self.labels[axis]
            self.labels[axis] = (old_label if label is None else label, old_unit if unit is None else unit)
        with self.mark.hold_sync():
            self.mark.selected = None
            if c is None:
                self.mark.color = None
                self.mark.scales = {"x": self.x_scale, "y": self.y_scale}
            self.mark.x = x[self._shown]
            self.mark.y = y[self._shown]
            if c is not None:
                cs = c[self._shown]
                fill = np.nanmedian(cs) if np.isfinite(cs).any() else 0.0
                self.mark.scales = {"x": self.x_scale, "y": self.y_scale, "color": self.c_scale}
                self.mark.color = np.where(np.isfinite(cs), cs, fill)
        self.figure.axes[0].label = _axis_title(*self.labels["x"])
        self.figure.axes[1].label = _axis_title(*self.labels["y"])
        self.c_axis.label = _axis_title(*self.labels["c"])
        self.c_axis.visible = c is not None
        n_finite = len(finite)
        if n_finite > len(self._shown):
            self.note.value = (
                f"<small>drawing a fixed random {len(self._shown)} of {n_finite} points; "
                f"selections use all of them</small>"
            )
        else:
            self.note.value = f"<small>{n_finite} points</small>"
        if keep_selection and len(self._selected) and self._selected[-1] < len(x):
            self._draw_selection()
        else:
            self._set_selected(np.zeros(0, dtype=np.uint32))

    @property
    def n_points(self):
        """Number of points (rows) last given to :meth:`set_data`."""
        return len(self._x)

    def data(self):
        """The arrays as given to :meth:`set_data` (float32): dict with x, y and c (None without colour)."""
        return {"x": self._x, "y": self._y, "c": self._c}

    @property
    def shown_indices(self):
        """Indices (into the ``set_data`` arrays) of the points actually drawn."""
        return self._shown

    # ---------------------------------------------------------------- selection
    @property
    def selected_indices(self):
        """Selected points as uint32 indices into the ``set_data`` arrays (sorted, unique); assignable."""
        return self._selected.copy()

    @selected_indices.setter
    def selected_indices(self, indices):
        idx = np.unique(np.asarray(indices, dtype=np.int64).ravel())
        if len(idx) and (idx[0] < 0 or idx[-1] >= self.n_points):
            raise ValueError(f"selected indices must lie in [0, {self.n_points}), got {idx[0]}..{idx[-1]}")
        self._set_selected(idx.astype(np.uint32))

    def clear_selection(self):
        """Select nothing."""
        self._set_selected(np.zeros(0, dtype=np.uint32))

    def on_select(self, callback, remove=False):
        """Call ``callback(indices)`` (uint32 array) whenever the selection changes."""
        if remove:
            self._callbacks.remove(callback)
        else:
            self._callbacks.append(callback)

    def _set_selected(self, indices):
        changed = not np.array_equal(indices, self._selected)
        self._selected = indices
        self._draw_selection()
        if changed:
            for callback in list(self._callbacks):
                callback(self._selected.copy())

    def _draw_selection(self):
        drawn = np.flatnonzero(np.isin(self._shown, self._selected)) if len(self._selected) else []
        self.mark.selected = drawn if len(drawn) else None

    def _brushed(self, change):
        if change["new"]:  # still dragging: wait for the end of the gesture
            return
        sx, sy = self.brush.selected_x, self.brush.selected_y
        if sx is None or sy is None or len(sx) < 2 or len(sy) < 2:
            self.clear_selection()
            return
        self.select_box(sx, sy)

    def select_box(self, x_range, y_range):
        """Select every point (not only the drawn ones) inside a rectangle in data units."""
        x0, x1 = sorted(float(v) for v in np.asarray(x_range, dtype=float)[:2])
        y0, y1 = sorted(float(v) for v in np.asarray(y_range, dtype=float)[:2])
        inside = (self._x >= x0) & (self._x <= x1) & (self._y >= y0) & (self._y <= y1)
        self._set_selected(np.flatnonzero(inside).astype(np.uint32))

    def _set_mode(self, change):
        self.figure.interaction = self.brush if change["new"] == "brush" else self.pan_zoom


def canvas_view_available():
    """True when the canvas view :class:`mwkin.widgets.views.SampleScatter` can be used."""
    try:
        from .views import SampleScatter  # noqa: F401
    except Exception:  # noqa: BLE001 - any failure (missing module, missing js) means: use bqplot
        return False
    return True


class SampleView(widgets.VBox):
    """A titled whole-sample scatter: the canvas ``SampleScatter`` when available, else :class:`PointCloud`.

    Delegates ``set_data``, ``data()``, ``n_points``, ``selected_indices``, ``on_select`` and
    ``clear_selection`` to the view in :attr:`view`, so callers never need to know which one it is.

    Parameters
    ----------
    title : str
    equal_aspect : bool
    width, height : int
        CSS pixels.
    use_canvas : bool, optional
        Force the choice (default: the canvas view when it imports).
    selection_mode : {"brush", "lasso", "pan"}
        What a drag does at first in the canvas view (the bqplot fallback always starts with its box).
    """

    def __init__(self, title, *, equal_aspect=False, width=400, height=340, use_canvas=None, selection_mode="brush"):
        if use_canvas is None:
            use_canvas = canvas_view_available()
        if use_canvas:
            from .views import SampleScatter

            # The box width lets the view's toolbar wrap instead of widening the view past the plot.
            self.view = SampleScatter(
                width=width,
                height=height,
                equal_aspect=equal_aspect,
                selection_mode=selection_mode,
                point_size=2,
                layout=widgets.Layout(width=f"{width + 4}px"),
            )
        else:
            self.view = PointCloud(equal_aspect=equal_aspect, width=width, height=height)
        self.is_canvas = bool(use_canvas)
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
