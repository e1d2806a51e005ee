"""One normalisation path for every orbit input: observables or phase-space tables, dicts, arrays and DataFrames all go through :func:`~mwkin.catalog.read_catalog`'s checks; the time grid and the potential are checked here too."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from astropy.table import QTable, Table

from ..columns import column_values
from ..frames import SolarFrame, frame_or_default
from ..potentials import Potential
from ..units import to_value
from .flags import _CART_UNITS, _CARTESIAN, OrbitError, TimeGridError


# --------------------------------------------------------------------------------------- geometry
def _cylindrical(xyz):
    """(N, 6) Cartesian x..vz (astropy axes) -> (N, 6) R, phi, z, v_R, v_phi, v_z (our conventions)."""
    from ..kinematics import cylindrical_from_cartesian

    with np.errstate(all="ignore"):  # overflowing rows are flagged by _screen_singular
        cyl = cylindrical_from_cartesian(*(xyz[:, i] for i in range(6)))
    return np.column_stack([cyl[k] for k in ("R", "phi", "z", "v_R", "v_phi", "v_z")])


def _cartesian(R, phi, z, v_R, v_phi, v_z):
    """Inverse of :func:`_cylindrical`, on arrays of any (equal) shape; returns x, y, z, vx, vy, vz."""
    c, s = np.cos(phi), np.sin(phi)
    return -R * c, R * s, z, -v_R * c + v_phi * s, v_R * s + v_phi * c, v_z


# --------------------------------------------------------------------------------------- input
@dataclass
class _PhaseSpace:
    xyz: np.ndarray  # (N, 6) Cartesian, kpc km/s
    cyl: np.ndarray  # (N, 6) cylindrical
    flags: list  # list of lists of reasons
    frame: SolarFrame
    cov: np.ndarray | None  # (N, 6, 6) or None
    ids: np.ndarray | None
    source: str

    @property
    def usable(self):
        return np.array([not f for f in self.flags], dtype=bool)


def _frame_or_default(frame, table=None):
    return frame_or_default(frame, table=table, error=OrbitError)


def _as_table(stars):
    if isinstance(stars, Table):
        return stars
    if hasattr(stars, "to_numpy") and hasattr(stars, "columns"):  # pandas DataFrame
        return Table.from_pandas(stars)
    if isinstance(stars, dict):
        return QTable({k: np.atleast_1d(v) for k, v in stars.items()})
    arr = _as_float_rows(stars)
    if arr.ndim in (1, 2) and arr.shape[-1] == 6:
        arr = np.atleast_2d(arr)
        return QTable({name: arr[:, i] for i, name in enumerate(_CARTESIAN)})
    raise OrbitError(
        "stars must be a Table (observables or x y z vx vy vz), a dict of columns, or an array of shape "
        f"(6,) or (N, 6) with x y z [kpc] vx vy vz [km/s]; got {type(stars).__name__} of shape {arr.shape}"
    )


def _non_numeric(values, what, unit):
    """OrbitError naming the first rows of ``values`` (1-D) that are not numbers."""
    rows = []
    for i, v in enumerate(np.asarray(values, dtype=object).ravel()):
        try:
            float(v)
        except (TypeError, ValueError):
            rows.append(i)
    first = np.asarray(values, dtype=object).ravel()[rows[0]] if rows else None
    return OrbitError(f"{what}: value {first!r} at row(s) {rows[:5]} is not a number; expected numbers in {unit}")


def _as_float_rows(stars):
    """``stars`` as a float array, or an OrbitError naming the column, row and unit of a non-number."""
    try:
        return np.asarray(stars, dtype=float)
    except (TypeError, ValueError):
        arr = np.asarray(stars, dtype=object)
        if arr.ndim in (1, 2) and arr.shape[-1] == 6:
            arr = arr.reshape(-1, 6)
            for k, (name, unit) in enumerate(zip(_CARTESIAN, _CART_UNITS)):
                try:
                    np.asarray(arr[:, k], dtype=float)
                except (TypeError, ValueError):
                    raise _non_numeric(arr[:, k], f"stars column {k} ({name!r})", unit) from None
        raise OrbitError(
            "stars: expected numbers x y z [kpc] vx vy vz [km/s] in an array of shape (6,) or "
            f"(N, 6); got {type(stars).__name__} that is not numeric"
        ) from None


def _phase_space(stars, frame, need_cov=False, distance=None):
    """Turn every accepted input into Cartesian and cylindrical phase space with per-star flags.

    One path for every kind of input: arrays, dicts and DataFrames become a table first
    (:func:`_as_table`), observables go through :func:`~mwkin.kinematics.to_galactocentric` (and so
    through :func:`~mwkin.read_catalog`'s checks), and every phase-space column through the same
    numeric and unit checks.
    """
    table = _as_table(stars)
    frame = _frame_or_default(frame, table)
    names = set(table.colnames)
    if set(_CARTESIAN) <= names:
        source = "phase space"
    elif {"ra", "dec"} <= names:
        from .. import kinematics

        errors = "linear" if need_cov else "none"
        kwargs = dict(frame=frame, errors=errors)
        if distance is not None:
            kwargs["distance"] = distance
        if need_cov:
            kwargs["return_covariance"] = True
        table = kinematics.to_galactocentric(table, **kwargs)
        source = f"observables via to_galactocentric(errors={errors!r})"
        names = set(table.colnames)
    else:
        missing = [c for c in _CARTESIAN if c not in names]
        raise OrbitError(
            f"stars need either Galactocentric columns x y z vx vy vz (missing: {missing}) "
            "or observables (ra, dec, parallax or distance, pmra, pmdec, radial_velocity)"
        )
    n = len(table)
    if n == 0:
        raise OrbitError("stars: the table has no rows")
    xyz = np.empty((n, 6))
    for i, (name, unit) in enumerate(zip(_CARTESIAN, _CART_UNITS)):
        try:
            xyz[:, i] = column_values(table, name, unit, error=OrbitError, label=f"column {name!r}")
        except OrbitError:
            raise _non_numeric(table[name], f"column {name!r}", unit) from None
    flags: list[list[str]] = [[] for _ in range(n)]
    bad = ~np.all(np.isfinite(xyz), axis=1)
    if "has_velocity" in names:
        no_vel = ~np.asarray(table["has_velocity"], dtype=bool)
        for row in np.flatnonzero(no_vel):
            flags[row].append("no_velocity")
        bad &= ~no_vel
    for row in np.flatnonzero(bad):
        flags[row].append("nonfinite_input")
    cov = None
    if need_cov:
        if "cov_galactocentric" not in names:
            raise OrbitError(
                "n_samples > 0 needs uncertainties: give observables with their errors, or a "
                "phase-space table with a 'cov_galactocentric' column of shape (N, 6, 6) "
                "(x..vz in kpc and km/s)"
            )
        cov = np.asarray(getattr(table["cov_galactocentric"], "value", table["cov_galactocentric"]), dtype=float)
        if cov.shape != (n, 6, 6):
            raise OrbitError(f"column 'cov_galactocentric' must have shape ({n}, 6, 6), got {cov.shape}")
    ids = np.asarray(table["source_id"]) if "source_id" in names else None
    return _PhaseSpace(xyz, _cylindrical(xyz), flags, frame, cov, ids, source)


def _check_potential(pot):
    if not isinstance(pot, Potential):
        raise OrbitError(
            f"pot must be a mwkin Potential (Potential.preset, three_component or from_galpy), got {type(pot).__name__}"
        )
    return pot


def _time_grid(t):
    """Validate a time grid in Gyr: 1-D, finite, t[0] = 0, evenly spaced, non-zero step; returns float64.

    "Evenly spaced" allows each step to differ from the first by 1e-6 of it, or by the rounding of
    the input's own precision when that is coarser: a float32 ``numpy.linspace`` has steps that
    differ by a few float32 ulps of the largest time (relative 6e-8 of t_end, i.e. up to
    ~6e-8 * (n - 1) of the step), so its tolerance is 4 eps(float32) * max|t| per step.
    """
    raw = getattr(t, "value", t)
    dtype = getattr(np.asarray(raw), "dtype", None) if not isinstance(raw, (list, tuple)) else None
    t = np.atleast_1d(np.asarray(to_value(t, "Gyr", "t"), dtype=float))
    if t.ndim != 1 or t.size < 2:
        raise TimeGridError(f"t must be a 1-D array of at least 2 times (Gyr), got shape {t.shape}")
    if not np.all(np.isfinite(t)):
        raise TimeGridError(
            f"t must be finite (Gyr); non-finite at indices {np.flatnonzero(~np.isfinite(t))[:5].tolist()}"
        )
    span = abs(t[-1] - t[0])
    if span == 0:
        raise TimeGridError("t must not be constant: the step is zero")
    if abs(t[0]) > 1e-12 * span:
        raise TimeGridError(f"t must start at 0 (the time of the observed positions), got t[0] = {t[0]} Gyr")
    dt = np.diff(t)
    step = dt[0]
    tol = 1e-6 * abs(step)
    if dtype is not None and np.issubdtype(dtype, np.floating) and np.finfo(dtype).eps > np.finfo(float).eps:
        # common practice (no source): a low-precision grid is even only to its own rounding.
        tol = max(tol, 4.0 * float(np.finfo(dtype).eps) * float(np.max(np.abs(t))))
    off = np.flatnonzero(np.abs(dt - step) > tol)
    if off.size:
        raise TimeGridError(
            f"t must be evenly spaced (step {step:g} Gyr); step {dt[off[0]]:g} Gyr between "
            f"indices {off[0]} and {off[0] + 1}; use numpy.linspace(0, t_end, n)"
        )
    return t
