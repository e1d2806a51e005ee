"""VelocityPanel: a star sample's space velocities under the shared solar frame, live.

The sample (a table, a DataFrame, a path or an uploaded file) is converted with
:func:`mwkin.kinematics.to_galactocentric` whenever the frame or a setting changes, off the kernel's main
thread. Three whole-sample views: a Toomre diagram, the U-V plane and v_phi against R. A box selection in
any of them is available from Python as :attr:`VelocityPanel.selection`, a boolean mask over the rows of
the input table, and is highlighted in the other two.
"""

from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np
import traitlets

from ..columns import column_values
from ..kinematics.toomre import constant_speed_curve, toomre_ordinate
from ._base import AnalysisWidget, control_setting, one_of, snippet_preamble
from ._plots import COLOURS, SampleView, panel_from_view, warn_if_bqplot_fallback_asked
from ._sample import (
    DISTANCE_SETTING,
    SAMPLE_SETTING,
    DistanceControls,
    SampleInput,
    SampleLoader,
    SampleSource,
    inverse_parallax_caveat,
)
from .state import lsr_circular_velocity

__all__ = ["VelocityPanel"]

# Colour-by choices: label -> output column (None draws one colour).
COLOUR_COLUMNS = {
    "none": None,
    "z [kpc]": "z",
    "R [kpc]": "R",
    "distance [kpc]": "distance",
    "v_z [km/s]": "v_z",
}

#: Radii of the guide circles in the Toomre diagram (total speed relative to the LSR), km/s. Speeds of
#: roughly 70-100 and 180-200 km/s are commonly used to separate thin disc, thick disc and halo (common
#: practice, no source); we draw round numbers and make no population assignment.
GUIDE_SPEEDS_KMS = (100.0, 200.0)

_ERROR_METHODS = ("none", "linear")


class VelocityPanel(SampleInput, AnalysisWidget):
    """Space velocities of a sample under the shared solar frame, with a selection mask.

    Parameters
    ----------
    sample : astropy Table, pandas DataFrame, str or path, optional
        Anything :func:`mwkin.read_catalog` reads. A file can also be uploaded in the widget.
    frame : FrameState, optional
        Shared solar frame (a new default one if not given).
    potential : PotentialState, optional
        Only its ``solar_V`` is used, to place the local standard of rest in the Toomre diagram.
    errors : {"none", "linear"}
        Uncertainty propagation passed to ``to_galactocentric``.
    threaded : bool
        False computes synchronously (scripts, tests).

    Attributes
    ----------
    result : astropy QTable
        The latest output of :func:`mwkin.to_galactocentric` (one row per input row).
    selection : numpy.ndarray of bool
        Rows of the input table selected in the plots; stars without velocities are never selected.
    sample : astropy QTable
        The input sample, standardised by ``read_catalog`` (assign a new table, DataFrame or path to
        replace it).

    Notes
    -----
    Plot conventions (all velocities in km/s, positions in kpc):

    - **Toomre diagram**: ``sqrt(v_R**2 + v_z**2)`` against ``v_phi``, from the Galactocentric
      cylindrical velocities, ``v_phi`` positive in the sense of rotation. This is the usual
      sqrt(U_LSR^2 + W_LSR^2) against V_LSR diagram with the x axis shifted by the circular velocity:
      the local disc sits near ``v_phi = v_c`` and a non-rotating halo near 0. The guide circles are
      centred on the local standard of rest implied by the frame, ``v_phi = v_sun_y - solar_V`` (the
      potential state's solar_V, by default the V of Schoenrich et al. 2010), ``v_R = v_z = 0``, at
      100 and 200 km/s total speed relative to it. Using each star's own cylindrical axes differs
      from the heliocentric U, W by the small angle phi (a few degrees within ~1 kpc).
    - **U-V plane**: heliocentric U (toward the Galactic centre) and V (along rotation), relative to the
      Sun, so it does not depend on the frame.
    - **v_phi against R**: Galactocentric radius and azimuthal velocity.

    The whole-sample views are the canvas view ``SampleScatter`` (box and lasso selection of every
    star; ``use_canvas=False``, which chose a removed bqplot fallback, is deprecated). The guide circles are drawn in the exported figure (the
    canvas view has no curve layer); the LSR's v_phi is printed under the views.
    """

    n_selected = traitlets.Int(0, help="number of stars in the current selection")

    #: The config's settings (besides the shared frame), in the order they are applied.
    SETTINGS = {
        "sample": SAMPLE_SETTING,
        "distance": DISTANCE_SETTING,
        "errors": control_setting("errors_control", types=(str,), check=one_of(set(_ERROR_METHODS), "errors")),
        "colour_by": control_setting("colour_control", types=(str,), check=one_of(set(COLOUR_COLUMNS), "colour_by")),
    }

    def __init__(
        self,
        sample=None,
        frame=None,
        potential=None,
        *,
        errors="none",
        colour_by="none",
        threaded=True,
        use_canvas=None,
        **kwargs,
    ):
        super().__init__(frame, potential, threaded=threaded, **kwargs)
        self.add_class("mwkin-velocity-panel")
        self._stars = None
        self._source = SampleSource()
        self._selected_rows = np.zeros(0, dtype=np.int64)
        self._note = ""
        warn_if_bqplot_fallback_asked(use_canvas)
        with self._quiet:  # building: one computation once the sample is in
            self._build(errors, colour_by, None)
        if sample is not None:
            self.sample = sample
        else:
            self.status_line.show_ready("no sample yet: pass sample=... or load a file")

    def _build(self, errors, colour_by, use_canvas):
        self.loader = SampleLoader(self._uploaded, self._upload_failed)
        self.distance_controls = DistanceControls(self.refresh)
        if errors not in _ERROR_METHODS:
            raise ValueError(f"errors must be one of {_ERROR_METHODS}, got {errors!r}")
        self.errors_control = widgets.ToggleButtons(
            options=list(_ERROR_METHODS),
            value=errors,
            description="errors",
            style={"button_width": "70px"},
            tooltip="uncertainty propagation (linear: full covariance)",
        )
        self.errors_control.add_class("mwkin-errors")
        if colour_by not in COLOUR_COLUMNS:
            raise ValueError(f"colour_by must be one of {list(COLOUR_COLUMNS)}, got {colour_by!r}")
        self.colour_control = widgets.Dropdown(
            options=list(COLOUR_COLUMNS), value=colour_by, description="colour by", layout=widgets.Layout(width="16em")
        )
        self.colour_control.add_class("mwkin-colour-by")
        self.errors_control.observe(lambda _: self.refresh(), "value")
        self.colour_control.observe(self._recolour, "value")

        size = {"width": 310, "height": 320, "use_canvas": use_canvas}
        self.toomre = SampleView("Toomre diagram", **size)
        self.uv_plane = SampleView("U-V plane (relative to the Sun)", equal_aspect=True, **size)
        self.rotation = SampleView("v_phi against R", **size)
        self._views = (self.toomre, self.uv_plane, self.rotation)
        for view in self._views:
            view.on_select(lambda indices, _view=view: self._selected_in(_view, indices))

        self.counts_label = widgets.HTML()
        self.counts_label.add_class("mwkin-dropped")
        self.lsr_label = widgets.HTML()
        self.caveat_label = widgets.HTML()
        self.caveat_label.add_class("mwkin-caveat")
        self.selection_label = widgets.HTML()
        self.selection_label.add_class("mwkin-selection")

        settings = widgets.VBox(
            [self.loader, self.distance_controls, widgets.HBox([self.errors_control, self.colour_control])]
        )
        self._views_box = widgets.HBox(list(self._views), layout=widgets.Layout(flex_flow="row wrap"))
        self.children = [
            settings,
            self._views_box,
            self.counts_label,
            self.lsr_label,
            self.caveat_label,
            self.selection_label,
            self.status_line,
            self.provenance_label,
            widgets.HBox([self.code_button]),
            self.code_area,
        ]

        self.frame_state.observe(lambda _: self.refresh(), names=["R0", "z_sun", "v_sun"])
        self.potential_state.observe(lambda _: self._show_lsr(), names=["solar_V"])

    # ------------------------------------------------------------------ sample
    def _set_sample(self, stars, source):
        self._take_sample(stars, source)
        self._note = ""
        self._selected_rows = np.zeros(0, dtype=np.int64)
        self.n_selected = 0
        self.selection_label.value = ""
        self.refresh()

    def _uploaded(self, stars, source):
        self._set_sample(stars, source)

    def _result_views(self):
        return [self._views_box, self.counts_label, self.lsr_label, self.caveat_label]

    # ------------------------------------------------------------------ selection
    @property
    def selection(self):
        """Boolean mask over the input rows: True for the selected stars (all False without a sample).

        Assign a boolean mask over the input rows, or row numbers, to select from Python.
        """
        mask = np.zeros(self._n_rows(), dtype=bool)
        mask[self._selected_rows] = True
        return mask & self._has_velocity()

    @selection.setter
    def selection(self, mask_or_rows):
        n = self._n_rows()
        value = np.asarray(mask_or_rows)
        if value.dtype == bool:
            if value.shape != (n,):
                raise ValueError(f"a selection mask must have one entry per input row ({n}), got {value.shape}")
            rows = np.flatnonzero(value)
        else:
            rows = np.unique(value.astype(np.int64).ravel())
            if len(rows) and (rows[0] < 0 or rows[-1] >= n):
                raise ValueError(f"selected rows must lie in [0, {n}), got {rows[0]}..{rows[-1]}")
        self._set_selected_rows(rows, origin=None)

    def _n_rows(self):
        return 0 if self._stars is None else len(self._stars)

    def _has_velocity(self):
        n = self._n_rows()
        if self._result is None or len(self._result) != n:
            return np.zeros(n, dtype=bool)
        return np.asarray(self._result["has_velocity"], dtype=bool)

    def _selected_in(self, view, indices):
        if self._quiet:  # our own update of the other views
            return
        self._set_selected_rows(np.asarray(indices, dtype=np.int64), origin=view)

    def _set_selected_rows(self, rows, origin):
        rows = np.asarray(rows, dtype=np.int64)
        self._selected_rows = rows[self._has_velocity()[rows]] if len(rows) else rows
        with self._quiet:
            for view in self._views:
                if view is not origin and view.n_points == self._n_rows():
                    view.selected_indices = self._selected_rows
        self.n_selected = len(self._selected_rows)
        self.selection_label.value = (
            f"<small>{self.n_selected} stars selected (available as panel.selection)</small>" if self.n_selected else ""
        )

    # ------------------------------------------------------------------ AnalysisWidget hooks
    def _request(self):
        if self._stars is None:
            raise ValueError(
                "no sample: pass sample=... (a table, DataFrame or path) or load a file"
                + (f"; {self._note}" if self._note else "")
            )
        controls = self.distance_controls
        return {
            "stars": self._stars,
            "source": self._source,
            "frame": self.frame_state.frame,
            "distance": controls.choice(),
            "distance_code": controls.code(),
            "errors": self.errors_control.value,
            "caveat": inverse_parallax_caveat(
                self._stars, controls.method.value, controls.min_snr.value, controls.zero_point.value
            ),
        }

    def _compute(self, request):
        from ..kinematics import to_galactocentric

        return to_galactocentric(
            request["stars"], request["frame"], errors=request["errors"], distance=request["distance"]
        )

    def _show(self, result, request):
        has_v = np.asarray(result["has_velocity"], dtype=bool)
        # One entry per input row (NaN where there is no velocity: never drawn, never selectable), so a
        # view's indices are input row numbers.
        arrays = {}
        for name in ("v_R", "v_phi", "v_z", "U", "V", "R"):
            values = column_values(result, name).copy()
            values[~has_v] = np.nan
            arrays[name] = values
        arrays["v_perp"] = toomre_ordinate(arrays["v_R"], arrays["v_z"])
        self._arrays = arrays
        self._frame = request["frame"]
        self._draw(result, keep_selection=True)
        self._set_selected_rows(self._selected_rows, origin=None)
        self.counts_label.value = self._counts_html(result)
        self._show_lsr()
        caveat = request["caveat"]
        self.caveat_label.value = (
            f'<div style="color:#8a4b00;font-size:12px">{html.escape(caveat)}</div>' if caveat else ""
        )

    def _draw(self, result, keep_selection):
        a = self._arrays
        colour = self._colour_values(result)
        c_label, c_unit = _split_label(self.colour_control.value) if colour is not None else ("", "")
        common = {"c_label": c_label, "c_unit": c_unit, "keep_selection": keep_selection}
        with self._quiet:
            self.toomre.set_data(
                a["v_phi"],
                a["v_perp"],
                colour,
                x_label="v_phi",
                x_unit="km/s",
                y_label="sqrt(v_R² + v_z²)",
                y_unit="km/s",
                **common,
            )
            self.uv_plane.set_data(
                a["U"],
                a["V"],
                colour,
                x_label="U, toward the centre",
                x_unit="km/s",
                y_label="V, along rotation",
                y_unit="km/s",
                **common,
            )
            self.rotation.set_data(
                a["R"], a["v_phi"], colour, x_label="R", x_unit="kpc", y_label="v_phi", y_unit="km/s", **common
            )

    def _colour_values(self, result):
        name = COLOUR_COLUMNS[self.colour_control.value]
        if name is None or name not in result.colnames:
            return None
        return column_values(result, name)

    def _recolour(self, change):
        if self._result is None:
            return
        self._draw(self._result, keep_selection=True)

    def _lsr_vphi(self):
        frame = getattr(self, "_frame", None) or self.frame_state.frame
        return lsr_circular_velocity(frame, self.potential_state.solar_V)

    def _show_lsr(self):
        self.lsr_label.value = (
            f"<small>Toomre diagram: the local standard of rest is at v_phi = "
            f"{self._lsr_vphi():.1f} km/s (the frame's v_sun_y minus solar_V = "
            f"{self.potential_state.solar_V:g} km/s); disc stars lie near it, a "
            f"non-rotating halo near v_phi = 0.</small>"
        )

    def _counts_html(self, result):
        n_in = len(result)
        n_ok = int(np.count_nonzero(np.asarray(result["has_velocity"], dtype=bool)))
        dropped = {k: v for k, v in _dropped_counts(result).items() if v}
        text = f"{n_in} stars in, {n_ok} with full space velocities"
        if dropped:
            text += "; without: " + ", ".join(f"{reason}: {count}" for reason, count in dropped.items())
        return f"<small>{html.escape(text)}</small>"

    def _summary(self, result):
        n_ok = int(np.count_nonzero(np.asarray(result["has_velocity"], dtype=bool)))
        text = f"{n_ok} of {len(result)} stars with velocities"
        return f"{text}; {self._note}" if self._note else text

    def _provenance_for(self, result, request):
        from ..provenance import provenance_line

        return provenance_line(
            frame=request["frame"],
            distance=request["distance"],
            extra=f"errors: {request['errors']}; sample: {request['source'].describe()}",
        )

    def _code(self, request):
        return "\n".join(
            snippet_preamble(request, sample=True)
            + [
                f"out = mk.to_galactocentric(stars, frame, errors={request['errors']!r},",
                f"                           distance={request['distance_code']})",
            ]
        )

    def _figure_panels(self):
        """The three views as they are shown (points, colours, selection, region), for the static export.

        The Toomre diagram's guide circles are drawn here only: the canvas view has no curve layer (the
        LSR's v_phi is printed under the views instead).
        """
        if self._result is None:
            return []
        centre = self._lsr_vphi()
        guides = []
        for s in GUIDE_SPEEDS_KMS:
            x, y = constant_speed_curve(centre, s)
            guides.append(
                {
                    "kind": "line",
                    "x": x,
                    "y": y,
                    "color": COLOURS["guide"],
                    "label": f"{s:g} km/s from the LSR",
                    "width": 0.8,
                }
            )
        return [panel_from_view(view, last=guides if view is self.toomre else ()) for view in self._views]


def _split_label(text):
    """'z [kpc]' -> ('z', 'kpc')."""
    if text.endswith("]") and " [" in text:
        label, unit = text[:-1].split(" [", 1)
        return label, unit
    return text, ""


def _dropped_counts(result):
    """{reason: number of stars} from the conversion's meta."""
    meta = result.meta
    for key in ("dropped", "dropped_counts", "n_dropped"):
        if isinstance(meta.get(key), dict):
            return {str(k).replace("_", " "): int(v) for k, v in meta[key].items()}
    return {}
