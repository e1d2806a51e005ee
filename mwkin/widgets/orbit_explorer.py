"""OrbitExplorer: the orbit of one star in the shared frame and potential, recomputed live.

The star comes from a table row, from typed observables or from typed Galactocentric phase space. The
orbit is integrated forward and backward with :func:`mwkin.integrate_orbits` and drawn face-on (x, y) in
a :class:`~mwkin.widgets.views.GalaxyView` and in the meridional plane (R, z) with bqplot, both at equal
aspect, with the Sun, the centre and the sense of Galactic rotation marked. A toggle adds faint orbits of
stars drawn from the measurement uncertainties.

Dragging the tip of the star's velocity arrow in the face-on view sets the star's initial in-plane
Galactocentric velocity (vx, vy); the orbit is recomputed through the widget's live runner while the
arrow moves (the browser sends at most one value per animation frame, the newest request wins). A star
given as observables or as a table row is converted to phase space with the frame of that moment at the
first drag; the star as given is kept (``config["star"]["original"]``) and a button brings it back.
"""

from __future__ import annotations

import html
import math
import warnings
from dataclasses import dataclass, field

import ipywidgets as widgets
import numpy as np
import traitlets

from ..columns import OUTPUT_COLUMNS, PHASE_SPACE_COLUMNS, column_values
from ..orbits import ADVISORY_FLAGS
from ..orbits.parameters import draw_phase_space_samples, span_parameters
from ._base import AnalysisWidget, Setting, control_setting, snippet_preamble, within_control
from ._plots import CLOUD_OPACITY, ORBIT_COLOURS, panel_from_figure
from ._sample import LOW_SNR, parallax_snr
from .controls import NumberField
from .state import ConfigError, potential_from_config, require_mapping
from .views import GalaxyView

__all__ = ["OrbitExplorer", "OrbitView", "DEFAULT_STAR"]

#: The star shown when none is given: a thin-disc-like star about 1 kpc away (made up for the demo).
DEFAULT_STAR = {
    "ra": 120.0,
    "dec": -30.0,
    "parallax": 1.0,
    "pmra": -4.0,
    "pmdec": 3.0,
    "radial_velocity": 15.0,
    "parallax_error": 0.04,
    "pmra_error": 0.05,
    "pmdec_error": 0.05,
    "radial_velocity_error": 1.0,
    "distance": 1.0,
    "distance_error": 0.04,
}

#: Typed observables: key -> (label with unit, default slider range or None).
_OBSERVABLES = {
    "ra": ("ra [deg]", None),
    "dec": ("dec [deg]", None),
    "parallax": ("parallax [mas]", None),
    "distance": ("distance [kpc]", None),
    "pmra": ("pmra [mas/yr]", (-100.0, 100.0, 0.1)),
    "pmdec": ("pmdec [mas/yr]", (-100.0, 100.0, 0.1)),
    "radial_velocity": ("radial_velocity [km/s]", (-400.0, 400.0, 0.5)),
}
_OBS_ERRORS = {
    "parallax_error": "σ parallax [mas]",
    "distance_error": "σ distance [kpc]",
    "pmra_error": "σ pmra [mas/yr]",
    "pmdec_error": "σ pmdec [mas/yr]",
    "radial_velocity_error": "σ radial_velocity [km/s]",
}
#: Typed Galactocentric phase space (astropy's Galactocentric axes). vx and vy have no slider: the
#: velocity arrow of the face-on view is their live control (a slider would also echo each dragged
#: value back rounded to its step, racing the drag).
_PHASE_SPACE = {
    "x": ("x [kpc]", None),
    "y": ("y [kpc]", None),
    "z": ("z [kpc]", None),
    "vx": ("vx [km/s]", None),
    "vy": ("vy [km/s]", None),
    "vz": ("vz [km/s]", (-300.0, 300.0, 0.5)),
}
DEFAULT_PHASE_SPACE = {"x": -8.0, "y": 0.5, "z": 0.1, "vx": 10.0, "vy": 230.0, "vz": 5.0}

_SOURCES = {"table": "table row", "observables": "observables", "phase_space": "phase space"}
#: The orbit views' palette (one for the face-on canvas, the meridional figure, the key and the export).
_COLOURS = {**ORBIT_COLOURS, "forward": ORBIT_COLOURS["track"]}

#: Output points of each cloud orbit (at most; fewer if the main orbit has fewer).
CLOUD_POINTS = 501

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


def _is_number(value):
    return not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)


def _finite_gyr(widget, value):
    if not _is_number(value):
        raise ValueError("must be a finite number of Gyr")
    return float(value)


@dataclass
class OrbitView:
    """Everything one OrbitExplorer computation produced.

    Attributes
    ----------
    orbits : OrbitSet
        The forward integration (the backward one when the forward time is 0); ``OrbitExplorer.result``.
    backward : OrbitSet or None
    cloud : OrbitSet or None
        Orbits of stars drawn from the measurement uncertainties (forward in time).
    potential : Potential
        The potential used (after matching the frame, if asked).
    frame : SolarFrame
    start : numpy.ndarray, shape (6,)
        The star's Galactocentric x, y, z (kpc), vx, vy, vz (km/s) at t = 0.
    note : str
        Said in the status line after the summary (e.g. that the velocity was set by dragging).
    """

    orbits: object
    backward: object
    cloud: object
    potential: object
    frame: object
    start: np.ndarray = field(default_factory=lambda: np.full(6, np.nan))
    note: str = ""


class OrbitExplorer(AnalysisWidget):
    """The orbit of one star, live in the shared frame and potential.

    Parameters
    ----------
    frame : FrameState, optional
    potential : PotentialState, optional
    star : dict, optional
        Observables (``ra``, ``dec``, ``parallax`` or ``distance``, ``pmra``, ``pmdec``,
        ``radial_velocity``, optional ``*_error``; deg, mas, kpc, mas/yr, km/s) or Galactocentric
        phase space (``x``, ``y``, ``z`` in kpc, ``vx``, ``vy``, ``vz`` in km/s).
    stars : table, optional
        Anything :func:`mwkin.read_catalog` reads; the star is row ``row`` of it.
    row : int, optional
    t_forward, t_backward : float, optional
        Integration time forward and backward, Gyr (both >= 0, not both 0).
    n_points : int, optional
        Output points per direction (including t = 0).
    n_cloud : int, optional
        Number of orbits drawn from the uncertainties when the cloud is shown.
    seed : int, optional
        Seed of the cloud's random draws (so a config reproduces the same cloud).
    threaded : bool, optional
        Compute off the kernel's main thread (default); False computes in place.

    Notes
    -----
    ``.result`` is the :class:`~mwkin.orbits.OrbitSet` of the forward integration (or of the backward
    one when ``t_forward`` is 0); :attr:`view` holds both directions and the cloud. The orbital
    parameters shown cover the whole integrated span (backward and forward together).

    The face-on view is :attr:`galaxy_view`. Its ``velocity_xy`` (km/s, astropy's Galactocentric axes)
    is the star's initial in-plane velocity: setting it, by dragging the arrow in the browser or from
    Python, makes the star typed phase space with that (vx, vy), keeping x, y, z and vz. A star given
    as observables or a table row is first converted with the current frame; from then on a change of
    the frame moves the Sun but no longer the star (phase space does not depend on the frame), and the
    orbit cloud is off (phase space has no uncertainties). The star as given stays in
    ``config["star"]["original"]``; :meth:`restore_star` (the "back to ..." button) brings it back.
    """

    #: The star as given, once a drag of the velocity arrow has turned it into phase space (None before);
    #: the note and the "back to ..." button under the source follow it.
    _original = traitlets.Dict(default_value=None, allow_none=True)

    #: The config's settings (besides the shared frame and potential), in the order they are applied.
    SETTINGS = {
        "star": Setting(
            lambda w: w._star_setting(),
            lambda w, star: w._apply_star_setting(star),
            check=lambda w, star: _checked_star(w, star),
        ),
        "t_forward_gyr": Setting(
            lambda w: float(w.time_fields["t_forward"].value),
            lambda w, value: w.time_fields["t_forward"].show(float(value)),
            check=_finite_gyr,
        ),
        "t_backward_gyr": Setting(
            lambda w: float(w.time_fields["t_backward"].value),
            lambda w, value: w.time_fields["t_backward"].show(float(value)),
            check=_finite_gyr,
        ),
        "n_points": control_setting("n_points", types=(int,), convert=int),
        "cloud": control_setting("cloud_toggle", types=(bool,), convert=bool),
        "n_cloud": control_setting("n_cloud", types=(int,), convert=int, check=within_control("n_cloud")),
        "seed": Setting(lambda w: w._seed, lambda w, value: setattr(w, "_seed", int(value)), types=(int,)),
    }

    def __init__(
        self,
        frame=None,
        potential=None,
        star=None,
        *,
        stars=None,
        row=0,
        t_forward=1.0,
        t_backward=0.0,
        n_points=2001,
        n_cloud=30,
        seed=1,
        threaded=True,
        **kwargs,
    ):
        super().__init__(frame, potential, threaded=threaded, **kwargs)
        with self._quiet:  # building: one computation at the end
            table_refused = self._build(star, stars, row, t_forward, t_backward, n_points, n_cloud, seed)
        self.frame_state.observe(self._inputs_changed, ["R0", "z_sun", "v_sun"])
        self.potential_state.observe(self._inputs_changed, ["preset", "parameters", "match_frame_vc", "solar_V"])
        if not table_refused:  # else the status line keeps saying why the table was not used
            self.refresh()

    def _build(self, star, stars, row, t_forward, t_backward, n_points, n_cloud, seed):
        """Make the inputs, views and layout; returns True if a table was given and refused."""
        self._stars = None
        self._seed = int(seed)
        self._drawn = None  # the extent of what the face-on view shows (to widen it after a drag)
        star = dict(star or {})
        if star and set(star) & set(_PHASE_SPACE) and not set(star) & {"ra", "dec"}:
            source, obs, phase = "phase_space", dict(DEFAULT_STAR), {**DEFAULT_PHASE_SPACE, **star}
        else:
            source, obs, phase = "observables", {**DEFAULT_STAR, **star}, dict(DEFAULT_PHASE_SPACE)
        if "distance" in star and "parallax" not in star:
            distance_input = "distance"
        else:
            distance_input = "parallax"

        self._build_inputs(obs, phase, distance_input, t_forward, t_backward, n_points, n_cloud)
        table_refused = stars is not None and not self.set_stars(stars, row=row, refresh=False)
        if stars is not None and not table_refused:
            source = "table"
        self.source.value = source
        self._source_changed(None)
        self._build_figures()
        self.readout = widgets.HTML()
        self.readout.add_class("mwkin-orbit-parameters")
        self.drag_note = widgets.HTML()
        self.drag_note.add_class("mwkin-drag-note")
        self.restore_button = widgets.Button(
            description="back to the star as given",
            icon="undo",
            tooltip="undo the dragged velocity: use the star as it was given before the first drag",
            layout=widgets.Layout(width="auto", display="none"),
        )
        self.restore_button.add_class("mwkin-restore-star")
        self.restore_button.on_click(lambda _: self.restore_star())

        left = widgets.VBox(
            [
                self.source,
                self.drag_note,
                self.restore_button,
                self.table_box,
                self.observables_box,
                self.phase_box,
                self.time_box,
                self.cloud_box,
            ],
            layout=widgets.Layout(width="30em", flex="0 0 auto"),
        )
        self.key = widgets.HTML(_KEY_HTML)
        self.key.add_class("mwkin-orbit-key")
        plots = widgets.VBox(
            [self.galaxy_view, self.meridional_figure, self.key, self.readout],
            layout=widgets.Layout(width=f"{_FACE_PX + 10}px", flex="0 0 auto"),
        )
        # Fixed widths: a column that shrank or grew with its content (the note shown at the first drag)
        # would move the face-on view under the pointer in the middle of a drag.
        self._plots_box = plots
        self.children = [
            widgets.HBox([left, plots]),
            self.status_line,
            widgets.HBox([self.code_button]),
            self.code_area,
            self.provenance_label,
        ]
        self.add_class("mwkin-orbit-explorer")
        return table_refused

    # ================================================================== inputs
    def _build_inputs(self, obs, phase, distance_input, t_forward, t_backward, n_points, n_cloud):
        changed = self._inputs_changed
        self.source = widgets.ToggleButtons(
            options=[(_SOURCES[k], k) for k in ("observables", "phase_space")],
            description="Star from",
            style={"description_width": "6em"},
        )
        self.source.add_class("mwkin-star-source")
        self.source.observe(self._source_changed, "value")

        self.row_selector = widgets.BoundedIntText(
            value=0,
            min=0,
            max=0,
            description="row",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
        )
        self.row_selector.add_class("mwkin-row")
        self.row_selector.observe(changed, "value")
        self.row_label = widgets.HTML()
        self.table_box = widgets.VBox([self.row_selector, self.row_label])

        def field(key, label, value, rng):
            css = "mwkin-" + key.replace("_", "-")
            return NumberField(label, float(value), css, lambda v: changed(None), rng, label)

        self.observable_fields = {k: field(k, lab, obs[k], rng) for k, (lab, rng) in _OBSERVABLES.items()}
        self.error_fields = {k: field(k, lab, obs.get(k, 0.0), None) for k, lab in _OBS_ERRORS.items()}
        self.distance_input = widgets.ToggleButtons(
            options=[("parallax", "parallax"), ("distance", "distance")],
            value=distance_input,
            description="distance from",
            style={"description_width": "9em"},
        )
        self.distance_input.add_class("mwkin-distance-input")
        self.distance_input.observe(self._distance_input_changed, "value")
        f, e = self.observable_fields, self.error_fields
        self.observables_box = widgets.VBox(
            [
                f["ra"],
                f["dec"],
                self.distance_input,
                f["parallax"],
                f["distance"],
                f["pmra"],
                f["pmdec"],
                f["radial_velocity"],
                widgets.HTML("<small>uncertainties (1σ, for the orbit cloud)</small>"),
                e["parallax_error"],
                e["distance_error"],
                e["pmra_error"],
                e["pmdec_error"],
                e["radial_velocity_error"],
            ]
        )
        self.phase_fields = {k: field(k, lab, phase[k], rng) for k, (lab, rng) in _PHASE_SPACE.items()}
        self.phase_box = widgets.VBox(
            [widgets.HTML("<small>Galactocentric Cartesian (astropy axes: the Sun near x = -R0)</small>")]
            + list(self.phase_fields.values())
        )

        self.time_fields = {
            "t_forward": field("t_forward", "forward [Gyr]", t_forward, None),
            "t_backward": field("t_backward", "backward [Gyr]", t_backward, None),
        }
        self.n_points = widgets.IntText(
            value=int(n_points),
            description="output points",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
            continuous_update=False,
        )
        self.n_points.add_class("mwkin-n-points")
        self.n_points.observe(changed, "value")
        self.time_box = widgets.VBox(
            [widgets.HTML("<b>integration time</b>"), *self.time_fields.values(), self.n_points]
        )

        self.cloud_toggle = widgets.Checkbox(
            value=False, description="show orbits from the uncertainties", indent=False
        )
        self.cloud_toggle.add_class("mwkin-cloud-toggle")
        self.cloud_toggle.observe(changed, "value")
        self.n_cloud = widgets.BoundedIntText(
            value=int(n_cloud),
            min=2,
            max=200,
            description="orbits drawn",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
        )
        self.n_cloud.add_class("mwkin-n-cloud")
        self.n_cloud.observe(changed, "value")
        self.cloud_box = widgets.VBox([self.cloud_toggle, self.n_cloud])
        self._distance_input_changed(None)

    def set_stars(self, stars, row=0, refresh=True):
        """Use row ``row`` of a table (anything :func:`mwkin.read_catalog` reads) as the star.

        A table that cannot be read, has no rows or has no row ``row`` is not used: the status line says
        why, a :class:`~mwkin.widgets.SampleWarning` is issued and the previous star stays. Returns True
        when the table was taken.
        """
        from ..catalog import read_catalog
        from ._base import error_text
        from ._sample import SampleWarning

        try:
            table = read_catalog(stars)
            if len(table) == 0:
                raise ValueError("the star table has no rows")
            if isinstance(row, bool) or not isinstance(row, (int, np.integer)) or not 0 <= row < len(table):
                raise ValueError(f"row = {row!r}: the star table has rows 0 to {len(table) - 1}")
        except Exception as exc:  # noqa: BLE001 - on screen, and a warning for the cell that gave it
            text = f"{error_text(exc)} (the star table was not used)"
            self.status_line.show_error(text)
            warnings.warn(f"OrbitExplorer: {text}", SampleWarning, stacklevel=2)
            return False
        self._stars = table
        n = len(self._stars)
        with self.hold_sync(), self._quiet:
            self.source.options = [(_SOURCES[k], k) for k in ("table", "observables", "phase_space")]
            self.row_selector.max = n - 1
            self.row_selector.value = int(row)
            self.source.value = "table"
        self._show_row_label()
        if refresh:
            self.refresh()
        return True

    def _show_row_label(self):
        if self._stars is None:
            self.row_label.value = ""
            return
        values = self._row_values()
        ident = f"source_id {values['source_id']}: " if "source_id" in values else ""
        shown = ", ".join(
            f"{k} = {values[k]:.4g}"
            for k in ("ra", "dec", "parallax", "distance", "pmra", "pmdec", "radial_velocity")
            if k in values and np.isfinite(values[k])
        )
        self.row_label.value = f"<small>{html.escape(ident + shown)} (of {len(self._stars)} rows)</small>"

    def _row_values(self):
        """The chosen row's numbers (standard units, NaN where masked) and its source_id, by column name."""
        i = int(self.row_selector.value)
        row = self._stars[i : i + 1]
        out = {}
        for name in self._stars.colnames:
            if name == "source_id":
                value = row[name][0]
                out[name] = value.item() if hasattr(value, "item") else value
                continue
            try:
                values = column_values(row, name)
            except ValueError:  # a text column: not an input of the orbit
                continue
            if values.size == 1:
                out[name] = float(values[0])
        return out

    def _source_changed(self, change):
        source = self.source.value
        if source != "phase_space" and not self._quiet:
            # the user chose another input: the dragged star is left behind, nothing to restore
            self._original = None
        self.table_box.layout.display = None if source == "table" else "none"
        self.observables_box.layout.display = None if source == "observables" else "none"
        self.phase_box.layout.display = None if source == "phase_space" else "none"
        self.cloud_box.layout.display = "none" if source == "phase_space" else None
        self._inputs_changed(change)

    def _distance_input_changed(self, change):
        use_parallax = self.distance_input.value == "parallax"
        for key, shown in (("parallax", use_parallax), ("distance", not use_parallax)):
            self.observable_fields[key].layout.display = None if shown else "none"
            self.error_fields[f"{key}_error"].layout.display = None if shown else "none"
        if change is not None:
            self._inputs_changed(change)

    def _inputs_changed(self, change):
        if change is not None and getattr(change, "get", None) and change.get("owner") is self.row_selector:
            self._show_row_label()
        self.refresh()

    # ================================================================== dragging the velocity
    def _velocity_dragged(self, vx, vy):
        """``galaxy_view.velocity_xy`` changed: a drag in the browser, or a value set from Python."""
        if self._quiet:
            return  # the view being told the current star's velocity, not an edit
        vx, vy = float(vx), float(vy)
        fields = self.phase_fields
        if self.source.value == "phase_space" and (vx, vy) == (float(fields["vx"].value), float(fields["vy"].value)):
            return
        if self.source.value != "phase_space":
            try:
                self._convert_to_phase_space()
            except ValueError as exc:
                self._fail(ValueError(f"the dragged velocity cannot be used: {exc}"), None)
                return
        fields["vx"].show(vx)
        fields["vy"].show(vy)
        self._refresh(keep_view=True)  # the view must not move under the pointer

    def _convert_to_phase_space(self):
        """Turn the star (observables or table row) into typed phase space with the current frame.

        The star as given is kept in ``self._original`` (``config["star"]["original"]``) together with
        the frame used for the conversion. Raises ValueError if the star cannot be converted.
        """
        frame = self.frame_state.frame
        phase, _ = _phase_space(self._star_request(), frame)
        values = dict(zip(PHASE_SPACE_COLUMNS, _phase_space_row(phase)))
        original = {**self._star_config(), "converted_with_frame": frame.to_dict()}
        with self._quiet:
            for key, value in values.items():
                self.phase_fields[key].show(value)
            self.source.value = "phase_space"
        self._original = original

    def restore_star(self):
        """Use the star as it was given before the first drag of the velocity arrow, and recompute.

        Raises
        ------
        ValueError
            If the star was not converted by a drag (there is nothing to go back to).
        """
        if self._original is None:
            raise ValueError("nothing to restore: the star was not converted by dragging its velocity arrow")
        original = self._original
        with self._quiet:
            self._apply_star_config(original)
        self._original = None
        self.refresh()

    @traitlets.observe("_original")
    def _show_original(self, change=None):
        original = self._original
        if original is None:
            self.drag_note.value = ""
            self.restore_button.layout.display = "none"
            return
        given = _given_text(original)
        R0 = original.get("converted_with_frame", {}).get("R0_kpc")
        self.drag_note.value = (
            "<small class='mwkin-note'>The in-plane velocity was set by dragging the arrow, so the star is "
            f"now Galactocentric phase space, converted from the {html.escape(given)} with the frame of "
            f"that moment (R0 = {R0} kpc). A change of the frame now moves the Sun, not the star; the "
            "orbit cloud is off (phase space has no uncertainties). The star as given is kept "
            "(config['star']['original']).</small>"
        )
        self.restore_button.description = f"back to the {given}"
        self.restore_button.layout.display = None

    def _drag_ended(self, change):
        # the last value of a drag may equal one already computed: widen the view now if needed
        if not change["new"] and self._drawn is not None and self._runner.idle:
            self._fit_view(self._drawn["bounds"], self._drawn["extent"], only_if_needed=True)

    # ================================================================== request / compute
    def _star_request(self):
        """The star as plain values, validated: (kind, values, errors); raises ValueError naming the input."""
        source = self.source.value
        if source == "phase_space":
            values = {k: float(f.value) for k, f in self.phase_fields.items()}
            for key, v in values.items():
                if not math.isfinite(v):
                    raise ValueError(f"{_PHASE_SPACE[key][0]}: got {v}, need a finite number")
            return {"kind": "phase_space", "values": values, "errors": {}}
        if source == "table":
            row = self._row_values()
            use = (
                "distance"
                if ("parallax" not in row or not np.isfinite(row.get("parallax", np.nan)))
                and np.isfinite(row.get("distance", np.nan))
                else "parallax"
            )
            where = f"row {int(self.row_selector.value)}"
        else:
            row = {k: float(f.value) for k, f in self.observable_fields.items()}
            row.update({k: float(f.value) for k, f in self.error_fields.items()})
            use = self.distance_input.value
            where = "typed star"
        drop = "distance" if use == "parallax" else "parallax"
        keys = ["ra", "dec", use, "pmra", "pmdec", "radial_velocity"]
        values = {}
        for key in keys:
            v = row.get(key, np.nan)
            if not np.isfinite(v):
                raise ValueError(
                    f"{where}: {key} is missing or not finite ({v}); the orbit needs ra, dec, "
                    "parallax or distance, pmra, pmdec and radial_velocity"
                )
            values[key] = float(v)
        if not -90.0 <= values["dec"] <= 90.0:
            raise ValueError(f"{where}: dec = {values['dec']} deg is outside [-90, 90] deg")
        if use == "parallax" and not values["parallax"] > 0:
            raise ValueError(
                f"{where}: parallax = {values['parallax']} mas is not positive, so 1/parallax gives "
                "no distance; type a distance [kpc] instead"
            )
        if use == "distance" and not values["distance"] > 0:
            raise ValueError(f"{where}: distance = {values['distance']} kpc must be positive")
        errors = {}
        for key in (f"{use}_error", "pmra_error", "pmdec_error", "radial_velocity_error"):
            v = row.get(key, np.nan)
            if np.isfinite(v):
                if v < 0:
                    raise ValueError(f"{where}: {key} = {v} is negative; uncertainties are standard deviations")
                errors[key] = float(v)
        for key in ("ra_error", "dec_error"):
            if np.isfinite(row.get(key, np.nan)):
                errors[key] = float(row[key])
        corr = {k: float(v) for k, v in row.items() if k.endswith("_corr") and drop not in k and np.isfinite(v)}
        return {"kind": "observables", "values": values, "errors": {**errors, **corr}}

    def _time_request(self):
        t_forward = float(self.time_fields["t_forward"].value)
        t_backward = float(self.time_fields["t_backward"].value)
        n_points = int(self.n_points.value)
        for key, value in (("t_forward", t_forward), ("t_backward", t_backward)):
            label = self.time_fields[key].text.description
            if not math.isfinite(value) or value < 0:
                raise ValueError(
                    f"integration time {label} = {value} must be >= 0 (use the other field for the other direction)"
                )
        if t_forward == 0 and t_backward == 0:
            raise ValueError("integration time: forward and backward are both 0 Gyr; give at least one")
        if n_points < 2:
            raise ValueError(f"output points = {n_points}: need at least 2 output times per direction")
        return t_forward, t_backward, n_points

    def _request(self):
        star = self._star_request()
        t_forward, t_backward, n_points = self._time_request()
        cloud = bool(self.cloud_toggle.value) and star["kind"] == "observables"
        dragged = self._original if self.source.value == "phase_space" else None
        return {
            "frame": self.frame_state.frame,
            "potential_config": self.potential_state.config,
            "star": star,
            "source": self.source.value,
            "row": int(self.row_selector.value) if self.source.value == "table" else None,
            "t_forward": t_forward,
            "t_backward": t_backward,
            "n_points": n_points,
            "cloud": cloud,
            "n_cloud": int(self.n_cloud.value),
            "seed": self._seed,
            "dragged_from": None if dragged is None else _given_text(dragged),
            "keep_view": False,
            "dragging": bool(self.galaxy_view.dragging),
        }

    def _compute(self, request):
        frame = request["frame"]
        pot = potential_from_config(request["potential_config"], frame)
        phase, cov = _phase_space(request["star"], frame, want_covariance=request["cloud"])
        n = request["n_points"]
        forward = backward = cloud = None
        if request["t_forward"] > 0:
            forward = _integrate(phase, pot, frame, np.linspace(0.0, request["t_forward"], n))
        if request["t_backward"] > 0:
            backward = _integrate(phase, pot, frame, np.linspace(0.0, -request["t_backward"], n))
        if request["cloud"]:
            span = request["t_forward"] if request["t_forward"] > 0 else -request["t_backward"]
            samples = _draw_stars(phase, cov, request["n_cloud"], request["seed"])
            # A coarser grid for the faint cloud: enough for a smooth line, cheap to send.
            cloud = _integrate(samples, pot, frame, np.linspace(0.0, span, min(n, CLOUD_POINTS)))
        main = forward if forward is not None else backward
        for name, orbits in (("orbit", main), ("backward orbit", backward if forward is not None else None)):
            if orbits is None:
                continue
            # Advisory flags (e.g. a time grid too coarse for exact turning points) keep the orbit;
            # anything else means there is no orbit to show.
            fatal = [flag for flag in str(orbits.flags[0]).split(";") if flag and flag not in ADVISORY_FLAGS]
            if fatal:
                raise ValueError(f"the {name} could not be computed: {'; '.join(fatal)}")
        start = _phase_space_row(phase)
        note = (
            ""
            if request["dragged_from"] is None
            else f"velocity set by dragging (star converted from the {request['dragged_from']}, which is kept)"
        )
        return OrbitView(
            orbits=main,
            backward=backward if forward is not None else None,
            cloud=cloud,
            potential=pot,
            frame=frame,
            start=start,
            note=note,
        )

    def _star_table_for_bench(self):
        """The current star as the one-row table handed to the core (benchmarks, debugging)."""
        return _star_table(self._star_request())

    # ================================================================== results
    @property
    def result(self):
        """The latest :class:`~mwkin.orbits.OrbitSet` (None before the first computation)."""
        return None if self._result is None else self._result.orbits

    @property
    def view(self):
        """The latest :class:`OrbitView` (both directions and the cloud)."""
        return self._result

    def orbital_parameters(self):
        """Orbital parameters over the whole integrated span, as a dict of floats (kpc, km^2/s^2, kpc km/s).

        ``rperi``/``rapo``/``zmax`` are the extremes over the backward and forward integrations
        together, ``eccentricity`` = (rapo - rperi) / (rapo + rperi) from them; ``energy`` and ``Lz``
        are those of the star at t = 0 (:func:`mwkin.orbits.parameters.span_parameters`).
        """
        view = self._result
        if view is None:
            return None
        table = span_parameters([view.orbits, view.backward])
        return {name: float(table[name][0].value) for name in ("rperi", "rapo", "zmax", "eccentricity", "energy", "Lz")}

    def _summary(self, view):
        p = self.orbital_parameters()
        text = f"rperi {p['rperi']:.2f} kpc, rapo {p['rapo']:.2f} kpc, zmax {p['zmax']:.2f} kpc"
        advisory = str(view.orbits.flags[0])
        if advisory:  # e.g. coarse_time_grid: the turning points may be off; more output points fix it
            text += f"; caution: {advisory.replace(';', ', ')} (see mwkin.integrate_orbits)"
        return f"{text}; {view.note}" if view.note else text

    def _provenance_for(self, view, request):
        from ..provenance import provenance_line

        return provenance_line(
            frame=view.frame, potential=view.potential, extra=f"star from {_SOURCES[request['source']]}"
        )

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

    # ================================================================== sharing
    def _result_views(self):
        return [self._plots_box]

    def _star_setting(self):
        """The ``star`` part of the config: the inputs, and the star as given once dragged."""
        star = self._star_config()
        if self._original is not None:
            star["original"] = self._original
            star["note"] = (
                "vx, vy set by dragging the velocity arrow; 'original' is the star as given, "
                "'phase_space' its conversion with the frame of that moment"
            )
        return star

    def _apply_star_setting(self, star):
        self._apply_star_config(star)
        original = star.get("original")
        self._original = dict(original) if original and self.source.value == "phase_space" else None

    def _star_config(self):
        star = {
            "source": self.source.value,
            "observables": {k: float(f.value) for k, f in self.observable_fields.items()},
            "errors": {k: float(f.value) for k, f in self.error_fields.items()},
            "distance_input": self.distance_input.value,
            "phase_space": {k: float(f.value) for k, f in self.phase_fields.items()},
            "row": int(self.row_selector.value),
        }
        if self.source.value == "table":
            star["row_values"] = {k: v for k, v in self._row_values().items() if k != "source_id"}
            star["note"] = "the table itself is not saved; pass stars= again to use it"
        return star

    def _apply_star_config(self, star):
        """Show the star of a config's ``"star"`` dict in the inputs (no recomputation)."""
        for key, value in star.get("observables", {}).items():
            self.observable_fields[key].show(float(value))
        for key, value in star.get("errors", {}).items():
            self.error_fields[key].show(float(value))
        for key, value in star.get("phase_space", {}).items():
            self.phase_fields[key].show(float(value))
        if "distance_input" in star:
            self.distance_input.value = star["distance_input"]
        source = star.get("source", self.source.value)
        if source == "table":
            if self._stars is None:
                # No table here: fall back to the row's saved values as typed observables.
                values = star.get("row_values", {})
                for key, field_ in {**self.observable_fields, **self.error_fields}.items():
                    if np.isfinite(values.get(key, np.nan)):
                        field_.show(float(values[key]))
                self.distance_input.value = "parallax" if np.isfinite(values.get("parallax", np.nan)) else "distance"
                source = "observables"
            else:
                self.row_selector.value = int(star.get("row", 0))
                self._show_row_label()
        self.source.value = source

    def _code(self, request):
        lines = snippet_preamble(
            request, imports=("import numpy as np", "from astropy.table import QTable"), potential="pot"
        )
        star = request["star"]
        cloud = request["cloud"]
        values = {**star["values"], **(star["errors"] if cloud else {})}
        columns = ", ".join(f"{k!r}: [{v!r}]" for k, v in values.items())
        lines.append(f"star = QTable({{{columns}}})  # {_UNITS_CODE[star['kind']]}")
        if request["dragged_from"] is not None:
            lines.append(
                f"# vx, vy set by dragging the velocity arrow; x, y, z, vz converted from the "
                f"{request['dragged_from']} (see config['star']['original'])"
            )
        if star["kind"] == "observables":
            choice = "mk.DistanceColumn()" if "distance" in star["values"] else "mk.InverseParallax(min_snr=0)"
            errors = ', errors="linear", return_covariance=True' if cloud else ""
            lines.append(f"star = mk.to_galactocentric(star, frame=frame, distance={choice}{errors})")
        t_f, t_b, n = request["t_forward"], request["t_backward"], request["n_points"]
        grids = ([("orbits", t_f)] if t_f > 0 else []) + (
            [("backward" if t_f > 0 else "orbits", -t_b)] if t_b > 0 else []
        )
        for name, end in grids:
            lines.append(
                f"{name} = mk.integrate_orbits(star, pot, frame=frame, t=np.linspace(0.0, {end!r}, {n}))  # Gyr"
            )
        lines.append("print(orbits.rperi, orbits.rapo, orbits.zmax, orbits.eccentricity)")
        if cloud:
            span = t_f if t_f > 0 else -t_b
            lines += [
                "# the cloud: orbits of stars drawn from the linear covariance of x..vz",
                f'cloud = mk.orbit_parameters(star, pot, frame=frame, method="integrate", '
                f"t=np.linspace(0.0, {span!r}, {min(n, CLOUD_POINTS)}), n_samples={request['n_cloud']}, "
                f"seed={request['seed']})",
                'print(cloud["rapo_p16"], cloud["rapo_p84"])',
            ]
        return "\n".join(lines) + "\n"


_UNITS_CODE = {
    "observables": "ra, dec in deg, parallax in mas (distance in kpc), pm in mas/yr, km/s",
    "phase_space": "Galactocentric x, y, z in kpc, vx, vy, vz in km/s",
}


# ====================================================================== helpers (no widget access)
def _checked_star(widget, star, where="OrbitExplorer config['star']", original_allowed=True):
    """The ``star`` part of a config, every key and value checked (nothing applied yet)."""
    star = require_mapping(star, where)
    known = {"source", "observables", "errors", "distance_input", "phase_space", "row", "row_values", "note"}
    known |= {"original"} if original_allowed else {"converted_with_frame"}
    unknown = set(star) - known
    if unknown:
        raise ConfigError(f"{where} has unknown keys {sorted(unknown)}; expected {sorted(known)}")
    fields_by_part = {
        "observables": DEFAULT_STAR,
        "errors": None,
        "phase_space": DEFAULT_PHASE_SPACE,
        "row_values": None,
    }
    for part, names in fields_by_part.items():
        values = require_mapping(star.get(part, {}), f"{where}[{part!r}]")
        for name, value in values.items():
            if part != "row_values" and names is not None and name not in names:
                raise ConfigError(f"{where}[{part!r}] has an unknown field {name!r}; expected {sorted(names)}")
            if not (isinstance(value, (int, float)) and not isinstance(value, bool)):
                raise ConfigError(f"{where}[{part!r}][{name!r}] must be a number, got {value!r:.80}")
    if "source" in star and star["source"] not in _SOURCES:
        raise ConfigError(f"{where}['source'] must be one of {sorted(_SOURCES)}, got {star['source']!r:.80}")
    if "distance_input" in star and star["distance_input"] not in ("parallax", "distance"):
        raise ConfigError(
            f"{where}['distance_input'] must be 'parallax' or 'distance', got {star['distance_input']!r:.80}"
        )
    if "row" in star and (isinstance(star["row"], bool) or not isinstance(star["row"], int) or star["row"] < 0):
        raise ConfigError(f"{where}['row'] must be a whole number >= 0, got {star['row']!r:.80}")
    if "converted_with_frame" in star:
        require_mapping(star["converted_with_frame"], f"{where}['converted_with_frame']")
    if star.get("original"):
        _checked_star(widget, star["original"], f"{where}['original']", original_allowed=False)
    return star


def _set_xy(mark, x, y):
    with mark.hold_sync():
        mark.x = np.asarray(x, dtype=float)
        mark.y = np.asarray(y, dtype=float)


def _given_text(star_config):
    """How a star config was given, for messages: 'table row 3' or 'typed observables'."""
    if star_config.get("source") == "table":
        return f"table row {int(star_config.get('row', 0))}"
    return "typed observables"


def _joined_track(tracks, key):
    """Coordinate ``key`` of the backward (reversed) and forward tracks as one line in time order."""
    back, fwd = tracks["backward"], tracks["forward"]
    if back is None:
        return fwd[key]
    if fwd is None:
        return back[key][::-1]
    return np.concatenate([back[key][::-1], fwd[key][1:]])  # both start at the star (t = 0)


def _star_table(star):
    """One-row QTable of a star request (observables with errors, or Galactocentric phase space)."""
    from astropy.table import QTable

    columns = {k: [v] for k, v in {**star["values"], **star["errors"]}.items()}
    return QTable(columns)


def _integrate(stars, pot, frame, t):
    """:func:`mwkin.integrate_orbits` with the widget's inputs (one place, so the snippet matches)."""
    from ..orbits import integrate_orbits

    return integrate_orbits(stars, pot, frame=frame, t=t)


def _parallax_caveat(star):
    """A warning when the star's distance is 1/parallax at a signal-to-noise below :data:`LOW_SNR`, else ''."""
    if "parallax" not in star["values"] or not star["errors"].get("parallax_error"):
        return ""
    snr = float(parallax_snr(_star_table(star))[0])
    if snr >= LOW_SNR:
        return ""
    return (
        f"parallax/error = {snr:.1f} < {LOW_SNR:g}: 1/parallax is a biased, noisy distance here "
        "(Bailer-Jones 2015, PASP 127, 994); the orbit cloud shows how uncertain the orbit is"
    )


def _distance_choice(star):
    """The distance choice for a one-star request: the distance typed, or 1/parallax without a cut.

    The user typed (or picked) this one star, so its parallax is inverted whatever its signal-to-noise;
    the read-out warns when that is below :data:`LOW_SNR` (:func:`_parallax_caveat`).
    """
    from ..distances import DistanceColumn, InverseParallax

    return DistanceColumn() if "distance" in star["values"] else InverseParallax(min_snr=0)


def _phase_space(star, frame, want_covariance=False):
    """Galactocentric x..vz of the star (a one-row QTable) and, if asked, its (1, 6, 6) covariance."""
    from ..kinematics import to_galactocentric

    table = _star_table(star)
    if star["kind"] == "phase_space":
        return table, None
    errors = "linear" if want_covariance else "none"
    gc = to_galactocentric(
        table, frame=frame, distance=_distance_choice(star), errors=errors, return_covariance=want_covariance
    )
    if gc["flag"][0]:
        raise ValueError(f"the star has no Galactocentric position and velocity: {gc['flag'][0]}")
    cov = column_values(gc, "cov_galactocentric").reshape(1, 6, 6) if want_covariance else None
    return gc[list(_PHASE_SPACE)], cov


def _phase_space_row(phase):
    """x, y, z (kpc), vx, vy, vz (km/s) of the first row of a phase-space table, as floats."""
    return np.array([column_values(phase, c, OUTPUT_COLUMNS[c][0])[0] for c in PHASE_SPACE_COLUMNS])


def _draw_stars(phase, cov, n, seed):
    """``n`` Galactocentric phase-space points (n, 6) drawn from the star's linear covariance.

    The covariance of x..vz is ``to_galactocentric(errors="linear", return_covariance=True)``'s and the
    draws are :func:`mwkin.orbits.parameters.draw_phase_space_samples`, the sampler of
    ``orbit_parameters(n_samples=...)``, so with the same seed the cloud holds the samples that function
    summarises.
    """
    from ..orbits import OrbitError

    if cov is None:
        raise ValueError(
            "the star has no covariance to draw from; give the parallax (or distance), "
            "pmra, pmdec and radial_velocity errors"
        )
    try:
        return draw_phase_space_samples(_phase_space_row(phase), cov, n, seed).reshape(-1, 6)
    except OrbitError as exc:
        raise ValueError(f"{exc}; give the parallax (or distance), pmra, pmdec and radial_velocity errors") from None


def _tracks(orbits, keep=slice(None)):
    """Tracks ``keep`` (an index or a selection) as float64 arrays x, y, z, R (kpc) from the OrbitSet."""
    return {name: getattr(orbits, name)[keep].to_value("kpc") for name in ("x", "y", "z", "R")}


def _track_arrays(orbits, i):
    """Track of orbit ``i`` as float64 arrays x, y, z, R (kpc) and t (Gyr)."""
    return {**_tracks(orbits, i), "t": orbits.t.to_value("Gyr")}


def _cloud_arrays(orbits):
    """All cloud tracks as (N, nt) arrays x, y, z, R (kpc); failed draws dropped."""
    return _tracks(orbits, np.all(np.isfinite(orbits.R.to_value("kpc")), axis=1))
