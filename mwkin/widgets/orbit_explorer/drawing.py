"""OrbitExplorer's views: the face-on GalaxyView, the meridional bqplot figure and the read-out.

:class:`_Drawing` is a mixin of :class:`~mwkin.widgets.orbit_explorer.widget.OrbitExplorer`: it builds
the two views and draws a computed :class:`~mwkin.widgets.orbit_explorer.widget.OrbitView` into them
(tracks, the cloud, the Sun, the star and its velocity arrow), fills the table of orbital parameters and
describes the views for the static export. The helpers below it turn an OrbitSet into plain arrays.
"""

from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np

from .._plots import CLOUD_OPACITY, ORBIT_COLOURS, panel_from_figure
from ..views import GalaxyView
from .star import _parallax_caveat

#: The orbit views' palette (one for the face-on canvas, the meridional figure, the key and the export).
_COLOURS = {**ORBIT_COLOURS, "forward": ORBIT_COLOURS["track"]}

#: The plots' key, under them (the tracks fill the boxes, so an in-plot legend would hide them).
_KEY_HTML = (
    "<small><b>face-on</b> (top): the whole integrated span as one line, the Sun, the Galactic centre, "
    "the sense of Galactic rotation and the star with its initial velocity in the plane; "
    "<b>drag the arrow's tip</b> to change that velocity (pan: drag elsewhere; zoom: wheel).<br>"
    "<b>meridional</b> (below it): "
    f"<span style='color:{_COLOURS['forward']}'>━ forward</span> &nbsp; "
    f"<span style='color:{_COLOURS['backward']}'>╍ backward</span> &nbsp; "
    f"<span style='color:{_COLOURS['cloud']}'>━ from the uncertainties</span> &nbsp; "
    f"<span style='color:{_COLOURS['sun']}'>● Sun</span> &nbsp; "
    f"<span style='color:{_COLOURS['centre']}'>✚ Galactic centre</span> &nbsp; "
    f"<span style='color:{_COLOURS['star']}'>● star now</span> &nbsp; "
    f"<span style='color:{_COLOURS['rotation']}'>↻ sense of rotation (clockwise seen from the north "
    "Galactic pole; toward you in the meridional view)</span></small>"
)

_FACE_PX = 420  # face-on GalaxyView: square (the view itself keeps equal aspect)
#: Arrow scale of the face-on view: a 250 km/s arrow spans this fraction of the view's half-width.
_ARROW_FRACTION = 0.3
_MER_W, _MER_H = _FACE_PX, 240  # meridional figure, under the face-on view
_MARGIN = 45


class _Drawing:
    """Mixin of OrbitExplorer: build the views, draw a result into them, describe them for the export.

    Uses the widget's ``orbital_parameters``, ``_star_request``, ``_quiet``, ``_runner`` and the drag
    handlers ``_velocity_dragged`` and ``_drag_ended``.
    """

    def _show(self, view, request):
        tracks = {"forward": None, "backward": None}
        main_key = "forward" if request["t_forward"] > 0 else "backward"
        tracks[main_key] = _track_arrays(view.orbits, 0)
        if view.backward is not None:
            tracks["backward"] = _track_arrays(view.backward, 0)
        cloud = _cloud_arrays(view.cloud) if view.cloud is not None else None
        sun = view.frame.sun_position
        self._draw_face_on(tracks, cloud, sun, view, request)
        self._draw_meridional(tracks, cloud, sun, view.frame.inplane_radius)
        self._show_readout(view, request["star"])

    def _show_readout(self, view, star):
        p = self.orbital_parameters()
        rows = [
            ("r_peri", f"{p['rperi']:.3f}", "kpc", "rperi"),
            ("r_apo", f"{p['rapo']:.3f}", "kpc", "rapo"),
            ("z_max", f"{p['zmax']:.3f}", "kpc", "zmax"),
            ("e", f"{p['eccentricity']:.3f}", "", "eccentricity"),
            ("E", f"{p['energy']:.5g}", "km²/s²", "energy"),
            ("L_z", f"{p['Lz']:.5g}", "kpc km/s", "Lz"),
        ]
        spread = {}
        if view.cloud is not None:
            for key in ("rperi", "rapo", "zmax", "eccentricity", "energy", "Lz"):
                values = getattr(view.cloud, key).value
                values = values[np.isfinite(values)]
                if values.size:
                    lo, hi = np.percentile(values, [16, 84])
                    spread[key] = f"{lo:.4g} – {hi:.4g}"
        head = "<tr><th></th><th>value</th><th>unit</th>" + ("<th>cloud 16–84%</th>" if spread else "") + "</tr>"
        body = "".join(
            f"<tr><td>{n}</td><td>{v}</td><td>{u}</td>" + (f"<td>{spread.get(k, '')}</td>" if spread else "") + "</tr>"
            for n, v, u, k in rows
        )
        note = (
            "<small>r_peri, r_apo, z_max and e over the integrated span; E in the potential's zero point "
            "(see OrbitSet.energy); L_z = R v_phi, positive for prograde orbits</small>"
        )
        caveat = _parallax_caveat(star)
        if caveat:
            note += f"<br><small class='mwkin-caveat'>{html.escape(caveat)}</small>"
        self.readout.value = f"<table class='mwkin-orbit-table'>{head}{body}</table>{note}"

    # ================================================================== plots
    def _build_figures(self):
        import bqplot as bq

        def figure(title, x_label, y_label, width, height):
            xs, ys = bq.LinearScale(), bq.LinearScale()
            axes = [
                bq.Axis(scale=xs, label=x_label, grid_lines="none"),
                bq.Axis(scale=ys, label=y_label, side="left", grid_lines="none"),
            ]
            fig = bq.Figure(
                axes=axes,
                title=title,
                fig_margin={"top": _MARGIN, "bottom": _MARGIN, "left": _MARGIN, "right": _MARGIN},
                layout=widgets.Layout(width=f"{width}px", height=f"{height}px"),
                min_aspect_ratio=width / height,
                max_aspect_ratio=width / height,
                legend_location="top-right",
            )
            return fig, xs, ys

        def marks(xs, ys, labelled):
            sc = {"x": xs, "y": ys}
            empty = np.array([np.nan])
            m = {
                "cloud": bq.Lines(
                    x=empty,
                    y=empty,
                    scales=sc,
                    colors=[_COLOURS["cloud"]],
                    opacities=[CLOUD_OPACITY],
                    labels=["from the uncertainties"],
                    stroke_width=1.0,
                ),
                "backward": bq.Lines(
                    x=empty,
                    y=empty,
                    scales=sc,
                    colors=[_COLOURS["backward"]],
                    line_style="dashed",
                    labels=["backward"],
                    display_legend=labelled,
                ),
                "forward": bq.Lines(
                    x=empty,
                    y=empty,
                    scales=sc,
                    colors=[_COLOURS["forward"]],
                    labels=["forward"],
                    display_legend=labelled,
                ),
                "rotation": bq.Lines(x=empty, y=empty, scales=sc, colors=[_COLOURS["rotation"]]),
                "star": bq.Scatter(
                    x=empty, y=empty, scales=sc, colors=[_COLOURS["star"]], default_size=40, labels=["star (t = 0)"]
                ),
                "sun": bq.Scatter(
                    x=empty,
                    y=empty,
                    scales=sc,
                    colors=[_COLOURS["sun"]],
                    default_size=90,
                    stroke="black",
                    labels=["Sun"],
                    display_legend=labelled,
                ),
                "centre": bq.Scatter(
                    x=np.array([0.0]),
                    y=np.array([0.0]),
                    scales=sc,
                    marker="cross",
                    colors=[_COLOURS["centre"]],
                    default_size=90,
                    labels=["Galactic centre"],
                    display_legend=labelled,
                ),
                "label": bq.Label(
                    x=empty,
                    y=empty,
                    scales=sc,
                    text=np.array(["rotation"]),
                    colors=[_COLOURS["rotation"]],
                    default_size=12,
                    align="middle",
                ),
            }
            return m

        self.galaxy_view = GalaxyView(width=_FACE_PX, height=_FACE_PX)
        self.galaxy_view.add_class("mwkin-face-on")
        self.galaxy_view.on_velocity(self._velocity_dragged)
        self.galaxy_view.observe(self._drag_ended, "dragging")
        self.meridional_figure, self._mx, self._my = figure("Meridional", "R [kpc]", "z [kpc]", _MER_W, _MER_H)
        self.meridional_marks = marks(self._mx, self._my, False)
        self.meridional_figure.marks = list(self.meridional_marks.values())
        self.meridional_figure.add_class("mwkin-meridional")

    def _draw_face_on(self, tracks, cloud, sun, view, request):
        """Face-on (x, y) view: the whole track, the cloud, the Sun, the star and its velocity arrow."""
        g = self.galaxy_view
        start = view.start
        x, y = _joined_track(tracks, "x"), _joined_track(tracks, "y")
        xs, ys = [x, [sun[0], start[0]]], [y, [sun[1], start[1]]]
        if cloud is not None:
            xs.append(cloud["x"].ravel())
            ys.append(cloud["y"].ravel())
        xs, ys = np.concatenate(xs), np.concatenate(ys)
        bounds = (float(np.nanmin(xs)), float(np.nanmax(xs)), float(np.nanmin(ys)), float(np.nanmax(ys)))
        extent = max(map(abs, bounds)) * 1.1
        self._drawn = {"bounds": bounds, "extent": extent}
        with g.hold_sync():
            g.set_track(x, y)
            g.set_cloud([] if cloud is None else list(zip(cloud["x"], cloud["y"])))
            g.sun_xy = [float(sun[0]), float(sun[1])]
            g.sun_velocity_xy = [float(v) for v in view.frame.v_sun[:2]]
            g.star_xy = [float(start[0]), float(start[1])]
            if self._is_current(request):
                # A result for an older input must not move the arrow back. Showing the velocity is no
                # drag; the guard is per thread, so a drag arriving meanwhile still counts.
                with self._quiet:
                    g.velocity_xy = [float(start[3]), float(start[4])]
            if not request["keep_view"]:
                self._fit_view(bounds, extent)
            elif not request["dragging"]:
                self._fit_view(bounds, extent, only_if_needed=True)

    def _is_current(self, request):
        """True if ``request`` holds the star the inputs hold now."""
        try:
            return self._star_request() == request["star"]
        except ValueError:
            return False

    def _fit_view(self, bounds, extent, only_if_needed=False):
        """Show +-extent kpc about the centre, with a matching arrow scale.

        With ``only_if_needed`` the view (zoomed or panned by the user, or kept during a drag) changes
        only when ``bounds`` (x0, x1, y0, y1) do not fit inside it.
        """
        g = self.galaxy_view
        if only_if_needed:
            x0, x1, y0, y1 = g.view_range
            if (
                min(x0, x1) <= bounds[0]
                and bounds[1] <= max(x0, x1)
                and min(y0, y1) <= bounds[2]
                and bounds[3] <= max(y0, y1)
            ):
                return
        with g.hold_sync():
            g.view_range = [-extent, extent, -extent, extent]
            g.arrow_scale = 250.0 / (_ARROW_FRACTION * extent)

    def _draw_meridional(self, tracks, cloud, sun, R_sun):
        m = self.meridional_marks
        z_sun = sun[2]
        Rs = [t["R"] for t in tracks.values() if t is not None]
        zs = [t["z"] for t in tracks.values() if t is not None]
        if cloud is not None:
            Rs.append(cloud["R"].ravel())
            zs.append(cloud["z"].ravel())
        R_top = max(float(np.nanmax(np.concatenate(Rs))), R_sun) * 1.08
        z_half = max(float(np.nanmax(np.abs(np.concatenate(zs)))), abs(z_sun)) * 1.15
        ratio = (_MER_W - 2 * _MARGIN) / (_MER_H - 2 * _MARGIN)  # plot-area width / height
        # Equal aspect: data span ratio equals the plot area's ratio (widen whichever is short).
        if R_top / (2 * z_half) > ratio:
            z_half = R_top / ratio / 2
        else:
            R_top = 2 * z_half * ratio
        with self.meridional_figure.hold_sync():
            self._mx.min, self._mx.max = 0.0, R_top
            self._my.min, self._my.max = -z_half, z_half
            self._set_tracks(m, tracks, cloud, "R", "z")
            _set_xy(m["sun"], [R_sun], [z_sun])
            # Rotation is perpendicular to this plane, toward the viewer (R right, z up, phi with rotation).
            m["label"].text = np.array(["⊙ rotation: toward you"])
            _set_xy(m["label"], [0.5 * R_top], [0.82 * z_half])
            _set_xy(m["rotation"], [np.nan], [np.nan])

    def _set_tracks(self, m, tracks, cloud, kx, ky):
        for key in ("forward", "backward"):
            track = tracks[key]
            if track is None:
                _set_xy(m[key], [np.nan], [np.nan])
            else:
                _set_xy(m[key], track[kx], track[ky])
        start = tracks["forward"] if tracks["forward"] is not None else tracks["backward"]
        _set_xy(m["star"], [start[kx][0]], [start[ky][0]])
        if cloud is None:
            _set_xy(m["cloud"], [np.nan], [np.nan])
        else:
            _set_xy(m["cloud"], cloud[kx], cloud[ky])

    def _figure_panels(self):
        """The two views as they are shown, for the static export (one description: the live views)."""
        if self._result is None or self._drawn is None:
            raise RuntimeError("nothing to export yet: the orbit has not been computed")
        scale = float(self.galaxy_view.arrow_scale)
        face_on = self.galaxy_view.export_panel(
            "Face-on",
            notes=[
                "grey arrow: sense of Galactic rotation (clockwise seen from the north pole)",
                f"red arrow: the star's initial velocity in the plane ({scale:.3g} km/s per kpc)",
            ],
        )
        meridional = panel_from_figure(
            self.meridional_figure,
            "Meridional",
            equal_aspect=True,
            legend_outside=True,
            notes=["rotation is toward the viewer (perpendicular to this plane)"],
        )
        return [face_on, meridional]


# ====================================================================== helpers (no widget access)
def _set_xy(mark, x, y):
    with mark.hold_sync():
        mark.x = np.asarray(x, dtype=float)
        mark.y = np.asarray(y, dtype=float)


def _joined_track(tracks, key):
    """Coordinate ``key`` of the backward (reversed) and forward tracks as one line in time order."""
    back, fwd = tracks["backward"], tracks["forward"]
    if back is None:
        return fwd[key]
    if fwd is None:
        return back[key][::-1]
    return np.concatenate([back[key][::-1], fwd[key][1:]])  # both start at the star (t = 0)


def _tracks(orbits, keep=slice(None)):
    """Tracks ``keep`` (an index or a selection) as float64 arrays x, y, z, R (kpc) from the OrbitSet."""
    return {name: getattr(orbits, name)[keep].to_value("kpc") for name in ("x", "y", "z", "R")}


def _track_arrays(orbits, i):
    """Track of orbit ``i`` as float64 arrays x, y, z, R (kpc) and t (Gyr)."""
    return {**_tracks(orbits, i), "t": orbits.t.to_value("Gyr")}


def _cloud_arrays(orbits):
    """All cloud tracks as (N, nt) arrays x, y, z, R (kpc); failed draws dropped."""
    return _tracks(orbits, np.all(np.isfinite(orbits.R.to_value("kpc")), axis=1))
