"""The standard star-table columns: names, units, descriptions, correlation pairs and other spellings.

The one home for column facts: the catalogue reader, the kinematics, the Oort fit, the demo survey and
the output tables all take their column names from here."""

from __future__ import annotations

import astropy.units as u
import numpy as np

from .units import KMS, MASYR, UnitMismatchError, to_value

VALUE_COLUMNS = ("ra", "dec", "parallax", "pmra", "pmdec", "radial_velocity", "distance")
"""The measured quantities, in the order used throughout mwkin."""

ERROR_COLUMNS = tuple(f"{name}_error" for name in VALUE_COLUMNS)
"""Uncertainty (one standard deviation) of each of :data:`VALUE_COLUMNS`, in the same order."""

CORRELATION_COLUMNS = (
    "ra_dec_corr",
    "ra_parallax_corr",
    "ra_pmra_corr",
    "ra_pmdec_corr",
    "dec_parallax_corr",
    "dec_pmra_corr",
    "dec_pmdec_corr",
    "parallax_pmra_corr",
    "parallax_pmdec_corr",
    "pmra_pmdec_corr",
)
"""The ten correlation coefficients of the five-parameter astrometric solution, in Gaia order."""

ASTROMETRIC_PARAMETERS = ("ra", "dec", "parallax", "pmra", "pmdec")
"""The five astrometric parameters, in the order of the covariance matrices (ra means ra cos(dec))."""

CORRELATION_PAIRS = {
    (i, j): f"{ASTROMETRIC_PARAMETERS[i]}_{ASTROMETRIC_PARAMETERS[j]}_corr"
    for i in range(len(ASTROMETRIC_PARAMETERS))
    for j in range(i + 1, len(ASTROMETRIC_PARAMETERS))
}
"""Index pair (i, j) of :data:`ASTROMETRIC_PARAMETERS` -> correlation column; the same order as
:data:`CORRELATION_COLUMNS`. (With a distance column instead of the parallax, index 2 is the distance.)"""
assert tuple(CORRELATION_PAIRS.values()) == CORRELATION_COLUMNS

REQUIRED_COLUMNS = ("ra", "dec", "pmra", "pmdec")
"""Columns every catalogue needs; it also needs ``parallax`` or ``distance``."""


STANDARD_UNITS = {
    "ra": u.deg,
    "dec": u.deg,
    "parallax": u.mas,
    "pmra": MASYR,
    "pmdec": MASYR,
    "radial_velocity": KMS,
    "distance": u.kpc,
    "ra_error": u.mas,
    "dec_error": u.mas,
    "parallax_error": u.mas,
    "pmra_error": MASYR,
    "pmdec_error": MASYR,
    "radial_velocity_error": KMS,
    "distance_error": u.kpc,
    **{name: u.dimensionless_unscaled for name in CORRELATION_COLUMNS},
}
"""Standard numeric column name -> the unit :func:`read_catalog` returns it in (and assumes for
columns that carry no unit)."""

_STANDARD_NAMES = ("source_id",) + tuple(STANDARD_UNITS)

_DESCRIPTIONS = {
    "ra": "right ascension (ICRS)",
    "dec": "declination (ICRS)",
    "parallax": "parallax",
    "pmra": "proper motion in right ascension, mu_alpha* = mu_alpha cos(dec)",
    "pmdec": "proper motion in declination",
    "radial_velocity": "heliocentric radial velocity",
    "distance": "heliocentric distance",
    "ra_error": "uncertainty (1 sigma) of ra cos(dec)",
    **{f"{name}_error": f"uncertainty (1 sigma) of {name}" for name in VALUE_COLUMNS[1:]},
    # "ra_pmdec_corr" -> "correlation coefficient of ra and pmdec" (no standard name before
    # "_corr" has an underscore except radial_velocity, which has no correlation column)
    **{name: f"correlation coefficient of {name[:-5].replace('_', ' and ', 1)}" for name in CORRELATION_COLUMNS},
}

# Other spellings -> standard name. Matching is case-insensitive, so "PLX" and "plx" are both covered
# by the entry "Plx", and the standard names need no entry ("RA", "DEC", "pmRA" are found as they are);
# entries differing only in case are listed once. Spellings that include a unit
# different from the default are in ALIAS_UNITS as well.
COLUMN_ALIASES = {
    # identifier
    "Source": "source_id",
    "sourceid": "source_id",
    "gaia_source_id": "source_id",
    # position
    "RAdeg": "ra",
    "ra_deg": "ra",
    "RA_ICRS": "ra",
    "alpha": "ra",
    "right_ascension": "ra",
    "DE": "dec",
    "DEdeg": "dec",
    "dec_deg": "dec",
    "DE_ICRS": "dec",
    "delta": "dec",
    "declination": "dec",
    # parallax and distance
    "Plx": "parallax",
    "parallax_mas": "parallax",
    "varpi": "parallax",
    "dist": "distance",
    "d": "distance",
    "distance_kpc": "distance",
    "dist_kpc": "distance",
    "d_kpc": "distance",
    "distance_pc": "distance",
    "dist_pc": "distance",
    "d_pc": "distance",
    # proper motions (mu_alpha* = mu_alpha cos dec in every case)
    "pm_ra": "pmra",
    "pmra_cosdec": "pmra",
    "pm_ra_cosdec": "pmra",
    "mu_alpha_star": "pmra",
    "mu_ra": "pmra",
    "pmDE": "pmdec",
    "pm_dec": "pmdec",
    "mu_delta": "pmdec",
    "mu_dec": "pmdec",
    # radial velocity
    "RV": "radial_velocity",
    "vrad": "radial_velocity",
    "v_rad": "radial_velocity",
    "v_r": "radial_velocity",
    "vr": "radial_velocity",
    "HRV": "radial_velocity",
    "vlos": "radial_velocity",
    "v_los": "radial_velocity",
    "radial_velocity_kms": "radial_velocity",
    "rv_kms": "radial_velocity",
    # uncertainties
    "e_RA_ICRS": "ra_error",
    "e_ra": "ra_error",
    "ra_err": "ra_error",
    "e_DE_ICRS": "dec_error",
    "e_de": "dec_error",
    "e_dec": "dec_error",
    "dec_err": "dec_error",
    "e_Plx": "parallax_error",
    "plx_error": "parallax_error",
    "plx_err": "parallax_error",
    "parallax_err": "parallax_error",
    "e_parallax": "parallax_error",
    "sigma_parallax": "parallax_error",
    "e_pmRA": "pmra_error",
    "pmra_err": "pmra_error",
    "e_pm_ra": "pmra_error",
    "pm_ra_error": "pmra_error",
    "e_pmDE": "pmdec_error",
    "pmdec_err": "pmdec_error",
    "e_pm_dec": "pmdec_error",
    "pm_dec_error": "pmdec_error",
    "e_RV": "radial_velocity_error",
    "rv_error": "radial_velocity_error",
    "rv_err": "radial_velocity_error",
    "e_vrad": "radial_velocity_error",
    "vrad_error": "radial_velocity_error",
    "e_HRV": "radial_velocity_error",
    "radial_velocity_err": "radial_velocity_error",
    "e_dist": "distance_error",
    "e_distance": "distance_error",
    "dist_error": "distance_error",
    "dist_err": "distance_error",
    "distance_err": "distance_error",
    "distance_error_kpc": "distance_error",
    "dist_error_kpc": "distance_error",
    "distance_error_pc": "distance_error",
    "dist_error_pc": "distance_error",
    # correlations, as abbreviated in some catalogue services
    "RADEcor": "ra_dec_corr",
    "RAPlxcor": "ra_parallax_corr",
    "RApmRAcor": "ra_pmra_corr",
    "RApmDEcor": "ra_pmdec_corr",
    "DEPlxcor": "dec_parallax_corr",
    "DEpmRAcor": "dec_pmra_corr",
    "DEpmDEcor": "dec_pmdec_corr",
    "PlxpmRAcor": "parallax_pmra_corr",
    "PlxpmDEcor": "parallax_pmdec_corr",
    "pmRApmDEcor": "pmra_pmdec_corr",
}
"""Other spelling -> standard column name (matched case-insensitively)."""

ALIAS_UNITS = {
    "distance_pc": u.pc,
    "dist_pc": u.pc,
    "d_pc": u.pc,
    "distance_error_pc": u.pc,
    "dist_error_pc": u.pc,
}
"""Spellings whose name states a unit other than the default; a column with such a name and no unit
of its own is read in this unit."""

# Short format names accepted by ``format=`` and the file suffixes that imply them.


PHASE_SPACE_COLUMNS = ("x", "y", "z", "vx", "vy", "vz")
"""Galactocentric Cartesian phase space (kpc, km/s; astropy's Galactocentric axes), as orbits take it."""

_ROT = "in the direction of Galactic rotation"
#: Output column -> (unit, description) of :func:`to_galactocentric`, in output order.
OUTPUT_COLUMNS = {
    "x": (u.kpc, "Galactocentric x (astropy Galactocentric axes; the Sun is near x = -R0)"),
    "y": (u.kpc, f"Galactocentric y, {_ROT} at the Sun"),
    "z": (u.kpc, "Galactocentric z, toward the north Galactic pole (height above the mid-plane)"),
    "vx": (KMS, "Galactocentric velocity along x"),
    "vy": (KMS, "Galactocentric velocity along y"),
    "vz": (KMS, "Galactocentric velocity along z"),
    "R": (u.kpc, "Galactocentric cylindrical radius sqrt(x^2 + y^2)"),
    "phi": (
        u.deg,
        f"Galactocentric azimuth atan2(y, -x): 0 at the Sun, increasing {_ROT} "
        "(astropy's cylindrical phi is atan2(y, x), the other sense)",
    ),
    "v_R": (KMS, "Galactocentric radial velocity (x vx + y vy)/R, positive outward"),
    "v_phi": (
        KMS,
        f"Galactocentric azimuthal velocity (y vx - x vy)/R, positive {_ROT} (the Sun has "
        "about +245 km/s); astropy's cylindrical differential has the opposite sign",
    ),
    "v_z": (KMS, "Galactocentric vertical velocity (= vz)"),
    "X": (u.kpc, "heliocentric Galactic X, toward the Galactic centre (l = 0, b = 0)"),
    "Y": (u.kpc, "heliocentric Galactic Y, toward l = 90 deg (direction of rotation)"),
    "Z": (u.kpc, "heliocentric Galactic Z, toward the north Galactic pole"),
    "U": (KMS, "velocity along X relative to the Sun (positive toward the Galactic centre)"),
    "V": (KMS, "velocity along Y relative to the Sun (positive in the direction of rotation)"),
    "W": (KMS, "velocity along Z relative to the Sun (positive toward the north Galactic pole)"),
    "l": (u.deg, "Galactic longitude (Hipparcos ICRS-to-Galactic matrix)"),
    "b": (u.deg, "Galactic latitude (Hipparcos ICRS-to-Galactic matrix)"),
    "distance": (u.kpc, "heliocentric distance used (see meta['distance'])"),
}


def column_values(table, name, unit=None, *, error=ValueError, label=None):
    """A table column as a float64 array in ``unit``; masked entries become NaN.

    The one way mwkin turns a column into numbers. Plain columns (no unit) are taken to be in ``unit``;
    a plain ``Table`` column that states a unit is converted (100 pc is not 100 kpc).

    Parameters
    ----------
    table : astropy Table or QTable
    name : str
        Column name.
    unit : str or astropy unit, optional
        Unit wanted. None takes the numbers as they are (for dimensionless columns, or columns known
        to be in the standard unit already, as :func:`~mwkin.read_catalog` returns them).
    error : type of Exception
        Raised, naming the column and the unit, when the column is not numeric.
    label : str, optional
        How messages name the column (default: the name itself).

    Returns
    -------
    numpy.ndarray
        1-d float64. A view of the column where possible: callers must not write to it.

    Raises
    ------
    mwkin.units.UnitMismatchError
        If the column's unit cannot be converted to ``unit``.

    Examples
    --------
    >>> from astropy.table import Table
    >>> t = Table({"distance": [100.0, 250.0]}, units={"distance": "pc"})
    >>> column_values(t, "distance", "kpc").tolist()
    [0.1, 0.25]
    """
    col = table[name]
    mask = getattr(col, "mask", None)
    if hasattr(col, "unmasked"):  # astropy Masked Quantity
        col = col.unmasked
    if unit is None:
        data = col.value if isinstance(col, u.Quantity) else np.ma.getdata(col)
        try:
            values = np.asarray(data, dtype=float)
        except (TypeError, ValueError):
            raise error(f"column {name!r} is not numeric") from None
    else:
        if not isinstance(col, u.Quantity) and getattr(col, "unit", None) is not None:
            col = u.Quantity(np.ma.getdata(col), col.unit, copy=False)
        try:
            values = to_value(col if isinstance(col, u.Quantity) else np.ma.getdata(col), unit, label or name)
        except UnitMismatchError:
            raise
        except (TypeError, ValueError):
            raise error(f"column {name!r} is not numeric (expected numbers in {unit})") from None
    values = np.asarray(values, dtype=float).reshape(-1)
    if mask is not None and np.any(mask):
        values = values.copy()
        values[np.asarray(mask).reshape(-1)] = np.nan
    return values


def alias_doc_table():
    """The alias list as a reST table, for docstrings (built from the dict so the two never drift)."""
    by_target: dict[str, list[str]] = {}
    for alias, std in COLUMN_ALIASES.items():
        by_target.setdefault(std, []).append(alias)
    rows = [(f"``{std}``", ", ".join(f"``{a}``" for a in spellings)) for std, spellings in by_target.items()]
    left = max(len(r[0]) for r in rows)
    right = max(len(r[1]) for r in rows)
    rule = f"{'=' * left}  {'=' * right}"
    lines = [rule, f"{'standard name':<{left}}  other spellings", rule]
    lines += [f"{a:<{left}}  {b}" for a, b in rows]
    lines.append(rule)
    return "\n".join(lines)
