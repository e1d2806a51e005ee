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
:data:`~mwkin.columns.COLUMN_ALIASES`, listed below. ``read_catalog(..., aliases={"my_plx":
"parallax"})`` adds spellings of your own. A few spellings state a unit in the name (for example
``distance_pc``); see :data:`~mwkin.columns.ALIAS_UNITS`.

Layout
------
The column facts (names, units, descriptions, spellings) live in :mod:`mwkin.columns`;
:mod:`~mwkin.catalog.files` reads files, :mod:`~mwkin.catalog.values` parses and checks values,
:mod:`~mwkin.catalog.reader` holds :func:`read_catalog`.
"""

from __future__ import annotations

from ..columns import (
    ALIAS_UNITS,
    COLUMN_ALIASES,
    CORRELATION_COLUMNS,
    ERROR_COLUMNS,
    REQUIRED_COLUMNS,
    STANDARD_UNITS,
    VALUE_COLUMNS,
    alias_doc_table,
)
from .reader import VelocityUnitWarning, _read_catalog, read_catalog
from .values import RA_LIMIT_DEG, CatalogError

__all__ = [
    "CatalogError",
    "read_catalog",
    "VelocityUnitWarning",
    "RA_LIMIT_DEG",
    "STANDARD_UNITS",
    "CORRELATION_COLUMNS",
    "ERROR_COLUMNS",
    "VALUE_COLUMNS",
    "REQUIRED_COLUMNS",
    "COLUMN_ALIASES",
    "ALIAS_UNITS",
    "_read_catalog",
]

if __doc__ is not None:  # python -OO strips docstrings
    __doc__ += "\n" + alias_doc_table() + "\n"
