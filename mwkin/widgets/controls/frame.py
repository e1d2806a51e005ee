"""FrameControls: edit the shared :class:`~mwkin.widgets.state.FrameState`.

The control writes to its state object and redraws itself when the state changes, whoever changed it.
It keeps no second copy of the state: the solar velocity shown as (U, V, W) + vc is converted to and
from the state's Cartesian ``v_sun`` with the core's :meth:`SolarFrame.from_lsr` / :meth:`lsr_motion`.
A value the state refuses stays in its text box, marked, with the reason in the control's status line.
"""

from __future__ import annotations

import html

import ipywidgets as widgets

from ...frames import SCHOENRICH2010_SOLAR_MOTION, SGR_A_STAR_PROPER_MOTION, SolarFrame, reflex_comparison
from .._base import Quiet, StatusLine, error_text
from ..state import DEFAULT_FRAME_PRESET, FrameState, lsr_circular_velocity
from .fields import _LABEL_STYLE, NumberField

#: Default split of the Sun's azimuthal velocity: its motion relative to the LSR along rotation, km/s
#: (the V of :data:`mwkin.frames.SCHOENRICH2010_SOLAR_MOTION`).
DEFAULT_SOLAR_V = SCHOENRICH2010_SOLAR_MOTION[1]

_CUSTOM = "custom"


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
