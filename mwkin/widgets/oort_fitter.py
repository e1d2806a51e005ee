"""OortFitter: the Oort constants and the solar motion fitted live to a sample, with diagnostics.

Every change of a setting, of the shared frame or of the shared potential reruns
:func:`mwkin.oort.fit_oort` off the kernel's main thread (newest request wins). The fits in distance
bins, which cost several full fits, run on a second worker after the main fit is shown, and are cached:
moving the distance-range slider, or changing the frame or potential, does not redo them.
"""

from __future__ import annotations

import html
import math
import warnings

import ipywidgets as widgets
import numpy as np

from ..columns import column_values
from ..oort.model import predicted_observables
from ..oort.sample import sky_motions
from ._base import AnalysisWidget, Setting, control_setting, error_text, one_of, snippet_preamble, within_control
from ._live import LiveRunner
from ._plots import (
    COLOURS,
    SampleView,
    band_mark,
    binned_quantiles,
    error_bar_mark,
    legend_html,
    line_mark,
    panel_from_figure,
    panel_from_view,
    points_mark,
    set_error_bars,
    small_figure,
    warn_if_bqplot_fallback_asked,
)
from ._sample import (
    DISTANCE_SETTING,
    SAMPLE_SETTING,
    DistanceControls,
    SampleInput,
    SampleLoader,
    SampleSource,
    inverse_parallax_caveat,
)

__all__ = ["OortFitter", "parameter_table_html", "parse_bins", "DEFAULT_BINS_KPC", "L_BIN_DEG"]

#: Default edges of the distance bins, kpc.
DEFAULT_BINS_KPC = (0.0, 0.1, 0.2, 0.3, 0.5, 0.75, 1.0, 1.5)

#: Width of the longitude bins of the binned medians, deg.
L_BIN_DEG = 15.0

#: sqrt(pi / 2): the standard error of a median of n Gaussian values is this times sigma / sqrt(n)
#: (e.g. Kendall & Stuart, The Advanced Theory of Statistics, Vol. 1, Sect. 10.10 [from memory]).
_MEDIAN_ERROR_FACTOR = math.sqrt(math.pi / 2.0)

_USES = {"proper motions": "proper_motions", "radial velocities": "radial_velocities", "both": "both"}
_RESIDUALS = {
    "mu_l*": ("z_mu_l_star", "normalised residual of mu_l*"),
    "mu_b": ("z_mu_b", "normalised residual of mu_b"),
    "v_r": ("z_v_r", "normalised residual of v_r"),
}
_AGAINST = ("l", "distance")

BINS_NOTE = (
    "The first-order (linear) velocity field holds only near the Sun: where A and B drift from bin "
    "to bin beyond their errors, the model has stopped holding (its mu_l* error is ~0.1 mas/yr at "
    "0.2 kpc and ~0.5 mas/yr at 1 kpc for a disc model)."
)

#: Largest bootstrap the live widget runs (the core has no limit; past this a live fit takes seconds).
MAX_LIVE_BOOTSTRAP = 5000


def _check_bootstrap(widget, n_boot):
    if not 0 <= n_boot <= MAX_LIVE_BOOTSTRAP:
        raise ValueError(
            f"bootstrap N = {n_boot}: give 0 (no bootstrap) to {MAX_LIVE_BOOTSTRAP} resamples "
            "in the widget (use mwkin.fit_oort directly for more)"
        )
    return n_boot


def _check_max_pm_error(widget, max_pm_error):
    if not (math.isfinite(max_pm_error) and max_pm_error >= 0):
        raise ValueError(f"max pm error = {max_pm_error} mas/yr: give 0 (no cut) or a positive error in mas/yr")
    return float(max_pm_error)


def _check_distance_range(widget, value):
    if (
        len(value) != 2
        or any(isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) for v in value)
        or not 0 <= value[0] < value[1]
    ):
        raise ValueError("must be [min, max] in kpc with 0 <= min < max")
    return float(value[0]), float(value[1])


def _set_distance_range(widget, value):
    lo, hi = (float(v) for v in value)
    widget.distance_range.max = max(widget.distance_range.max, hi)
    widget.distance_range.value = (lo, hi)


def _check_bins(widget, text):
    parse_bins(text)
    return text


def parse_bins(text):
    """'0, 0.2, 0.5' -> [(0, 0.2), (0.2, 0.5)] (kpc); raises ValueError with the reason."""
    try:
        edges = [float(part) for part in str(text).replace(";", ",").split(",") if part.strip()]
    except ValueError:
        raise ValueError(f"distance bins: give increasing edges in kpc separated by commas, got {text!r}") from None
    if len(edges) < 2 or any(b <= a for a, b in zip(edges, edges[1:])) or edges[0] < 0:
        raise ValueError(f"distance bins: need at least two increasing edges >= 0 kpc, got {text!r}")
    return list(zip(edges[:-1], edges[1:]))


class _SampleGeometry:
    """What the widget keeps once per sample: Galactic l, b, mu_l*, mu_b and the largest pm error.

    l, b, mu_l*, mu_b come from :func:`mwkin.oort.sample.sky_motions`, the rotation the fit itself uses,
    so data and model agree exactly.
    """

    def __init__(self, stars):
        self.l_deg, self.b_deg, self.mu_l_star, self.mu_b = sky_motions(stars)
        self.v_r = (
            column_values(stars, "radial_velocity", "km/s")
            if "radial_velocity" in stars.colnames
            else np.full(len(stars), np.nan)
        )
        if "pmra_error" in stars.colnames and "pmdec_error" in stars.colnames:
            self.pm_error = np.fmax(
                column_values(stars, "pmra_error", "mas/yr"), column_values(stars, "pmdec_error", "mas/yr")
            )
        else:
            self.pm_error = None
        self.has_rv = bool(np.isfinite(self.v_r).any())
        self._stars = stars
        self._distances = {}

    def distances(self, choice):
        """Distances (kpc, NaN where unusable) under a distance choice, resolved once per choice."""
        if choice not in self._distances:
            self._distances[choice] = np.asarray(choice.resolve(self._stars).distance_kpc, dtype=float)
        return self._distances[choice]

    def quality(self, max_pm_error, max_abs_b):
        """Boolean mask of the quality cuts (None when no cut is active).

        Raises
        ------
        ValueError
            If a proper-motion error cut is asked for and the sample has no pmra_error / pmdec_error.
        """
        mask = None
        if max_abs_b < 90.0:
            mask = np.abs(self.b_deg) <= max_abs_b
        if max_pm_error > 0:
            if self.pm_error is None:
                raise ValueError(
                    f"max pm error = {max_pm_error:g} mas/yr: the sample has no pmra_error and "
                    "pmdec_error columns to cut on (set it to 0)"
                )
            with np.errstate(invalid="ignore"):
                cut = self.pm_error <= max_pm_error
            mask = cut if mask is None else mask & cut
        return mask


def first_order_model(l_deg, fit, distance_kpc, b_deg=0.0):
    """Deprecated: mu_l* (mas/yr) and v_r (km/s) of the first-order model with a fit's parameters.

    Use :func:`mwkin.oort.predicted_observables` (``mu_l, mu_b, v_r = predicted_observables(l_deg,
    b_deg, distance_kpc, fit)``), the model's one home; this calls it.

    Returns
    -------
    mu_l_star, v_r : numpy.ndarray
    """
    warnings.warn(
        "mwkin.widgets.oort_fitter.first_order_model is deprecated: use "
        "mwkin.oort.predicted_observables(l_deg, b_deg, distance_kpc, fit), which also gives mu_b",
        DeprecationWarning,
        stacklevel=2,
    )
    mu_l, _, v_r = predicted_observables(l_deg, b_deg, distance_kpc, fit)
    return mu_l, v_r


def _model_curves(fit, distance_kpc):
    """The first-order model with a fit's parameters along l (0-360 deg) at b = 0 and one distance."""
    l_curve = np.linspace(0.0, 360.0, 361)
    mu_curve, _, vr_curve = predicted_observables(l_curve, 0.0, distance_kpc, fit)
    return l_curve, mu_curve, vr_curve


class OortFitter(SampleInput, AnalysisWidget):
    """Fit the Oort constants A, B, C, K and the solar motion to a sample, live.

    Parameters
    ----------
    sample : astropy Table, pandas DataFrame, str or path, optional
        Anything :func:`mwkin.read_catalog` reads; a file can also be uploaded in the widget.
    frame : FrameState, optional
        Shared solar frame: gives R0 for V0 = R0 (A - B) and for the potential's values.
    potential : PotentialState, optional
        Shared potential: the A, B (Omega, kappa) it implies at the frame's in-plane R0 are shown beside
        the fitted ones.
    distance_range : (float, float)
        kpc; stars with min <= d < max are fitted.
    use : {"proper_motions", "radial_velocities", "both"}
    bins : sequence of float
        Edges of the distance bins, kpc.
    threaded : bool
        False computes synchronously (scripts, tests).

    Attributes
    ----------
    result : mwkin.oort.OortFit
        The latest fit; ``result.bins`` holds the distance-bin table once the bin fits are done
        (``wait()`` waits for them too).

    Notes
    -----
    - **mu_l* against l**: every fitted star (canvas view), and beside it the median of mu_l* in
      15-deg longitude bins (points with the standard error of the median, band: 16th-84th percentile
      spread), the first-order model evaluated with the fitted parameters at b = 0 and the median
      distance of the fitted stars (a curve: stars at other distances scatter about it, because the
      solar-motion term scales as 1/d), and the binned median of the model at each star's own l, b, d,
      which is what the data medians should follow.
    - **v_r against l**: the same for radial velocities, shown when the fit uses them.
    - **Residuals**: data minus model divided by each datum's standard deviation (measurement error,
      distance term and fitted intrinsic dispersion), against l or distance.
    - **Distance bins**: A and B fitted separately in each bin (same settings), with the potential's
      values as lines; where they drift the first-order model stops holding.
    - Quality cuts: the parallax signal-to-noise cut belongs to the distance choice; the proper-motion
      error cut takes max(pmra_error, pmdec_error); 0 switches it off, and max ``|b|`` = 90 switches the
      latitude cut off.
    """

    def __init__(
        self,
        sample=None,
        frame=None,
        potential=None,
        *,
        distance_range=(0.0, 0.5),
        use="both",
        bins=DEFAULT_BINS_KPC,
        threaded=True,
        use_canvas=None,
        **kwargs,
    ):
        super().__init__(frame, potential, threaded=threaded, **kwargs)
        self.add_class("mwkin-oort-fitter")
        self._stars = None
        self._source = SampleSource()
        self._geometry = None
        self._note = ""
        self._bins_cache = {}
        self._bins_error = ""
        self._bins_runner = LiveRunner(self._compute_bins, self._deliver_bins, self._fail_bins, threaded=threaded)

        warn_if_bqplot_fallback_asked(use_canvas)
        with self._quiet:  # building: one computation once the sample is in
            self._build(distance_range, use, bins, None)
        if sample is not None:
            self.sample = sample
        else:
            self.status_line.show_ready("no sample yet: pass sample=... or load a file")

    #: The config's settings (besides the shared frame and potential), in the order they are applied.
    SETTINGS = {
        "sample": SAMPLE_SETTING,
        "distance": DISTANCE_SETTING,
        # The front end snaps the range to the slider's step and echoes values like 0.49999999999999994;
        # rounding far below the step keeps the settings (and the config) at what the user chose.
        "distance_range": Setting(
            lambda w: [round(float(v), 9) for v in w.distance_range.value],
            _set_distance_range,
            types=(list, tuple),
            check=_check_distance_range,
        ),
        "max_pm_error": control_setting("max_pm_error", types=(int, float), convert=float, check=_check_max_pm_error),
        "max_abs_b": control_setting(
            "max_abs_b", types=(int, float), convert=float, check=within_control("max_abs_b", " deg")
        ),
        "use": control_setting("use", types=(str,), check=one_of(set(_USES.values()), "use")),
        "robust": control_setting("robust", types=(bool,), convert=bool),
        "bootstrap": control_setting("bootstrap", types=(int,), convert=int, check=_check_bootstrap),
        "seed": Setting(lambda w: w.seed, lambda w, value: setattr(w, "seed", value), types=(int, type(None))),
        "bins": control_setting("bins_text", types=(str,), check=_check_bins),
        "residual": control_setting("residual", types=(str,), check=one_of(set(_RESIDUALS), "residual")),
        "residual_against": control_setting(
            "residual_against", types=(str,), check=one_of(set(_AGAINST), "residual_against")
        ),
    }

    def _build(self, distance_range, use, bins, use_canvas):
        self.loader = SampleLoader(self._set_sample, self._upload_failed)
        self.distance_controls = DistanceControls(self.refresh)
        self.distance_range = widgets.FloatRangeSlider(
            value=tuple(distance_range),
            min=0.0,
            max=max(3.0, float(distance_range[1])),
            step=0.01,
            description="distance [kpc]",
            readout_format=".2f",
            continuous_update=True,
            style={"description_width": "9em"},
            layout=widgets.Layout(width="30em"),
        )
        self.distance_range.add_class("mwkin-distance-range")
        # Plain number boxes, checked in _settings(): a bounded box would silently clamp a value typed
        # out of range (bootstrap 10**9 became 5000) instead of saying it is out of range.
        self.max_pm_error = widgets.FloatText(
            value=0.0,
            step=0.05,
            description="max pm error [mas/yr]",
            tooltip="largest max(pmra_error, pmdec_error); 0: no cut",
            style={"description_width": "12.5em"},
            layout=widgets.Layout(width="19em"),
            continuous_update=False,
        )
        self.max_abs_b = widgets.FloatSlider(
            value=90.0,
            min=0.0,
            max=90.0,
            step=1.0,
            description="max |b| [deg]",
            continuous_update=False,
            style={"description_width": "9em"},
            tooltip="Galactic latitude cut; 90: no cut",
        )
        self.use = widgets.ToggleButtons(
            options=list(_USES.items()), value=use, description="fit", style={"button_width": "135px"}
        )
        self.use.add_class("mwkin-use")
        self.robust = widgets.Checkbox(value=False, description="reject outliers (4-sigma clipping)", indent=False)
        self.bootstrap = widgets.IntText(
            value=0, step=50, description="bootstrap N", continuous_update=False, layout=widgets.Layout(width="14em")
        )
        self.seed = 1
        self.bins_text = widgets.Text(
            value=", ".join(f"{e:g}" for e in bins),
            description="bin edges [kpc]",
            continuous_update=False,
            style={"description_width": "9em"},
            layout=widgets.Layout(width="30em"),
        )
        self.residual = widgets.Dropdown(
            options=list(_RESIDUALS), value="mu_l*", description="residual of", layout=widgets.Layout(width="14em")
        )
        self.residual_against = widgets.ToggleButtons(
            options=list(_AGAINST), value="l", description="against", style={"button_width": "80px"}
        )
        for control in (
            self.distance_range,
            self.max_pm_error,
            self.max_abs_b,
            self.use,
            self.robust,
            self.bootstrap,
            self.bins_text,
        ):
            control.observe(lambda _: self.refresh(), "value")
        for control in (self.residual, self.residual_against):
            control.observe(lambda _: self._redraw_residuals(), "value")

        self._build_plots(use_canvas)
        self.table_html = widgets.HTML()
        self.table_html.add_class("mwkin-oort-table")
        self.counts_label = widgets.HTML()
        self.counts_label.add_class("mwkin-dropped")
        self.caveat_label = widgets.HTML()
        self.caveat_label.add_class("mwkin-caveat")
        self.notes_html = widgets.HTML()
        self.bins_status = widgets.HTML()
        self.bins_note = widgets.HTML(f'<div style="max-width:380px;font-size:11px">{html.escape(BINS_NOTE)}</div>')
        self.bins_note.add_class("mwkin-bins-note")

        settings = widgets.VBox(
            [
                self.loader,
                self.distance_controls,
                self.distance_range,
                widgets.HBox([self.max_pm_error, self.max_abs_b]),
                self.use,
                widgets.HBox([self.robust, self.bootstrap]),
                self.bins_text,
            ]
        )
        self._mu_box = widgets.HBox([self.mu_view, widgets.VBox([self.mu_fig, self.mu_legend])])
        self._residual_box = widgets.HBox(
            [
                widgets.VBox([widgets.HBox([self.residual, self.residual_against]), self.residual_view]),
                widgets.VBox([self.bins_fig, self.bins_legend, self.bins_status, self.bins_note]),
            ]
        )
        self.children = [
            widgets.HBox([settings, self.table_html]),
            self._mu_box,
            self.vr_box,
            self._residual_box,
            self.counts_label,
            self.caveat_label,
            self.notes_html,
            self.status_line,
            self.provenance_label,
            widgets.HBox([self.code_button]),
            self.code_area,
        ]
        self.frame_state.observe(lambda _: self.refresh(), names=["R0", "z_sun", "v_sun"])
        self.potential_state.observe(
            lambda _: self.refresh(), names=["preset", "parameters", "match_frame_vc", "solar_V"]
        )

    # ------------------------------------------------------------------ plots
    def _build_plots(self, use_canvas):
        self.mu_view = SampleView("mu_l* against l: fitted stars", use_canvas=use_canvas, selection_mode="pan")
        self.mu_fig, xs, ys = small_figure(
            "mu_l*: binned medians and the model", "l [deg]", "mu_l* [mas/yr]", width="420px", x_range=(0, 360)
        )
        self.mu_band = band_mark(xs, ys, COLOURS["band"])
        self.mu_bars = error_bar_mark(xs, ys, COLOURS["median"])
        self.mu_medians = points_mark(xs, ys, COLOURS["median"], size=25, label="data median")
        self.mu_model_stars = line_mark(xs, ys, COLOURS["potential"], label="model at the stars (median)", dashed=True)
        self.mu_model = line_mark(xs, ys, COLOURS["model"], label="model, b = 0, median d")
        self.mu_fig.marks = [self.mu_band, self.mu_bars, self.mu_model_stars, self.mu_model, self.mu_medians]
        self.mu_legend = widgets.HTML()

        self.vr_view = SampleView("v_r against l: fitted stars", use_canvas=use_canvas, selection_mode="pan")
        self.vr_fig, xs, ys = small_figure(
            "v_r: binned medians and the model", "l [deg]", "v_r [km/s]", width="420px", x_range=(0, 360)
        )
        self.vr_band = band_mark(xs, ys, COLOURS["band"])
        self.vr_bars = error_bar_mark(xs, ys, COLOURS["median"])
        self.vr_medians = points_mark(xs, ys, COLOURS["median"], size=25, label="data median")
        self.vr_model_stars = line_mark(xs, ys, COLOURS["potential"], label="model at the stars (median)", dashed=True)
        self.vr_model = line_mark(xs, ys, COLOURS["model"], label="model, b = 0, median d")
        self.vr_fig.marks = [self.vr_band, self.vr_bars, self.vr_model_stars, self.vr_model, self.vr_medians]
        self.vr_legend = widgets.HTML()
        self.vr_box = widgets.HBox([self.vr_view, widgets.VBox([self.vr_fig, self.vr_legend])])
        self.vr_box.layout.display = "none"

        self.residual_view = SampleView("normalised residuals", use_canvas=use_canvas, selection_mode="pan")

        self.bins_fig, xs, ys = small_figure("A and B in distance bins", "distance [kpc]", "[km/s/kpc]", width="380px")
        self.bins_A = points_mark(xs, ys, COLOURS["A"], size=40, label="A")
        self.bins_B = points_mark(xs, ys, COLOURS["B"], size=40, label="B", marker="square")
        self.bins_A_bars = error_bar_mark(xs, ys, COLOURS["A"])
        self.bins_B_bars = error_bar_mark(xs, ys, COLOURS["B"])
        self.pot_A = line_mark(xs, ys, COLOURS["A"], label="A of the potential", dashed=True, width=1.5)
        self.pot_B = line_mark(xs, ys, COLOURS["B"], label="B of the potential", dashed=True, width=1.5)
        self.bins_fig.marks = [self.bins_A_bars, self.bins_B_bars, self.pot_A, self.pot_B, self.bins_A, self.bins_B]
        self.bins_legend = widgets.HTML(
            legend_html(
                [
                    (COLOURS["A"], "point", "A"),
                    (COLOURS["B"], "square", "B"),
                    (COLOURS["A"], "dashed", "A of the potential"),
                    (COLOURS["B"], "dashed", "B of the potential"),
                ],
                width="380px",
            )
        )

    # ------------------------------------------------------------------ sample
    def _set_sample(self, stars, source):
        self._take_sample(stars, source)
        self._bins_cache = {}
        self._note = ""
        self.refresh()

    def _take_sample(self, stars, source):
        super()._take_sample(stars, source)
        self._geometry = _SampleGeometry(stars) if stars is not None else None

    def _result_views(self):
        return [
            self.table_html,
            self._mu_box,
            self.vr_box,
            self._residual_box,
            self.counts_label,
            self.caveat_label,
            self.notes_html,
        ]

    def _runners(self):
        return [self._runner, self._bins_runner]

    # ------------------------------------------------------------------ AnalysisWidget hooks
    def wait(self, timeout=60.0, include_bins=True):
        """Block until the fit (and, with ``include_bins``, the distance-bin fits) is done; returns self."""
        super().wait(timeout)
        if include_bins and not self._bins_runner.wait(timeout):
            raise TimeoutError(f"distance-bin fits still running after {timeout} s")
        return self

    def _settings(self):
        """The fit's settings as typed, with the range checks a config gets too (ValueError naming them)."""
        settings = {
            key: setting.get(self) for key, setting in self.SETTINGS.items() if key not in ("sample", "distance")
        }
        _check_bootstrap(self, settings["bootstrap"])
        _check_max_pm_error(self, settings["max_pm_error"])
        return settings

    def _request(self):
        if self._stars is None:
            raise ValueError(
                "no sample: pass sample=... (a table, DataFrame or path) or load a file"
                + (f"; {self._note}" if self._note else "")
            )
        settings = self._settings()
        frame = self.frame_state.frame
        controls = self.distance_controls
        return {
            "stars": self._stars,
            "source": self._source,
            "geometry": self._geometry,
            "frame": frame,
            "potential": self.potential_state.potential_for(frame),
            "potential_config": self.potential_state.config,
            "distance": controls.choice(),
            "distance_code": controls.code(),
            "settings": settings,
            "bins": parse_bins(settings["bins"]),
            "quality": self._geometry.quality(settings["max_pm_error"], settings["max_abs_b"]),
            "caveat": inverse_parallax_caveat(
                self._stars, controls.method.value, controls.min_snr.value, controls.zero_point.value
            ),
        }

    def _compute(self, request):
        from ..oort import fit_oort

        s = request["settings"]
        return fit_oort(
            request["stars"],
            request["frame"],
            use=s["use"],
            distance=request["distance"],
            distance_range=tuple(s["distance_range"]),
            quality=request["quality"],
            robust=s["robust"],
            bootstrap=s["bootstrap"],
            seed=s["seed"],
            potential=request["potential"],
        )

    def _bins_key(self, request):
        s = request["settings"]
        return (
            request["distance"],
            s["use"],
            s["max_pm_error"],
            s["max_abs_b"],
            s["robust"],
            tuple(request["bins"]),
            request["source"].fingerprint,
        )

    def _show(self, fit, request):
        self._fit_arrays = self._arrays_for(fit, request)
        self._draw_fit(fit, request)
        self._redraw_residuals()
        key = self._bins_key(request)
        if key in self._bins_cache:
            fit.bins = self._bins_cache[key]
            self._draw_bins(fit)
        else:
            self.bins_status.value = "<small>fitting the distance bins...</small>"
            self._bins_runner.submit({"key": key, "request": request})
        self.table_html.value = parameter_table_html(fit)
        self.counts_label.value = self._counts_html(fit)
        caveat = request["caveat"]
        self.caveat_label.value = (
            f'<div style="color:#8a4b00;font-size:12px">{html.escape(caveat)}</div>' if caveat else ""
        )
        self.notes_html.value = (
            '<details><summary style="font-size:12px">notes on this fit</summary><ul '
            'style="font-size:11px">' + "".join(f"<li>{html.escape(n)}</li>" for n in fit.notes) + "</ul></details>"
        )

    def _arrays_for(self, fit, request):
        """Per-row arrays (NaN where a row was not fitted) for the plots and the export."""
        geometry = request["geometry"]
        residuals = fit.residuals
        used = np.asarray(residuals["used"], dtype=bool)
        d = geometry.distances(request["distance"])
        a = {"used": used, "l": geometry.l_deg, "distance": np.where(used, d, np.nan)}
        a["mu_l_star"] = np.where(used, geometry.mu_l_star, np.nan)
        a["mu_model"] = a["mu_l_star"] - column_values(residuals, "delta_mu_l_star", "mas/yr")
        delta_v_r = column_values(residuals, "delta_v_r", "km/s")
        vr_used = used & np.isfinite(delta_v_r)
        a["v_r"] = np.where(vr_used, geometry.v_r, np.nan)
        a["vr_model"] = a["v_r"] - delta_v_r
        for name, (column, _) in _RESIDUALS.items():
            a[f"z_{name}"] = np.where(used, column_values(residuals, column), np.nan)
        a["median_distance"] = float(np.nanmedian(a["distance"])) if used.any() else float("nan")
        return a

    def _draw_fit(self, fit, request):
        a = self._fit_arrays
        l_curve, mu_curve, vr_curve = _model_curves(fit, a["median_distance"])
        self._draw_sky_panel("mu", "mu_l_star", "mu_model", ("mu_l*", "mas/yr"), l_curve, mu_curve)
        has_vr = bool(np.isfinite(a["v_r"]).any())
        self.vr_box.layout.display = None if has_vr else "none"
        if has_vr:
            self._draw_sky_panel("vr", "v_r", "vr_model", ("v_r", "km/s"), l_curve, vr_curve)

    def _draw_sky_panel(self, prefix, column, model_column, y_axis, l_curve, model_curve):
        """One observable against l: every star, binned medians, the model at the stars and its curve.

        ``prefix`` names the panel's marks (``mu_view``, ``mu_band``, ... or ``vr_view``, ...).
        """
        a = self._fit_arrays
        marks = {
            name: getattr(self, f"{prefix}_{name}")
            for name in ("view", "band", "bars", "medians", "model_stars", "model", "legend")
        }
        y_label, y_unit = y_axis
        marks["view"].set_data(
            a["l"], a[column], a["distance"],
            x_label="l", x_unit="deg", y_label=y_label, y_unit=y_unit, c_label="distance", c_unit="kpc",
        )  # fmt: skip
        edges = np.arange(0.0, 360.0 + L_BIN_DEG / 2, L_BIN_DEG)
        self._draw_binned(
            edges,
            a["l"],
            a[column],
            a[model_column],
            (marks["band"], marks["bars"], marks["medians"], marks["model_stars"]),
        )
        with marks["model"].hold_sync():
            marks["model"].x, marks["model"].y = l_curve, model_curve
        marks["model"].labels = [f"model, b = 0, d = {a['median_distance']:.2f} kpc"]
        marks["legend"].value = _binned_legend(a["median_distance"])

    @staticmethod
    def _draw_binned(edges, x, y, model, marks):
        band, bars, medians, model_line = marks
        centres, q, counts = binned_quantiles(x, y, edges)
        _, q_model, _ = binned_quantiles(x, model, edges, quantiles=(0.5,))
        with np.errstate(invalid="ignore", divide="ignore"):
            error = _MEDIAN_ERROR_FACTOR * 0.5 * (q[2] - q[0]) / np.sqrt(counts)
        ok = counts > 0
        with band.hold_sync():
            band.x = centres[ok]
            band.y = np.stack([q[0][ok], q[2][ok]])
        set_error_bars(bars, centres, q[1] - error, q[1] + error)
        with medians.hold_sync():
            medians.x, medians.y = centres[ok], q[1][ok]
        with model_line.hold_sync():
            model_line.x, model_line.y = centres[ok], q_model[0][ok]

    def _redraw_residuals(self):
        a = getattr(self, "_fit_arrays", None)
        if a is None:
            return
        name = self.residual.value
        against = self.residual_against.value
        x = a["l"] if against == "l" else a["distance"]
        self.residual_view.set_data(
            x,
            a[f"z_{name}"],
            x_label=against,
            x_unit="deg" if against == "l" else "kpc",
            y_label=f"(data - model) / sigma of {name}",
            y_unit="",
        )
        self.residual_view.set_title(f"normalised residuals of {name} against {against}")

    # ------------------------------------------------------------------ distance bins (second worker)
    def _compute_bins(self, job):
        from ..oort import fit_in_distance_bins

        request = job["request"]
        s = request["settings"]
        stars = request["stars"]
        # Only rows that can fall in a bin: the same fits, on a smaller table.
        lo, hi = request["bins"][0][0], request["bins"][-1][1]
        d = request["geometry"].distances(request["distance"])
        with np.errstate(invalid="ignore"):
            keep = (d >= lo) & (d < hi)
        if request["quality"] is not None:
            keep &= request["quality"]
        rows = np.flatnonzero(keep)
        subset = stars[rows]
        subset.meta = stars.meta
        return fit_in_distance_bins(
            subset, request["bins"], request["frame"], use=s["use"], distance=request["distance"], robust=s["robust"]
        )

    def _deliver_bins(self, table, job, seconds):
        self._bins_cache[job["key"]] = table
        self._bins_error = ""
        fit = self._result
        if fit is not None and self._last_request is not None and self._bins_key(self._last_request) == job["key"]:
            fit.bins = table
            self._draw_bins(fit)

    def _fail_bins(self, exc, job):
        self._bins_error = error_text(exc)
        self.bins_status.value = f'<small style="color:#a11d1d">distance bins: {html.escape(self._bins_error)}</small>'

    def _draw_bins(self, fit):
        bins = fit.bins
        d = np.asarray(bins["d_median"], dtype=float)
        centre = 0.5 * (np.asarray(bins["d_min"], dtype=float) + np.asarray(bins["d_max"], dtype=float))
        x = np.where(np.isfinite(d), d, centre)
        for name, mark, bars in (("A", self.bins_A, self.bins_A_bars), ("B", self.bins_B, self.bins_B_bars)):
            value = np.asarray(bins[name], dtype=float)
            error = np.asarray(bins[f"{name}_error"], dtype=float)
            ok = np.isfinite(value)
            with mark.hold_sync():
                mark.x, mark.y = x[ok], value[ok]
            set_error_bars(bars, x, value - error, value + error)
        span = np.array([float(bins["d_min"][0]), float(bins["d_max"][-1])])
        pot = fit.potential_oort or {}
        for name, mark in (("A", self.pot_A), ("B", self.pot_B)):
            with mark.hold_sync():
                if name in pot:
                    mark.x, mark.y = span, np.full(2, pot[name])
                else:
                    mark.x, mark.y = np.zeros(0), np.zeros(0)
        n_empty = int(np.count_nonzero(~np.isfinite(np.asarray(bins["A"], dtype=float))))
        self.bins_status.value = (
            f"<small>{len(bins)} bins" + (f", {n_empty} without a constrained A" if n_empty else "") + "</small>"
        )

    # ------------------------------------------------------------------ text
    def _counts_html(self, fit):
        dropped = ", ".join(f"{k.replace('_', ' ')}: {v}" for k, v in fit.n_dropped.items()) or "none"
        text = f"{fit.n_used} stars fitted ({fit.n_data} data); left out: {dropped}"
        if fit.distance_reasons:
            text += (
                " (no distance: "
                + ", ".join(f"{k.replace('_', ' ')}: {v}" for k, v in fit.distance_reasons.items())
                + ")"
            )
        return f"<small>{html.escape(text)}</small>"

    def _summary(self, fit):
        text = f"A = {_pm(fit.A, fit.errors['A'])}, B = {_pm(fit.B, fit.errors['B'])} km/s/kpc from {fit.n_used} stars"
        return f"{text}; {self._note}" if self._note else text

    def _provenance_for(self, fit, request):
        from ..provenance import provenance_line

        s = request["settings"]
        lo, hi = s["distance_range"]
        extra = (
            f"fit: {s['use'].replace('_', ' ')}, {lo:g}-{hi:g} kpc, robust={s['robust']}, "
            f"bootstrap={s['bootstrap']}; sample: {request['source'].describe()}"
        )
        return provenance_line(
            frame=request["frame"], potential=request["potential"], distance=request["distance"], extra=extra
        )

    # ------------------------------------------------------------------ sharing
    def _code(self, request):
        s = request["settings"]
        lines = snippet_preamble(request, imports=("import numpy as np",), potential="potential", sample=True)
        quality = "None"
        cuts = []
        if s["max_abs_b"] < 90.0:
            lines += [
                "from mwkin.oort.sample import sky_motions",
                "l, b, mu_l, mu_b = sky_motions(stars)  # deg, deg, mas/yr, mas/yr (the fit's own rotation)",
            ]
            cuts.append(f"(np.abs(b) <= {s['max_abs_b']!r})")
        if s["max_pm_error"] > 0:
            cuts.append(f"(np.fmax(stars['pmra_error'].value, stars['pmdec_error'].value) <= {s['max_pm_error']!r})")
        if cuts:
            lines.append("quality = " + " & ".join(cuts))
            quality = "quality"
        lo, hi = s["distance_range"]
        lines += [
            f"fit = mk.fit_oort(stars, frame, use={s['use']!r}, distance={request['distance_code']},",
            f"                  distance_range=({lo!r}, {hi!r}), quality={quality}, robust={s['robust']!r},",
            f"                  bootstrap={s['bootstrap']!r}, seed={s['seed']!r}, bins={request['bins']!r},",
            "                  potential=potential)",
            "print(fit.summary())",
        ]
        return "\n".join(lines)

    def _figure_panels(self):
        """The plots as they are shown, for the static export (one description: the live views)."""
        fit = self._result
        if fit is None or getattr(self, "_fit_arrays", None) is None:
            return []
        panels = [panel_from_view(self.mu_view), panel_from_figure(self.mu_fig)]
        if self.vr_box.layout.display != "none":
            panels += [panel_from_view(self.vr_view), panel_from_figure(self.vr_fig)]
        panels.append(panel_from_view(self.residual_view))
        if fit.bins is not None:
            panels.append(
                panel_from_figure(
                    self.bins_fig, notes=["where A and B drift with distance, the first-order model stops holding"]
                )
            )
        return panels


def _binned_legend(median_distance):
    return legend_html(
        [
            (COLOURS["median"], "point", f"median in {L_BIN_DEG:g}-deg bins, with its error"),
            (COLOURS["band"], "band", "16-84 % spread"),
            (COLOURS["model"], "line", f"model at b = 0 and the median distance {median_distance:.2f} kpc"),
            (COLOURS["potential"], "dashed", "median of the model at each star's own l, b, d"),
        ]
    )


def _pm(value, error):
    if not np.isfinite(value):
        return "not constrained"
    return f"{value:.2f} ± {error:.2f}" if np.isfinite(error) else f"{value:.2f}"


_ROW_UNITS = {
    "A": "km/s/kpc",
    "B": "km/s/kpc",
    "C": "km/s/kpc",
    "K": "km/s/kpc",
    "U": "km/s",
    "V": "km/s",
    "W": "km/s",
    "Omega0": "km/s/kpc",
    "dV/dR": "km/s/kpc",
    "V0": "km/s",
    "kappa": "km/s/kpc",
    "sigma_U": "km/s",
    "sigma_V": "km/s",
    "sigma_W": "km/s",
}
_POTENTIAL_KEYS = {"A": "A", "B": "B", "Omega0": "Omega", "kappa": "kappa"}


def parameter_table_html(fit):
    """The fitted parameters as an HTML table: value ± error, unit, bootstrap interval, the potential's value.

    Parameters the data do not constrain are shown as "not constrained", not as numbers.
    """
    table = fit.table()
    pot = fit.potential_oort or {}
    boot = "ci68_low" in table.colnames
    head = ["parameter", "fit", "unit"] + (["bootstrap 68%"] if boot else []) + (["potential"] if pot else [])
    rows = []
    for row in table:
        name = str(row["parameter"])
        value, error, constrained = float(row["value"]), float(row["error"]), bool(row["constrained"])
        if constrained and np.isfinite(value):
            cell = f"{value:.2f} ± {error:.2f}" if np.isfinite(error) else f"{value:.2f}"
        else:
            cell = '<i style="color:#777">not constrained</i>'
        cells = [html.escape(name), cell, _ROW_UNITS.get(name, html.escape(str(row["unit"])))]
        if boot:
            lo, hi = float(row["ci68_low"]), float(row["ci68_high"])
            cells.append(f"[{lo:.2f}, {hi:.2f}]" if constrained and np.isfinite(lo) and np.isfinite(hi) else "")
        if pot:
            key = _POTENTIAL_KEYS.get(name)
            cells.append(f"{pot[key]:.2f}" if key in pot else "")
        rows.append("<tr>" + "".join(f'<td style="padding:1px 8px">{c}</td>' for c in cells) + "</tr>")
    caption = ""
    if pot:
        caption = (
            f"<caption style='font-size:11px;caption-side:bottom'>potential: {html.escape(fit.potential_description)}"
            f" at R = {pot['R_kpc']:.3f} kpc</caption>"
        )
    header = "<tr>" + "".join(f'<th style="padding:1px 8px;text-align:left">{h}</th>' for h in head) + "</tr>"
    return f'<table class="mwkin-oort-parameters" style="font-size:12px">{caption}{header}{"".join(rows)}</table>'
