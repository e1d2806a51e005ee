"""Checks of configuration values at the public boundary: one home for every ``from_dict`` and constructor.

Configuration reaches mwkin as Python values and as JSON (``to_dict`` / ``from_dict``, widget configs,
the command line). JSON and user code can carry the wrong *type* for a value that numpy would quietly
accept: ``"245"`` turns into ``(2, 4, 5)`` under ``tuple()`` and into ``245.0`` under ``float()``,
``True`` into ``1.0``, ``[[1, 2, 3]]`` into a one-element vector. The helpers here refuse all of these
with an error that names the key, the value and the unit, and raise the caller's own error class
(:class:`~mwkin.frames.FrameError`, :class:`~mwkin.potentials.PotentialError`, ...), so each module keeps
its documented exceptions while the rules live in one place.

Values that are well-formed but physically implausible (a Sun--centre distance of 8122 kpc, a height
of 0.0208 pc) are not errors -- someone may mean them -- but usually betray a unit slip; they get an
:class:`~mwkin.units.ImplausibleValueWarning` through :func:`warn_implausible`.
"""

from __future__ import annotations

import math
import numbers
import os
import sys
import types
import warnings
from collections.abc import Mapping

import astropy.units as u
import numpy as np

from .units import ImplausibleValueWarning, to_value

__all__ = [
    "require_mapping",
    "check_keys",
    "real_number",
    "real_vector",
    "text",
    "unit_text",
    "is_plain",
    "warn_implausible",
]

_PACKAGE_DIR = os.path.dirname(os.path.abspath(__file__)) + os.sep
_COUNT_WORDS = {1: "one", 2: "two", 3: "three", 4: "four"}


def unit_text(unit):
    """How a unit is written in messages: ``"kpc"``, ``"km/s"``, or ``"dimensionless"`` for none."""
    if unit in (None, "") or u.Unit(unit) == u.dimensionless_unscaled:
        return "dimensionless"
    # A unit written as text is quoted as written ("km/s", "Msun"), not as astropy spells it.
    return unit if isinstance(unit, str) else u.Unit(unit).to_string()


def _describe(value):
    """``'245' (a str)``: the value and its type, short enough for one line."""
    shown = repr(value)
    if len(shown) > 60:
        shown = shown[:57] + "..."
    return f"{shown} (a {type(value).__name__})"


def require_mapping(data, what, error):
    """A shallow ``dict`` copy of ``data``, or ``error`` naming ``what`` when it is not a mapping.

    Parameters
    ----------
    data : object
        The value that should be a dict (a JSON object).
    what : str
        What it describes, e.g. ``"solar frame"`` or ``"potential 'disc'"``.
    error : type
        Exception class to raise (a ValueError subclass).

    Returns
    -------
    dict
    """
    if not isinstance(data, Mapping):
        raise error(f"{what} must be a dict (a JSON object), got {_describe(data)}")
    keys = [k for k in data if not isinstance(k, str)]
    if keys:
        raise error(f"{what}: keys must be strings, got {keys[:5]!r}")
    return dict(data)


def check_keys(data, what, error, *, required=(), optional=()):
    """Refuse unknown and missing keys of a mapping, naming them and (when given) their units.

    Parameters
    ----------
    data : Mapping
    what : str
        Used in the message, e.g. ``"solar frame"``.
    error : type
        Exception class to raise.
    required, optional : iterable of str, or dict of key -> unit
        The keys that must be present and those that may be. A dict also states each key's unit,
        which the message for a missing key quotes.

    Raises
    ------
    error
        Unknown keys (usually typos) are reported first, then missing ones.
    """
    units: dict = {}
    for group in (required, optional):
        if isinstance(group, Mapping):
            units.update(group)
    known = list(required) + list(optional)
    unknown = sorted(set(data) - set(known))
    if unknown:
        raise error(f"unknown {what} key(s) {unknown}; expected {sorted(known)}")
    missing = [k for k in required if k not in data]
    if missing:
        named = ", ".join(f"{k!r}" + (f" ({units[k]})" if units.get(k) else "") for k in missing)
        raise error(f"{what}: missing required key(s) {named}")


def _plain_real(value):
    """Whether ``value`` is a real number that is not a boolean (numpy scalars included)."""
    if isinstance(value, (bool, np.bool_)):
        return False
    if isinstance(value, np.ndarray):
        return value.ndim == 0 and value.dtype.kind in "iuf"
    return isinstance(value, numbers.Real)


def is_plain(value):
    """True when ``value`` carries no unit of its own (a plain number or a sequence of them)."""
    return not isinstance(value, u.Quantity) and not (
        isinstance(value, (list, tuple)) and any(isinstance(v, u.Quantity) for v in value)
    )


def real_number(value, name, unit, error, *, finite=True):
    """One real number in ``unit``: a plain int/float (taken as ``unit``) or a scalar Quantity.

    Parameters
    ----------
    value : object
    name : str
        Key or argument name for the message.
    unit : str or astropy unit
        The working unit ("" for dimensionless).
    error : type
        Exception class for a wrong type or a non-finite value.
    finite : bool, default True
        Also refuse inf and NaN.

    Returns
    -------
    float

    Raises
    ------
    error
        For strings, booleans, None, sequences, complex numbers, arrays with more than one value, and
        (with ``finite``) inf/NaN. A Quantity in an unconvertible unit raises
        :class:`~mwkin.units.UnitMismatchError` (also a ValueError).
    """
    unit = u.dimensionless_unscaled if unit in (None, "") else unit
    shown = unit_text(unit)
    if isinstance(value, u.Quantity):
        if value.ndim != 0 or value.dtype.kind not in "iuf":
            raise error(f"{name} must be a single real number in {shown}, got {_describe(value)}")
        out = to_value(value, unit, name)
    elif _plain_real(value):
        out = float(value)
    else:
        raise error(f"{name} must be a real number in {shown}, got {_describe(value)}")
    if finite and not math.isfinite(out):
        raise error(f"{name} must be finite, got {out} {shown}")
    return out


def real_vector(value, name, unit, error, *, components, finite=True):
    """A fixed-length vector of real numbers in ``unit`` (a sequence or a 1-D Quantity).

    Parameters
    ----------
    value : object
    name : str
    unit : str or astropy unit
    error : type
    components : tuple of str
        Names of the components, e.g. ``("vx", "vy", "vz")``; fixes the length.
    finite : bool, default True

    Returns
    -------
    tuple of float

    Raises
    ------
    error
        For strings (which ``tuple()`` would take apart character by character), booleans, mappings,
        nested sequences, the wrong number of components, or a component that is not a finite real
        number (named as ``name[i]``).
    """
    n = len(components)
    shown = unit_text(unit)
    expected = f"{name} must have {_COUNT_WORDS.get(n, n)} components ({', '.join(components)}) in {shown}"
    if isinstance(value, u.Quantity):
        if value.ndim != 1:
            raise error(f"{expected}, got {_describe(value)}")
        values = to_value(value, unit, name)
        items = [float(v) for v in values]
    elif (
        isinstance(value, (str, bytes, Mapping, set, frozenset))
        or _plain_real(value)
        or value is None
        or isinstance(value, (bool, np.bool_))
    ):
        raise error(f"{expected}, got {_describe(value)}")
    else:
        if isinstance(value, np.ndarray) and value.ndim != 1:
            raise error(f"{expected}, got an array of shape {value.shape}")
        try:
            items = list(value)
        except TypeError:
            raise error(f"{expected}, got {_describe(value)}") from None
    if len(items) != n:
        raise error(f"{expected}, got {len(items)}: {_describe(value)}")
    return tuple(
        real_number(v, f"{name}[{i}] ({components[i]})", unit, error, finite=finite) for i, v in enumerate(items)
    )


def text(value, name, error):
    """A string value, or ``error`` naming ``name`` and the value."""
    if not isinstance(value, str):
        raise error(f"{name} must be a string, got {_describe(value)}")
    return value


def _caller_stacklevel():
    # The first frame outside mwkin (and outside dataclass-generated __init__ code, whose file is
    # "<string>"), so the warning points at the user's line, not ours.
    frame: types.FrameType | None = sys._getframe(2)
    level = 2
    while frame is not None:
        filename = frame.f_code.co_filename
        inside = (
            filename.startswith(_PACKAGE_DIR)
            or (filename == "<string>" and frame.f_code.co_name == "__init__")
            # a value set on a widget state reaches us through traitlets' validation machinery
            or f"{os.sep}traitlets{os.sep}" in filename
        )
        if not inside:
            break
        frame = frame.f_back
        level += 1
    return level


def warn_implausible(message):
    """Issue an :class:`~mwkin.units.ImplausibleValueWarning` pointing at the caller outside mwkin."""
    warnings.warn(message, ImplausibleValueWarning, stacklevel=_caller_stacklevel())
