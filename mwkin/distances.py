"""The distance choice: how a star's distance is obtained, made explicit.

Every conversion from observables to positions needs a distance, and there is no neutral default.
This module offers two plain choices, both small immutable value objects that serialise to JSON:

* :class:`InverseParallax` -- distance = 1 / (parallax - zero point), only for stars whose parallax is
  measured well enough (parallax / parallax_error >= ``min_snr``).
* :class:`DistanceColumn` -- a distance the user brings (photometric, Bayesian, from another
  catalogue...), read from a table column in kpc.

``choice.resolve(table)`` returns a :class:`DistanceResult`: the distance of every row (NaN where it
cannot be used), its linear uncertainty, and for every unusable row the reason, so that every result
can say how many stars it could not use and why.

Caveat
------
The inverse parallax is a biased and noisy distance estimator when the parallax is not measured
precisely: the reciprocal of a Gaussian variable is skewed, its mean does not exist, and the bias grows
quickly once sigma_parallax / parallax exceeds ~0.1-0.2 (Bailer-Jones 2015, PASP 127, 994). Keep the
signal-to-noise cut at ~5 or more (10 is safer for velocities), or bring better distances with
:class:`DistanceColumn`.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np

from ._validate import real_number, require_mapping, text
from .columns import column_values

__all__ = [
    "DEFAULT_MIN_SNR",
    "DistanceError",
    "DistanceUnitWarning",
    "SUSPICIOUS_MEDIAN_KPC",
    "DistanceResult",
    "InverseParallax",
    "DistanceColumn",
    "distance_from_dict",
    "REASONS",
]

#: Every reason a row's distance can be unusable, with its meaning (used in flags and counts).
REASONS = {
    "no_parallax": "no parallax (NaN)",
    "nonpositive_parallax": "parallax minus the zero point is zero or negative",
    "no_parallax_error": "no parallax uncertainty (NaN), so the signal-to-noise cut cannot be applied",
    "parallax_below_cut": "parallax / parallax_error is below the signal-to-noise cut",
    "no_distance": "no distance (NaN, zero or negative) in the distance column",
}

_BIAS_CAVEAT = (
    "1/parallax is biased at low parallax signal-to-noise (Bailer-Jones 2015, PASP 127, 994); "
    "keep the cut at ~5 or more"
)


#: Default parallax signal-to-noise cut of :class:`InverseParallax`: below it 1/parallax is too biased
#: to use (Bailer-Jones 2015, PASP 127, 994). The one home of this number (command line and widgets
#: take it from here).
DEFAULT_MIN_SNR = 5.0


class DistanceError(ValueError):
    """A distance choice with impossible settings, or a table that lacks what the choice needs."""


class DistanceUnitWarning(UserWarning):
    """Distances without a unit whose size suggests pc where kpc is assumed."""


SUSPICIOUS_MEDIAN_KPC = 50.0
"""Median distance (kpc) above which a distance column without a unit is suspected to be in pc.

A Galactic star sample with a median distance beyond 50 kpc (the outer stellar halo) is rare, while
the same numbers in pc (a median of 50 pc and more) are common: the usual mistake is a pc column
read as kpc."""


def warn_if_distances_look_like_pc(values, label, assumed, fix):
    """Warn (:class:`DistanceUnitWarning`) if the median positive distance exceeds SUSPICIOUS_MEDIAN_KPC.

    Parameters
    ----------
    values : numpy.ndarray
        Distances as they will be used, kpc (NaN and non-positive values are left out).
    label : str
        The column, as named in the message.
    assumed : str
        The unit assumed, as named in the message.
    fix : str
        How to state the unit, as named in the message.
    """
    with np.errstate(invalid="ignore"):
        positive = values[values > 0]
    if positive.size == 0:
        return
    median = float(np.median(positive))
    if median > SUSPICIOUS_MEDIAN_KPC:
        warnings.warn(
            f"{label}: the median distance is {median:.6g}, taken as {assumed}, i.e. beyond "
            f"{SUSPICIOUS_MEDIAN_KPC:g} kpc; are the distances in pc? If so, state the unit ({fix})",
            DistanceUnitWarning,
            stacklevel=3,
        )


def _column_values(table, name, unit):
    """Float64 values of a table column in ``unit`` (:func:`mwkin.columns.column_values`)."""
    return column_values(table, name, unit, error=DistanceError)


@dataclass(frozen=True)
class DistanceResult:
    """The distance of every row of a table under one distance choice.

    Attributes
    ----------
    distance_kpc : numpy.ndarray
        Heliocentric distance, kpc; NaN where the row cannot be used.
    distance_error_kpc : numpy.ndarray or None
        Linear (first-order) uncertainty of the distance, kpc; None when the table has no uncertainty
        column for the quantity the distance comes from.
    usable : numpy.ndarray of bool
        True where the distance can be used for positions.
    reason_code : numpy.ndarray of uint8
        0 where usable, else 1 + the index in ``reason_names`` of the reason (the first check that
        failed). :attr:`reason` gives the same as text.
    reason_names : tuple of str
        The reasons this choice can give, each one of :data:`REASONS`.
    counts : dict
        Reason -> number of rows, for every reason in ``reason_names`` (zeros included).
    parameter : str
        The measured quantity the distance is a function of: ``"parallax"`` (in mas) or
        ``"distance"`` (in kpc). Error propagation uses it as the third astrometric parameter.
    parameter_value, parameter_error : numpy.ndarray
        That quantity for every row (the zero-point-corrected parallax in mas, or the distance in kpc)
        and its uncertainty (zeros when the table has none).
    ignored_columns : tuple of str
        Columns of the table that could give distances but that this choice leaves out (the
        ``parallax`` column when distances come from a distance column, and the other way round).
    notes : tuple of str
        One sentence per ignored column, for provenance.
    """

    distance_kpc: np.ndarray
    distance_error_kpc: np.ndarray | None
    usable: np.ndarray
    reason_code: np.ndarray
    reason_names: tuple
    counts: dict
    parameter: str = "parallax"
    parameter_value: np.ndarray | None = None
    parameter_error: np.ndarray | None = None
    ignored_columns: tuple = ()
    notes: tuple = ()

    @property
    def reason(self):
        """Array of str: "" where usable, else the reason (one of :data:`REASONS`)."""
        labels = np.array(("",) + tuple(self.reason_names))
        return labels[self.reason_code]

    @property
    def n_usable(self):
        """Number of rows with a usable distance."""
        return int(np.count_nonzero(self.usable))


def _ignored(table, columns, used):
    """(ignored columns, notes) for the distance-giving columns of ``table`` a choice does not use."""
    ignored = tuple(name for name in columns if name in table.colnames and name != used)
    notes = tuple(f"the table's {name!r} column is not used: distances come from {used!r}" for name in ignored)
    return ignored, notes


def _result(distance, error, codes, names, parameter, value, value_error, ignored=((), ())):
    """DistanceResult from per-row codes (0 = usable, i + 1 = names[i]); distance and error are ours to edit."""
    if np.count_nonzero(codes):
        counts = {name: int(np.count_nonzero(codes == i)) for i, name in enumerate(names, start=1)}
    else:  # the common case, one pass
        counts = dict.fromkeys(names, 0)
    usable = codes == 0
    if sum(counts.values()):
        distance[~usable] = np.nan
        if error is not None:
            error[~usable] = np.nan
    return DistanceResult(
        distance_kpc=distance,
        distance_error_kpc=error,
        usable=usable,
        reason_code=codes,
        reason_names=tuple(names),
        counts=counts,
        parameter=parameter,
        parameter_value=value,
        parameter_error=value_error,
        ignored_columns=ignored[0],
        notes=ignored[1],
    )


@dataclass(frozen=True)
class InverseParallax:
    """Distance = 1 / (parallax - zero point), for stars with a well-measured parallax only.

    Parameters
    ----------
    min_snr : float, default 5.0
        Smallest parallax signal-to-noise, (parallax - zero_point_mas) / parallax_error, for a star to
        be given a distance. 0 switches the cut off (every positive corrected parallax is used).
    zero_point_mas : float or Quantity, default 0.0
        Parallax zero point, mas, subtracted from every parallax: corrected = parallax - zero_point_mas.
        Gaia parallaxes are too small on average, so Gaia's global zero point of about -0.017 mas
        (Lindegren et al. 2021, A&A 649, A4) is passed as ``zero_point_mas=-0.017``.

    Raises
    ------
    DistanceError
        If ``min_snr`` is negative or not finite, or ``zero_point_mas`` is not finite.

    Notes
    -----
    A row is unusable, with the first reason that applies: ``no_parallax`` (NaN),
    ``nonpositive_parallax`` (corrected parallax <= 0), ``no_parallax_error`` (NaN uncertainty while a
    cut is asked for), ``parallax_below_cut`` (signal-to-noise below ``min_snr``). A ``distance``
    column of the table is not used; the result says so in ``ignored_columns`` and ``notes``.

    1/parallax is a biased distance estimator at low parallax signal-to-noise: the reciprocal of a
    noisy parallax is skewed and its bias grows fast beyond sigma_parallax / parallax ~ 0.1-0.2. Keep
    ``min_snr`` at ~5 or more, or use better distances through :class:`DistanceColumn`.

    References
    ----------
    Bailer-Jones, C. A. L. 2015, PASP 127, 994: "Estimating distances from parallaxes".
    Lindegren, L. et al. 2021, A&A 649, A4 (Gaia EDR3 parallax zero point).

    Examples
    --------
    >>> InverseParallax(min_snr=10, zero_point_mas=-0.017).to_dict()
    {'method': 'inverse_parallax', 'min_snr': 10.0, 'zero_point_mas': -0.017}

    The defaults: a signal-to-noise cut of 5 and no zero point.

    >>> InverseParallax()
    InverseParallax(min_snr=5.0, zero_point_mas=0.0)
    """

    min_snr: float = DEFAULT_MIN_SNR
    zero_point_mas: float = 0.0

    method = "inverse_parallax"
    reasons = ("no_parallax", "nonpositive_parallax", "no_parallax_error", "parallax_below_cut")

    def __post_init__(self):
        # the same type rules as from_dict: strings, booleans and sequences are refused, naming the setting
        min_snr = real_number(self.min_snr, "min_snr", "", DistanceError, finite=False)
        zero_point = real_number(self.zero_point_mas, "zero_point_mas", "mas", DistanceError, finite=False)
        if not (np.ndim(min_snr) == 0 and np.isfinite(min_snr) and min_snr >= 0):
            raise DistanceError(f"min_snr must be a finite number >= 0 (0 switches the cut off), got {min_snr}")
        if not (np.ndim(zero_point) == 0 and np.isfinite(zero_point)):
            raise DistanceError(f"zero_point_mas must be a finite number of mas, got {zero_point}")
        object.__setattr__(self, "min_snr", float(min_snr))
        object.__setattr__(self, "zero_point_mas", float(zero_point))

    def resolve(self, table):
        """Distances for every row of ``table``.

        Parameters
        ----------
        table : astropy Table or QTable
            With a ``parallax`` column (mas; Quantity or plain numbers in mas) and, when ``min_snr`` > 0,
            a ``parallax_error`` column.

        Returns
        -------
        DistanceResult

        Raises
        ------
        DistanceError
            If there is no ``parallax`` column, or no ``parallax_error`` column while a cut is asked for.
        """
        if "parallax" not in table.colnames:
            hint = (
                " The table has a 'distance' column: use DistanceColumn('distance')."
                if "distance" in table.colnames
                else ""
            )
            raise DistanceError(f"InverseParallax needs a 'parallax' column (mas); none found.{hint}")
        plx = _column_values(table, "parallax", u.mas)
        if self.zero_point_mas:
            plx = plx - self.zero_point_mas
        has_error = "parallax_error" in table.colnames
        if has_error:
            plx_err = _column_values(table, "parallax_error", u.mas)
        elif self.min_snr > 0:
            raise DistanceError(
                f"InverseParallax(min_snr={self.min_snr:g}) needs a 'parallax_error' column (mas) for its "
                f"signal-to-noise cut; none found. Pass InverseParallax(min_snr=0) to use every positive "
                f"parallax without a cut ({_BIAS_CAVEAT})."
            )
        else:
            plx_err = np.zeros_like(plx)

        cut = self.min_snr > 0
        # Two reductions tell whether the first checks can fail at all (min is NaN if any value is).
        all_positive = plx.size == 0 or plx.min() > 0
        errors_known = not cut or plx_err.size == 0 or not np.isnan(plx_err.max())
        checks = (  # in the order of self.reasons; the first failing check names the reason
            lambda: None if all_positive else np.isnan(plx),
            lambda: None if all_positive else plx <= 0,
            lambda: np.isnan(plx_err) if cut and not errors_known else None,
            lambda: plx < self.min_snr * plx_err if cut else None,
        )
        codes = np.zeros(plx.shape, dtype=np.uint8)
        with np.errstate(invalid="ignore"):
            # From the last check to the first, so that the first failing check has the last word.
            for code, check in reversed(list(enumerate(checks, start=1))):
                bad = check()
                if bad is not None and bad.any():
                    np.copyto(codes, code, where=bad)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):  # a ~0 parallax gives inf, not a warning
            distance = np.divide(1.0, plx)
            if has_error:
                error = plx_err * distance
                error *= distance
            else:
                error = None
        return _result(
            distance, error, codes, self.reasons, "parallax", plx, plx_err, _ignored(table, ("distance",), "parallax")
        )

    def describe(self):
        """One line for provenance, with the bias caveat."""
        zp = f" - ({self.zero_point_mas:g} mas)" if self.zero_point_mas else ""
        cut = f" for parallax/error >= {self.min_snr:g}" if self.min_snr > 0 else " (no signal-to-noise cut)"
        return f"distance = 1/(parallax{zp}){cut}; {_BIAS_CAVEAT}"

    def to_dict(self):
        """JSON-able dictionary; :func:`distance_from_dict` rebuilds the choice."""
        return {"method": self.method, "min_snr": self.min_snr, "zero_point_mas": self.zero_point_mas}

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict`."""
        params = _params(data, cls.method, ("min_snr", "zero_point_mas"))
        for key, unit in (("min_snr", ""), ("zero_point_mas", "mas")):
            if key in params:  # True is not a number, "5" is not one either: named, not converted
                params[key] = real_number(params[key], key, unit, DistanceError)
        return cls(**params)


@dataclass(frozen=True)
class DistanceColumn:
    """Distances the user brings, read from a table column.

    Parameters
    ----------
    column : str, default "distance"
        Column name. Values in kpc (a Quantity column is converted; plain numbers are taken as kpc).
        An uncertainty column ``<column>_error`` (kpc) is used when present.

    Raises
    ------
    DistanceError
        If ``column`` is not a non-empty string.

    Notes
    -----
    Rows whose distance is NaN, zero or negative are unusable (reason ``no_distance``). A column of
    plain numbers whose median exceeds :data:`SUSPICIOUS_MEDIAN_KPC` gives a
    :class:`DistanceUnitWarning` (probably pc read as kpc). A ``parallax`` column of the table is not
    used; the result says so in ``ignored_columns`` and ``notes``. In error
    propagation the distance is an independent parameter: it is taken as uncorrelated with the
    astrometry, since the catalogue's correlations refer to the parallax.
    """

    column: str = "distance"

    method = "distance_column"
    reasons = ("no_distance",)

    def __post_init__(self):
        if not isinstance(self.column, str) or not self.column:
            raise DistanceError(f"column must be a non-empty column name, got {self.column!r}")

    def resolve(self, table):
        """Distances for every row of ``table``.

        Returns
        -------
        DistanceResult

        Raises
        ------
        DistanceError
            If the column is missing. UnitMismatchError if its unit is not a length.
        """
        if self.column not in table.colnames:
            raise DistanceError(
                f"DistanceColumn: there is no column {self.column!r} (kpc); columns found: {', '.join(table.colnames)}"
            )
        dist = _column_values(table, self.column, u.kpc)
        if getattr(table[self.column], "unit", None) is None:  # plain numbers, taken as kpc
            warn_if_distances_look_like_pc(
                dist,
                f"DistanceColumn({self.column!r})",
                "kpc (no unit given)",
                "give the column a unit, e.g. table[name].unit = 'pc'",
            )
        error_name = f"{self.column}_error"
        has_error = error_name in table.colnames
        err = _column_values(table, error_name, u.kpc) if has_error else np.zeros_like(dist)
        with np.errstate(invalid="ignore"):
            codes = (~(dist > 0)).astype(np.uint8)
        return _result(
            dist.copy(),
            err.copy() if has_error else None,
            codes,
            self.reasons,
            "distance",
            dist,
            err,
            _ignored(table, ("parallax",), self.column),
        )

    def describe(self):
        """One line for provenance."""
        return f"distance from the column {self.column!r} (kpc)"

    def to_dict(self):
        """JSON-able dictionary; :func:`distance_from_dict` rebuilds the choice."""
        return {"method": self.method, "column": self.column}

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict`."""
        params = _params(data, cls.method, ("column",))
        if "column" in params:
            params["column"] = text(params["column"], "column", DistanceError)
        return cls(**params)


_CHOICES = {cls.method: cls for cls in (InverseParallax, DistanceColumn)}


def _params(data, method, keys):
    data = require_mapping(data, f"the {method!r} distance choice", DistanceError)
    if data.get("method", method) != method:
        raise DistanceError(f"expected method {method!r}, got {data.get('method')!r}")
    unknown = set(data) - set(keys) - {"method"}
    if unknown:
        raise DistanceError(f"unknown keys {sorted(unknown)} for {method!r}; expected {sorted(keys)}")
    return {k: data[k] for k in keys if k in data}


def distance_from_dict(data):
    """Rebuild a distance choice from its :meth:`to_dict` dictionary.

    Parameters
    ----------
    data : dict
        With ``"method"``: ``"inverse_parallax"`` or ``"distance_column"``, and that choice's settings.

    Returns
    -------
    InverseParallax or DistanceColumn

    Raises
    ------
    DistanceError
        For an unknown method or unknown keys.
    """
    data = require_mapping(data, "a distance choice", DistanceError)
    try:
        cls = _CHOICES[data["method"]]
    except (KeyError, TypeError):
        raise DistanceError(f"unknown distance method {data.get('method')!r}; known: {', '.join(_CHOICES)}") from None
    return cls.from_dict(data)
