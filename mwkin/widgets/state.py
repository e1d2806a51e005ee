"""Shared state: one solar frame and one potential that several widgets observe.

Controls write to these objects and analysis widgets observe them; no widget reaches into another. Each
state holds one representation only (the frame as R0, z_sun and Cartesian v_sun; the potential as a
preset name or a three-component parameter set) and converts to and from the core objects.
"""

from __future__ import annotations

import copy
import json
import math

import astropy.units as u
import traitlets

from .._validate import require_mapping as _require_mapping
from ..frames import (
    DEFAULT_FRAME_PARAMETERS,
    DEFAULT_PRESET,
    SCHOENRICH2010_SOLAR_MOTION,
    FrameError,
    SolarFrame,
    warn_if_implausible,
)

__all__ = [
    "FrameState",
    "PotentialState",
    "DEFAULT_FRAME_PRESET",
    "DEFAULT_POTENTIAL_PRESET",
    "potential_from_config",
    "default_three_component_parameters",
    "ConfigError",
    "require_mapping",
    "frame_from_config",
    "validated_potential_config",
    "lsr_circular_velocity",
]


class ConfigError(ValueError):
    """A widget or state config that cannot be applied; the message names the key and the value."""


def require_mapping(config, what):
    """A shallow copy of ``config`` as a dict, or a :class:`ConfigError` naming ``what`` if it is not one."""
    return _require_mapping(config, what, ConfigError)


def frame_from_config(config):
    """The :class:`~mwkin.frames.SolarFrame` a :attr:`FrameState.config` describes (validated, named errors)."""
    config = require_mapping(config, "the frame config")
    try:
        return SolarFrame.from_dict(config)
    except (KeyError, TypeError) as exc:  # keep every failure a ValueError that names the problem
        raise ConfigError(f"frame config: {exc}") from None


#: The preset a new FrameState holds (mwkin.frames.DEFAULT_PRESET).
DEFAULT_FRAME_PRESET = DEFAULT_PRESET
DEFAULT_POTENTIAL_PRESET = "MWPotential2014"


class FrameState(traitlets.HasTraits):
    """The solar frame shared by widgets.

    Attributes
    ----------
    R0 : float
        Sun--centre distance, kpc.
    z_sun : float
        Height of the Sun above the mid-plane, pc.
    v_sun : tuple of 3 floats
        Solar velocity in astropy's Galactocentric Cartesian axes, km/s.
    preset : str
        Name of the preset the values came from, or "" once edited.
    """

    # The defaults are mwkin.frames.DEFAULT_FRAME_PARAMETERS (the frame __init__ sets anyway).
    R0 = traitlets.Float(DEFAULT_FRAME_PARAMETERS["R0"], help="Sun-centre distance, kpc")
    z_sun = traitlets.Float(
        DEFAULT_FRAME_PARAMETERS["z_sun"], help="height of the Sun above the Galactic mid-plane, pc"
    )
    v_sun = traitlets.Tuple(
        traitlets.Float(),
        traitlets.Float(),
        traitlets.Float(),
        default_value=tuple(DEFAULT_FRAME_PARAMETERS["v_sun"]),
        help="solar velocity (vx, vy, vz) in Galactocentric Cartesian axes, km/s",
    )
    preset = traitlets.Unicode(DEFAULT_FRAME_PRESET, help="preset name, or '' once a value was edited")

    def __init__(self, frame=None, **kwargs):
        super().__init__()
        self._applying = False
        self.set_frame(frame if frame is not None else SolarFrame.preset(DEFAULT_FRAME_PRESET))
        # Values given as keywords apply on top of the frame (FrameState(R0=8.3) is the default frame
        # with R0 = 8.3, marked as edited), never silently replaced by it.
        with self.hold_trait_notifications():
            for name, value in kwargs.items():
                setattr(self, name, value)

    @traitlets.validate("R0")
    def _check_R0(self, proposal):
        value = proposal["value"]
        if not (math.isfinite(value) and value > 0):
            raise traitlets.TraitError(f"R0 must be a finite distance > 0 kpc, got {value} kpc")
        if not getattr(self, "_applying", False):  # a preset or saved frame was checked when made
            warn_if_implausible(R0=value)
        return value

    @traitlets.validate("z_sun")
    def _check_z_sun(self, proposal):
        value = proposal["value"]
        if not math.isfinite(value):
            raise traitlets.TraitError(f"z_sun must be a finite height in pc, got {value} pc")
        try:  # the core's rule for z_sun against R0 (units stated: no unit-slip warning here)
            SolarFrame(R0=self.R0 * u.kpc, z_sun=value * u.pc)
        except FrameError as exc:
            raise traitlets.TraitError(str(exc)) from None
        if not getattr(self, "_applying", False):
            warn_if_implausible(z_sun=value)
        return value

    @traitlets.validate("v_sun")
    def _check_v_sun(self, proposal):
        value = tuple(proposal["value"])
        bad = [f"{axis} = {v}" for axis, v in zip(("vx", "vy", "vz"), value) if not math.isfinite(v)]
        if bad:
            raise traitlets.TraitError(f"v_sun must be finite, got {', '.join(bad)} km/s")
        if not getattr(self, "_applying", False):
            warn_if_implausible(v_sun=value)
        return value

    @traitlets.observe("R0", "z_sun", "v_sun")
    def _mark_edited(self, change):
        if not getattr(self, "_applying", False):
            self.preset = ""

    @property
    def frame(self):
        """The current :class:`~mwkin.frames.SolarFrame`."""
        # With their units stated: the values were checked for unit slips when they were set, and a
        # frame made on every refresh must not repeat that warning.
        return SolarFrame(
            R0=self.R0 * u.kpc, z_sun=self.z_sun * u.pc, v_sun=tuple(self.v_sun) * (u.km / u.s), label=self.preset
        )

    def set_frame(self, frame):
        """Take all values from a SolarFrame in one batch of notifications."""
        self._applying = True
        try:
            with self.hold_trait_notifications():
                self.R0 = frame.R0
                self.z_sun = frame.z_sun
                self.v_sun = tuple(frame.v_sun)
                self.preset = frame.label
        finally:
            self._applying = False

    def apply_preset(self, name):
        """Load a published preset by name (see ``SolarFrame.presets()``)."""
        self.set_frame(SolarFrame.preset(name))

    @property
    def config(self):
        """JSON-able dict of the state (the frame's ``to_dict()``)."""
        return self.frame.to_dict()

    def load_config(self, config):
        """Inverse of :attr:`config`; a bad config raises :class:`ConfigError` and changes nothing."""
        self.set_frame(frame_from_config(config))


class PotentialState(traitlets.HasTraits):
    """The Galactic potential shared by widgets.

    Attributes
    ----------
    preset : str
        Name of a published model (``Potential.presets()``), or "" to use ``parameters``.
    parameters : dict
        Three-component model in physical units, as accepted by ``Potential.three_component``
        (``{"bulge": {...}, "disc": {...}, "halo": {...}}``); used when ``preset`` is "".
    match_frame_vc : bool
        Rescale the potential so that its circular velocity at the Sun equals the frame's azimuthal
        solar velocity minus ``solar_V`` (the Sun's own motion relative to the local standard of rest).
    solar_V : float
        The Sun's motion relative to the LSR in the direction of rotation, km/s, used by ``match_frame_vc``.
    """

    preset = traitlets.Unicode(DEFAULT_POTENTIAL_PRESET, help="published model name, or '' for parameters")
    parameters = traitlets.Dict(help="three-component model parameters (Msun, kpc), used when preset is ''")
    match_frame_vc = traitlets.Bool(False, help="rescale to the frame's circular velocity at the Sun")
    solar_V = traitlets.Float(
        SCHOENRICH2010_SOLAR_MOTION[1],
        help="solar motion relative to the LSR along rotation, km/s "
        "(Schoenrich et al. 2010), used when matching the frame",
    )

    def __init__(self, potential=None, **kwargs):
        super().__init__(**kwargs)
        if potential is not None:
            self.set_potential(potential)
        if not self.parameters:
            self.parameters = default_three_component_parameters()

    def potential_for(self, frame=None):
        """The current :class:`~mwkin.potentials.Potential`, matched to ``frame`` if requested."""
        return potential_from_config(self.config, frame)

    @property
    def potential(self):
        """The current potential without frame matching."""
        return self.potential_for(None)

    def set_potential(self, potential):
        """Take a preset or three-component Potential (anything ``to_dict()`` describes)."""
        spec = potential.to_dict()
        if "scaled_to" in spec:
            raise ValueError(
                "PotentialState holds unscaled models; use match_frame_vc=True to rescale to the "
                f"frame's circular velocity (this potential is scaled to {spec['scaled_to']})"
            )
        with self.hold_trait_notifications():
            if spec.get("kind") == "preset":
                self.preset = spec["name"]
            elif spec.get("kind") == "three_component":
                self.parameters = {k: copy.deepcopy(spec[k]) for k in _COMPONENTS}
                self.preset = ""
            else:
                raise ValueError(f"PotentialState holds presets or three-component models, got {spec.get('kind')!r}")

    @property
    def config(self):
        """JSON-able dict of the state."""
        return {
            "preset": self.preset,
            "parameters": json.loads(json.dumps(self.parameters)),
            "match_frame_vc": self.match_frame_vc,
            "solar_V": self.solar_V,
        }

    def load_config(self, config):
        """Inverse of :attr:`config`; a bad config raises :class:`ConfigError` and changes nothing."""
        config = validated_potential_config(config)
        with self.hold_trait_notifications():
            for key, value in config.items():
                setattr(self, key, value)


_COMPONENTS = ("bulge", "disc", "halo")


_POTENTIAL_KEYS = {"preset": str, "parameters": dict, "match_frame_vc": bool, "solar_V": float}


def validated_potential_config(config):
    """Check a :attr:`PotentialState.config`-like dict without applying it; returns a clean copy.

    Keys, types (``True`` is not a number, a number is not a name), the preset name and, when no preset
    is named, the three-component parameters (through the core's own validation) are checked, each
    failure naming the key and the value.

    Raises
    ------
    ConfigError
    """
    config = require_mapping(config, "the potential config")
    unknown = set(config) - set(_POTENTIAL_KEYS)
    if unknown:
        raise ConfigError(f"unknown potential-state keys {sorted(unknown)}; expected {sorted(_POTENTIAL_KEYS)}")
    out = {}
    for key, value in config.items():
        kind = _POTENTIAL_KEYS[key]
        if kind is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise ConfigError(f"potential config: {key} must be a finite number (km/s), got {value!r}")
            value = float(value)
        elif not isinstance(value, kind):
            raise ConfigError(
                f"potential config: {key} must be a {kind.__name__}, got {type(value).__name__} {value!r:.80}"
            )
        out[key] = copy.deepcopy(value)
    preset = out.get("preset")
    if preset:
        from ..potentials import Potential

        if preset not in Potential.presets():
            raise ConfigError(f"potential config: unknown preset {preset!r}; known: {sorted(Potential.presets())}")
    elif "parameters" in out or preset == "":
        from ..potentials import Potential

        parameters = out.get("parameters", default_three_component_parameters())
        unknown = set(parameters) - set(_COMPONENTS)
        if unknown:
            raise ConfigError(
                f"potential config: parameters has unknown components {sorted(unknown)}; expected {list(_COMPONENTS)}"
            )
        for name, part in parameters.items():
            if not isinstance(part, dict):
                raise ConfigError(f"potential config: parameters[{name!r}] must be a dict, got {part!r:.80}")
        try:
            Potential.three_component(**copy.deepcopy(parameters))  # the core names the bad parameter
        except ValueError as exc:
            raise ConfigError(f"potential config: {exc}") from None
        except TypeError as exc:
            raise ConfigError(f"potential config: parameters: {exc}") from None
    return out


def default_three_component_parameters():
    """Parameters of ``Potential.three_component()`` with its defaults, as {"bulge": {...}, ...}."""
    # Read the defaults rather than building the model: building imports galpy, which takes seconds.
    from ..potentials import DEFAULT_BULGE, DEFAULT_DISC, DEFAULT_HALO

    return {"bulge": dict(DEFAULT_BULGE), "disc": dict(DEFAULT_DISC), "halo": dict(DEFAULT_HALO)}


def lsr_circular_velocity(frame, solar_V):
    """The circular velocity of the local standard of rest a frame implies, km/s: ``v_sun[1] - solar_V``.

    The inverse, for vc, of :meth:`mwkin.frames.SolarFrame.from_lsr` (``v_sun = (U, vc + V, W)``) given
    the Sun's motion V relative to the LSR along rotation. The one place the widgets split the Sun's
    azimuthal velocity (frame controls, rotation-curve marker, frame matching, Toomre diagram).

    Parameters
    ----------
    frame : SolarFrame
    solar_V : float
        The Sun's motion relative to the LSR in the direction of rotation, km/s.

    Returns
    -------
    float
    """
    return frame.lsr_circular_velocity(solar_V)


def potential_from_config(config, frame=None):
    """The :class:`~mwkin.potentials.Potential` a :attr:`PotentialState.config` describes.

    Parameters
    ----------
    config : dict
        ``preset``, ``parameters``, ``match_frame_vc``, ``solar_V`` (as :attr:`PotentialState.config`).
    frame : SolarFrame, optional
        Needed for ``match_frame_vc``: the model is rescaled so that vc at the Sun's in-plane radius
        equals ``v_sun[1] - solar_V``.

    Notes
    -----
    Safe to call from a worker thread (it reads no traits), which is how the widgets use it.
    """
    from ..potentials import Potential

    if config.get("preset"):
        pot = Potential.preset(config["preset"])
    else:
        pot = Potential.three_component(**copy.deepcopy(config["parameters"]))
    if config.get("match_frame_vc") and frame is not None:
        solar_V = config.get("solar_V", SCHOENRICH2010_SOLAR_MOTION[1])
        pot = pot.scaled_to(lsr_circular_velocity(frame, solar_V), frame.inplane_radius)
    return pot


def _frame_error_message(exc):
    """Readable text of a frame validation error for the status line."""
    if isinstance(exc, (FrameError, traitlets.TraitError)):
        return str(exc)
    return f"{type(exc).__name__}: {exc}"
