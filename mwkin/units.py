"""Unit handling at the public boundary.

Public functions accept either an :class:`astropy.units.Quantity` or a plain number in the documented
default unit. :func:`to_value` turns either into a float64 numpy value in the unit the code works in,
and raises a :class:`UnitMismatchError` that names the argument when the unit cannot be converted.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

__all__ = ["UnitMismatchError", "ImplausibleValueWarning", "to_value", "KMS", "MASYR"]

KMS = u.km / u.s
MASYR = u.mas / u.yr


class UnitMismatchError(ValueError):
    """A value carries a unit that cannot be converted to the one expected."""


class ImplausibleValueWarning(UserWarning):
    """A plain number far outside the physically plausible range for its documented unit.

    Usually a unit slip (``z_sun=0.0208`` typed in kpc where pc is documented, ``R0=8122`` in pc where
    kpc is). The value is used as given; the message names it and the unit it was taken in. Pass an
    astropy Quantity to state the unit explicitly, or filter the warning if the value is meant.
    """


def to_value(value, unit, name):
    """Return ``value`` as float64 in ``unit``.

    Parameters
    ----------
    value : float, array-like or `~astropy.units.Quantity`
        Plain numbers are taken to be in ``unit`` already.
    unit : str or `~astropy.units.UnitBase`
        The unit the caller works in.
    name : str
        Name of the argument or column, used in the error message.

    Returns
    -------
    float or numpy.ndarray
        A Python float for scalar input, otherwise a float64 array.

    Raises
    ------
    UnitMismatchError
        If ``value`` is a Quantity whose unit is not convertible to ``unit``.
    """
    unit = u.Unit(unit)
    if isinstance(value, u.Quantity):
        try:
            out = value.to_value(unit)
        except u.UnitConversionError:
            raise UnitMismatchError(
                f"{name}: got a value in {value.unit!s}, expected a unit convertible to {unit!s}"
            ) from None
    else:
        out = value
    arr = np.asarray(out, dtype=float)
    return float(arr) if arr.ndim == 0 else arr
