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

import math
from dataclasses import dataclass, field

import ipywidgets as widgets
import numpy as np
import traitlets

from ...orbits import ADVISORY_FLAGS
from ...orbits.parameters import draw_phase_space_samples, span_parameters
from .._base import AnalysisWidget, Setting, control_setting, snippet_preamble, within_control
from ..state import potential_from_config
from .drag import _VelocityDrag
from .drawing import _FACE_PX, _KEY_HTML, _Drawing
from .star import (
    _PHASE_SPACE,
    _SOURCES,
    DEFAULT_PHASE_SPACE,
    DEFAULT_STAR,
    _checked_star,
    _given_text,
    _phase_space,
    _phase_space_row,
    _StarInput,
)

#: Output points of each cloud orbit (at most; fewer if the main orbit has fewer).
CLOUD_POINTS = 501


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


# The class is split by job into mixins (plain classes of methods, no traits, no __init__):
# _StarInput (star.py: inputs, star and time requests, the config's star), _VelocityDrag (drag.py: the
# velocity arrow's drag and its undo) and _Drawing (drawing.py: the views and the read-out). They come
# before AnalysisWidget so that their methods override its hooks (_show, _figure_panels); their method
# names do not overlap, so the MRO is OrbitExplorer, _StarInput, _VelocityDrag, _Drawing, AnalysisWidget.
class OrbitExplorer(_StarInput, _VelocityDrag, _Drawing, AnalysisWidget):
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

    # ================================================================== traits
    @traitlets.observe("_original")
    def _original_changed(self, change):
        self._show_original(change)  # the note and the button: _VelocityDrag

    # ================================================================== request / compute
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
        from ...provenance import provenance_line

        return provenance_line(
            frame=view.frame, potential=view.potential, extra=f"star from {_SOURCES[request['source']]}"
        )

    # ================================================================== sharing
    def _result_views(self):
        return [self._plots_box]

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


def _integrate(stars, pot, frame, t):
    """:func:`mwkin.integrate_orbits` with the widget's inputs (one place, so the snippet matches)."""
    from ...orbits import integrate_orbits

    return integrate_orbits(stars, pot, frame=frame, t=t)


def _draw_stars(phase, cov, n, seed):
    """``n`` Galactocentric phase-space points (n, 6) drawn from the star's linear covariance.

    The covariance of x..vz is ``to_galactocentric(errors="linear", return_covariance=True)``'s and the
    draws are :func:`mwkin.orbits.parameters.draw_phase_space_samples`, the sampler of
    ``orbit_parameters(n_samples=...)``, so with the same seed the cloud holds the samples that function
    summarises.
    """
    from ...orbits import OrbitError

    if cov is None:
        raise ValueError(
            "the star has no covariance to draw from; give the parallax (or distance), "
            "pmra, pmdec and radial_velocity errors"
        )
    try:
        return draw_phase_space_samples(_phase_space_row(phase), cov, n, seed).reshape(-1, 6)
    except OrbitError as exc:
        raise ValueError(f"{exc}; give the parallax (or distance), pmra, pmdec and radial_velocity errors") from None
