"""Custom front ends for whole samples and for one orbit, drawn by our own ES modules.

:class:`SampleScatter` shows 1e4-1e6 stars on a canvas (colour by any column, pan, zoom, hover read-out,
box and lasso selection); :class:`GalaxyView` shows a face-on orbit with a draggable velocity arrow.
Both are :class:`anywidget.AnyWidget` subclasses whose modules live in the repository's ``js/`` folder
(``mwkin/_js`` in a wheel) and are bundled into one ES module by :mod:`mwkin.widgets._assets`.

Arrays travel both ways as binary buffers: little-endian float32 for coordinates and colour values,
little-endian uint32 for indices of stars; never as JSON lists. Every setting has its default here, in
Python; the modules read everything from the model.
"""

from __future__ import annotations

import math

import anywidget
import numpy as np
import traitlets
from ipywidgets.widgets.trait_types import bytes_serialization

from ..frames import DEFAULT_FRAME_PARAMETERS
from ..units import to_value
from ._assets import bundle
from ._plots import CLOUD_OPACITY, ORBIT_COLOURS

__all__ = ["ViewDataError", "SampleScatter", "GalaxyView", "rotation_arc"]

# The view's defaults show the default frame (mwkin.frames.DEFAULT_FRAME_PARAMETERS): the Sun at
# x = -R0 (in-plane, the z_sun tilt ignored) moving with v_sun; the star starts on the Sun.
_SUN_XY = [-DEFAULT_FRAME_PARAMETERS["R0"], 0.0]
_SUN_VXY = list(DEFAULT_FRAME_PARAMETERS["v_sun"][:2])

_F32 = np.dtype("<f4")
_U32 = np.dtype("<u4")


class ViewDataError(ValueError):
    """Arrays given to a view have the wrong shape, length or content."""


def _binary_trait(help_text):
    # bytes_serialization turns the memoryview arriving from the browser into bytes
    return traitlets.Bytes(b"", help=help_text).tag(sync=True, **bytes_serialization)


def _as_float32_bytes(values, name, unit=None):
    """1-D float32 little-endian bytes of ``values`` (Quantity converted to ``unit`` when given)."""
    if unit is not None and hasattr(values, "unit"):
        values = to_value(values, unit, name)
    elif hasattr(values, "unit"):
        values = values.value
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise ViewDataError(f"{name}: expected a 1-D array, got shape {arr.shape}")
    with np.errstate(over="ignore"):
        return np.ascontiguousarray(arr, dtype=_F32).tobytes()


def _unit_text(values, unit):
    if unit is not None:
        return str(unit)
    u = getattr(values, "unit", None)
    return "" if u is None else u.to_string()


def _padded_range(values, fraction=0.04):
    """[lo, hi] of the finite values widened by ``fraction`` of the span; [0, 1] when none are finite."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return [0.0, 1.0]
    lo, hi = float(finite.min()), float(finite.max())
    if lo == hi:
        half = 0.5 if lo == 0 else 0.05 * abs(lo)
        return [lo - half, hi + half]
    pad = fraction * (hi - lo)
    return [lo - pad, hi + pad]


class SampleScatter(anywidget.AnyWidget):
    """Scatter plot of a whole star sample, drawn in the browser by pixel writes into a canvas.

    Colour by any column with a colour bar; axes with units; pan (drag), zoom (wheel), reset
    (double-click); hover read-out of the nearest star (index and values); box and lasso selection
    (toolbar, or Shift-drag / Alt-drag), sent back as indices; density shading when many points overlap.

    Parameters
    ----------
    **kwargs
        Initial trait values (see the traits below); usually the data come through :meth:`set_data`.

    Notes
    -----
    Coordinates and colour values are sent and drawn as float32 (about 7 significant digits), and the
    browser selects on those float32 values. That is ample for plotting, but columns with a large
    offset and a tiny spread (e.g. a Julian date) lose resolution; subtract the offset first.
    Rows with NaN in x or y are not drawn and can never be selected; a NaN colour value is drawn grey.
    """

    _esm = bundle("scatter.js")

    x = _binary_trait("x coordinates, float32 little-endian, one per star")
    y = _binary_trait("y coordinates, float32 little-endian, one per star")
    c = _binary_trait("colour values, float32 little-endian, one per star; empty for a single colour")
    x_label = traitlets.Unicode("x", help="x axis label (without unit)").tag(sync=True)
    y_label = traitlets.Unicode("y", help="y axis label (without unit)").tag(sync=True)
    c_label = traitlets.Unicode("", help="colour bar label (without unit)").tag(sync=True)
    x_unit = traitlets.Unicode("", help="unit of x, shown in brackets after the label").tag(sync=True)
    y_unit = traitlets.Unicode("", help="unit of y, shown in brackets after the label").tag(sync=True)
    c_unit = traitlets.Unicode("", help="unit of the colour values").tag(sync=True)
    c_range = traitlets.List(
        traitlets.Float(), default_value=[], maxlen=2, help="[low, high] colour value range; empty for the data's range"
    ).tag(sync=True)
    view_range = traitlets.List(
        traitlets.Float(),
        default_value=[],
        maxlen=4,
        help="shown region [x0, x1, y0, y1] in data units (x0 > x1 reverses the "
        "axis); updated by the browser after pan and zoom",
    ).tag(sync=True)
    home_range = traitlets.List(
        traitlets.Float(), default_value=[], maxlen=4, help="region [x0, x1, y0, y1] that 'Reset view' returns to"
    ).tag(sync=True)
    width = traitlets.Int(640, min=120, help="width of the plot in CSS pixels").tag(sync=True)
    height = traitlets.Int(420, min=100, help="height of the plot in CSS pixels").tag(sync=True)
    point_size = traitlets.Int(2, min=1, max=20, help="side of a drawn point in CSS pixels").tag(sync=True)
    opacity = traitlets.Float(0.75, min=0.02, max=1.0, help="opacity of each drawn point").tag(sync=True)
    density = traitlets.Enum(
        ["auto", "on", "off"],
        default_value="auto",
        help="density shading: 'on', 'off', or 'auto' (on above density_threshold drawable stars)",
    ).tag(sync=True)
    density_threshold = traitlets.Int(
        200_000, min=0, help="number of drawable stars above which 'auto' shades density"
    ).tag(sync=True)
    density_bin_px = traitlets.Int(3, min=1, max=50, help="side of a density bin in CSS pixels").tag(sync=True)
    equal_aspect = traitlets.Bool(False, help="same data units per pixel on both axes").tag(sync=True)
    selection_mode = traitlets.Enum(
        ["pan", "brush", "lasso"], default_value="pan", help="what a mouse drag does: pan, box selection or lasso"
    ).tag(sync=True)
    hover_radius_px = traitlets.Int(
        12, min=1, max=100, help="hover read-out picks the nearest star within this many pixels"
    ).tag(sync=True)
    selected = _binary_trait("indices of the selected stars, uint32 little-endian, increasing")
    selection_region = traitlets.Dict(
        help="the region last selected in the browser: {'kind': 'box', 'x': [lo, hi], 'y': [lo, hi]} or "
        "{'kind': 'lasso', 'x': [...], 'y': [...]} (vertices), in data units; {} when cleared"
    ).tag(sync=True)
    draw_count = traitlets.Int(
        0,
        help="number of redraws so far, written by the browser after each "
        "draw (lets tests and callers wait for a redraw)",
    ).tag(sync=True)

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self._select_callbacks = []
        self.observe(self._notify_select, names="selected")

    # ---- data ----
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
        c_range=None,
        view_range=None,
        keep_view=False,
        keep_selection=False,
    ):
        """Send a sample to the view in one message.

        Parameters
        ----------
        x, y : array-like or `~astropy.units.Quantity`, shape (n,)
            Coordinates. A Quantity is converted to ``x_unit`` / ``y_unit`` when given, else its own unit
            labels the axis.
        c : array-like or Quantity, shape (n,), optional
            Colour values; None draws a single colour.
        x_label, y_label, c_label : str, optional
            Axis and colour bar labels (without units); unchanged when None.
        x_unit, y_unit, c_unit : str, optional
            Units shown after the labels.
        c_range : (float, float), optional
            Colour range; default the finite range of ``c``.
        view_range : (x0, x1, y0, y1), optional
            Region to show; default the finite extent of the data with a 4 % margin. Also becomes the
            region "Reset view" returns to.
        keep_view : bool
            Keep the current view (e.g. when only the colour column changes).
        keep_selection : bool
            Keep the current selection (only sensible when the rows are the same stars).

        Raises
        ------
        ViewDataError
            If an array is not 1-D or the lengths of x, y and c differ.
        UnitMismatchError
            If a Quantity cannot be converted to the unit given.
        """
        xb = _as_float32_bytes(x, "x", x_unit)
        yb = _as_float32_bytes(y, "y", y_unit)
        n = len(xb) // 4
        if len(yb) // 4 != n:
            raise ViewDataError(f"x and y differ in length: {n} and {len(yb) // 4} values")
        cb = b""
        if c is not None:
            cb = _as_float32_bytes(c, "c", c_unit)
            if len(cb) // 4 != n:
                raise ViewDataError(f"c has {len(cb) // 4} values, x and y have {n}")
        xf = np.frombuffer(xb, _F32)
        yf = np.frombuffer(yb, _F32)
        with self.hold_sync():
            self.x, self.y, self.c = xb, yb, cb
            for name, value in (("x_label", x_label), ("y_label", y_label), ("c_label", c_label)):
                if value is not None:
                    setattr(self, name, str(value))
            self.x_unit = _unit_text(x, x_unit) if (x_unit is not None or hasattr(x, "unit")) else self.x_unit
            self.y_unit = _unit_text(y, y_unit) if (y_unit is not None or hasattr(y, "unit")) else self.y_unit
            if c is not None and (c_unit is not None or hasattr(c, "unit")):
                self.c_unit = _unit_text(c, c_unit)
            if c_range is not None:
                self.c_range = [float(c_range[0]), float(c_range[1])]
            elif c is not None:
                finite = np.frombuffer(cb, _F32)
                finite = finite[np.isfinite(finite)]
                self.c_range = [float(finite.min()), float(finite.max())] if finite.size else []
            else:
                self.c_range = []
            if not keep_selection:
                self.selected = b""
                self.selection_region = {}
            if not keep_view:
                if view_range is not None:
                    home = [float(v) for v in view_range]
                    if len(home) != 4 or not all(map(math.isfinite, home)):
                        raise ViewDataError(f"view_range must be 4 finite numbers, got {view_range!r}")
                else:
                    home = _padded_range(xf) + _padded_range(yf)
                self.home_range = home
                self.view_range = list(home)

    @property
    def n_points(self):
        """Number of stars (rows) currently sent to the view."""
        return len(self.x) // 4

    def data(self):
        """The arrays as drawn: dict of float32 numpy arrays ``x``, ``y`` and ``c`` (None if unset)."""
        c = np.frombuffer(self.c, _F32) if self.c else None
        return {"x": np.frombuffer(self.x, _F32), "y": np.frombuffer(self.y, _F32), "c": c}

    # ---- selection ----
    @property
    def selected_indices(self):
        """Indices (uint32 numpy array, increasing) of the selected stars; assign to select from Python."""
        return np.frombuffer(self.selected, _U32).copy()

    @selected_indices.setter
    def selected_indices(self, indices):
        idx = np.asarray(indices)
        if idx.dtype == bool:
            raise ViewDataError("selected_indices takes indices; use selected_mask for a boolean mask")
        idx = idx.astype(np.int64, copy=False).ravel()
        bad = (idx < 0) | (idx >= self.n_points)
        if bad.any():
            raise ViewDataError(
                f"selected_indices: {int(bad.sum())} indices outside 0..{self.n_points - 1}, first {int(idx[bad][0])}"
            )
        self.selected = np.unique(idx).astype(_U32).tobytes()
        self.selection_region = {}

    @property
    def selected_mask(self):
        """Boolean numpy array, one per star, True for the selected ones; assignable."""
        mask = np.zeros(self.n_points, dtype=bool)
        mask[self.selected_indices] = True
        return mask

    @selected_mask.setter
    def selected_mask(self, mask):
        mask = np.asarray(mask, dtype=bool)
        if mask.shape != (self.n_points,):
            raise ViewDataError(f"selected_mask has shape {mask.shape}, expected ({self.n_points},)")
        self.selected_indices = np.flatnonzero(mask)

    def clear_selection(self):
        """Select nothing."""
        self.selected = b""
        self.selection_region = {}

    def on_select(self, callback, remove=False):
        """Call ``callback(indices)`` (uint32 numpy array) whenever the selection changes.

        Parameters
        ----------
        callback : callable
        remove : bool
            Unregister ``callback`` instead.
        """
        if remove:
            self._select_callbacks.remove(callback)
        else:
            self._select_callbacks.append(callback)

    def _notify_select(self, change):
        if not self._select_callbacks:
            return
        indices = self.selected_indices
        for callback in list(self._select_callbacks):
            callback(indices)

    def reset_view(self):
        """Show the home region again."""
        if self.home_range:
            self.view_range = list(self.home_range)


def rotation_arc(position, velocity, fraction=0.55, span_deg=70.0, n_seg=24):
    """An arc about the centre showing the sense in which a body at ``position`` moving with ``velocity`` turns.

    The arc has ``fraction`` times the body's distance as radius, starts at its azimuth and sweeps
    ``span_deg`` degrees in the direction it moves (the sign of x vy - y vx). The one drawing of the
    sense of rotation: the face-on view shows it and the exported figure draws the same points.

    Parameters
    ----------
    position, velocity : sequence of 2 float
        In-plane position (kpc) and velocity (any unit).
    fraction, span_deg : float
    n_seg : int
        Segments of the polyline.

    Returns
    -------
    (x, y) : tuple of numpy.ndarray, or None
        ``n_seg + 1`` points each (kpc); None when the sense is undefined (at the centre, radial motion).
    """
    px, py = (float(v) for v in position)
    vx, vy = (float(v) for v in velocity)
    r, lz = math.hypot(px, py), px * vy - py * vx
    if not (r > 0 and abs(lz) > 0):
        return None
    theta = math.atan2(py, px) + math.copysign(math.radians(span_deg), lz) * np.arange(n_seg + 1) / n_seg
    return fraction * r * np.cos(theta), fraction * r * np.sin(theta)


class GalaxyView(anywidget.AnyWidget):
    """Face-on view of the Galactocentric x-y plane with one star's orbit and a draggable velocity arrow.

    Shows the Sun, the Galactic centre, an arrow for the sense of Galactic rotation (taken from the Sun's
    motion: clockwise seen from the north Galactic pole in astropy's frame, where the Sun sits near
    x = -R0 and moves toward +y), the orbit track, an optional cloud of faint tracks, and the star with its
    in-plane velocity arrow. Dragging the arrow's tip sets ``velocity_xy``; the browser sends at most one
    update per animation frame while dragging (``dragging`` is True meanwhile) and the final value on
    release. Whoever integrates the orbit observes ``velocity_xy`` and calls :meth:`set_track`.

    Notes
    -----
    Coordinates follow astropy's Galactocentric frame (kpc); velocities are Galactocentric (km/s).
    Tracks are drawn as float32; NaN in a track lifts the pen, which is how several tracks are packed
    into ``cloud_x`` / ``cloud_y``.
    """

    _esm = bundle("galaxy.js")

    track_x = _binary_trait("orbit track x (kpc), float32 little-endian")
    track_y = _binary_trait("orbit track y (kpc), float32 little-endian")
    cloud_x = _binary_trait("x (kpc) of extra faint tracks, float32, tracks separated by NaN")
    cloud_y = _binary_trait("y (kpc) of extra faint tracks, float32, tracks separated by NaN")
    star_xy = traitlets.List(
        traitlets.Float(), default_value=list(_SUN_XY), minlen=2, maxlen=2, help="star's initial position [x, y] in kpc"
    ).tag(sync=True)
    velocity_xy = traitlets.List(
        traitlets.Float(),
        default_value=list(_SUN_VXY),
        minlen=2,
        maxlen=2,
        help="star's initial in-plane velocity [vx, vy] in km/s; set by dragging the arrow tip",
    ).tag(sync=True)
    sun_xy = traitlets.List(
        traitlets.Float(),
        default_value=list(_SUN_XY),
        minlen=2,
        maxlen=2,
        help="the Sun's position [x, y] in kpc (default: the default frame's, x = -R0)",
    ).tag(sync=True)
    sun_velocity_xy = traitlets.List(
        traitlets.Float(),
        default_value=list(_SUN_VXY),
        minlen=2,
        maxlen=2,
        help="the Sun's in-plane velocity [vx, vy] in km/s; sets the sense of the rotation arrow",
    ).tag(sync=True)
    colors = traitlets.Dict(
        default_value=dict(ORBIT_COLOURS),
        help="CSS colours of track, cloud, star, arrow, sun, centre and rotation (the "
        "orbit views' palette, mwkin.widgets._plots.ORBIT_COLOURS)",
    ).tag(sync=True)
    cloud_opacity = traitlets.Float(CLOUD_OPACITY, min=0.0, max=1.0, help="opacity of the faint cloud tracks").tag(
        sync=True
    )
    rotation_x = _binary_trait(
        "x (kpc) of the arc showing the sense of rotation, float32; follows sun_xy and sun_velocity_xy (rotation_arc)"
    )
    rotation_y = _binary_trait("y (kpc) of the arc showing the sense of rotation, float32")
    arrow_scale = traitlets.Float(50.0, min=1e-3, help="velocity arrow scale, km/s per kpc of arrow length").tag(
        sync=True
    )
    view_range = traitlets.List(
        traitlets.Float(),
        default_value=[-13.0, 13.0, -13.0, 13.0],
        minlen=4,
        maxlen=4,
        help="shown region [x0, x1, y0, y1] in kpc (widened to equal aspect)",
    ).tag(sync=True)
    width = traitlets.Int(460, min=120, help="width of the view in CSS pixels").tag(sync=True)
    height = traitlets.Int(460, min=120, help="height of the view in CSS pixels").tag(sync=True)
    editable = traitlets.Bool(True, help="whether the velocity arrow can be dragged").tag(sync=True)
    dragging = traitlets.Bool(False, help="True while the arrow is being dragged (set by the browser)").tag(sync=True)
    draw_count = traitlets.Int(0, help="number of redraws so far, written by the browser after each draw").tag(
        sync=True
    )

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self._velocity_callbacks = []
        self._last_final = {}
        self.observe(self._notify_velocity, names=["velocity_xy", "dragging"])
        self.observe(self._update_rotation, names=["sun_xy", "sun_velocity_xy"])
        self._update_rotation()

    def _update_rotation(self, change=None):
        arc = rotation_arc(self.sun_xy, self.sun_velocity_xy)
        x, y = arc if arc is not None else ([], [])
        with self.hold_sync():
            self.rotation_x = np.asarray(x, dtype=_F32).tobytes()
            self.rotation_y = np.asarray(y, dtype=_F32).tobytes()

    def export_panel(self, title="Face-on", notes=()):
        """What the view draws, as a :class:`~mwkin.widgets._base.Panel` for the static export.

        The same data, colours, arc and shown region as the canvas: cloud, track, the sense of rotation,
        the Galactic centre, the Sun, and the star with its velocity arrow.
        """
        from ._base import Panel

        c = self.colors
        cloud_x, cloud_y = (np.frombuffer(b, _F32).astype(float) for b in (self.cloud_x, self.cloud_y))
        track_x, track_y = (v.astype(float) for v in self.track())
        layers = []
        if cloud_x.size:
            layers.append(
                {
                    "kind": "line",
                    "x": cloud_x,
                    "y": cloud_y,
                    "color": c["cloud"],
                    "width": 1.0,
                    "opacity": self.cloud_opacity,
                }
            )
        layers.append({"kind": "line", "x": track_x, "y": track_y, "color": c["track"], "width": 1.5})
        arc_x, arc_y = (np.frombuffer(b, _F32).astype(float) for b in (self.rotation_x, self.rotation_y))
        if arc_x.size >= 2:
            layers += [
                {"kind": "line", "x": arc_x, "y": arc_y, "color": c["rotation"], "width": 2.0},
                {"kind": "arrow", "x": arc_x[-2:], "y": arc_y[-2:], "color": c["rotation"], "width": 2.0},
                {
                    "kind": "text",
                    "x": [1.12 * arc_x[-1]],
                    "y": [1.12 * arc_y[-1]],
                    "text": "Galactic rotation",
                    "color": c["rotation"],
                },
            ]
        (sx, sy), (vx, vy), scale = self.star_xy, self.velocity_xy, self.arrow_scale
        layers += [
            {"kind": "scatter", "x": [0.0], "y": [0.0], "color": c["centre"], "size": 80, "marker": "+"},
            {"kind": "text", "x": [0.0], "y": [0.0], "text": "  Galactic centre", "color": c["centre"]},
            {
                "kind": "scatter",
                "x": [self.sun_xy[0]],
                "y": [self.sun_xy[1]],
                "color": c["sun"],
                "size": 60,
                "marker": "o",
            },
            {
                "kind": "text",
                "x": [self.sun_xy[0]],
                "y": [self.sun_xy[1]],
                "text": "Sun  ",
                "color": c["centre"],
                "align": "right",
            },
            {
                "kind": "arrow",
                "x": [sx, sx + vx / scale],
                "y": [sy, sy + vy / scale],
                "color": c["arrow"],
                "width": 2.0,
            },
            {"kind": "scatter", "x": [sx], "y": [sy], "color": c["star"], "size": 20},
        ]
        x0, x1, y0, y1 = self.view_range
        return Panel(
            title, "x [kpc]", "y [kpc]", layers, equal_aspect=True, notes=notes, x_range=(x0, x1), y_range=(y0, y1)
        )

    def set_track(self, x, y):
        """Send the orbit track (kpc; Quantity or plain numbers) in one message.

        Raises
        ------
        ViewDataError
            If x and y are not 1-D arrays of the same length.
        """
        xb = _as_float32_bytes(x, "track x", "kpc")
        yb = _as_float32_bytes(y, "track y", "kpc")
        if len(xb) != len(yb):
            raise ViewDataError(f"track x and y differ in length: {len(xb) // 4} and {len(yb) // 4} values")
        with self.hold_sync():
            self.track_x, self.track_y = xb, yb

    def set_cloud(self, tracks):
        """Send extra faint tracks, e.g. orbits drawn from the measurement uncertainties.

        Parameters
        ----------
        tracks : sequence of (x, y) pairs of 1-D arrays (kpc); empty to remove them.
        """
        xs, ys = [], []
        for i, (tx, ty) in enumerate(tracks):
            tx = np.frombuffer(_as_float32_bytes(tx, f"cloud track {i} x", "kpc"), _F32)
            ty = np.frombuffer(_as_float32_bytes(ty, f"cloud track {i} y", "kpc"), _F32)
            if tx.size != ty.size:
                raise ViewDataError(f"cloud track {i}: x and y differ in length: {tx.size} and {ty.size}")
            xs += [tx, np.full(1, np.nan, _F32)]
            ys += [ty, np.full(1, np.nan, _F32)]

        def cat(parts):
            return np.concatenate(parts).astype(_F32).tobytes() if parts else b""

        with self.hold_sync():
            self.cloud_x, self.cloud_y = cat(xs), cat(ys)

    def track(self):
        """The track as drawn: (x, y) float32 numpy arrays in kpc."""
        return np.frombuffer(self.track_x, _F32), np.frombuffer(self.track_y, _F32)

    def on_velocity(self, callback, final_only=False, remove=False):
        """Call ``callback(vx, vy)`` (km/s) when the star's in-plane velocity changes.

        Parameters
        ----------
        callback : callable
        final_only : bool
            Call it only with settled values: the value on release of a drag, or one set from Python,
            not the intermediate values sent while dragging.
        remove : bool
            Unregister ``callback`` instead.
        """
        if remove:
            self._velocity_callbacks = [e for e in self._velocity_callbacks if e[0] is not callback]
        else:
            self._velocity_callbacks.append((callback, bool(final_only)))

    def _notify_velocity(self, change):
        # On release the browser sends velocity_xy and dragging=False together; a final-only callback
        # hears of each settled value once, whichever of the two notifications comes first.
        value = tuple(self.velocity_xy)
        for callback, final_only in list(self._velocity_callbacks):
            if not final_only:
                if change["name"] == "velocity_xy":
                    callback(*value)
                continue
            if self.dragging or self._last_final.get(id(callback)) == value:
                continue
            self._last_final[id(callback)] = value
            callback(*value)
