""":func:`read_catalog`: a file, table or DataFrame to a checked ``QTable`` in the standard columns."""

from __future__ import annotations

import warnings

import astropy.units as u
import numpy as np
from astropy.table import QTable

from ..columns import (
    _DESCRIPTIONS,
    ALIAS_UNITS,
    REQUIRED_COLUMNS,
    STANDARD_UNITS,
)
from ..distances import SUSPICIOUS_MEDIAN_KPC, warn_if_distances_look_like_pc
from .files import _load
from .values import (
    CatalogError,
    _alias_lookup,
    _as_float,
    _column_label,
    _key,
    _list_names,
    _range_problems,
    _resolve_unit,
    _spellings,
    _summaries,
    _wrap_ra,
)


def read_catalog(source, *, format=None, aliases=None, units=None, encoding=None) -> QTable:
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
            raise CatalogError(f"aliases: there is no column {alias!r}; columns found: {_list_names(table.colnames)}")
    found: dict[str, list[str]] = {}
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
        hints = "; ".join(f"{m}: {', '.join(sum((_spellings(part) for part in m.split(' or ')), []))}" for m in missing)
        message = (
            f"missing required column(s): {', '.join(missing)}. Columns found: "
            f"{_list_names(table.colnames)}. Names recognised (any case): {hints}. "
            f"Pass aliases={{'your_column': 'standard_name'}} for other names"
        )
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
        found_here: list[str] = []
        column_problems.append(found_here)
        values, unit, ours = _as_float(table[original], label, copy and not owned)
        if values is None:
            found_here.append(unit)
            continue
        writable = ours or owned
        # The unit is an assumption when neither the column, units= nor the name states one.
        assumed = (
            (unit is None or unit == u.dimensionless_unscaled)
            and std not in stated_units
            and _key(original) not in ALIAS_UNITS
        )
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
        pending, _summaries([item[2] for item in pending])
    ):
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
            return (
                f". The likely cause: {description} separates its columns with {spoken}, not commas, "
                f"so a header such as {glued[0][:60]!r} was read as one column name. read_catalog reads "
                f"comma-separated CSV: convert the file, or read it with astropy "
                f"(Table.read(path, format='ascii.csv', delimiter={delimiter!r})) and pass the table"
            )
    return ""


#: Median |radial velocity| (km/s) above which a column without a unit is probably in m/s (our choice:
#: stars near the Sun move at tens of km/s, the fastest known stars at about 1,000 km/s).
SUSPICIOUS_MEDIAN_RV_KMS = 1000.0


class VelocityUnitWarning(UserWarning):
    """Radial velocities without a stated unit that look like m/s although km/s is assumed."""


def _warn_if_velocities_look_like_m_per_s(label, values):
    finite = np.abs(values[np.isfinite(values)])
    if finite.size and float(np.median(finite)) > SUSPICIOUS_MEDIAN_RV_KMS:
        warnings.warn(
            f"{label}: the median |radial velocity| is {float(np.median(finite)):.6g}, taken as km/s "
            f"(no unit given), i.e. beyond {SUSPICIOUS_MEDIAN_RV_KMS:g} km/s; are the velocities in "
            "m/s? If so, state the unit (units={'radial_velocity': 'm/s'})",
            VelocityUnitWarning,
            stacklevel=4,
        )


def _warn_if_distance_in_pc(std, label, values, summary, unit_stated):
    """Warn when a distance column without a unit looks like pc although kpc is assumed."""
    if std != "distance" or unit_stated or not summary.hi > SUSPICIOUS_MEDIAN_KPC:
        return
    warn_if_distances_look_like_pc(values, label, "kpc (no unit given)", "units={'distance': 'pc'}")


def _standard_column(std, values):
    column = u.Quantity(values, STANDARD_UNITS[std], copy=False)
    column.info.description = _DESCRIPTIONS[std]
    return column
