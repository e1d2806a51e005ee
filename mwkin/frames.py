"""The solar frame: where the Sun sits in the Galaxy and how it moves.

A :class:`SolarFrame` fixes the Sun's distance from the Galactic centre ``R0`` (kpc), its height above
the mid-plane ``z_sun`` (pc) and its velocity ``v_sun`` (km/s) in Galactocentric Cartesian axes. It is
the same parameter set as :class:`astropy.coordinates.Galactocentric` and converts to and from it
exactly, so Galactocentric positions and velocities computed with it agree with astropy to round-off.

Conventions
-----------
* ``R0`` is the Sun--centre distance (astropy's ``galcen_distance``), which includes the small tilt
  from ``z_sun``; it is not the in-plane distance.
* ``v_sun = (vx, vy, vz)`` in astropy's Galactocentric axes: x from the Sun toward the centre,
  y in the direction of Galactic rotation at the Sun, z toward the north Galactic pole.
* The common statement "circular velocity vc plus the solar motion (U, V, W) relative to the local
  standard of rest" maps to ``v_sun = (U, vc + V, W)`` (:meth:`SolarFrame.from_lsr`). The tilt of
  the Galactic plane by ``z_sun / R0`` (about 0.15 deg) is neglected in that mapping, as is usual.
"""

from __future__ import annotations

import dataclasses
import math
import types
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import astropy.units as u
import numpy as np

from ._validate import check_keys, is_plain, real_number, real_vector, require_mapping, text, warn_implausible
from .coords import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC, _rot, tangent_basis
from .units import KMS, to_value

__all__ = [
    "SolarFrame",
    "Preset",
    "ReflexProperMotion",
    "FrameError",
    "UnknownPresetError",
    "warn_if_implausible",
    "frame_or_default",
    "reflex_comparison",
    "DEFAULT_PRESET",
    "DEFAULT_FRAME_PARAMETERS",
    "SGR_A_STAR_PROPER_MOTION",
    "SCHOENRICH2010_SOLAR_MOTION",
]

#: Name of the preset a :class:`SolarFrame` built without arguments equals.
DEFAULT_PRESET = "astropy v4.0"

#: The default frame's parameters (astropy's Galactocentric defaults since v4.0): R0 in kpc, z_sun in pc,
#: v_sun in km/s. Read-only; the one home of these numbers (the default preset and the widgets use it).
DEFAULT_FRAME_PARAMETERS: Mapping[str, Any] = types.MappingProxyType(
    {"R0": 8.122, "z_sun": 20.8, "v_sun": (12.9, 245.6, 7.78)}
)

#: Measured proper motion of Sgr A* in Galactic coordinates, mas/yr, as (value, sigma); mu_l is
#: mu_l cos b (Reid & Brunthaler 2020, ApJ 892, 39).
SGR_A_STAR_PROPER_MOTION = types.MappingProxyType({"mu_l": (-6.411, 0.008), "mu_b": (-0.219, 0.007)})

#: The Sun's motion (U, V, W) relative to the local standard of rest, km/s (Schoenrich, Binney & Dehnen
#: 2010, MNRAS 403, 1829).
SCHOENRICH2010_SOLAR_MOTION = (11.1, 12.24, 7.25)

#: astropy's default ICRS position of the Galactic centre, (l, b) = (0, 0) (astropy source).
_GALCEN_RA_DEG = 266.4051
_GALCEN_DEC_DEG = -28.936175
#: Extra roll that aligns the Galactocentric z axis with the Galactic pole (astropy, Galactocentric._ROLL0).
ROLL0_DEG = 58.5986320306


class FrameError(ValueError):
    """Raised for solar-frame parameters that make no physical sense."""


class UnknownPresetError(FrameError, KeyError):
    """An unknown solar-frame preset name (a KeyError too, as before, and a ValueError like every bad input)."""

    def __str__(self):  # KeyError would otherwise quote the message
        return str(self.args[0]) if self.args else ""


_V_SUN_COMPONENTS = ("vx", "vy", "vz")

#: to_dict key -> (field name, unit as written in messages); the one list of the serialised keys.
_DICT_FIELDS = {
    "R0_kpc": ("R0", "kpc"),
    "z_sun_pc": ("z_sun", "pc"),
    "v_sun_kms": ("v_sun", "km/s"),
    "roll_deg": ("roll", "deg"),
    "galcen_ra_deg": ("galcen_ra", "deg"),
    "galcen_dec_deg": ("galcen_dec", "deg"),
    "label": ("label", ""),
}
_DICT_KEYS = {key: unit for key, (name, unit) in _DICT_FIELDS.items() if name != "label"}
_FIELD_UNITS = {name: u.Unit(unit) for name, unit in _DICT_FIELDS.values() if name != "label"}

#: Plausibility limits for plain numbers (common practice (no source): the Sun is 7-9 kpc from the
#: centre, 0-30 pc above the plane, and moves at about 250 km/s). Outside them a value is most likely
#: in another unit, and an ImplausibleValueWarning says which unit it was taken in.
R0_PLAUSIBLE_KPC = (1.0, 100.0)
Z_SUN_MIN_PLAUSIBLE_PC = 1.0
MAX_PLAUSIBLE_SPEED_KMS = 1000.0


def warn_if_implausible(R0=None, z_sun=None, v_sun=None):
    """Warn about solar-frame values in the default units (kpc, pc, km/s) that look like a unit slip.

    The one home of the plausibility limits (:data:`R0_PLAUSIBLE_KPC`, :data:`Z_SUN_MIN_PLAUSIBLE_PC`,
    :data:`MAX_PLAUSIBLE_SPEED_KMS`): :class:`SolarFrame` applies it to plain numbers, the widgets'
    frame state to every value typed. ``None`` skips a parameter.

    Warns
    -----
    mwkin.units.ImplausibleValueWarning
        Naming the value, the unit it was taken in and the unit it was probably meant in.
    """
    plain, skip = 0.0, 0.0 * u.one  # a Quantity counts as a stated unit: not checked
    _warn_if_implausible(
        skip if R0 is None else plain,
        skip if z_sun is None else plain,
        skip if v_sun is None else plain,
        R0,
        z_sun,
        v_sun,
    )


def _warn_if_implausible(R0_given, z_sun_given, v_sun_given, R0, z_sun, v_sun):
    """Warn about plain numbers (no unit stated) that look like a unit slip; Quantities are trusted."""
    low, high = R0_PLAUSIBLE_KPC
    if is_plain(R0_given) and not low <= R0 < high:
        hint = "pc" if R0 >= high else "Mpc"
        warn_implausible(
            f"R0 = {R0:g} kpc (plain number, taken in kpc) is implausible for the Sun-centre "
            f"distance (expected about 8 kpc); was it given in {hint}? Pass a Quantity to "
            f"state the unit."
        )
    # z_sun = 0 exactly is a deliberate choice (the Sun in the plane), not a slip.
    if is_plain(z_sun_given) and 0.0 < abs(z_sun) < Z_SUN_MIN_PLAUSIBLE_PC:
        warn_implausible(
            f"z_sun = {z_sun:g} pc (plain number, taken in pc) is implausibly small for the "
            f"Sun's height above the mid-plane (expected about 20 pc); was it given in kpc "
            f"({z_sun:g} kpc = {1000 * z_sun:g} pc)? Pass a Quantity to state the unit."
        )
    if is_plain(v_sun_given):
        for i, (axis, value) in enumerate(zip(_V_SUN_COMPONENTS, v_sun)):
            if abs(value) > MAX_PLAUSIBLE_SPEED_KMS:
                warn_implausible(
                    f"v_sun[{i}] ({axis}) = {value:g} km/s (plain number, taken in km/s) is "
                    f"implausibly large for the solar velocity (expected |v| < "
                    f"{MAX_PLAUSIBLE_SPEED_KMS:g} km/s); was it given in m/s?"
                )


@dataclass(frozen=True)
class Preset:
    """A named, published solar-frame parameter set."""

    name: str
    description: str
    citation: str
    params: dict

    def __post_init__(self):
        # Read-only parameters (v_sun a tuple), so a Preset handed out by SolarFrame.presets() cannot
        # change the preset for the rest of the process.
        params = {k: (tuple(v) if isinstance(v, (list, tuple)) else v) for k, v in dict(self.params).items()}
        object.__setattr__(self, "params", types.MappingProxyType(params))


@dataclass(frozen=True)
class ReflexProperMotion:
    """Apparent proper motion of the Galactic centre caused by the Sun's motion, in Galactic coordinates.

    Attributes are in mas/yr; ``mu_l_star`` is mu_l cos b.
    """

    mu_l_star: float
    mu_b: float

    @property
    def total(self):
        """Size of the proper-motion vector, mas/yr."""
        return math.hypot(self.mu_l_star, self.mu_b)


@dataclass(frozen=True)
class SolarFrame:
    """The Sun's position and velocity in the Galaxy. Immutable; use :meth:`replace` for variants.

    Parameters
    ----------
    R0 : float or Quantity
        Distance of the Sun from the Galactic centre, kpc (astropy's ``galcen_distance``).
    z_sun : float or Quantity
        Height of the Sun above the Galactic mid-plane, pc.
    v_sun : 3-sequence of float or Quantity
        Solar velocity in Galactocentric Cartesian axes, km/s (astropy's ``galcen_v_sun``).
    roll : float or Quantity, optional
        Extra rotation about the Sun--centre line, deg (astropy's ``roll``; 0 normally).
    galcen_ra, galcen_dec : float or Quantity, optional
        ICRS direction of the Galactic centre, deg (astropy's default ``galcen_coord``).
    label : str, optional
        Name of the preset this frame came from, or "" once edited. Not part of equality.

    Raises
    ------
    FrameError
        If a value is not a real number (strings, booleans, None and nested lists are refused, as is a
        ``v_sun`` without exactly three components), is not finite, R0 is not positive, or z_sun is
        not smaller than R0. Each message names the parameter, the value and the unit.

    Warns
    -----
    ImplausibleValueWarning
        For plain numbers that look like a unit slip: R0 < 1 or >= 100 (kpc), 0 < ``|z_sun|`` < 1 (pc;
        probably kpc), a v_sun component above 1000 km/s. Quantities state their unit and are trusted.

    Examples
    --------
    >>> frame = SolarFrame(R0=8.122, z_sun=20.8, v_sun=(12.9, 245.6, 7.78))
    >>> frame.replace(R0=8.2).R0
    8.2

    The default frame is the "astropy v4.0" preset:

    >>> default = SolarFrame()
    >>> default.R0, default.z_sun, default.v_sun
    (8.122, 20.8, (12.9, 245.6, 7.78))
    >>> default == SolarFrame.preset(DEFAULT_PRESET), DEFAULT_PRESET
    (True, 'astropy v4.0')
    """

    R0: float = DEFAULT_FRAME_PARAMETERS["R0"]
    z_sun: float = DEFAULT_FRAME_PARAMETERS["z_sun"]
    v_sun: tuple = DEFAULT_FRAME_PARAMETERS["v_sun"]
    roll: float = 0.0
    galcen_ra: float = _GALCEN_RA_DEG
    galcen_dec: float = _GALCEN_DEC_DEG
    label: str = field(default="", compare=False)

    def __post_init__(self):
        # Types first (a string or a boolean is never a number here), then finiteness, then physics.
        R0 = real_number(self.R0, "R0", "kpc", FrameError)
        z_sun = real_number(self.z_sun, "z_sun", "pc", FrameError)
        v_sun = real_vector(self.v_sun, "v_sun", "km/s", FrameError, components=_V_SUN_COMPONENTS)
        roll = real_number(self.roll, "roll", "deg", FrameError)
        ra = real_number(self.galcen_ra, "galcen_ra", "deg", FrameError)
        dec = real_number(self.galcen_dec, "galcen_dec", "deg", FrameError)
        text(self.label, "label", FrameError)
        if not R0 > 0:
            raise FrameError(f"R0 must be positive, got {R0} kpc")
        if abs(z_sun) >= 1000.0 * R0:
            raise FrameError(f"z_sun = {z_sun} pc: |z_sun| must be smaller than R0 = {R0} kpc")
        if not -90.0 <= dec <= 90.0:
            raise FrameError(f"galcen_dec must lie in [-90, 90] deg, got {dec} deg")
        _warn_if_implausible(self.R0, self.z_sun, self.v_sun, R0, z_sun, v_sun)
        for name, value in (
            ("R0", R0),
            ("z_sun", z_sun),
            ("v_sun", v_sun),
            ("roll", roll),
            ("galcen_ra", ra),
            ("galcen_dec", dec),
        ):
            object.__setattr__(self, name, value)

    # ----------------------------------------------------------------- construction
    @classmethod
    def from_lsr(cls, R0, z_sun, vc, U, V, W, **kwargs):
        """Build a frame from the circular velocity at the Sun and the solar motion relative to the LSR.

        Parameters
        ----------
        R0 : float or Quantity
            Sun--centre distance, kpc.
        z_sun : float or Quantity
            Height above the mid-plane, pc.
        vc : float or Quantity
            Circular velocity of the local standard of rest, km/s.
        U, V, W : float or Quantity
            Solar motion relative to the LSR, km/s: U toward the centre, V in the direction of
            rotation, W toward the north Galactic pole.
        **kwargs
            Passed to the constructor (``roll``, ``label``...).

        Returns
        -------
        SolarFrame
            With ``v_sun = (U, vc + V, W)``.
        """
        vc_value = real_number(vc, "vc", "km/s", FrameError)
        U, V, W = (real_number(x, n, "km/s", FrameError) for x, n in ((U, "U"), (V, "V"), (W, "W")))
        if is_plain(vc) and abs(vc_value) > MAX_PLAUSIBLE_SPEED_KMS:
            warn_implausible(
                f"vc = {vc_value:g} km/s (circular velocity, taken in km/s) is implausibly "
                f"large for the Milky Way (expected about 200-260 km/s); was it given in m/s?"
            )
        v_sun = (U, vc_value + V, W)
        if not all(is_plain(x) for x in (vc, U, V, W)):
            v_sun = v_sun * KMS  # a stated unit is no slip: do not warn about the sum again
        return cls(R0=R0, z_sun=z_sun, v_sun=v_sun, **kwargs)

    def lsr_motion(self, vc):
        """Solar motion (U, V, W) relative to an LSR of circular velocity ``vc`` (km/s); inverse of from_lsr."""
        vc = to_value(vc, KMS, "vc")
        vx, vy, vz = self.v_sun
        return (vx, vy - vc, vz)

    @classmethod
    def preset(cls, name):
        """Return the frame of a published parameter set; :meth:`presets` lists the names.

        Raises
        ------
        UnknownPresetError
            A :class:`FrameError` (so a ValueError) and a KeyError, with the list of known names, if
            ``name`` is not one of them.
        """
        try:
            entry = _PRESETS[name]
        except (KeyError, TypeError):
            raise UnknownPresetError(f"unknown solar-frame preset {name!r}; known: {', '.join(_PRESETS)}") from None
        return cls(**entry.params, label=entry.name)

    @staticmethod
    def presets():
        """Dictionary of preset name -> :class:`Preset` (description, citation, parameters).

        A new dictionary on every call, so the caller may change it freely; the :class:`Preset`
        entries are frozen and their ``params`` are read-only mappings, so no caller can change a
        preset for the rest of the process.
        """
        return dict(_PRESETS)

    def replace(self, **changes):
        """A new frame with some parameters changed (the preset label is cleared unless given).

        Unchanged values are passed on with their units, so only the changed ones are checked for
        implausible plain numbers (see :class:`~mwkin.units.ImplausibleValueWarning`).
        """
        unknown = sorted(set(changes) - set(_FIELD_UNITS) - {"label"})
        if unknown:
            raise FrameError(
                f"replace() got unknown parameters {unknown}; a SolarFrame has {sorted(_FIELD_UNITS) + ['label']}"
            )
        changes.setdefault("label", "")
        for name, unit in _FIELD_UNITS.items():
            if name not in changes:
                changes[name] = getattr(self, name) * unit
        return dataclasses.replace(self, **changes)

    # ----------------------------------------------------------------- astropy
    def to_astropy(self):
        """The equivalent :class:`astropy.coordinates.Galactocentric` frame."""
        import astropy.units as u
        from astropy.coordinates import ICRS, CartesianDifferential, Galactocentric

        return Galactocentric(
            galcen_coord=ICRS(ra=self.galcen_ra * u.deg, dec=self.galcen_dec * u.deg),
            galcen_distance=self.R0 * u.kpc,
            galcen_v_sun=CartesianDifferential(list(self.v_sun) * KMS),
            z_sun=self.z_sun * u.pc,
            roll=self.roll * u.deg,
        )

    @classmethod
    def from_astropy(cls, galactocentric):
        """Build a frame from an :class:`astropy.coordinates.Galactocentric` frame instance."""
        g = galactocentric
        v_sun = g.galcen_v_sun
        v = (v_sun.d_xyz if hasattr(v_sun, "d_xyz") else v_sun.xyz).to_value(KMS)
        coord = g.galcen_coord.transform_to("icrs") if g.galcen_coord.name != "icrs" else g.galcen_coord
        return cls(
            R0=g.galcen_distance,
            z_sun=g.z_sun,
            v_sun=tuple(v),
            roll=g.roll,
            galcen_ra=coord.ra,
            galcen_dec=coord.dec,
        )

    # ----------------------------------------------------------------- serialisation
    def to_dict(self):
        """JSON-able dictionary of the parameters, with units in the keys."""
        return {
            "R0_kpc": self.R0,
            "z_sun_pc": self.z_sun,
            "v_sun_kms": list(self.v_sun),
            "roll_deg": self.roll,
            "galcen_ra_deg": self.galcen_ra,
            "galcen_dec_deg": self.galcen_dec,
            "label": self.label,
        }

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict`.

        Parameters
        ----------
        data : dict
            Every key :meth:`to_dict` writes: ``R0_kpc``, ``z_sun_pc``, ``v_sun_kms`` (three numbers),
            ``roll_deg``, ``galcen_ra_deg``, ``galcen_dec_deg``, and optionally ``label`` (text).

        Returns
        -------
        SolarFrame

        Raises
        ------
        FrameError
            If ``data`` is not a mapping; for unknown keys (usually typos); for a missing parameter
            (there are no silent defaults); for a value of the wrong type -- a string, a boolean, a
            nested list, a ``v_sun`` of the wrong length -- each naming the key, the value and the unit.
        """
        data = require_mapping(data, "solar frame", FrameError)
        check_keys(data, "solar-frame", FrameError, optional=_DICT_FIELDS)
        # The types of the values given are checked before any missing key is reported, so that
        # {"v_sun_kms": "245"} is told about the string it holds, not only about what it lacks.
        for key, (name, unit) in _DICT_FIELDS.items():
            if key not in data:
                continue
            if name == "label":
                text(data[key], key, FrameError)
            elif name == "v_sun":
                real_vector(data[key], key, unit, FrameError, components=_V_SUN_COMPONENTS, finite=False)
            else:
                real_number(data[key], key, unit, FrameError, finite=False)
        check_keys(data, "solar-frame", FrameError, required=_DICT_KEYS, optional={"label": ""})
        kwargs = {name: data[key] for key, (name, _unit) in _DICT_FIELDS.items() if key in data}
        return cls(**kwargs)

    # ----------------------------------------------------------------- geometry
    def galactocentric_transform(self):
        """Matrix and offset taking ICRS Cartesian positions (kpc) to Galactocentric ones.

        Returns
        -------
        matrix : numpy.ndarray, shape (3, 3)
            ``x_gc = matrix @ x_icrs + offset`` and ``v_gc = matrix @ v_icrs + v_sun``.
        offset : numpy.ndarray, shape (3,)
            The Sun's Galactocentric position, kpc.

        Notes
        -----
        The same construction as :class:`astropy.coordinates.Galactocentric`: align x with the
        direction of the centre, roll the z axis onto the Galactic pole, then tilt about y by
        arcsin(z_sun / R0) and shift by R0.
        """
        ra, dec = math.radians(self.galcen_ra), math.radians(self.galcen_dec)
        rotation = _rot(math.radians(ROLL0_DEG - self.roll), "x") @ _rot(-dec, "y") @ _rot(ra, "z")
        tilt = _rot(-math.asin(self.z_sun / (1000.0 * self.R0)), "y")
        matrix = tilt @ rotation
        offset = -tilt @ np.array([self.R0, 0.0, 0.0])
        return matrix, offset

    @property
    def sun_position(self):
        """The Sun's Galactocentric Cartesian position (x, y, z), kpc."""
        return tuple(self.galactocentric_transform()[1])

    def lsr_circular_velocity(self, solar_V=SCHOENRICH2010_SOLAR_MOTION[1]):
        """The circular velocity of the local standard of rest this frame implies, km/s: v_sun[1] - V.

        The inverse, for vc, of :meth:`from_lsr` (``v_sun = (U, vc + V, W)``), given the Sun's motion V
        relative to the LSR in the direction of rotation.

        Parameters
        ----------
        solar_V : float, default 12.24
            The Sun's motion relative to the LSR along rotation, km/s (default: Schoenrich, Binney &
            Dehnen 2010, :data:`SCHOENRICH2010_SOLAR_MOTION`).

        Returns
        -------
        float

        Examples
        --------
        >>> round(SolarFrame().lsr_circular_velocity(), 2)
        233.36
        """
        return float(self.v_sun[1]) - float(real_number(solar_V, "solar_V", "km/s", FrameError))

    @property
    def inplane_radius(self):
        """The Sun's cylindrical Galactocentric radius, kpc: sqrt(R0^2 - z_sun^2).

        R0 is the Sun-centre distance (astropy's ``galcen_distance``), which includes the small tilt
        from z_sun; galpy's ``ro`` and a rotation curve's radius are in-plane.

        Examples
        --------
        >>> round(SolarFrame(R0=8.0, z_sun=25.0).inplane_radius, 8)
        7.99996094
        """
        return math.sqrt(self.R0**2 - (self.z_sun / 1000.0) ** 2)

    def reflex_proper_motion(self):
        """Proper motion of the Galactic centre implied by this frame, for comparison with Sgr A*.

        Returns
        -------
        ReflexProperMotion
            mu_l* and mu_b in mas/yr of a source at rest at the Galactocentric origin, seen from the Sun.

        Notes
        -----
        Compare with the measured proper motion of Sgr A*, :data:`SGR_A_STAR_PROPER_MOTION`
        (:func:`reflex_comparison` does).
        """
        matrix, offset = self.galactocentric_transform()
        # The centre relative to the Sun, in ICRS then Galactic axes.
        pos_icrs = matrix.T @ (-offset)
        vel_icrs = matrix.T @ (-np.asarray(self.v_sun))
        pos_gal = ICRS_TO_GALACTIC @ pos_icrs
        vel_gal = ICRS_TO_GALACTIC @ vel_icrs
        distance = float(np.linalg.norm(pos_gal))
        lon = math.atan2(pos_gal[1], pos_gal[0])
        lat = math.asin(pos_gal[2] / distance)
        _, e_l, e_b = tangent_basis(np.array([lon]), np.array([lat]))
        scale = K_KMS_PER_MASYR_KPC * distance
        return ReflexProperMotion(mu_l_star=float(e_l[:, 0] @ vel_gal) / scale, mu_b=float(e_b[:, 0] @ vel_gal) / scale)

    def describe(self):
        """One-line human-readable summary, used in provenance lines."""
        name = f"{self.label}: " if self.label else ""
        vx, vy, vz = self.v_sun
        return f"{name}R0={self.R0:g} kpc, z_sun={self.z_sun:g} pc, v_sun=({vx:g}, {vy:g}, {vz:g}) km/s"


def _sgr_a_star_azimuthal_velocity(R0_kpc):
    """Solar azimuthal velocity implied by Sgr A*'s measured mu_l (:data:`SGR_A_STAR_PROPER_MOTION`)."""
    return -SGR_A_STAR_PROPER_MOTION["mu_l"][0] * K_KMS_PER_MASYR_KPC * R0_kpc


def reflex_comparison(frame):
    """The Galactic centre's reflex proper motion implied by ``frame`` against the measured one of Sgr A*.

    Parameters
    ----------
    frame : SolarFrame

    Returns
    -------
    dict
        ``mu_l``, ``mu_b`` (implied, mas/yr; mu_l is mu_l cos b) and ``sigma_l``, ``sigma_b``: the
        difference implied - measured in units of the measurement's standard deviation
        (:data:`SGR_A_STAR_PROPER_MOTION`).
    """
    reflex = frame.reflex_proper_motion()
    (ml, sl), (mb, sb) = SGR_A_STAR_PROPER_MOTION["mu_l"], SGR_A_STAR_PROPER_MOTION["mu_b"]
    return {
        "mu_l": reflex.mu_l_star,
        "mu_b": reflex.mu_b,
        "sigma_l": (reflex.mu_l_star - ml) / sl,
        "sigma_b": (reflex.mu_b - mb) / sb,
    }


def frame_or_default(frame, *, table=None, error=FrameError):
    """The frame a computation uses: ``frame`` if given, else the table's own, else the default.

    The one rule every core function follows for its ``frame=`` argument. The default is the preset
    :data:`DEFAULT_PRESET` (equal to ``SolarFrame()``, and labelled with the preset's name).

    Parameters
    ----------
    frame : SolarFrame or None
        The frame asked for. Anything else than a :class:`SolarFrame` or None is refused.
    table : astropy Table, optional
        A table whose ``meta["frame"]`` (a :class:`SolarFrame` or its dict form, as mwkin's results
        carry) is used when ``frame`` is None. A frame in the metadata that is not valid is an error,
        never silently replaced by another frame.
    error : type of Exception
        The error class to raise (each module raises its own).

    Returns
    -------
    SolarFrame
    """
    if frame is not None:
        if not isinstance(frame, SolarFrame):
            raise error(f"frame must be a SolarFrame (or None for the default), got {type(frame).__name__}")
        return frame
    meta_frame = getattr(table, "meta", {}).get("frame") if table is not None else None
    if isinstance(meta_frame, SolarFrame):
        return meta_frame
    if isinstance(meta_frame, dict):
        try:
            return SolarFrame.from_dict(meta_frame)
        except ValueError as exc:
            raise error(
                f"the table's meta['frame'] is not a valid solar frame ({exc}); pass frame= "
                "explicitly or fix the metadata"
            ) from None
    return SolarFrame.preset(DEFAULT_PRESET)


_PRESETS = {
    p.name: p
    for p in [
        Preset(
            name=DEFAULT_PRESET,
            description="astropy's Galactocentric defaults since v4.0",
            citation=(
                "R0: GRAVITY Collaboration 2018, A&A 615, L15; v_sun: Drimmel & Poggio 2018, "
                "RNAAS 2, 210; z_sun: Bennett & Bovy 2019, MNRAS 482, 1417"
            ),
            params=dict(DEFAULT_FRAME_PARAMETERS),
        ),
        Preset(
            name="Schoenrich 2010 + GRAVITY 2019",
            description=(
                "solar motion (U, W) relative to the LSR from Schoenrich et al., R0 from GRAVITY 2019, "
                "azimuthal velocity from the Sgr A* proper motion"
            ),
            citation=(
                "U, W: Schoenrich, Binney & Dehnen 2010, MNRAS 403, 1829; R0 = 8.178 kpc: GRAVITY "
                "Collaboration 2019, A&A 625, L10; v_y = k R0 |mu_l(Sgr A*)| with mu_l = -6.411 mas/yr: "
                "Reid & Brunthaler 2020, ApJ 892, 39; z_sun: Bennett & Bovy 2019, MNRAS 482, 1417"
            ),
            params=dict(
                R0=8.178,
                z_sun=20.8,
                v_sun=(
                    SCHOENRICH2010_SOLAR_MOTION[0],
                    _sgr_a_star_azimuthal_velocity(8.178),
                    SCHOENRICH2010_SOLAR_MOTION[2],
                ),
            ),
        ),
        Preset(
            name="astropy pre-v4.0",
            description="astropy's Galactocentric defaults before v4.0",
            citation=(
                "R0: Gillessen et al. 2009, ApJ 692, 1075; v_sun: Schoenrich, Binney & Dehnen 2010 "
                "with vc = 220 km/s (Bovy et al. 2012, ApJ 759, 131); z_sun: Chen et al. 2001, ApJ 553, 184"
            ),
            params=dict(
                R0=8.3,
                z_sun=27.0,
                v_sun=(
                    SCHOENRICH2010_SOLAR_MOTION[0],
                    220.0 + SCHOENRICH2010_SOLAR_MOTION[1],
                    SCHOENRICH2010_SOLAR_MOTION[2],
                ),
            ),
        ),
    ]
}
