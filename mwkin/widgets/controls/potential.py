"""PotentialControls: edit the shared :class:`~mwkin.widgets.state.PotentialState`, with its rotation curve.

The control writes to its state object and redraws itself when the state changes, whoever changed it;
the rotation curve is recomputed live (:class:`~mwkin.widgets._live.LiveRunner`) by the core's
:meth:`~mwkin.potentials.Potential.rotation_curve`.
"""

from __future__ import annotations

import html
import json
import math
import warnings

import ipywidgets as widgets
import numpy as np
from astropy.table import QTable

from ...columns import column_values
from ...frames import SCHOENRICH2010_SOLAR_MOTION
from .._base import Quiet, StatusLine, error_text
from .._live import LiveRunner
from ..state import PotentialState, lsr_circular_velocity, potential_from_config
from .fields import _LABEL_STYLE, NumberField

_THREE_COMPONENT = ""
_COMPONENT_COLOURS = {"total": "#222222", "bulge": "#c8553d", "disc": "#2f7ab9", "halo": "#5b9e47"}
_EXTRA_COLOURS = ["#8c5fb0", "#b8860b", "#7a7a7a", "#1a9e9e"]
_MASS_UNIT = 1e10  # Msun per slider unit

#: Rotation curves that took less than this (s) last time are recomputed on the main thread.
INLINE_LIMIT_S = 0.05


#: Slider label (with unit), range in slider units, and the factor from slider units to the model's
#: (Msun for masses, shown in 1e10 Msun; kpc for lengths). Ranges are our choice: wide around MWPotential2014.
_SLIDERS = {
    "mass": ("mass [1e10 Msun]", None, _MASS_UNIT),
    "alpha": ("slope alpha [no unit]", (0.0, 2.95, 0.01), 1.0),
    "cutoff": ("cut-off radius [kpc]", (0.1, 10.0, 0.01), 1.0),
    "scale": ("scale radius [kpc]", (0.1, 60.0, 0.1), 1.0),
    "a": ("scale length a [kpc]", (0.0, 10.0, 0.01), 1.0),
    "b": ("scale height b [kpc]", (0.01, 2.0, 0.005), 1.0),
}


def _slider_spec(component, name, value):
    """Label, slider range and the factor from slider units to the model's units for one parameter."""
    label, rng, factor = _SLIDERS.get(name, (f"{name} [model units]", None, 1.0))
    if component == "halo" and name == "mass":
        label = "mass scale M_s [1e10 Msun]"
    if rng is None:
        shown = value / factor
        rng = (0.0, max(5.0 * shown, 1.0), 0.01)
    return f"{component} {label}", rng, factor


class PotentialControls(widgets.VBox):
    """Edit a :class:`PotentialState`: preset or three-component sliders, frame matching, rotation curve.

    Parameters
    ----------
    potential_state : PotentialState, optional
    frame_state : FrameState, optional
        When given, the frame's implied circular velocity at the Sun (``v_sun[1] - solar_V``) is marked
        on the rotation curve and the potential can be rescaled to it ("match the frame").
    threaded : bool, optional
        Compute the rotation curve off the kernel's main thread (default). False computes in place.
    R_max : float, optional
        Outer radius of the rotation curve, kpc.

    Attributes
    ----------
    result : astropy.table.QTable or None
        The rotation curve drawn: :meth:`mwkin.Potential.rotation_curve` of the model (columns ``R``,
        ``vc`` and ``vc_<component>``), whose ``meta`` also holds ``oort`` (the
        :class:`~mwkin.potentials.OortConstants` at the Sun's in-plane radius, or at 8 kpc without a
        frame: ``meta["oort"].vc`` is the model's circular velocity there), ``potential_model`` (the
        :class:`~mwkin.Potential`, matched to the frame if asked) and, with a frame, ``frame``,
        ``solar_V_kms`` and ``vc_frame_kms`` (the circular velocity the frame implies, v_sun,y - V).
        None before the first curve and while the current state gives an error. The keys of the
        dictionary it used to be (``result["vc_pot"]``...) still work, with a DeprecationWarning.

    Notes
    -----
    The rotation curve is recomputed on every change through a :class:`LiveRunner` (newest request
    wins); building McMillan17 the first time takes seconds, during which the status line says so.
    """

    def __init__(self, potential_state=None, frame_state=None, *, threaded=True, R_max=20.0, n_radii=160):
        from ...potentials import Potential

        self.state = potential_state if potential_state is not None else PotentialState()
        self.frame_state = frame_state
        self.result = None
        self._quiet = Quiet()
        self._radii = np.linspace(0.05, float(R_max), int(n_radii))
        self._built = set()
        self._presets = Potential.presets()

        options = [(name, name) for name in self._presets] + [("adjustable three-component", _THREE_COMPONENT)]
        self.preset_dropdown = widgets.Dropdown(
            options=options,
            value=self.state.preset,
            description="Model",
            style=_LABEL_STYLE,
            layout=widgets.Layout(width="31em"),
        )
        self.preset_dropdown.add_class("mwkin-potential-preset")
        self.preset_dropdown.observe(self._preset_chosen, "value")
        self.citation = widgets.HTML()
        self.citation.add_class("mwkin-potential-citation")

        self.sliders = {}
        self.parameter_box = widgets.VBox()
        self.parameter_box.add_class("mwkin-potential-parameters")
        self._build_sliders()

        self.match_checkbox = widgets.Checkbox(
            value=self.state.match_frame_vc,
            indent=False,
            description="match the frame's circular velocity at the Sun",
            disabled=frame_state is None,
        )
        self.match_checkbox.add_class("mwkin-match-vc")
        self.match_checkbox.observe(self._match_toggled, "value")
        self.solar_V_field = NumberField(
            "V_sun - V_LSR [km/s]",
            self.state.solar_V,
            "mwkin-solar-V",
            self._solar_V_set,
            tooltip="the Sun's motion along rotation "
            "relative to the LSR (Schoenrich et al. 2010: "
            f"{SCHOENRICH2010_SOLAR_MOTION[1]:g} km/s)",
        )

        self._build_figure()
        self.readout = widgets.HTML()
        self.readout.add_class("mwkin-vc-readout")
        self.status_line = StatusLine()
        self._curve_cache = None
        self._seconds = {}
        self._runner = LiveRunner(self._compute, self._deliver, self._fail, self._busy, threaded=threaded)

        super().__init__(
            [
                self.preset_dropdown,
                self.citation,
                self.parameter_box,
                widgets.HBox([self.match_checkbox]),
                self.solar_V_field,
                self.figure,
                self.readout,
                self.status_line,
            ]
        )
        self.add_class("mwkin-potential-controls")
        self.state.observe(self._state_changed, ["preset", "parameters", "match_frame_vc", "solar_V"])
        if frame_state is not None:
            frame_state.observe(lambda change: self.refresh(), ["R0", "z_sun", "v_sun"])
        self._show_preset()
        self.refresh()

    # ------------------------------------------------------------------ public
    @property
    def status(self):
        """'ready ...', 'computing...' or the error."""
        return self.status_line.text

    def refresh(self):
        """Recompute the rotation curve from the current state (newest request wins).

        A model whose last rotation curve took less than :data:`INLINE_LIMIT_S` is recomputed in place
        when nothing else is running; anything slower, or never computed yet (McMillan17's first build
        takes seconds), goes to the worker thread with a busy status. Either way it goes through the
        live runner, which draws only the newest request.
        """
        frame = self.frame_state.frame if self.frame_state is not None else None
        config = self.state.config
        inline = self._seconds.get(_model_key(config), math.inf) < INLINE_LIMIT_S
        if not (inline and self._runner.idle):
            self._busy(True)  # at once, on the main thread: the worker may start later
        self._runner.submit({"potential": config, "frame": frame}, inline=inline)

    def wait(self, timeout=120.0):
        """Block until the rotation curve is up to date (scripts and tests); returns self."""
        if not self._runner.wait(timeout):
            raise TimeoutError(f"PotentialControls still computing after {timeout} s")
        return self

    def _build_sliders(self):
        """One slider per numeric parameter of the three-component model (rebuilt if the keys change)."""
        self.sliders = {}
        boxes = []
        for component, params in self.state.parameters.items():
            rows = [
                widgets.HTML(
                    f"<b>{html.escape(component)}</b>"
                    + (f" <small>({html.escape(str(params['model']))})</small>" if "model" in params else "")
                )
            ]
            for name, value in params.items():
                if isinstance(value, bool) or not isinstance(value, (int, float)):
                    continue
                label, rng, factor = _slider_spec(component, name, value)
                field = NumberField(
                    label,
                    value / factor,
                    f"mwkin-{component}-{name}",
                    self._parameter_setter(component, name, factor),
                    rng,
                    f"{component} {name}",
                )
                self.sliders[(component, name)] = (field, factor)
                rows.append(field)
            boxes.append(widgets.VBox(rows))
        self.parameter_box.children = boxes
        self._slider_keys = self._numeric_keys()

    def _numeric_keys(self):
        return {
            (c, n)
            for c, p in self.state.parameters.items()
            for n, v in p.items()
            if isinstance(v, (int, float)) and not isinstance(v, bool)
        }

    # ------------------------------------------------------------------ user -> state
    def _preset_chosen(self, change):
        if not self._quiet:
            self.state.preset = change["new"]

    def _parameter_setter(self, component, name, factor):
        def set_value(value):
            from ...potentials import Potential

            field = self.sliders[(component, name)][0]
            params = {c: dict(p) for c, p in self.state.parameters.items()}
            params[component][name] = value * factor
            try:
                Potential.three_component(**params)  # the core validates (cheap: no integration)
            except Exception as exc:  # noqa: BLE001 - shown on screen, typed value kept
                field.mark_invalid(True)
                self.status_line.show_error(f"{error_text(exc)} (not applied)")
                return
            field.mark_invalid(False)
            with self.state.hold_trait_notifications():
                self.state.parameters = params
                self.state.preset = _THREE_COMPONENT

        return set_value

    def _match_toggled(self, change):
        if not self._quiet:
            self.state.match_frame_vc = change["new"]

    def _solar_V_set(self, value):
        self.state.solar_V = value

    # ------------------------------------------------------------------ state -> display
    def _state_changed(self, change):
        with self._quiet:
            self.match_checkbox.value = self.state.match_frame_vc
        if change["name"] == "solar_V":
            self.solar_V_field.show(self.state.solar_V)
        if change["name"] == "parameters" and self._numeric_keys() != self._slider_keys:
            self._build_sliders()
        elif change["name"] == "parameters":
            for (component, name), (field, factor) in self.sliders.items():
                value = self.state.parameters.get(component, {}).get(name)
                if value is not None:
                    field.show(value / factor)
        if change["name"] == "preset":
            self._show_preset()
        self.refresh()

    def _show_preset(self):
        with self._quiet:
            self.preset_dropdown.value = self.state.preset
        name = self.state.preset
        if name == _THREE_COMPONENT:
            self.citation.value = (
                "<small>bulge + disc + halo with the parameters below (masses in 1e10 Msun, lengths in kpc)</small>"
            )
            self.parameter_box.layout.display = None
        else:
            entry = self._presets[name]
            citation = getattr(entry, "citation", entry if isinstance(entry, str) else "")
            self.citation.value = f"<small>{html.escape(str(citation))}</small>"
            self.parameter_box.layout.display = "none"

    def _build_figure(self):
        import bqplot as bq

        self._x_scale = bq.LinearScale(min=0.0, max=float(self._radii[-1]))
        self._y_scale = bq.LinearScale(min=0.0)
        self.curve_mark = bq.Lines(
            x=self._radii,
            y=np.zeros((1, self._radii.size)),
            scales={"x": self._x_scale, "y": self._y_scale},
            labels=["total"],
            display_legend=True,
            colors=[_COMPONENT_COLOURS["total"]],
        )
        self.frame_mark = bq.Scatter(
            x=np.array([np.nan]),
            y=np.array([np.nan]),
            marker="cross",
            default_size=90,
            colors=["#a11d1d"],
            display_legend=True,
            labels=["frame: v_sun,y - V at R0"],
            scales={"x": self._x_scale, "y": self._y_scale},
        )
        axes = [
            bq.Axis(scale=self._x_scale, label="R [kpc]"),
            bq.Axis(scale=self._y_scale, side="left", label="v_c [km/s]"),
        ]
        self.figure = bq.Figure(
            marks=[self.curve_mark, self.frame_mark],
            axes=axes,
            title="Rotation curve",
            legend_location="bottom-right",
            layout=widgets.Layout(width="460px", height="320px"),
            fig_margin={"top": 40, "bottom": 45, "left": 60, "right": 20},
        )
        self.figure.add_class("mwkin-rotation-curve")

    # ------------------------------------------------------------------ computation
    def _busy(self, busy):
        if busy:
            name = self.state.preset
            if name and name not in self._built:
                self.status_line.show_busy(f"building {name} (the first time can take several seconds)...")
            else:
                self.status_line.show_busy("computing...")

    def _compute(self, request):
        frame = request["frame"]
        pot = potential_from_config(request["potential"], frame)
        # The curve depends on the model only (and on the frame only through a rescaling), so a frame
        # change that leaves the model as it is reuses it: McMillan17's curve takes seconds to evaluate.
        key = json.dumps(pot.to_dict(), sort_keys=True)
        cached = self._curve_cache
        if cached is not None and cached[0] == key:
            curve = cached[1]
        else:
            curve = pot.rotation_curve(self._radii)
            self._curve_cache = (key, curve)
        result = _RotationCurve(curve, copy=False)
        result.meta = {**curve.meta, "potential_model": pot}
        if frame is not None:
            solar_V = request["potential"]["solar_V"]
            result.meta.update(
                {"frame": frame, "solar_V_kms": solar_V, "vc_frame_kms": lsr_circular_velocity(frame, solar_V)}
            )
        result.meta["oort"] = pot.oort_constants(frame.inplane_radius if frame is not None else _REFERENCE_R_KPC)
        return result

    def _deliver(self, result, request, seconds):
        self._seconds[_model_key(request["potential"])] = seconds
        if request["potential"]["preset"]:
            self._built.add(request["potential"]["preset"])
        pot = result.meta["potential_model"]
        names = _curve_labels(pot, result)
        colours = [_COMPONENT_COLOURS.get(n, _EXTRA_COLOURS[i % len(_EXTRA_COLOURS)]) for i, n in enumerate(names)]
        y = np.vstack([column_values(result, column, "km/s") for column in result.colnames[1:]])
        with self.curve_mark.hold_sync():
            self.curve_mark.y = y
            self.curve_mark.labels = names
            self.curve_mark.colors = colours
            self.curve_mark.line_style = "solid"
            self.curve_mark.stroke_width = 2.0
        top = float(np.nanmax(y)) if np.isfinite(y).any() else 300.0
        oort = result.meta["oort"]
        R_ref, vc_pot = float(oort.R.to_value("kpc")), float(oort.vc.to_value("km/s"))
        if "vc_frame_kms" in result.meta:
            vc_frame = result.meta["vc_frame_kms"]
            top = max(top, vc_frame)
            with self.frame_mark.hold_sync():
                self.frame_mark.x = np.array([R_ref])
                self.frame_mark.y = np.array([vc_frame])
            self.readout.value = (
                f"v_c(R0 = {R_ref:.3f} kpc) = <b>{vc_pot:.1f} km/s</b> in this potential; "
                f"the frame implies {vc_frame:.1f} km/s (v_sun,y - V); "
                f"difference {vc_pot - vc_frame:+.1f} km/s"
            )
        else:
            self.readout.value = f"v_c({R_ref:g} kpc) = <b>{vc_pot:.1f} km/s</b> in this potential"
        self._y_scale.max = 1.1 * top
        self.figure.layout.visibility = "visible"
        self.result = result
        self.status_line.show_ready(f"ready ({seconds * 1000:.0f} ms)")

    def _fail(self, exc, request):
        # The current state has no curve: the one drawn was for another model, so it is hidden and
        # .result no longer offers it.
        self.result = None
        self.figure.layout.visibility = "hidden"
        self.readout.value = ""
        self.status_line.show_error(error_text(exc))


#: Radius at which the rotation curve is read out when no frame is given, kpc (a round number near the Sun).
_REFERENCE_R_KPC = 8.0

#: What ``PotentialControls.result`` held as a dictionary: key -> how to read it from the table.
_LEGACY_RESULT_KEYS = {
    "potential": lambda t: t.meta["potential_model"],
    "frame": lambda t: t.meta.get("frame"),
    "curves": lambda t: dict(
        zip(_curve_labels(t.meta["potential_model"], t), (column_values(t, c, "km/s") for c in t.colnames[1:]))
    ),
    "R_sun": lambda t: float(t.meta["oort"].R.to_value("kpc")) if "frame" in t.meta else None,
    "vc_pot": lambda t: float(t.meta["oort"].vc.to_value("km/s")) if "frame" in t.meta else None,
    "vc_frame": lambda t: t.meta.get("vc_frame_kms"),
    "vc_8": lambda t: float(t.meta["oort"].vc.to_value("km/s")) if "frame" not in t.meta else None,
}


class _RotationCurve(QTable):
    """The QTable of :meth:`Potential.rotation_curve` that also answers the old dictionary keys.

    ``result["vc_pot"]`` and the other keys of the dictionary :attr:`PotentialControls.result` used to
    be still work, with a DeprecationWarning naming what to use instead; columns are columns as ever.
    """

    def __getitem__(self, item):
        if isinstance(item, str) and item not in self.colnames and item in _LEGACY_RESULT_KEYS:
            warnings.warn(
                f"PotentialControls.result is now the rotation-curve QTable; result[{item!r}] is "
                "deprecated: use its columns (R, vc, vc_<component>) and meta (oort: the "
                "OortConstants at the Sun, vc_frame_kms, frame, potential_model)",
                DeprecationWarning,
                stacklevel=2,
            )
            value = _LEGACY_RESULT_KEYS[item](self)
            if value is None:
                raise KeyError(item)
            return value
        return super().__getitem__(item)


def _model_key(config):
    """Models that cost about the same to evaluate share a timing entry."""
    return config["preset"] or "three-component"


def _curve_labels(pot, table):
    """Legend labels of a rotation-curve table's vc columns: "total", then the components' names."""
    # Potential.rotation_curve: columns R, vc, then one vc_<component> per component, in order.
    labels = ["total"]
    for label, column in zip(pot.component_names, table.colnames[2:]):
        labels.append(label if label not in labels else column)
    return labels
