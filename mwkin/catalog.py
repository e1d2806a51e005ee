"""Read and check star catalogues.

:func:`read_catalog` takes a file (CSV, ECSV, FITS, VOTable, Parquet), an astropy ``Table``/``QTable``
or a pandas ``DataFrame`` and returns a ``QTable`` with standard column names and units, checked for
values that cannot be right. Everything downstream in mwkin (kinematics, orbits, the Oort fit) reads
only these standard columns.

Standard columns
----------------
The standard names are those of the Gaia archive (``gaia_source``). Columns without a unit are taken
to be in the default unit listed here; columns with a unit are converted to it.

=========================  ==========  ===========================================================
name                       unit        meaning
=========================  ==========  ===========================================================
``source_id``              --          identifier, optional, kept as it is
``ra``, ``dec``            deg         ICRS position
``parallax``               mas         trigonometric parallax (may be zero or negative)
``pmra``                   mas/yr      mu_alpha* = mu_alpha cos(dec), as in Gaia
``pmdec``                  mas/yr      mu_delta
``radial_velocity``        km/s        heliocentric line-of-sight velocity, optional
``distance``               kpc         heliocentric distance, instead of or besides ``parallax``
``ra_error``               mas         uncertainty of ra cos(dec) (Gaia convention)
``dec_error``              mas
``parallax_error``         mas
``pmra_error``             mas/yr
``pmdec_error``            mas/yr
``radial_velocity_error``  km/s
``distance_error``         kpc
``<a>_<b>_corr``           --          the ten Gaia correlation coefficients, see CORRELATION_COLUMNS
=========================  ==========  ===========================================================

Other spellings
---------------
Column names are matched case-insensitively (and ignoring surrounding blanks) against the standard
names (so ``RA``, ``DEC``, ``pmRA``, ``PARALLAX`` are found as they are) and against
:data:`COLUMN_ALIASES`, listed below. ``read_catalog(..., aliases={"my_plx":
"parallax"})`` adds spellings of your own. A few spellings state a unit in the name (for example
``distance_pc``); see :data:`ALIAS_UNITS`.
"""

from __future__ import annotations

import math
import os
import warnings

import numpy as np
import astropy.units as u
from astropy.constants import c as speed_of_light
from astropy.table import QTable, Table
from astropy.utils.masked import Masked

from .distances import SUSPICIOUS_MEDIAN_KPC, warn_if_distances_look_like_pc

__all__ = [
    "CatalogError",
    "read_catalog",
    "RA_LIMIT_DEG",
    "STANDARD_UNITS",
    "CORRELATION_COLUMNS",
    "ERROR_COLUMNS",
    "VALUE_COLUMNS",
    "REQUIRED_COLUMNS",
    "COLUMN_ALIASES",
    "ALIAS_UNITS",
]


class CatalogError(ValueError):
    """A star table that cannot be used as it is.

    Raised by :func:`read_catalog` for every problem it finds: a file it cannot read, missing or
    doubly given columns, units that do not fit, and values out of range. The message names the
    column, the rows and the unit at fault.
    """


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

REQUIRED_COLUMNS = ("ra", "dec", "pmra", "pmdec")
"""Columns every catalogue needs; it also needs ``parallax`` or ``distance``."""

_KMS = u.km / u.s
_MASYR = u.mas / u.yr

STANDARD_UNITS = {
    "ra": u.deg,
    "dec": u.deg,
    "parallax": u.mas,
    "pmra": _MASYR,
    "pmdec": _MASYR,
    "radial_velocity": _KMS,
    "distance": u.kpc,
    "ra_error": u.mas,
    "dec_error": u.mas,
    "parallax_error": u.mas,
    "pmra_error": _MASYR,
    "pmdec_error": _MASYR,
    "radial_velocity_error": _KMS,
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
    **{name: f"correlation coefficient of {name[:-5].replace('_', ' and ', 1)}"
       for name in CORRELATION_COLUMNS},
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
_FORMATS = {
    "csv": "ascii.csv",
    "ecsv": "ascii.ecsv",
    "fits": "fits",
    "votable": "votable",
    "parquet": "parquet",
}
_SUFFIXES = {
    ".csv": "csv",
    ".ecsv": "ecsv",
    ".fits": "fits",
    ".fit": "fits",
    ".fts": "fits",
    ".vot": "votable",
    ".votable": "votable",
    ".xml": "votable",
    ".parquet": "parquet",
    ".pq": "parquet",
}
_COMPRESSION_SUFFIXES = (".gz", ".bz2", ".xz")

_N_SHOWN = 5  # offending rows quoted in an error message
_BOM = "\ufeff"  # the byte order mark, as a character
_TEXT_FORMATS = ("ascii.csv", "ascii.ecsv")  # the formats encoding= applies to
_DEFAULT_ENCODING = "utf-8-sig"  # UTF-8, with a byte order mark (if any) removed

RA_LIMIT_DEG = 1080.0
"""Largest ``|ra|`` accepted (three full turns); values beyond are refused, not wrapped.

Right ascensions in [-180, 180) or shifted by a turn are common and are wrapped into [0, 360), but a
value beyond a few turns is no right ascension at all (a unit mix-up, a corrupted file), and wrapping
it would hide that."""

_C_KMS = float(speed_of_light.to_value(u.km / u.s))  # no radial velocity reaches it
_TINY = np.finfo(np.float64).tiny  # smallest normal float64; nonzero values below it are subnormal


def _key(name):
    """The form of a column name used for matching: blanks and a leading byte order mark removed, lower case.

    A byte order mark (U+FEFF) glued to the first column name is what a UTF-8 file written with a BOM
    gives when it is read without stripping it (e.g. by pandas or by astropy without ``encoding``); the
    name is still recognised, and the renaming is recorded in ``meta["renamed"]``.
    """
    return str(name).strip().lstrip(_BOM).strip().lower()


def _alias_lookup(aliases):
    """Lower-cased spelling -> standard name (or None for "leave this column alone")."""
    lookup = {name: name for name in _STANDARD_NAMES}
    lookup.update({alias.lower(): std for alias, std in COLUMN_ALIASES.items()})
    for alias, std in (aliases or {}).items():
        if std is not None and std not in _STANDARD_NAMES:
            raise CatalogError(
                f"aliases: {alias!r} is mapped to {std!r}, which is not a standard column name; "
                f"standard names are: {', '.join(_STANDARD_NAMES)}"
            )
        lookup[_key(alias)] = std
    return lookup


def _spellings(std):
    """Known spellings of a standard column, for hints in error messages."""
    return [std] + [alias for alias, target in COLUMN_ALIASES.items() if target == std]


def _describe_rows(rows, values, unit):
    """'rows 3, 7 (values 91 deg, -95 deg)', with the first few rows and the total count."""
    shown = rows[:_N_SHOWN]
    unit_text = unit.to_string()
    vals = ", ".join(f"{values[i]:.10g}{' ' + unit_text if unit_text else ''}" for i in shown)
    text = f"row{'s' if len(rows) > 1 else ''} {', '.join(str(i) for i in shown)}"
    if len(rows) > _N_SHOWN:
        text += f", ... ({len(rows)} rows in all)"
    return f"{text} (value{'s' if len(rows) > 1 else ''} {vals}{', ...' if len(rows) > _N_SHOWN else ''})"


def _list_names(names, limit=40):
    text = ", ".join(names[:limit]) or "(none)"
    return text + (f", ... ({len(names)} columns in all)" if len(names) > limit else "")


def _column_label(std, original):
    return f"column {std!r}" if original == std else f"column {std!r} (input column {original!r})"


def _is_blank(value):
    return isinstance(value, (str, bytes)) and not value.strip()


def _text_rows(data):
    """Row numbers of entries that do not read as numbers (blank text is missing, not bad); only used
    to build an error message."""
    bad = []
    for i, value in enumerate(data.tolist()):
        if _is_blank(value):
            continue
        try:
            float(value)
        except (TypeError, ValueError):
            bad.append(i)
    return bad


def _parse_text(data):
    """Float64 values of a column of numbers written as text, or None if an entry is not a number.

    The rule is the one astropy's CSV reader applies to a CSV file, so that the same text gives the
    same numbers whether it comes from a CSV file, a Parquet or FITS string column or a table in
    memory: surrounding blanks are ignored, a blank entry is missing (NaN), anything else must read as
    a number. Objects that are neither text nor numbers (None, for instance) are not numbers.
    """
    if data.dtype.kind == "O":
        out = np.empty(data.shape, dtype=np.float64)
        for i, value in enumerate(data.tolist()):
            if _is_blank(value):
                out[i] = np.nan
                continue
            try:
                out[i] = float(value)
            except (TypeError, ValueError):
                return None
        return out
    try:
        text = np.char.strip(np.char.decode(data, "ascii") if data.dtype.kind == "S" else data)
        return np.where(text == "", "nan", text).astype(np.float64)
    except (TypeError, ValueError):  # UnicodeDecodeError is a ValueError
        return None


def _as_float(col, label, copy):
    """Return (float64 values, unit or None, whether they are ours to modify), or (None, problem, None).

    Masked entries become NaN. With ``copy`` the values are always a fresh copy; without it they
    share the column's memory when it already is unmasked float64 (then they are not ours to modify).
    """
    unit = getattr(col, "unit", None)
    mask = None
    if isinstance(col, Masked):
        mask = np.asarray(col.mask)
        col = col.unmasked
    elif isinstance(col, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(col)
    data = np.asarray(col.value if isinstance(col, u.Quantity) else np.ma.getdata(col))
    if mask is not None and not mask.any():
        mask = None

    if data.ndim != 1:
        return None, f"{label} must hold one number per row, found shape {data.shape}", None
    kind = data.dtype.kind
    if kind not in "iufOUS":
        return None, f"{label} is not numeric: it has data type {data.dtype}", None
    values = None
    if kind in "iufO":
        try:
            # One copy for in-memory input, so that editing the result never edits the input.
            values = np.array(data, dtype=np.float64, copy=True if copy else None)
        except (TypeError, ValueError):
            if kind == "O":
                values = _parse_text(data)
    else:  # text: one rule whatever the source (CSV, Parquet or FITS strings, an in-memory table)
        values = _parse_text(data)
    if values is None:  # text, or objects that are not all numbers
        rows = [i for i in _text_rows(data) if mask is None or not mask[i]]
        if rows:
            entries = data.tolist()  # plain Python values, so the message shows 'n/a', not np.str_('n/a')
            shown = ", ".join(f"{i} ({entries[i]!r})" for i in rows[:_N_SHOWN])
            more = f", ... ({len(rows)} rows in all)" if len(rows) > _N_SHOWN else ""
            if len(rows) == 1:
                return None, f"{label} is not numeric: row {shown} is not a number", None
            return None, f"{label} is not numeric: rows {shown}{more} are not numbers", None
        return None, f"{label} is not numeric: it holds text ({data.dtype}); convert it to numbers first", None
    ours = copy or not np.may_share_memory(values, data)
    if mask is not None:
        if not ours:
            values, ours = values.copy(), True
        values[mask] = np.nan
    return values, unit, ours


def _resolve_unit(std, original, unit, stated, label):
    """Unit the column's numbers are in: its own, else the one stated by the user, the name, or default."""
    if isinstance(unit, u.UnrecognizedUnit):
        return None, f"{label} has unit {unit.to_string()!r}, which astropy does not recognise"
    if unit is not None and unit == u.dimensionless_unscaled:
        unit = None  # an empty unit string means "not stated"
    if unit is None:
        return stated or ALIAS_UNITS.get(_key(original)) or STANDARD_UNITS[std], None
    if stated is not None and not (unit.is_equivalent(stated) and unit.to(stated) == 1.0):
        return None, (
            f"{label} carries the unit {unit.to_string()!r} but units= says {stated.to_string()!r}; "
            f"units= is only for columns without a unit"
        )
    return unit, None


_SCAN_BLOCK = 1 << 16  # values per block of _Summary (512 kB, fits the processor cache)


class _Summary:
    """Lowest and highest value (ignoring NaN), the NaN entries and whether there are subnormal values
    of a column, from one or two passes.

    Most columns have no NaN and nothing out of range: two reductions then settle every check, and
    the row-by-row checks run only for the columns that need them. Subnormal numbers (nonzero, smaller
    in size than the smallest normal float64, ~2.2e-308) need a third pass only over the blocks that
    reach into that band around zero.
    """

    __slots__ = ("lo", "hi", "n_nan", "isnan", "subnormal")

    def __init__(self, values):
        self.isnan = None
        self.subnormal = False
        if values.size == 0:
            self.lo = self.hi = math.nan
            self.n_nan = 0
            return
        lo, hi = math.inf, -math.inf
        scratch = None
        for start in range(0, values.size, _SCAN_BLOCK):  # the reductions while the block is in cache
            block = values[start:start + _SCAN_BLOCK]
            b_lo, b_hi = float(block.min()), float(block.max())  # NaN if any value is NaN
            if math.isnan(b_lo) or math.isnan(b_hi):
                break
            lo, hi = min(lo, b_lo), max(hi, b_hi)
            if b_lo < _TINY and b_hi > -_TINY and not self.subnormal:  # the block reaches near zero
                if scratch is None:
                    scratch = np.empty(min(values.size, _SCAN_BLOCK))
                size = np.abs(block, out=scratch[:block.size])
                if float(size.min()) < _TINY:  # zero or subnormal: tell them apart
                    self.subnormal = _has_subnormal(size)
        else:
            self.n_nan = 0
            self.lo, self.hi = lo, hi
            return
        self.isnan = np.isnan(values)
        self.n_nan = int(np.count_nonzero(self.isnan))
        self.lo, self.hi = float(np.fmin.reduce(values)), float(np.fmax.reduce(values))  # NaN only if all are
        self.subnormal = (self.lo < _TINY and self.hi > -_TINY) and _has_subnormal(np.abs(values))

    def within(self, lo, hi, lo_open=False):
        """True if every non-NaN value is finite, normal (or zero) and in [lo, hi] (lo excluded with
        ``lo_open``)."""
        if math.isnan(self.lo):  # no rows, or only NaN, which always passes
            return True
        above = self.lo > lo if lo_open else self.lo >= lo
        return bool(above and self.hi <= hi and math.isfinite(self.lo) and math.isfinite(self.hi)
                    and not self.subnormal)


def _has_subnormal(size):
    """True if any of the absolute values ``size`` is subnormal (NaN is not)."""
    return bool(np.any((size > 0.0) & (size < _TINY)))


def _subnormal_mask(values):
    size = np.abs(values)
    return (size > 0.0) & (size < _TINY)


def _summaries(columns):
    """:class:`_Summary` of each array, on a few threads for large tables (numpy's reductions
    release the interpreter lock)."""
    out = [None] * len(columns)
    if sum(c.size for c in columns) < (1 << 20):
        return [_Summary(c) for c in columns]
    from ._blocks import run_blocks

    def work(start, stop, scratch):
        for i in range(start, stop):
            out[i] = _Summary(columns[i])

    run_blocks(len(columns), 1, work)
    return out


# Range of the values each kind of column may take (beyond being finite and not subnormal), and
# whether the lower end is excluded; used by _range_problems to skip the row-by-row checks when the
# column is clean.
def _allowed_range(std):
    if std == "ra":
        return -RA_LIMIT_DEG, RA_LIMIT_DEG, False
    if std == "dec":
        return -90.0, 90.0, False
    if std in ERROR_COLUMNS:
        return 0.0, math.inf, False
    if std in CORRELATION_COLUMNS:
        return -1.0, 1.0, False
    if std == "distance":
        return 0.0, math.inf, True
    if std == "radial_velocity":
        return -math.nextafter(_C_KMS, 0.0), math.nextafter(_C_KMS, 0.0), False
    return -math.inf, math.inf, False


def _range_problems(std, values, label, unit, summary=None):
    """Checks of the values themselves (NaN always passes).

    Besides the physical ranges, subnormal numbers are refused in every column: no measurement
    gives a value below ~2.2e-308 in these units, while a damaged file (a corrupted Parquet data
    page, for instance) easily does.
    """
    if summary is not None and summary.within(*_allowed_range(std)):
        return []
    checks = [(np.isinf(values), "infinite values at")]
    if std == "ra":
        checks.append((np.abs(values) > RA_LIMIT_DEG,
                       f"values beyond +-{RA_LIMIT_DEG:g} deg (three turns; not wrapped: no right "
                       f"ascension is written like that, check the unit or the file) at"))
    elif std == "dec":
        checks.append(((values < -90.0) | (values > 90.0), "values outside [-90, 90] deg at"))
    elif std in ERROR_COLUMNS:
        checks.append((values < 0.0, "negative uncertainties at"))
    elif std in CORRELATION_COLUMNS:
        checks.append(((values < -1.0) | (values > 1.0), "correlations outside [-1, 1] at"))
    elif std == "distance":
        checks.append((values <= 0.0, "distances that are not positive at"))
    elif std == "radial_velocity":
        checks.append(((np.abs(values) >= _C_KMS) & np.isfinite(values),
                       f"speeds of light ({_C_KMS:.6g} km/s) or more at"))
    if summary is None or summary.subnormal:
        checks.append((_subnormal_mask(values),
                       "subnormal values (nonzero and below 2.2e-308 in size, which no measurement gives: "
                       "is the file damaged?) at"))
    problems = []
    for bad, what in checks:
        if bad.any():
            rows = np.flatnonzero(bad)
            problems.append(f"{label}: {what} {_describe_rows(rows, values, unit)}")
    return problems


def _wrap_ra(values, summary=None, writable=True):
    """Wrap right ascension into [0, 360) deg; return (values, how many moved).

    Works in place when ``writable``, else on a copy (only if a value has to move).
    """
    if summary is not None and summary.within(0.0, math.nextafter(360.0, 0.0)):
        return values, 0
    n = int(np.count_nonzero(((values < 0.0) | (values >= 360.0)) & np.isfinite(values)))
    if n:
        if not writable:
            values = values.copy()
        # np.mod leaves values already in [0, 360) exactly as they are; infinities stay, to be reported.
        np.mod(values, 360.0, out=values, where=np.isfinite(values))
        values[values == 360.0] = 0.0  # np.mod(-1e-20, 360) rounds to 360
    return values, n


def _load(source, format, encoding=None):
    """Return (table, description, owned, format used or None)."""
    text_only = f"encoding= applies only to CSV and ECSV files (text), got encoding={encoding!r} for "
    if isinstance(source, Table):
        if encoding is not None:
            raise CatalogError(text_only + "an astropy Table")
        return source, "astropy Table", False, None
    if type(source).__module__.split(".")[0] == "pandas" and hasattr(source, "columns"):
        if encoding is not None:
            raise CatalogError(text_only + "a pandas DataFrame")
        duplicated = list(source.columns[source.columns.duplicated()])
        if duplicated:
            raise CatalogError(f"the DataFrame has more than one column named {duplicated}")
        if not all(isinstance(name, str) for name in source.columns):
            source = source.rename(columns=str)
        index = getattr(source.index, "name", None) is not None and source.index.name not in source.columns
        try:
            table = Table.from_pandas(source, index=index)
        except Exception as exc:
            raise CatalogError(f"could not convert the pandas DataFrame to a table: {exc}") from exc
        return table, "pandas DataFrame", False, None
    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        if not os.path.exists(path):
            raise CatalogError(f"file not found: {path}")
        fmt = format or _format_from_suffix(path)
        astropy_format = _FORMATS.get(fmt, fmt)
        if astropy_format == "ascii.csv" and _looks_like_ecsv(path, encoding):
            astropy_format = "ascii.ecsv"
        if encoding is not None and astropy_format not in _TEXT_FORMATS:
            raise CatalogError(text_only + f"{path} (read as {astropy_format})")
        _check_content_matches_format(path, astropy_format)
        _check_header(path, astropy_format, encoding, path)
        if astropy_format == "parquet":
            _verify_parquet_checksums(path)
        return _read_file(path, astropy_format, path, encoding), path, True, astropy_format
    if hasattr(source, "read"):
        if format is None:
            raise CatalogError("a file object needs format= (one of: " + ", ".join(_FORMATS) + ")")
        astropy_format = _FORMATS.get(format, format)
        if encoding is not None and astropy_format not in _TEXT_FORMATS:
            raise CatalogError(text_only + f"a file object read as {astropy_format}")
        if _seekable(source):  # look at the header, then go back to where the reader starts
            position = source.tell()
            try:
                _check_header(source, astropy_format, encoding, "file object")
            finally:
                source.seek(position)
        return _read_file(source, astropy_format, "file object", encoding), "file object", True, format
    raise CatalogError(
        f"cannot read a catalogue from a {type(source).__name__}; give a file path, an astropy Table "
        f"or QTable, or a pandas DataFrame"
    )


def _seekable(fileobj):
    try:
        return bool(fileobj.seekable())
    except (AttributeError, OSError, ValueError):
        return False


#: First bytes of the binary formats (FITS standard 4.0, Sect. 4.4.1.1; Apache Parquet format
#: specification, "PAR1"; the XML declaration or VOTABLE element of a VOTable) [from memory].
_MAGIC = ((b"SIMPLE  =", "fits", "FITS"), (b"PAR1", "parquet", "Parquet"), (b"<?xml", "votable", "XML/VOTable"),
          (b"<VOTABLE", "votable", "VOTable"))


def _check_content_matches_format(path, astropy_format):
    """Refuse a file whose first bytes say it is another format than its name (or format=) says."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(16)
    except OSError:
        return  # the reader reports it
    for magic, fmt, spoken in _MAGIC:
        if head.startswith(magic) and astropy_format != fmt:
            raise CatalogError(f"{path} is read as {astropy_format} (from its name or format=), but its content "
                               f"is a {spoken} file (it starts with {magic!r}): rename it or pass format={fmt!r}")


def _verify_parquet_checksums(path):
    """Check the page checksums a Parquet writer may have stored (pyarrow keeps them optional).

    Damaged data pages in a file with intact metadata otherwise read without error; where the writer
    stored CRC checksums, pyarrow can verify them. Files without checksums pass (the range checks
    still look at the values).
    """
    import pyarrow.parquet as pq

    try:
        pq.read_table(path, page_checksum_verification=True)
    except OSError as exc:
        raise CatalogError(f"{path} is damaged: a Parquet data page fails its checksum ({exc}); nothing was "
                           "read from it") from None
    except Exception:  # noqa: BLE001 - any other problem is reported by the reader with its own message
        return


def _read_file(source, astropy_format, description, encoding=None):
    kwargs = {}
    if astropy_format in _TEXT_FORMATS:
        kwargs["encoding"] = encoding or _DEFAULT_ENCODING
    try:
        return Table.read(source, format=astropy_format, **kwargs)
    except UnicodeDecodeError as exc:
        raise CatalogError(_decode_problem(description, exc, kwargs["encoding"], encoding is None)) from None
    except Exception as exc:
        raise CatalogError(f"could not read {description} as {astropy_format}: {exc}") from exc


def _decode_problem(description, exc, used, default):
    """Message for a text file that is not in the encoding it was read with."""
    bad = exc.object[exc.start:exc.start + 4] if isinstance(exc.object, bytes) else b""
    where = ""
    if isinstance(exc.object, bytes) and len(exc.object) > exc.start:
        line = exc.object.count(b"\n", 0, exc.start) + 1
        where = f" at line {line} (byte {exc.start} of the text)"
    if bad[:2] in (b"\xff\xfe", b"\xfe\xff") and exc.start == 0:
        hint = "it starts with a UTF-16 byte order mark: pass encoding='utf-16'"
    elif default:
        hint = ("it is not UTF-8, so it is probably in a legacy 8-bit encoding such as Latin-1 "
                "(ISO-8859-1) or Windows-1252: pass encoding='latin-1' (or the file's real encoding)")
    else:
        hint = "pass the file's real encoding as encoding="
    return (f"could not read {description} as {used} text: byte {bad[:1]!r}{where} cannot be decoded "
            f"({exc.reason}); {hint}")


def _duplicates(names):
    """{name: [0-based positions]} for every name given more than once (blanks around it ignored)."""
    positions = {}
    for i, name in enumerate(names):
        positions.setdefault(str(name).strip().lstrip(_BOM), []).append(i)
    return {name: where for name, where in positions.items() if len(where) > 1}


def _header_names(source, astropy_format, encoding):
    """Column names as written in the file (before any reader renames a repeated one), or None.

    A reader that meets a repeated column name renames the later one (astropy's CSV, ECSV and
    VOTable readers append ``_1``, ``_2``) or fails with an obscure message (Parquet, FITS), so the
    names are taken from the header itself: the first line of a CSV file, the column line of an ECSV
    file, the TTYPEn keywords of the first FITS table, the FIELDs of the first VOTable table (their
    IDs where given, as astropy uses them), the Parquet schema.
    """
    if astropy_format in _TEXT_FORMATS:
        return _text_header_names(source, astropy_format, encoding or _DEFAULT_ENCODING)
    if astropy_format == "parquet":
        import pyarrow.parquet as pq

        return list(pq.read_schema(source).names)
    if astropy_format == "fits":
        from astropy.io import fits

        with fits.open(source) as hdus:
            for hdu in hdus:
                if isinstance(hdu, (fits.BinTableHDU, fits.TableHDU)):
                    header = hdu.header
                    return [str(header.get(f"TTYPE{i}", "")) for i in range(1, header.get("TFIELDS", 0) + 1)]
        return None
    if astropy_format == "votable":
        return _votable_field_names(source)
    return None


def _text_header_names(source, astropy_format, encoding):
    """The column line of a CSV file (its first non-blank line; astropy's CSV reader knows no comment
    lines) or of an ECSV file (the first line after the '#' header, split at the delimiter the
    header states, a blank by default)."""
    import csv

    from astropy.utils.data import get_readable_fileobj

    ecsv = astropy_format == "ascii.ecsv"
    delimiter = " " if ecsv else ","
    with get_readable_fileobj(source, encoding=encoding) as fh:
        for line in fh:
            if ecsv and line.lstrip().startswith("#"):
                stated = line.lstrip().lstrip("#").strip()
                if stated.startswith("delimiter:"):
                    delimiter = stated.split(":", 1)[1].strip().strip("'\"") or " "
                continue
            if line.strip():
                return next(csv.reader([line.rstrip("\r\n")], delimiter=delimiter, skipinitialspace=True))
    return None


def _votable_field_names(source):
    """Names astropy gives the columns of the first VOTable table: each FIELD's ID, else its name."""
    import xml.etree.ElementTree as ElementTree

    from astropy.utils.data import get_readable_fileobj

    names, depth = [], 0
    with get_readable_fileobj(source, encoding="binary") as fh:
        for event, element in ElementTree.iterparse(fh, events=("start", "end")):
            tag = element.tag.rsplit("}", 1)[-1]
            if tag == "TABLE":
                depth += 1 if event == "start" else -1
                if event == "end":
                    break
            elif tag == "FIELD" and event == "start" and depth == 1:
                names.append(element.get("ID") or element.get("name") or "")
            elif tag == "DATA" and event == "start":
                break
    return names


def _check_header(source, astropy_format, encoding, description):
    """Refuse a file whose header gives one column name twice (see :func:`_header_names`)."""
    try:
        names = _header_names(source, astropy_format, encoding)
    except Exception:  # noqa: BLE001 - an unreadable file is reported by the reader itself, with its message
        return
    repeated = _duplicates(names or [])
    if repeated:
        text = "; ".join(f"{name!r} is columns {' and '.join(str(i + 1) for i in where)}"
                         for name, where in repeated.items())
        raise CatalogError(
            f"{description}: the header gives a column name more than once ({text}, counting from 1); "
            f"a reader would keep the first and silently rename the others. Rename or drop the "
            f"repeated columns first"
        )


def _format_from_suffix(path):
    name = path.lower()
    for suffix in _COMPRESSION_SUFFIXES:
        if name.endswith(suffix):
            name = name[: -len(suffix)]
    ext = os.path.splitext(name)[1]
    if ext not in _SUFFIXES:
        raise CatalogError(
            f"cannot tell the format of {path!r} from its suffix {ext!r}; known suffixes: "
            f"{', '.join(_SUFFIXES)}; or pass format= (one of {', '.join(_FORMATS)}, or any astropy format)"
        )
    return _SUFFIXES[ext]


def _looks_like_ecsv(path, encoding=None):
    """Gaia archive 'CSV' downloads may really be ECSV, which keeps the units."""
    from astropy.utils.data import get_readable_fileobj

    try:
        with get_readable_fileobj(path, encoding=encoding or _DEFAULT_ENCODING) as fh:
            return fh.readline().startswith("# %ECSV")
    except (OSError, UnicodeDecodeError, LookupError):
        return False


def read_catalog(source, *, format=None, aliases=None, units=None, encoding=None):
    """Read a star catalogue into a table with standard columns, units and checks.

    Parameters
    ----------
    source : str, path-like, `~astropy.table.Table`, `~astropy.table.QTable` or pandas.DataFrame
        A file (CSV, ECSV, FITS, VOTable or Parquet, told apart by the suffix; ``.gz``, ``.bz2`` and
        ``.xz`` compression is allowed where astropy reads it) or a table in memory. An open file
        object (opened in binary mode) needs ``format``.
    format : str, optional
        Overrides the suffix: ``"csv"``, ``"ecsv"``, ``"fits"``, ``"votable"``, ``"parquet"``, or any
        format name `astropy.table.Table.read` understands.
    aliases : dict, optional
        ``{your_column_name: standard_name}`` spellings added to :data:`COLUMN_ALIASES` (and taking
        precedence over it). Map a column to ``None`` to keep it out of the standard columns, e.g.
        when a table has two right ascension columns.
    units : dict, optional
        ``{column: unit}`` (standard or input name; unit as a string or astropy unit) for columns that
        carry no unit, e.g. ``{"parallax": "arcsec"}``.
    encoding : str, optional
        Text encoding of a CSV or ECSV file, e.g. ``"latin-1"`` (any name Python's codecs know).
        Default: UTF-8, with a leading byte order mark removed. Not allowed for other sources.

    Returns
    -------
    `~astropy.table.QTable`
        Same rows in the same order as the input. Standard columns are renamed, converted to float64
        and :data:`STANDARD_UNITS` (correlations as dimensionless Quantities); other columns are
        passed through unchanged. Added: ``radial_velocity`` (all NaN) if the input had none, and a
        boolean ``has_nan`` column. ``meta`` keeps the input's metadata plus

        - ``mwkin_source``: the path, ``"astropy Table"``, ``"pandas DataFrame"`` or ``"file object"``;
        - ``renamed``: ``{input name: standard name}`` for every column that was renamed;
        - ``nan_counts``: ``{standard column: number of NaN values}``;
        - ``nan_flag_columns``: the columns ``has_nan`` looks at;
        - ``distance_column``: ``"distance"`` if the input has one, else ``"parallax"``;
        - ``filled_with_nan``: the columns added filled with NaN (``["radial_velocity"]`` or ``[]``);
        - ``ra_wrapped``: how many right ascensions were wrapped into [0, 360) deg.

    Raises
    ------
    CatalogError
        If the file cannot be read (a text file not in the encoding, named with the first byte that
        does not decode and a likely encoding); the file's header gives one column name twice (CSV,
        ECSV, FITS, VOTable, Parquet; a DataFrame with two columns of one name likewise); a required
        column is missing (with the likely cause when the file uses ``;``, tab or ``|`` as delimiter);
        two input columns give the same standard column (e.g. ``pmra`` and ``pm_ra``); a column is not
        numeric; a unit is unknown or cannot be converted to the standard unit; or any value is out of
        range: ``|ra|`` beyond :data:`RA_LIMIT_DEG`, ``dec`` outside [-90, 90] deg, an uncertainty
        below zero, a correlation outside [-1, 1], a ``distance`` of zero or less, a
        ``radial_velocity`` of the speed of light or more, an infinite value, or a subnormal value
        (nonzero and below ~2.2e-308 in size; no measurement gives one, a damaged file does). Problems
        with values are collected and reported together, each with the column, the first few
        offending rows (0-based positions), their count and the values in standard units.

    Warns
    -----
    mwkin.distances.DistanceUnitWarning
        If a ``distance`` column has no stated unit (neither its own, ``units=`` nor its name) and
        its median exceeds :data:`mwkin.distances.SUSPICIOUS_MEDIAN_KPC` (50 kpc): probably pc.

    Notes
    -----
    - Required: ``ra``, ``dec``, ``pmra``, ``pmdec`` and ``parallax`` or ``distance``. Optional
      uncertainty and correlation columns are kept when present and never made up.
    - ``pmra`` is always mu_alpha* = mu_alpha cos(dec) (Gaia convention), whatever its input name; a
      column of mu_alpha without the cos(dec) factor must be converted first. ``ra_error`` is the
      uncertainty of ra cos(dec), in mas.
    - Units: a column that carries a unit (ECSV, FITS, VOTable, Parquet written by astropy, a
      ``QTable`` Quantity) is converted to the standard unit; an empty unit counts as none. A column
      without one is taken in the unit given by ``units``, else the unit its name states
      (:data:`ALIAS_UNITS`, e.g. ``distance_pc``), else the standard unit. CSV files and DataFrames
      carry no units.
    - A finite ``ra`` with ``|ra| <= RA_LIMIT_DEG`` (1080 deg, three turns) is accepted and wrapped
      into [0, 360) deg; larger values are refused, never wrapped (``ra = 1e20`` is no direction).
      Parallaxes may be zero or negative (as measured); distances may not.
    - Numbers written as text (a CSV field, a Parquet, FITS or in-memory string column) follow one
      rule, whatever the source: blanks around them are ignored, a blank entry is missing (NaN), any
      other entry that does not read as a number is refused, naming the column and the rows.
    - Column names are matched ignoring a leading byte order mark; a CSV/ECSV file that starts with
      a UTF-8 byte order mark is read as if it had none.
    - NaN (and masked or empty entries, which become NaN) are allowed and never dropped. ``has_nan``
      is True where any of ``ra``, ``dec``, ``pmra``, ``pmdec``, the distance column (``distance``
      when present, else ``parallax``) or -- only if the input has one with at least one value --
      ``radial_velocity`` is NaN. An input ``has_nan`` column is replaced, so reading a table this
      function returned gives the same table again.
    - Standard columns are copied once (so editing the result never changes the input); the other
      columns of an in-memory input share its data.

    Examples
    --------
    >>> from astropy.table import Table
    >>> t = Table({"RA_ICRS": [10.0, -30.0], "DE_ICRS": [5.0, -60.0], "Plx": [2.0, 0.5],
    ...            "pmRA": [1.0, -3.0], "pmDE": [0.5, 2.0]})
    >>> stars = read_catalog(t)
    >>> stars["ra"]
    <Quantity [ 10., 330.] deg>
    >>> stars.meta["renamed"]["Plx"], stars["parallax"].unit
    ('parallax', Unit("mas"))
    >>> stars.meta["filled_with_nan"], bool(stars["has_nan"].any())
    (['radial_velocity'], False)
    """
    return _read_catalog(source, format, aliases, units, copy=True, encoding=encoding)


def _read_catalog(source, format=None, aliases=None, units=None, copy=True, encoding=None):
    """:func:`read_catalog`; ``copy=False`` lets the standard columns share an in-memory input's memory.

    For callers that only read the standard columns and never hand them back to the user
    (:func:`mwkin.kinematics.to_galactocentric`): the checks and the returned values are the same,
    only the copy is left out where no value has to change (unit conversion, masks and wrapped right
    ascensions still give copies, never edits of the input).
    """
    table, description, owned, used_format = _load(source, format, encoding)
    lookup = _alias_lookup(aliases)

    # Which input column is which standard column.
    lowered = {_key(name): name for name in table.colnames}
    for alias in aliases or {}:
        if _key(alias) not in lowered:
            raise CatalogError(
                f"aliases: there is no column {alias!r}; columns found: {_list_names(table.colnames)}"
            )
    found = {}
    for name in table.colnames:
        std = lookup.get(_key(name))
        if std is not None:
            found.setdefault(std, []).append(name)
    clashes = {std: names for std, names in found.items() if len(names) > 1}
    if clashes:
        raise CatalogError(
            f"{description}: "
            + "; ".join(
                f"columns {' and '.join(repr(n) for n in names)} all give the standard column {std!r}"
                for std, names in clashes.items()
            )
            + ". Keep one: rename or drop the others, or pass aliases={name: None} for the ones to ignore"
        )
    original_of = {std: names[0] for std, names in found.items()}
    standard_of = {orig: std for std, orig in original_of.items()}

    missing = [name for name in REQUIRED_COLUMNS if name not in original_of]
    if "parallax" not in original_of and "distance" not in original_of:
        missing.append("parallax or distance")
    if missing:
        hints = "; ".join(
            f"{m}: {', '.join(sum((_spellings(part) for part in m.split(' or ')), []))}" for m in missing
        )
        message = (f"missing required column(s): {', '.join(missing)}. Columns found: "
                   f"{_list_names(table.colnames)}. Names recognised (any case): {hints}. "
                   f"Pass aliases={{'your_column': 'standard_name'}} for other names")
        cause = _missing_column_cause(table.colnames, lookup, description)
        # The likely cause goes first: it is the fix, and the list of recognised names is long.
        raise CatalogError(f"{cause[2:]}. Hence: {message}" if cause else message)

    stated_units = {}
    for key, unit in (units or {}).items():
        std = key if key in STANDARD_UNITS else standard_of.get(key)
        if std is None or std not in original_of:
            raise CatalogError(
                f"units: {key!r} is not a numeric standard column of this table; its standard "
                f"columns are: {', '.join(s for s in original_of if s in STANDARD_UNITS)}"
            )
        try:
            stated_units[std] = u.Unit(unit)
        except (ValueError, TypeError) as exc:
            raise CatalogError(f"units: {unit!r} given for {key!r} is not a unit: {exc}") from None

    # Convert and check every standard numeric column; collect all problems before raising, in
    # column order. The scans of the values (the costly part for large tables) run on a few threads.
    column_problems = []
    pending = []
    for std, original in original_of.items():
        if std == "source_id":
            continue
        label = _column_label(std, original)
        found_here = []
        column_problems.append(found_here)
        values, unit, ours = _as_float(table[original], label, copy and not owned)
        if values is None:
            found_here.append(unit)
            continue
        writable = ours or owned
        # The unit is an assumption when neither the column, units= nor the name states one.
        assumed = ((unit is None or unit == u.dimensionless_unscaled) and std not in stated_units
                   and _key(original) not in ALIAS_UNITS)
        unit, problem = _resolve_unit(std, original, unit, stated_units.get(std), label)
        if problem:
            found_here.append(problem)
            continue
        target = STANDARD_UNITS[std]
        try:
            scale = unit.to(target)
        except u.UnitConversionError:
            found_here.append(
                f"{label} has unit {unit.to_string()!r}, which cannot be converted to the expected "
                f"unit {target.to_string() or 'dimensionless'!r}"
            )
            continue
        if scale != 1.0:
            if writable:
                values *= scale
            else:
                values, writable = values * scale, True
        pending.append((std, label, values, writable, target, found_here, assumed))
    converted = {}
    summaries = {}
    ra_wrapped = 0
    unit_assumed = {}
    for (std, label, values, writable, target, found_here, assumed), summary in zip(
            pending, _summaries([item[2] for item in pending])):
        unit_assumed[std] = (label, assumed)
        found_here.extend(_range_problems(std, values, label, target, summary))
        if std == "ra" and not found_here:
            # Checked before wrapping: absurd values are refused, never wrapped into range.
            values, ra_wrapped = _wrap_ra(values, summary, writable)
        converted[std] = values
        summaries[std] = summary
    problems = [problem for found_here in column_problems for problem in found_here]
    if problems:
        raise CatalogError(
            f"{len(problems)} problem{'s' if len(problems) > 1 else ''} in the catalogue:\n  - "
            + "\n  - ".join(problems)
        )
    if "distance" in converted:
        label, assumed = unit_assumed["distance"]
        _warn_if_distance_in_pc("distance", label, converted["distance"], summaries["distance"], not assumed)
    if "radial_velocity" in converted and unit_assumed.get("radial_velocity", (None, False))[1]:
        _warn_if_velocities_look_like_m_per_s(unit_assumed["radial_velocity"][0], converted["radial_velocity"])

    n_rows = len(table)
    filled = []
    if "radial_velocity" not in converted:
        converted["radial_velocity"] = np.full(n_rows, np.nan)
        filled.append("radial_velocity")
    distance_column = "distance" if "distance" in converted else "parallax"
    flag_columns = [*REQUIRED_COLUMNS, distance_column]
    # An all-NaN radial velocity column (e.g. our own filled one, read back) carries no information;
    # flagging every row for it would make has_nan useless.
    if not filled and summaries["radial_velocity"].n_nan != n_rows:
        flag_columns.append("radial_velocity")
    nan_counts = {}
    has_nan = np.zeros(n_rows, dtype=bool)
    for std in converted:
        summary = summaries.get(std)
        nan_counts[std] = n_rows if summary is None else summary.n_nan  # no summary: our all-NaN column
        if std in flag_columns and summary is not None and summary.n_nan:
            has_nan |= summary.isnan

    names, columns = [], []
    for name in table.colnames:
        std = standard_of.get(name)
        if name == "has_nan":
            continue
        if std in converted:
            names.append(std)
            columns.append(_standard_column(std, converted[std]))
        else:
            if std is None and name in original_of:
                raise CatalogError(
                    f"column {name!r} is left alone (aliases maps it to None) but another column "
                    f"becomes the standard column of that name; rename {name!r} first"
                )
            names.append(std or name)
            columns.append(table[name])
    for std in filled:
        names.append(std)
        columns.append(_standard_column(std, converted[std]))
    names.append("has_nan")
    columns.append(has_nan)

    meta = dict(table.meta)
    meta.update(
        mwkin_source=description,
        renamed={orig: std for std, orig in original_of.items() if orig != std},
        nan_counts=nan_counts,
        nan_flag_columns=flag_columns,
        distance_column=distance_column,
        filled_with_nan=filled,
        ra_wrapped=ra_wrapped,
    )
    if used_format is not None:
        meta["mwkin_format"] = used_format
    out = QTable(columns, names=names, meta=meta, copy=False)
    out["has_nan"].description = "True where a value needed for the kinematics is NaN"
    return out


_OTHER_DELIMITERS = {";": "';' (semicolon)", "\t": "a tab", "|": "'|' (vertical bar)"}


def _missing_column_cause(names, lookup, description):
    """The likely reason why required columns were not found, as a sentence to add (or "")."""
    for delimiter, spoken in _OTHER_DELIMITERS.items():
        glued = [name for name in names if delimiter in name]
        if glued and any(_key(part) in lookup for name in glued for part in name.split(delimiter)):
            return (f". The likely cause: {description} separates its columns with {spoken}, not commas, "
                    f"so a header such as {glued[0][:60]!r} was read as one column name. read_catalog reads "
                    f"comma-separated CSV: convert the file, or read it with astropy "
                    f"(Table.read(path, format='ascii.csv', delimiter={delimiter!r})) and pass the table")
    return ""


#: Median |radial velocity| (km/s) above which a column without a unit is probably in m/s (our choice:
#: stars near the Sun move at tens of km/s, the fastest known stars at about 1,000 km/s).
SUSPICIOUS_MEDIAN_RV_KMS = 1000.0


class VelocityUnitWarning(UserWarning):
    """Radial velocities without a stated unit that look like m/s although km/s is assumed."""


def _warn_if_velocities_look_like_m_per_s(label, values):
    finite = np.abs(values[np.isfinite(values)])
    if finite.size and float(np.median(finite)) > SUSPICIOUS_MEDIAN_RV_KMS:
        warnings.warn(f"{label}: the median |radial velocity| is {float(np.median(finite)):.6g}, taken as km/s "
                      f"(no unit given), i.e. beyond {SUSPICIOUS_MEDIAN_RV_KMS:g} km/s; are the velocities in "
                      "m/s? If so, state the unit (units={'radial_velocity': 'm/s'})", VelocityUnitWarning,
                      stacklevel=4)


def _warn_if_distance_in_pc(std, label, values, summary, unit_stated):
    """Warn when a distance column without a unit looks like pc although kpc is assumed."""
    if std != "distance" or unit_stated or not summary.hi > SUSPICIOUS_MEDIAN_KPC:
        return
    warn_if_distances_look_like_pc(values, label, "kpc (no unit given)", "units={'distance': 'pc'}")


def _standard_column(std, values):
    column = u.Quantity(values, STANDARD_UNITS[std], copy=False)
    column.info.description = _DESCRIPTIONS[std]
    return column


def _alias_doc_table():
    """The alias list, for the module docstring (built from the dict so the two never drift)."""
    by_target = {}
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


if __doc__ is not None:  # python -OO strips docstrings
    __doc__ += "\n" + _alias_doc_table() + "\n"
