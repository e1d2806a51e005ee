"""Controls that edit the shared states: :class:`FrameControls` and :class:`PotentialControls`.

A control writes to its state object and redraws itself when the state changes, whoever changed it.
It keeps no second copy of the state: the solar velocity shown as (U, V, W) + vc is converted to and
from the state's Cartesian ``v_sun`` with the core's :meth:`SolarFrame.from_lsr` / :meth:`lsr_motion`.
A value the state refuses stays in its text box, marked, with the reason in the control's status line.
"""

from __future__ import annotations

import html
import json
import math
import warnings

import ipywidgets as widgets
import numpy as np
from astropy.table import QTable

from ..columns import column_values
from ..frames import SCHOENRICH2010_SOLAR_MOTION, SGR_A_STAR_PROPER_MOTION, SolarFrame, reflex_comparison
from ._base import Quiet, StatusLine, error_text
from ._live import LiveRunner
from .state import DEFAULT_FRAME_PRESET, FrameState, PotentialState, lsr_circular_velocity, potential_from_config

# SGR_A_STAR_PROPER_MOTION and reflex_comparison are mwkin.frames' own (re-exported here as before).
__all__ = ["FrameControls", "PotentialControls", "SGR_A_STAR_PROPER_MOTION", "reflex_comparison"]

#: Default split of the Sun's azimuthal velocity: its motion relative to the LSR along rotation, km/s
#: (the V of :data:`mwkin.frames.SCHOENRICH2010_SOLAR_MOTION`).
DEFAULT_SOLAR_V = SCHOENRICH2010_SOLAR_MOTION[1]

_CUSTOM = "custom"
_LABEL_STYLE = {"description_width": "9em"}


class NumberField(widgets.HBox):
    """A labelled number: a free text box (it keeps whatever was typed) and, optionally, a slider.

    ``on_value(value)`` is called with every value the user enters (typed or dragged); values pushed
    from the program with :meth:`show` do not call it.

    Parameters
    ----------
    label : str
        Description including the unit, e.g. ``"R0 [kpc]"``.
    value : float
    css : str
        CSS class given to the whole field (browser tests find controls by it).
    on_value : callable
    slider : tuple (min, max, step), optional
        Adds a slider with ``continuous_update`` for live exploration.
    tooltip : str, optional
    """

    def __init__(self, label, value, css, on_value, slider=None, tooltip=""):
        self._quiet = Quiet()
        self._on_value = on_value
        self.text = widgets.FloatText(
            value=value,
            description=label,
            style=_LABEL_STYLE,
            continuous_update=False,
            tooltip=tooltip or label,
            layout=widgets.Layout(width="17em"),
        )
        children = [self.text]
        self.slider = None
        if slider is not None:
            lo, hi, step = slider
            self.slider = widgets.FloatSlider(
                value=min(max(value, lo), hi),
                min=lo,
                max=hi,
                step=step,
                readout=False,
                continuous_update=True,
                layout=widgets.Layout(width="14em"),
            )
            self.slider.observe(self._slider_moved, "value")
            children.append(self.slider)
        self.text.observe(self._typed, "value")
        super().__init__(children)
        self.add_class(css)
        self.add_class("mwkin-field")

    @property
    def value(self):
        """The value in the text box (what the user sees, valid or not)."""
        return self.text.value

    def show(self, value):
        """Display ``value`` (a valid value from the state) without calling back; clears the mark."""
        with self._quiet:
            self.text.value = value
            if self.slider is not None:
                if value > self.slider.max:
                    self.slider.max = value
                if value < self.slider.min:
                    self.slider.min = value
                self.slider.value = value
        self.mark_invalid(False)

    def mark_invalid(self, invalid):
        """Flag the text box (CSS class ``mwkin-invalid``) while it holds a refused value."""
        if invalid:
            self.add_class("mwkin-invalid")
        else:
            self.remove_class("mwkin-invalid")
        self.invalid = invalid

    invalid = False

    def _typed(self, change):
        if self._quiet:
            return
        if self.slider is not None:
            with self._quiet:
                self.slider.value = min(max(change["new"], self.slider.min), self.slider.max)
        self._on_value(change["new"])

    def _slider_moved(self, change):
        if self._quiet or self._is_echo(change["new"]):
            return
        with self._quiet:
            self.text.value = change["new"]
        self._on_value(change["new"])

    def _is_echo(self, slider_value):
        """True if the slider only repeats the text box's value at its step (the one slider-echo rule).

        A slider shown in the browser snaps a value set from Python to its step grid (12.9 ->
        12.899999999999999; vz = -10.83 with step 0.5 -> -11.0) and, with ``continuous_update``, sends
        the snapped value back as if the user had moved it; taking it would replace a shown value
        (a preset, a converted or restored star) by a rounded one and edit the shared state. A value
        within half a step of the text box's is that echo; a real move (one key press) lands a whole
        step away.
        """
        return abs(slider_value - self.text.value) <= 0.5 * self.slider.step * (1 + 1e-9)


class FrameControls(widgets.VBox):
    """Edit a :class:`FrameState`: preset, R0, z_sun and the solar velocity, with a Sgr A* check.

    Parameters
    ----------
    frame_state : FrameState, optional
        The state to edit (a new one with the default preset if omitted).
    solar_V : float, optional
        The Sun's motion along rotation relative to the LSR, km/s, used to split the azimuthal solar
        velocity into vc + V when the velocity is shown as (U, V, W) + vc. Only the split is kept
        here; the state holds the Cartesian ``v_sun``.

    Notes
    -----
    In the (U, V, W) + vc view, ``v_sun = (U, vc + V, W)`` (:meth:`SolarFrame.from_lsr`). When the
    state's ``v_sun`` changes from elsewhere, V stays and vc follows.
    """

    def __init__(self, frame_state=None, *, solar_V=DEFAULT_SOLAR_V):
        self.state = frame_state if frame_state is not None else FrameState()
        if not isinstance(self.state, FrameState):
            raise TypeError("frame_state must be a FrameState")
        self._solar_V = float(solar_V)
        self._quiet = Quiet()
        presets = SolarFrame.presets()
        self._last_preset = self.state.preset if self.state.preset in presets else DEFAULT_FRAME_PRESET

        self.preset_dropdown = widgets.Dropdown(
            description="Preset", style=_LABEL_STYLE, layout=widgets.Layout(width="31em")
        )
        self.preset_dropdown.add_class("mwkin-frame-preset")
        self.preset_dropdown.observe(self._preset_chosen, "value")
        self.citation = widgets.HTML()
        self.citation.add_class("mwkin-frame-citation")

        frame = self.state.frame
        self.fields = {
            "R0": NumberField(
                "R0 [kpc]", frame.R0, "mwkin-R0", self._setter("R0"), (6.5, 10.0, 0.001), "Sun-centre distance, kpc"
            ),
            "z_sun": NumberField(
                "z_sun [pc]",
                frame.z_sun,
                "mwkin-zsun",
                self._setter("z_sun"),
                (-50.0, 100.0, 0.1),
                "height of the Sun above the mid-plane, pc",
            ),
        }
        vc, (U, V, W) = self._lsr_view(frame)
        lsr = {
            "vc": ("vc [km/s]", vc, (150.0, 300.0, 0.1), "circular velocity of the LSR at the Sun"),
            "U": ("U [km/s]", U, (-40.0, 40.0, 0.1), "solar motion toward the Galactic centre"),
            "V": ("V [km/s]", V, (-40.0, 40.0, 0.1), "solar motion along rotation, relative to the LSR"),
            "W": ("W [km/s]", W, (-20.0, 20.0, 0.05), "solar motion toward the north Galactic pole"),
        }
        cart = {
            "vx": ("v_sun,x [km/s]", frame.v_sun[0], (-40.0, 40.0, 0.1), "Galactocentric x: Sun to centre"),
            "vy": ("v_sun,y [km/s]", frame.v_sun[1], (150.0, 320.0, 0.1), "Galactocentric y: rotation"),
            "vz": ("v_sun,z [km/s]", frame.v_sun[2], (-20.0, 20.0, 0.05), "Galactocentric z: north pole"),
        }
        for key, (label, value, rng, tip) in {**lsr, **cart}.items():
            self.fields[key] = NumberField(label, value, f"mwkin-{key}", self._velocity_setter(key), rng, tip)
        self.lsr_box = widgets.VBox([self.fields[k] for k in lsr])
        self.cartesian_box = widgets.VBox([self.fields[k] for k in cart], layout=widgets.Layout(display="none"))
        self.representation = widgets.ToggleButtons(
            options=[("(U, V, W) + vc", "lsr"), ("Cartesian v_sun", "cartesian")],
            value="lsr",
            description="Solar velocity",
            style=_LABEL_STYLE,
        )
        self.representation.add_class("mwkin-velocity-representation")
        self.representation.observe(self._representation_changed, "value")

        self.reset_button = widgets.Button(description="Reset", icon="undo", tooltip="back to the last preset chosen")
        self.reset_button.add_class("mwkin-frame-reset")
        self.reset_button.on_click(lambda _: self.reset())
        self.reflex_label = widgets.HTML()
        self.reflex_label.add_class("mwkin-reflex")
        self.status_line = StatusLine()

        super().__init__(
            [
                self.preset_dropdown,
                self.citation,
                self.fields["R0"],
                self.fields["z_sun"],
                self.representation,
                self.lsr_box,
                self.cartesian_box,
                widgets.HBox([self.reset_button]),
                self.reflex_label,
                self.status_line,
            ]
        )
        self.add_class("mwkin-frame-controls")
        self.state.observe(self._state_changed, ["R0", "z_sun", "v_sun", "preset"])
        self._show_preset()
        self._show_reflex()

    # ------------------------------------------------------------------ public
    @property
    def status(self):
        """'ready' or the error of the last refused value."""
        return self.status_line.text

    @property
    def reflex(self):
        """:func:`reflex_comparison` of the current frame."""
        return reflex_comparison(self.state.frame)

    def reset(self):
        """Go back to the last preset chosen (or the state's preset when the controls were made)."""
        self.state.apply_preset(self._last_preset)
        self._show_all()
        self.status_line.show_ready("ready")

    # ------------------------------------------------------------------ user -> state
    def _try(self, field, make_frame):
        """Build the new frame from the current one; on refusal keep the typed value and say why."""
        try:
            frame = make_frame(self.state.frame)
            with self.state.hold_trait_notifications():
                self.state.R0, self.state.z_sun, self.state.v_sun = frame.R0, frame.z_sun, frame.v_sun
        except Exception as exc:  # noqa: BLE001 - shown in the status line, typed value kept
            field.mark_invalid(True)
            self.status_line.show_error(f"{error_text(exc)} (not applied)")
            return
        field.mark_invalid(False)
        if not any(f.invalid for f in self.fields.values()):
            self.status_line.show_ready("ready")

    def _setter(self, name):
        def set_value(value):
            self._try(self.fields[name], lambda frame: frame.replace(**{name: value}))

        return set_value

    def _velocity_setter(self, key):
        def set_value(value):
            field = self.fields[key]
            if key in ("vx", "vy", "vz"):
                index = ("vx", "vy", "vz").index(key)

                def make(frame):
                    v = list(frame.v_sun)
                    v[index] = value
                    return frame.replace(v_sun=tuple(v))
            else:

                def make(frame):
                    vc, (U, V, W) = self._lsr_view(frame)
                    parts = {"vc": vc, "U": U, "V": V, "W": W, key: value}
                    new = SolarFrame.from_lsr(frame.R0, frame.z_sun, **parts)
                    self._solar_V = parts["V"]
                    return frame.replace(v_sun=new.v_sun)

            self._try(field, make)

        return set_value

    def _preset_chosen(self, change):
        if self._quiet or change["new"] == _CUSTOM:
            return
        self._last_preset = change["new"]
        self.state.apply_preset(change["new"])
        self._show_all()
        self.status_line.show_ready("ready")

    def _representation_changed(self, change):
        lsr = change["new"] == "lsr"
        self.lsr_box.layout.display = None if lsr else "none"
        self.cartesian_box.layout.display = "none" if lsr else None

    # ------------------------------------------------------------------ state -> display
    def _lsr_view(self, frame):
        vc = lsr_circular_velocity(frame, self._solar_V)
        return vc, frame.lsr_motion(vc)

    def _show_all(self):
        """Show every value of the state (also clearing refused values still in the text boxes)."""
        for name in ("R0", "z_sun", "v_sun"):
            self._state_changed({"name": name})

    def _state_changed(self, change):
        frame = self.state.frame
        name = change["name"]
        if name in ("R0", "z_sun"):
            self.fields[name].show(getattr(frame, name))
        elif name == "v_sun":
            vc, (U, V, W) = self._lsr_view(frame)
            for key, value in zip(("vc", "U", "V", "W", "vx", "vy", "vz"), (vc, U, V, W, *frame.v_sun)):
                self.fields[key].show(value)
        elif name == "preset":
            self._show_preset()
            if self.state.preset in SolarFrame.presets():
                self._last_preset = self.state.preset
        self._show_reflex()

    def _show_preset(self):
        presets = SolarFrame.presets()
        name = self.state.preset if self.state.preset in presets else _CUSTOM
        options = list(presets) + ([_CUSTOM] if name == _CUSTOM else [])
        with self._quiet, self.preset_dropdown.hold_sync():
            self.preset_dropdown.options = options
            self.preset_dropdown.value = name
        if name == _CUSTOM:
            base = presets[self._last_preset]
            self.citation.value = (
                f"<small>edited; reset returns to <i>{html.escape(base.name)}</i> "
                f"({html.escape(base.citation)})</small>"
            )
        else:
            entry = presets[name]
            self.citation.value = f"<small>{html.escape(entry.description)}. {html.escape(entry.citation)}</small>"

    def _show_reflex(self):
        r = self.reflex
        (ml, sl), (mb, sb) = SGR_A_STAR_PROPER_MOTION["mu_l"], SGR_A_STAR_PROPER_MOTION["mu_b"]
        self.reflex_text = (
            f"Reflex motion of the Galactic centre implied by this frame: mu_l* = {r['mu_l']:.3f}, "
            f"mu_b = {r['mu_b']:.3f} mas/yr; measured for Sgr A* (Reid & Brunthaler 2020): "
            f"{ml:.3f} ± {sl:.3f}, {mb:.3f} ± {sb:.3f} mas/yr; difference "
            f"{r['sigma_l']:+.1f}σ in mu_l*, {r['sigma_b']:+.1f}σ in mu_b"
        )
        self.reflex_label.value = f"<small>{html.escape(self.reflex_text)}</small>"


# =========================================================================== potential
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
        from ..potentials import Potential

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
            from ..potentials import Potential

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
