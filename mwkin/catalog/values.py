"""Column values: matching names, parsing numbers, resolving units, and checking ranges, naming column, rows and unit."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
from astropy.constants import c as speed_of_light
from astropy.utils.masked import Masked

from ..columns import (
    _STANDARD_NAMES,
    ALIAS_UNITS,
    COLUMN_ALIASES,
    CORRELATION_COLUMNS,
    ERROR_COLUMNS,
    STANDARD_UNITS,
)

_N_SHOWN = 5  # offending rows quoted in an error message
_BOM = "\ufeff"  # the byte order mark, as a character


class CatalogError(ValueError):
    """A star table that cannot be used as it is.

    Raised by :func:`read_catalog` for every problem it finds: a file it cannot read, missing or
    doubly given columns, units that do not fit, and values out of range. The message names the
    column, the rows and the unit at fault.
    """


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
            block = values[start : start + _SCAN_BLOCK]
            b_lo, b_hi = float(block.min()), float(block.max())  # NaN if any value is NaN
            if math.isnan(b_lo) or math.isnan(b_hi):
                break
            lo, hi = min(lo, b_lo), max(hi, b_hi)
            if b_lo < _TINY and b_hi > -_TINY and not self.subnormal:  # the block reaches near zero
                if scratch is None:
                    scratch = np.empty(min(values.size, _SCAN_BLOCK))
                size = np.abs(block, out=scratch[: block.size])
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
        return bool(
            above and self.hi <= hi and math.isfinite(self.lo) and math.isfinite(self.hi) and not self.subnormal
        )


def _has_subnormal(size):
    """True if any of the absolute values ``size`` is subnormal (NaN is not)."""
    return bool(np.any((size > 0.0) & (size < _TINY)))


def _subnormal_mask(values):
    size = np.abs(values)
    return (size > 0.0) & (size < _TINY)


def _summaries(columns):
    """:class:`_Summary` of each array, on a few threads for large tables (numpy's reductions
    release the interpreter lock)."""
    out: list[_Summary | None] = [None] * len(columns)
    if sum(c.size for c in columns) < (1 << 20):
        return [_Summary(c) for c in columns]
    from .._blocks import run_blocks

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
        checks.append(
            (
                np.abs(values) > RA_LIMIT_DEG,
                f"values beyond +-{RA_LIMIT_DEG:g} deg (three turns; not wrapped: no right "
                f"ascension is written like that, check the unit or the file) at",
            )
        )
    elif std == "dec":
        checks.append(((values < -90.0) | (values > 90.0), "values outside [-90, 90] deg at"))
    elif std in ERROR_COLUMNS:
        checks.append((values < 0.0, "negative uncertainties at"))
    elif std in CORRELATION_COLUMNS:
        checks.append(((values < -1.0) | (values > 1.0), "correlations outside [-1, 1] at"))
    elif std == "distance":
        checks.append((values <= 0.0, "distances that are not positive at"))
    elif std == "radial_velocity":
        checks.append(
            ((np.abs(values) >= _C_KMS) & np.isfinite(values), f"speeds of light ({_C_KMS:.6g} km/s) or more at")
        )
    if summary is None or summary.subnormal:
        checks.append(
            (
                _subnormal_mask(values),
                "subnormal values (nonzero and below 2.2e-308 in size, which no measurement gives: "
                "is the file damaged?) at",
            )
        )
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
