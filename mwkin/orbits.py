"""Orbits of stars in a Galactic potential: integration and orbital parameters.

:func:`integrate_orbits` follows one star or many forward or backward in time and returns an
:class:`OrbitSet`; :func:`orbit_parameters` gives pericentre, apocentre, maximum height, eccentricity,
energy and angular momentum for a whole sample, either from the fast Staeckel approximation or from
integrated orbits, optionally with percentile bands drawn from the measurement uncertainties.

Conventions
-----------
* Input stars are either observables (ra, dec, parallax or distance, pmra, pmdec, radial_velocity),
  turned into Galactocentric coordinates by :func:`mwkin.kinematics.to_galactocentric` with the given
  frame, or Galactocentric Cartesian phase space ``x y z vx vy vz`` (kpc, km/s) in astropy's axes
  (the Sun near x = -R0), as ``to_galactocentric`` returns. The frame enters only there: the orbit
  starts from the star's own Galactocentric position and velocity, not from galpy's solar-motion
  machinery.
* Tracks are given in the same Cartesian axes and in cylindrical coordinates R, phi, z, v_R, v_phi,
  v_z with phi = atan2(y, -x) (the Sun near 0, increasing with Galactic rotation, wrapped to
  [-pi, pi) along tracks) and **v_phi positive in the sense of rotation**. ``Lz = R v_phi`` (kpc km/s) is positive
  for prograde orbits.
* ``rperi``/``rapo`` are spherical radii r = sqrt(R^2 + z^2); ``zmax`` is max |z|; eccentricity
  e = (rapo - rperi) / (rapo + rperi). Integrated values are the extremes over the output times.
* Energies per unit mass in km^2/s^2 keep galpy's zero point of the potential (see
  :meth:`Potential.describe_zero_point`; for MWPotential2014 Phi(infinity) = +65,094 km^2/s^2, not 0).
* Flags: a ``flag`` string per star, "" when all is well, otherwise ";"-joined reasons from
  :data:`FLAGS`. Bad stars get NaN; they never stop the batch. Unbound orbits (E >= Phi(infinity))
  keep their energy, Lz and track but get NaN rperi, rapo, zmax and eccentricity.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy.table import QTable, Table

from . import _galpy
from .frames import SolarFrame
from .potentials import Potential, PotentialError
from .units import KMS, to_value

__all__ = ["integrate_orbits", "orbit_parameters", "OrbitSet", "OrbitError", "TimeGridError", "OrbitCancelled",
           "FLAGS", "ADVISORY_FLAGS", "PARAMETERS"]

#: Reasons that can appear in the ``flag`` column.
FLAGS = {
    "nonfinite_input": "position or velocity not finite (NaN or inf)",
    "no_velocity": "the input row has no full velocity (has_velocity is False)",
    "integration_failed": "the integrated track contains non-finite values",
    "unbound": "energy at or above the potential at infinity; the orbit escapes",
    "staeckel_failed": "the Staeckel approximation gave no finite value",
    "no_covariance": "no finite covariance to draw samples from",
    "cancelled": "not computed because the run was cancelled",
    "overflow": "finite input too large for float64 arithmetic (|x| or |v| near 1e154 or more)",
    "on_z_axis": "starts on the z axis (R <= 1e-9 r or R <= 1e-9 kpc): phi is undefined there and galpy's "
                 "integrator stalls",
    "radial_through_centre": "starts in the mid-plane with |z|, |v_z|, |v_phi| <= 1e-9 r, |v|: it falls straight "
                             "through the centre, where galpy's integrator stalls",
    "integration_timeout": "the integration of this star alone exceeded the time limit and was stopped",
    "coarse_time_grid": "the output step is too coarse to resolve rperi, rapo or zmax (values kept; see Notes of "
                        "integrate_orbits)",
    "short_time_grid": "the integration does not cover a pericentre, an apocentre and a vertical turning point "
                       "(values kept; they are extremes of an arc, not of the orbit)",
    "staeckel_unphysical": "the Staeckel approximation gave an impossible value (zmax < 0, rperi > rapo or e outside "
                           "[0, 1]); set to NaN",
    "staeckel_unreliable": "outside the validity tested for the Staeckel approximation (|Lz| < 0.2 R |v| or e > 0.7); "
                           "values kept, use method='integrate'",
}

#: Flags that keep the star's values (they qualify them); every other flag comes with NaN values.
ADVISORY_FLAGS = frozenset({"coarse_time_grid", "short_time_grid", "staeckel_unreliable"})

#: Orbital parameters: name -> (unit, description).
PARAMETERS = {
    "rperi": (u.kpc, "pericentre, spherical Galactocentric radius"),
    "rapo": (u.kpc, "apocentre, spherical Galactocentric radius"),
    "zmax": (u.kpc, "maximum distance from the mid-plane"),
    "eccentricity": (u.dimensionless_unscaled, "(rapo - rperi) / (rapo + rperi)"),
    "energy": (KMS**2, "energy per unit mass, galpy's zero point of the potential (see meta)"),
    "Lz": (u.kpc * KMS, "angular momentum about the z axis, R v_phi, positive for prograde orbits"),
}

_CARTESIAN = ("x", "y", "z", "vx", "vy", "vz")
_CART_UNITS = ("kpc",) * 3 + (KMS,) * 3
_DEFAULT_PARAMETER_GRID = (3.0, 3001)  # Gyr, points: ~15 radial and ~35 vertical periods near the Sun
_DEFAULT_CHUNK = {"staeckel": 2000, "integrate": 200}


class OrbitError(ValueError):
    """Invalid input to an orbit computation."""


class TimeGridError(OrbitError):
    """A time grid that does not start at 0 or is not evenly spaced."""


class OrbitCancelled(Exception):
    """The run was cancelled between chunks.

    Attributes
    ----------
    partial : OrbitSet or QTable
        The result so far: rows not yet computed are NaN and flagged "cancelled".
    done, total : int
        Stars computed and stars requested.
    """

    def __init__(self, partial, done, total):
        super().__init__(f"orbit computation cancelled after {done} of {total} stars")
        self.partial = partial
        self.done = done
        self.total = total


# --------------------------------------------------------------------------------------- geometry
def _cylindrical(xyz):
    """(N, 6) Cartesian x..vz (astropy axes) -> (N, 6) R, phi, z, v_R, v_phi, v_z (our conventions)."""
    from .kinematics import cylindrical_from_cartesian

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
    if frame is not None:
        if not isinstance(frame, SolarFrame):
            raise OrbitError(f"frame must be a SolarFrame, got {type(frame).__name__}")
        return frame
    meta_frame = getattr(table, "meta", {}).get("frame") if table is not None else None
    if isinstance(meta_frame, SolarFrame):
        return meta_frame
    if isinstance(meta_frame, dict):
        try:
            return SolarFrame.from_dict(meta_frame)
        except ValueError as exc:   # never fall back silently to another frame than the table states
            raise OrbitError(f"the table's meta['frame'] is not a valid solar frame ({exc}); pass frame= "
                             "explicitly or fix the metadata") from None
    return SolarFrame()


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
        f"(6,) or (N, 6) with x y z [kpc] vx vy vz [km/s]; got {type(stars).__name__} of shape {arr.shape}")


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
        raise OrbitError("stars: expected numbers x y z [kpc] vx vy vz [km/s] in an array of shape (6,) or "
                         f"(N, 6); got {type(stars).__name__} that is not numeric") from None


def _phase_space(stars, frame, need_cov=False, distance=None):
    """Turn the accepted inputs into Cartesian and cylindrical phase space with per-star flags."""
    if isinstance(stars, (np.ndarray, list, tuple)) and not need_cov:
        arr = _as_float_rows(stars)
        if arr.ndim in (1, 2) and arr.shape[-1] == 6 and arr.size:  # fast path: plain x..vz numbers
            xyz = np.atleast_2d(arr)
            flags = [[] if ok else ["nonfinite_input"] for ok in np.all(np.isfinite(xyz), axis=1)]
            return _PhaseSpace(xyz, _cylindrical(xyz), flags, _frame_or_default(frame), None, None, "phase space")
    table = _as_table(stars)
    frame = _frame_or_default(frame, table)
    names = set(table.colnames)
    if set(_CARTESIAN) <= names:
        source = "phase space"
    elif {"ra", "dec"} <= names:
        try:
            from . import kinematics
        except ImportError:  # pragma: no cover - during development only
            raise OrbitError("observables input needs mwkin.kinematics, which is not available") from None
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
        raise OrbitError(f"stars need either Galactocentric columns x y z vx vy vz (missing: {missing}) "
                         "or observables (ra, dec, parallax or distance, pmra, pmdec, radial_velocity)")
    n = len(table)
    if n == 0:
        raise OrbitError("stars: the table has no rows")
    xyz = np.empty((n, 6))
    for i, (name, unit) in enumerate(zip(_CARTESIAN, _CART_UNITS)):
        col = table[name]
        try:
            value = col if isinstance(col, u.Quantity) else (
                np.asarray(col, dtype=float) * u.Unit(col.unit) if getattr(col, "unit", None)
                else np.asarray(col, dtype=float))
        except (TypeError, ValueError):
            raise _non_numeric(col, f"column {name!r}", unit) from None
        if hasattr(value, "mask"):
            value = np.ma.filled(value, np.nan)
        xyz[:, i] = to_value(value, unit, f"column {name!r}")
    flags = [[] for _ in range(n)]
    bad = ~np.all(np.isfinite(xyz), axis=1)
    if "has_velocity" in names:
        no_vel = ~np.asarray(table["has_velocity"], dtype=bool)
        for i in np.flatnonzero(no_vel):
            flags[i].append("no_velocity")
        bad &= ~no_vel
    for i in np.flatnonzero(bad):
        flags[i].append("nonfinite_input")
    cov = None
    if need_cov:
        if "cov_galactocentric" not in names:
            raise OrbitError("n_samples > 0 needs uncertainties: give observables with their errors, or a "
                             "phase-space table with a 'cov_galactocentric' column of shape (N, 6, 6) "
                             "(x..vz in kpc and km/s)")
        cov = np.asarray(getattr(table["cov_galactocentric"], "value", table["cov_galactocentric"]), dtype=float)
        if cov.shape != (n, 6, 6):
            raise OrbitError(f"column 'cov_galactocentric' must have shape ({n}, 6, 6), got {cov.shape}")
    ids = np.asarray(table["source_id"]) if "source_id" in names else None
    return _PhaseSpace(xyz, _cylindrical(xyz), flags, frame, cov, ids, source)


def _check_potential(pot):
    if not isinstance(pot, Potential):
        raise OrbitError(f"pot must be a mwkin Potential (Potential.preset, three_component or from_galpy), "
                         f"got {type(pot).__name__}")
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
        raise TimeGridError(f"t must be finite (Gyr); non-finite at indices {np.flatnonzero(~np.isfinite(t))[:5].tolist()}")
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
        raise TimeGridError(f"t must be evenly spaced (step {step:g} Gyr); step {dt[off[0]]:g} Gyr between "
                            f"indices {off[0]} and {off[0] + 1}; use numpy.linspace(0, t_end, n)")
    return t


# --------------------------------------------------------------------------------------- screening
#: Relative size below which a coordinate counts as exactly zero for :func:`_screen_singular`.
_AXIS_TOL = 1e-9


def _screen_singular(ps):
    """Flag usable stars whose orbits galpy's integrator cannot follow (it stalls forever in C).

    Two starts are singular, both found by letting galpy's ``dop853_c`` run (it never returned):
    a star on the z axis, where galpy's cylindrical set-up divides by R = 0, and a star in the
    mid-plane with no vertical or azimuthal motion, which by the potential's symmetry stays on a
    line through the centre and meets the cusp or the R = 0 division there. "Zero" means below
    :data:`_AXIS_TOL` of r (positions) or of |v| (velocities), so rounding in the Cartesian ->
    cylindrical conversion cannot hide a zero; stars at rest in the mid-plane are included. R below
    1e-9 kpc (0.2 au) also counts as on the axis: there R^2 underflows (R ~ 1e-160 stalled too).
    Finite input too large for the conversion (x * x overflowing) is flagged "overflow".
    Near-singular starts that still stall are caught by the time limit instead.
    """
    xyz, cyl = ps.xyz, ps.cyl
    with np.errstate(all="ignore"):
        # From the Cartesian input with hypot, which neither underflows nor overflows (x * x would).
        R = np.hypot(xyz[:, 0], xyz[:, 1])
        r = np.hypot(R, xyz[:, 2])
        v = np.hypot(np.hypot(xyz[:, 3], xyz[:, 4]), xyz[:, 5])
        on_axis = R <= np.maximum(_AXIS_TOL * r, _AXIS_TOL)  # r = 0 (the centre itself) included
        # r^2 and v^2 must exist too: galpy squares them, and v ~ 1e200 stalled its integrator.
        overflow = ~on_axis & ~(np.all(np.isfinite(cyl), axis=1) & np.isfinite(r * r) & np.isfinite(v * v))
        z, v_z, v_phi = cyl[:, 2], cyl[:, 5], cyl[:, 4]
        radial = (~on_axis & ~overflow & (np.abs(z) <= _AXIS_TOL * r) & (np.abs(v_z) <= _AXIS_TOL * v)
                  & (np.abs(v_phi) <= _AXIS_TOL * v))
    for i in np.flatnonzero(ps.usable & on_axis):
        ps.flags[i].append("on_z_axis")
    for i in np.flatnonzero(ps.usable & overflow):
        ps.flags[i].append("overflow")
    for i in np.flatnonzero(ps.usable & radial):
        ps.flags[i].append("radial_through_centre")


#: Wall-clock limit used when ``timeout`` is None: base seconds + seconds per star per Gyr integrated.
#: About 6x the slowest preset measured here (DehnenBinney98I, 0.34 s per orbit-Gyr on one core).
_AUTO_TIMEOUT = (30.0, 2.0)


def _timeouts(timeout, n, t):
    """(seconds for a call with ``n`` stars, seconds for one star) from the user's ``timeout``."""
    if timeout is None:
        base, per = _AUTO_TIMEOUT
        span = abs(float(t[-1]))
        return base + per * n * span, base + per * span
    try:
        value = float(timeout)
    except (TypeError, ValueError):
        raise OrbitError(f"timeout must be a number of seconds (or None), got {timeout!r}") from None
    if not value > 0:  # also NaN
        raise OrbitError(f"timeout must be positive (seconds), got {timeout!r}")
    return value, value


#: Grid-resolution criteria (see the Notes of :func:`integrate_orbits`).
_MIN_STEPS_PER_PERIOD = 4
_EXTREME_TOL = (0.01, 1e-3)  # relative, absolute [kpc]
_KMS_TO_KPC_PER_GYR = float((1 * KMS).to_value(u.kpc / u.Gyr))


def _coarse_grid(pot, cyl0, track, t):
    """True where the output step cannot resolve the star's extremes (rperi, rapo, zmax).

    Two tests, either one flags: (a) before looking at the track, the step must be at most 1/4 of
    the shortest of the radial (2 pi / kappa), vertical (2 pi / nu) and azimuthal (2 pi / Omega)
    periods at the star's starting radius, else samples alias the oscillations; (b) at every sample
    that is a local extreme of the sampled r (or |z|), with rate s' and acceleration s'' (from the
    potential's force there), the turning point lies beyond the sample by about s'^2 / (2 |s''|) (a
    parabola through the sample; common practice (no source)), at most |s'| dt, or |s'| dt where the
    orbit does not curve back. The largest such peak estimate is the extreme the grid should have
    seen; when it exceeds the sampled extreme by more than 1 % (or 1 pc), the star is flagged.
    At the first or last time a rate pointing out of the span means the extreme is that end point.
    """
    model = pot._model
    step = abs(float(t[1] - t[0]))
    R0 = cyl0[:, 0]
    n, nt = track.shape[:2]
    with np.errstate(all="ignore"):
        omega = np.sqrt(np.abs(model.vc2_kms2(R0))) / R0
        fastest = np.fmax(np.fmax(model.epicycle_frequency(R0), model.vertical_frequency(R0)), omega)
        period = 2.0 * np.pi / (fastest * _KMS_TO_KPC_PER_GYR)
        coarse = step > period / _MIN_STEPS_PER_PERIOD  # NaN period: no verdict from (a)
        r = np.hypot(track[..., 0], track[..., 2])
        absz = np.abs(track[..., 2])
        direction = np.sign(t[-1] - t[0])
        for sign, vertical in ((-1.0, False), (1.0, False), (1.0, True)):
            # Work with s = sign * quantity, so every case is a maximum.
            values = absz if vertical else (r if sign > 0 else -r)
            rising = values[:, 1:] >= values[:, :-1]  # rising[k]: sample k + 1 >= sample k
            peaks = np.ones(values.shape, dtype=bool)
            peaks[:, 1:] &= rising
            peaks[:, :-1] &= values[:, :-1] >= values[:, 1:]
            star, when = np.nonzero(peaks)
            w = track[star, when]  # phase-space points at the sampled peaks
            wR, wphi, wz, vR, vphi, vz = (w[:, k] for k in range(6))
            if vertical:
                rate = np.sign(wz) * vz
            else:
                rr = np.hypot(wR, wz)
                rate = (wR * vR + wz * vz) / rr
            rate = sign * rate * direction * _KMS_TO_KPC_PER_GYR  # kpc/Gyr of s, along increasing |t|
            outward = ((when == 0) & (rate < 0)) | ((when == nt - 1) & (rate > 0))
            beyond = np.where(outward, 0.0, np.abs(rate) * step)  # at most one step's worth
            seen = values.max(axis=1)
            allowed = np.maximum(_EXTREME_TOL[0] * np.abs(seen), _EXTREME_TOL[1])
            # Only peaks that could pass the sampled extreme by more than allowed need the parabola
            # (and the potential's force): on a fine grid that is a handful per star.
            maybe = np.flatnonzero(values[star, when] + beyond - seen[star] > allowed[star])
            if maybe.size:
                f_R, f_z = model.forces(wR[maybe], wz[maybe], wphi[maybe])
                if vertical:
                    accel = np.sign(wz[maybe]) * f_z
                else:
                    # d2r/dt2 = (|v|^2 - (dr/dt)^2 + x . a) / r, with x . a = R a_R + z a_z
                    rdot = (wR[maybe] * vR[maybe] + wz[maybe] * vz[maybe]) / rr[maybe]
                    accel = (vR[maybe]**2 + vphi[maybe]**2 + vz[maybe]**2 - rdot**2
                             + wR[maybe] * f_R + wz[maybe] * f_z) / rr[maybe]
                accel = sign * accel * _KMS_TO_KPC_PER_GYR**2
                parabola = np.where(accel < 0, rate[maybe]**2 / (2.0 * np.abs(accel)), np.inf)
                beyond[maybe] = np.fmin(beyond[maybe], parabola)
            should = np.full(n, -np.inf)
            np.maximum.at(should, star, values[star, when] + beyond)
            coarse |= (should - seen) > allowed
    return coarse


def _short_grid(track, rperi, rapo, zmax):
    """True where the track has no radial pericentre and apocentre, or no vertical turning point.

    Turning points are sign changes of dr/dt (of R v_R + z v_z, its sign) and of v_z between
    samples; an orbit with no radial extent (rapo - rperi <= 1e-9 rapo) or no height
    (zmax <= 1e-9 rapo) needs none.
    """
    R, z, v_R, v_z = track[..., 0], track[..., 2], track[..., 3], track[..., 5]
    radial_turns = np.count_nonzero(np.diff(np.signbit(R * v_R + z * v_z), axis=1), axis=1)
    vertical_turns = np.count_nonzero(np.diff(np.signbit(v_z), axis=1), axis=1)
    with np.errstate(invalid="ignore"):
        circular = (rapo - rperi) <= _AXIS_TOL * rapo
        planar = zmax <= _AXIS_TOL * rapo
    return ((radial_turns < 2) & ~circular) | ((vertical_turns < 1) & ~planar)


# --------------------------------------------------------------------------------------- chunks
def _cancelled(cancel):
    if cancel is None:
        return False
    if hasattr(cancel, "is_set"):
        return bool(cancel.is_set())
    return bool(cancel())


def _run_chunks(indices, chunk_size, work, progress, cancel):
    """Call ``work(chunk)`` on successive chunks of ``indices``.

    ``cancel`` is checked before each chunk and ``progress(done, n)`` called after each.

    Returns
    -------
    done : int
        Indices processed.
    remaining : numpy.ndarray
        Indices not reached (non-empty only when cancelled).
    """
    done = 0
    n = len(indices)
    step = n if not chunk_size else int(chunk_size)
    for start in range(0, n, max(step, 1)):
        if _cancelled(cancel):
            return done, indices[start:]
        chunk = indices[start:start + step]
        work(chunk)
        done += len(chunk)
        if progress is not None:
            progress(done, n)
    return done, indices[:0]


def _chunk_size(chunk_size, default):
    if chunk_size is None:
        return default
    if int(chunk_size) != chunk_size or chunk_size < 1:
        raise OrbitError(f"chunk_size must be a positive integer, got {chunk_size!r}")
    return int(chunk_size)


# --------------------------------------------------------------------------------------- OrbitSet
def _parameters_from_tracks(track):
    """rperi, rapo, zmax, eccentricity from (N, nt, 6) cylindrical tracks."""
    r = np.hypot(track[..., 0], track[..., 2])
    rperi = r.min(axis=1)
    rapo = r.max(axis=1)
    zmax = np.abs(track[..., 2]).max(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        ecc = (rapo - rperi) / (rapo + rperi)
    return rperi, rapo, zmax, ecc


def _flag_strings(flags):
    return np.array([";".join(f) for f in flags], dtype=object).astype(str)


@dataclass(frozen=True, eq=False)
class OrbitSet:
    """Integrated orbits of N stars on a common time grid.

    Attributes
    ----------
    t : Quantity, shape (nt,)
        Times, Gyr (t[0] = 0; negative for backward integration).
    rperi, rapo, zmax, eccentricity, energy, Lz : Quantity, shape (N,)
        Orbital parameters from the tracks (see the module notes for definitions and zero points).
    flags : numpy.ndarray of str, shape (N,)
        "" or ";"-joined reasons (:data:`FLAGS`).
    frame : SolarFrame
    potential : Potential
    meta : dict
        Integrator, method, energy zero point and the frame/potential reconciliation numbers
        (``vc_at_sun_kms``, ``v_phi_sun_kms``, ``v_phi_sun_minus_vc_kms``, ...).
    ids : numpy.ndarray or None
        ``source_id`` of the input rows, when given.

    Notes
    -----
    Track arrays (``x``, ``R``, ``v_phi``...) have shape (N, nt) and are computed from the stored
    cylindrical tracks on access.
    """

    t: u.Quantity
    cylindrical: np.ndarray = field(repr=False)  # (N, nt, 6): R, phi, z, v_R, v_phi, v_z (kpc, rad, km/s)
    rperi: u.Quantity = field(repr=False)
    rapo: u.Quantity = field(repr=False)
    zmax: u.Quantity = field(repr=False)
    eccentricity: u.Quantity = field(repr=False)
    energy: u.Quantity = field(repr=False)
    Lz: u.Quantity = field(repr=False)
    flags: np.ndarray = field(repr=False)
    frame: SolarFrame = field(repr=False)
    potential: Potential = field(repr=False)
    meta: dict = field(default_factory=dict, repr=False)
    ids: np.ndarray | None = field(default=None, repr=False)

    def __len__(self):
        return self.cylindrical.shape[0]

    # --------------------------------------------------------------- tracks
    @property
    def R(self):
        return self.cylindrical[..., 0] * u.kpc

    @property
    def phi(self):
        """Azimuth atan2(y, -x), rad, increasing with rotation, wrapped to [-pi, pi)."""
        return self.cylindrical[..., 1] * u.rad

    @property
    def z(self):
        return self.cylindrical[..., 2] * u.kpc

    @property
    def v_R(self):
        return self.cylindrical[..., 3] * KMS

    @property
    def v_phi(self):
        """Azimuthal velocity, positive in the sense of Galactic rotation, km/s."""
        return self.cylindrical[..., 4] * KMS

    @property
    def v_z(self):
        return self.cylindrical[..., 5] * KMS

    def _cart(self):
        c = self.cylindrical
        return _cartesian(c[..., 0], c[..., 1], c[..., 2], c[..., 3], c[..., 4], c[..., 5])

    @property
    def x(self):
        c = self.cylindrical
        return -c[..., 0] * np.cos(c[..., 1]) * u.kpc

    @property
    def y(self):
        c = self.cylindrical
        return c[..., 0] * np.sin(c[..., 1]) * u.kpc

    @property
    def vx(self):
        return self._cart()[3] * KMS

    @property
    def vy(self):
        return self._cart()[4] * KMS

    @property
    def vz(self):
        return self.v_z

    def track(self, i):
        """The orbit of star ``i`` as a QTable: t, x, y, z, vx, vy, vz, R, phi, v_R, v_phi, v_z."""
        n = len(self)
        if not -n <= i < n:
            raise IndexError(f"star index {i} out of range for {n} orbits")
        c = self.cylindrical[i]
        x, y, z, vx, vy, vz = _cartesian(*(c[:, k] for k in range(6)))
        table = QTable(meta={"star": int(i) % n, "flag": str(self.flags[i]), **self._provenance()})
        columns = [
            ("t", self.t, "time since the observation, Gyr"),
            ("x", x * u.kpc, "Galactocentric x (astropy axes; Sun near -R0)"),
            ("y", y * u.kpc, "Galactocentric y (direction of rotation at the Sun)"),
            ("z", z * u.kpc, "Galactocentric z (toward the north Galactic pole)"),
            ("vx", vx * KMS, "Galactocentric vx"), ("vy", vy * KMS, "Galactocentric vy"),
            ("vz", vz * KMS, "Galactocentric vz"),
            ("R", c[:, 0] * u.kpc, "cylindrical radius"),
            ("phi", c[:, 1] * u.rad, "azimuth atan2(y, -x), increasing with rotation"),
            ("v_R", c[:, 3] * KMS, "radial velocity, outward positive"),
            ("v_phi", c[:, 4] * KMS, "azimuthal velocity, positive in the sense of Galactic rotation"),
            ("v_z", c[:, 5] * KMS, "vertical velocity"),
        ]
        for name, value, description in columns:
            table[name] = value
            table[name].info.description = description
        return table

    # --------------------------------------------------------------- summaries
    def _provenance(self):
        return {"frame": self.frame.describe(), "potential": self.potential.describe(),
                "method": self.meta.get("method"), "integrator": self.meta.get("integrator")}

    def table(self):
        """One row per star: orbital parameters and flag (QTable; meta carries the provenance)."""
        table = QTable(meta={**self._provenance(), **{k: v for k, v in self.meta.items() if np.isscalar(v)}})
        if self.ids is not None:
            table["source_id"] = self.ids
        for name, (unit, description) in PARAMETERS.items():
            table[name] = getattr(self, name)
            table[name].info.description = description
        table["flag"] = self.flags
        table["method"] = np.full(len(self), "integrate")
        return table

    def to_dict(self, include_tracks=True):
        """JSON-able dict (lists of floats, NaN kept as float NaN) with the frame and potential.

        Parameters
        ----------
        include_tracks : bool
            Include the (N, nt, 6) cylindrical tracks (needed by :meth:`from_dict`).
        """
        try:
            pot = self.potential.to_dict()
        except PotentialError:
            pot = {"description": self.potential.describe()}
        out = {
            "t_gyr": self.t.to_value(u.Gyr).tolist(),
            "parameters": {name: getattr(self, name).value.tolist() for name in PARAMETERS},
            "flags": [str(f) for f in self.flags],
            "frame": self.frame.to_dict(),
            "potential": pot,
            "meta": _jsonable(self.meta),
        }
        if self.ids is not None:
            out["ids"] = np.asarray(self.ids).tolist()
        if include_tracks:
            out["cylindrical"] = self.cylindrical.tolist()
        return out

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict` (with tracks)."""
        if "cylindrical" not in data:
            raise OrbitError("from_dict needs the tracks: export with to_dict(include_tracks=True)")
        params = {name: np.asarray(data["parameters"][name], dtype=float) * PARAMETERS[name][0]
                  for name in PARAMETERS}
        return cls(t=np.asarray(data["t_gyr"], dtype=float) * u.Gyr,
                   cylindrical=np.asarray(data["cylindrical"], dtype=float), **params,
                   flags=np.asarray(data["flags"], dtype=str), frame=SolarFrame.from_dict(data["frame"]),
                   potential=Potential.from_dict(data["potential"]), meta=dict(data.get("meta", {})),
                   ids=np.asarray(data["ids"]) if "ids" in data else None)


def _jsonable(obj):
    if isinstance(obj, dict):
        return {k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


def _base_meta(pot, frame, ps):
    value, how = pot._model.potential_at_infinity_kms2()
    meta = {
        "input": ps.source,
        "energy_zero_point": pot.describe_zero_point(),
        "potential_at_infinity_kms2": value,
        "n_stars": int(len(ps.flags)),
        "n_flagged": int(np.sum(~ps.usable)),
    }
    meta.update(pot.reconcile(frame))
    return meta


def _energy_lz(pot, cyl):
    energy = _galpy.energy_kms2(pot._model, cyl)
    return energy, cyl[:, 0] * cyl[:, 4]


# --------------------------------------------------------------------------------------- integration
def integrate_orbits(stars_or_phase_space, pot, frame=None, *, t, distance=None, numcores=None, progress=None,
                     cancel=None, chunk_size=None, timeout=None):
    """Integrate the orbits of one star or many in a potential.

    Parameters
    ----------
    stars_or_phase_space : Table, dict or array
        Observables (ra, dec, parallax or distance, pmra, pmdec, radial_velocity) or Galactocentric
        Cartesian ``x y z vx vy vz`` (kpc, km/s; astropy's axes), e.g. from ``to_galactocentric``;
        or an array of shape (6,) / (N, 6) with those six values.
    pot : Potential
    frame : SolarFrame, optional
        Used to convert observables and for the reconciliation numbers in ``meta``. Default: the
        table's ``meta["frame"]`` if it holds one, else ``SolarFrame()`` (astropy's v4.0 values).
    t : array or Quantity
        Output times, Gyr: must start at 0 and be evenly spaced; a negative step integrates backward.
    distance : InverseParallax or DistanceColumn, optional
        Distance choice for observables input (passed to ``to_galactocentric``; its default otherwise).
    numcores : int, optional
        OpenMP threads for galpy's C integrator (default: OpenMP's default, usually all cores).
    progress : callable, optional
        ``progress(done, total)`` after each chunk (counts in stars).
    cancel : callable or threading.Event, optional
        Checked before each chunk; when true the run stops with :class:`OrbitCancelled` carrying the
        partial :class:`OrbitSet`.
    chunk_size : int, optional
        Stars per chunk (default: all at once; set it when using progress or cancel).
    timeout : float, optional
        Wall-clock seconds allowed for integrating one chunk. When a chunk exceeds it, its stars are
        integrated again one at a time, each with the same limit; a star that alone exceeds it gets
        NaN and the flag "integration_timeout", and the others their normal result. Default (None):
        30 s + 2 s per star per Gyr of ``|t[-1]|`` for a chunk, 30 s + 2 s per Gyr for one star,
        about six times the slowest preset potential. ``float("inf")`` disables the limit.

    Returns
    -------
    OrbitSet

    Raises
    ------
    TimeGridError
        For a grid that does not start at 0, is uneven, has fewer than 2 points or non-finite values.
    OrbitError
        For input without usable columns, a wrong potential type or a bad ``timeout``.
    OrbitCancelled
        When ``cancel`` fires.

    Notes
    -----
    galpy's ``dop853_c`` integrator (adaptive 8th-order Dormand-Prince in C) at its default tolerances;
    see :mod:`mwkin._galpy` for the choice. Stars with non-finite input get NaN tracks and a flag.

    *Stars the integrator cannot follow.* A star on the z axis (R <= 1e-9 r or 1e-9 kpc) or in the mid-plane with
    no vertical and azimuthal motion (falling straight through the centre) makes galpy's C integrator
    loop forever; such stars are recognised before integrating, get NaN and the flag "on_z_axis" or
    "radial_through_centre", and the batch goes on. Any other runaway integration is stopped by the
    ``timeout`` (through galpy's own interrupt flag, polled at every C integration step; a galpy
    potential without a C implementation is integrated in Python, where no limit applies).

    *Resolution of the parameters.* Orbital parameters are the extremes over the output times. A star
    is flagged "coarse_time_grid" (its values kept) when the step is more than 1/4 of the shortest of
    its radial, vertical and azimuthal periods at the starting radius (2 pi / kappa, 2 pi / nu,
    2 pi / Omega of the potential), or when the true extreme can lie more than 1 % (or 1 pc) beyond
    the sampled one. For that, each sample that is a local extreme of r (|z| for zmax) is extended to
    its turning point, (dr/dt)^2 / (2 |d2r/dt2|) beyond it (a parabola, with the acceleration from
    the potential), at most |dr/dt| times the step; the largest of these is compared with the sampled
    extreme. An extreme at the first or last time with the motion leaving the span is exact. A
    two-point grid is flagged unless its samples happen to be the extremes.

    References
    ----------
    Hairer, Norsett & Wanner 1993, Solving Ordinary Differential Equations I, Sect. II.10 (DOP853);
    Bovy 2015, ApJS 216, 29 (galpy).
    """
    pot = _check_potential(pot)
    t = _time_grid(t)
    ps = _phase_space(stars_or_phase_space, frame, distance=distance)
    _screen_singular(ps)
    n, nt = len(ps.flags), t.size
    _timeouts(timeout, 1, t)  # validate before any work
    usable = np.flatnonzero(ps.usable)
    all_good = usable.size == n
    track = None if (all_good and not chunk_size) else np.full((n, nt, 6), np.nan)
    method_used = {}
    timed_out = np.zeros(n, dtype=bool)

    def work(idx):
        nonlocal track
        chunk_limit, star_limit = _timeouts(timeout, len(idx), t)
        out, method, stopped = _galpy.integrate(pot._model, ps.cyl[idx], t, numcores=numcores,
                                                timeout=chunk_limit, star_timeout=star_limit)
        method_used["method"] = method
        timed_out[idx] = stopped
        if track is None:
            track = out
        else:
            track[idx] = out

    done, remaining = _run_chunks(usable, _chunk_size(chunk_size, usable.size or 1), work,
                                  _progress_in_stars(progress, n, n - usable.size), cancel)
    if track is None:
        track = np.full((n, nt, 6), np.nan)
    for i in remaining:
        ps.flags[i].append("cancelled")
    rperi, rapo, zmax, ecc = (np.full(n, np.nan) for _ in range(4))
    energy, lz = (np.full(n, np.nan) for _ in range(2))
    computed = np.setdiff1d(usable, remaining)
    if computed.size:
        sub = track[computed]
        finite = np.all(np.isfinite(sub), axis=(1, 2))
        for i in computed[~finite]:
            ps.flags[i].append("integration_timeout" if timed_out[i] else "integration_failed")
        good = computed[finite]
        rperi[good], rapo[good], zmax[good], ecc[good] = _parameters_from_tracks(track[good])
        energy[computed], lz[computed] = _energy_lz(pot, ps.cyl[computed])
        phi_inf = pot._model.potential_at_infinity_kms2()[0]
        for i in computed[energy[computed] >= phi_inf]:
            ps.flags[i].append("unbound")
            rperi[i] = rapo[i] = zmax[i] = ecc[i] = np.nan
        resolved = good[np.isfinite(rapo[good])]
        if resolved.size:
            for i in resolved[_coarse_grid(pot, ps.cyl[resolved], track[resolved], t)]:
                ps.flags[i].append("coarse_time_grid")
    meta = _base_meta(pot, ps.frame, ps)
    meta.update({"method": "integrate", "integrator": method_used.get("method", _galpy.INTEGRATOR),
                 "t_end_gyr": float(t[-1]), "n_times": int(nt),
                 "parameter_definition": "extremes over the output times; r spherical"})
    result = OrbitSet(t=t * u.Gyr, cylindrical=track, rperi=rperi * u.kpc, rapo=rapo * u.kpc, zmax=zmax * u.kpc,
                      eccentricity=ecc * u.dimensionless_unscaled, energy=energy * KMS**2, Lz=lz * u.kpc * KMS,
                      flags=_flag_strings(ps.flags), frame=ps.frame, potential=pot, meta=meta, ids=ps.ids)
    if remaining.size:
        raise OrbitCancelled(result, int(n - remaining.size), n)
    return result


def _progress_in_stars(progress, total, already):
    """Adapt a progress(done, total) callback: flagged stars count as done from the start."""
    if progress is None:
        return None
    return lambda done, _total: progress(int(done + already), int(total))


# --------------------------------------------------------------------------------------- parameters
#: Per-star marks returned by the parameter blocks -> the flag they become.
_BLOCK_FLAGS = (("unphysical", "staeckel_unphysical"), ("timed_out", "integration_timeout"),
                ("unreliable", "staeckel_unreliable"), ("coarse", "coarse_time_grid"), ("short", "short_time_grid"))

#: Staeckel validity limits (see the Notes of :func:`orbit_parameters`): |Lz| / (R |v|) below the first,
#: or eccentricity above the second, flags "staeckel_unreliable".
_STAECKEL_LIMITS = (0.2, 0.7)


def _staeckel_block(pot, cyl):
    """Parameters for (M, 6) finite points via the Staeckel approximation; NaN on failure.

    Impossible values (zmax < 0, rperi > rapo, e outside [0, 1]) become NaN and are marked in
    ``unphysical``; ``unreliable`` marks finite values outside the tested validity.
    """
    model = pot._model
    delta = _galpy.estimate_delta(model, cyl[:, 0], cyl[:, 2])
    out = {k: np.full(len(cyl), np.nan) for k in ("eccentricity", "zmax", "rperi", "rapo")}
    ok = np.isfinite(delta) & (delta > 0)
    if np.any(ok):
        res = _galpy.staeckel_parameters(model, cyl[ok], delta[ok])
        for k in out:
            out[k][ok] = res[k]
    with np.errstate(invalid="ignore"):
        unphysical = ((out["zmax"] < 0) | (out["rperi"] < 0) | (out["rperi"] > out["rapo"])
                      | (out["eccentricity"] < 0) | (out["eccentricity"] > 1))
        for k in ("eccentricity", "zmax", "rperi", "rapo"):
            out[k][unphysical] = np.nan
        speed = np.sqrt(np.sum(cyl[:, 3:] ** 2, axis=1))
        low_lz = np.abs(cyl[:, 0] * cyl[:, 4]) < _STAECKEL_LIMITS[0] * cyl[:, 0] * speed
        unreliable = np.isfinite(out["rapo"]) & (low_lz | (out["eccentricity"] > _STAECKEL_LIMITS[1]))
    out["delta"] = delta
    out["unphysical"] = unphysical
    out["unreliable"] = unreliable
    return out


def _integrated_block(pot, cyl, t, numcores, timeout):
    chunk_limit, star_limit = _timeouts(timeout, len(cyl), t)
    track, method, timed_out = _galpy.integrate(pot._model, cyl, t, numcores=numcores, timeout=chunk_limit,
                                                star_timeout=star_limit)
    finite = np.all(np.isfinite(track), axis=(1, 2))
    rperi, rapo, zmax, ecc = _parameters_from_tracks(track)
    out = {"rperi": rperi, "rapo": rapo, "zmax": zmax, "eccentricity": ecc}
    for k in out:
        out[k][~finite] = np.nan
    coarse = np.zeros(len(cyl), dtype=bool)
    short = np.zeros(len(cyl), dtype=bool)
    if np.any(finite):
        coarse[finite] = _coarse_grid(pot, cyl[finite], track[finite], t)
        short[finite] = _short_grid(track[finite], rperi[finite], rapo[finite], zmax[finite])
    out.update({"timed_out": timed_out, "coarse": coarse, "short": short})
    return out


def _draw_samples(xyz, cov, n_samples, rng):
    """(M, n_samples, 6) Gaussian draws around xyz with covariances cov (symmetrised, PSD-clipped)."""
    cov = 0.5 * (cov + np.swapaxes(cov, 1, 2))
    vals, vecs = np.linalg.eigh(cov)
    root = vecs * np.sqrt(np.clip(vals, 0.0, None))[:, None, :]
    normal = rng.standard_normal((len(xyz), n_samples, 6))
    return xyz[:, None, :] + np.einsum("mij,msj->msi", root, normal)


def orbit_parameters(stars_or_phase_space, pot, frame=None, method="staeckel", t=None, n_samples=0, seed=None,
                     progress=None, cancel=None, chunk_size=None, numcores=None, distance=None, timeout=None):
    """Orbital parameters of many stars: rperi, rapo, zmax, eccentricity, energy, Lz.

    Parameters
    ----------
    stars_or_phase_space : Table, dict or array
        As for :func:`integrate_orbits`.
    pot : Potential
        Must be axisymmetric for ``method="staeckel"``.
    frame : SolarFrame, optional
        As for :func:`integrate_orbits`.
    method : {"staeckel", "integrate"}
        "staeckel": the Staeckel approximation (galpy's ``actionAngleStaeckel``) with the focal distance
        delta estimated for each star from the local potential (Sanders 2012, eq. 9); fast.
        "integrate": extremes along integrated orbits on the grid ``t``.
    t : array or Quantity, optional
        Time grid for "integrate", Gyr (default 0 to 3 Gyr in 3001 steps).
    n_samples : int, optional
        If > 0, draw this many phase-space points per star from the linear covariance of x..vz
        (``cov_galactocentric`` from ``to_galactocentric(errors="linear", return_covariance=True)``,
        computed here for observables) and add ``<name>_p16``, ``_p50``, ``_p84`` columns for every
        parameter, plus ``n_samples_used`` (samples that gave a finite value of rapo).
    seed : int or numpy.random.Generator, optional
        For the draws.
    progress : callable, optional
        ``progress(done, total)`` after each chunk, counting stars.
    cancel : callable or threading.Event, optional
        Checked before each chunk; when true, raises :class:`OrbitCancelled` whose ``partial`` is the
        table so far (rows not reached are NaN and flagged "cancelled").
    chunk_size : int, optional
        Stars per chunk (default 2000 for Staeckel, 200 for integration).
    numcores : int, optional
        OpenMP threads for integration.
    distance : InverseParallax or DistanceColumn, optional
        Distance choice for observables input (passed to ``to_galactocentric``).
    timeout : float, optional
        For "integrate": wall-clock seconds per chunk, as in :func:`integrate_orbits` (same default).

    Returns
    -------
    QTable
        Columns ``rperi``, ``rapo``, ``zmax`` (kpc), ``eccentricity``, ``energy`` (km^2/s^2, galpy's
        zero point), ``Lz`` (kpc km/s, positive prograde), ``staeckel_delta`` (kpc, for "staeckel"),
        percentile columns when sampling, ``flag`` and ``method``; ``source_id`` when the input has it.
        ``meta`` holds the method, frame, potential, energy zero point and reconciliation numbers.

    Raises
    ------
    OrbitError
        Unknown method, bad n_samples, chunk_size or timeout, unusable input, or Staeckel with a
        non-axisymmetric potential.
    TimeGridError
        For a bad ``t``.
    OrbitCancelled
        When ``cancel`` fires.

    Notes
    -----
    Staeckel ``rperi`` is the mid-plane radius at the inner turning point of the spheroidal coordinate
    u, ``rapo`` the spherical radius at the outer one; they agree with the integrated values to a few
    per cent for disc orbits (measured in the tests). Failures (unbound orbits, points where delta
    cannot be estimated) give NaN and a flag, never an exception for the whole batch.

    The Staeckel approximation fits the potential locally with one focal distance, which fails for
    orbits that reach the centre or the axis: it can return zmax < 0 or e = 1 for a polar orbit.
    Impossible values (zmax < 0, rperi > rapo, e outside [0, 1]) are replaced by NaN and flagged
    "staeckel_unphysical". Finite values are flagged "staeckel_unreliable" (and kept) when
    |Lz| < 0.2 R |v| (a nearly polar or radial orbit) or e > 0.7: against integrated orbits
    (MWPotential2014, 200 halo-like stars near the Sun, 10 Gyr) the flagged ones include zmax < 0 or
    wrong by a factor 2, rperi off by up to 90 % and e off by up to 0.2; the unflagged ones had rapo
    within 3.5 %, zmax within 0.6 % (median; 30 % at worst) and e within 0.15. Disc orbits agree to
    about 1 % (Mackereth & Bovy 2018).

    With ``method="integrate"`` the stars :func:`integrate_orbits` cannot follow are flagged the same
    way ("on_z_axis", "radial_through_centre", "integration_timeout"; also for Staeckel, whose
    focal-distance estimate is singular there), and so is a coarse grid ("coarse_time_grid", same
    criterion). A grid whose span does not reach a pericentre, an apocentre and a vertical turning
    point is flagged "short_time_grid": its extremes are those of an arc, not of the orbit.

    References
    ----------
    Binney 2012, MNRAS 426, 1324 (Staeckel fudge); Sanders 2012, MNRAS 426, 128 (delta estimate);
    Mackereth & Bovy 2018, PASP 130, 114094 (orbital parameters from the Staeckel approximation).
    """
    pot = _check_potential(pot)
    if method not in ("staeckel", "integrate"):
        raise OrbitError(f"method must be 'staeckel' or 'integrate', got {method!r}")
    if method == "staeckel" and not pot.is_axisymmetric:
        raise OrbitError(f"the Staeckel approximation needs an axisymmetric potential; {pot.name} is not. "
                         "Use method='integrate'")
    if int(n_samples) != n_samples or n_samples < 0:
        raise OrbitError(f"n_samples must be a non-negative integer, got {n_samples!r}")
    n_samples = int(n_samples)
    grid = _time_grid(t if t is not None else np.linspace(0.0, *_DEFAULT_PARAMETER_GRID)) if method == "integrate" else None
    if method == "integrate":
        _timeouts(timeout, 1, grid)  # validate before any work
    ps = _phase_space(stars_or_phase_space, frame, need_cov=n_samples > 0, distance=distance)
    _screen_singular(ps)
    n = len(ps.flags)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    names = ("rperi", "rapo", "zmax", "eccentricity")
    result = {k: np.full(n, np.nan) for k in names + ("energy", "Lz", "staeckel_delta")}
    bands = {f"{k}_{p}": np.full(n, np.nan) for k in names + ("energy", "Lz") for p in ("p16", "p50", "p84")}
    n_used = np.zeros(n, dtype=int)
    marks = {reason: np.zeros(n, dtype=bool) for _, reason in _BLOCK_FLAGS}
    usable = np.flatnonzero(ps.usable)
    phi_inf = pot._model.potential_at_infinity_kms2()[0]

    # Points per call: integrated tracks take nt x 48 bytes each, so sampled batches are split up.
    block = 20000 if method == "staeckel" else _DEFAULT_CHUNK["integrate"]

    def compute(cyl):
        parts = []
        for start in range(0, len(cyl), block):
            sub = cyl[start:start + block]
            parts.append(_staeckel_block(pot, sub) if method == "staeckel" else
                         _integrated_block(pot, sub, grid, numcores, timeout))
        return {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}

    def work(idx):
        cyl = ps.cyl[idx]
        out = compute(cyl)
        for k in names:
            result[k][idx] = out[k]
        if "delta" in out:
            result["staeckel_delta"][idx] = out["delta"]
        for key, reason in _BLOCK_FLAGS:
            if key in out:
                marks[reason][idx] = out[key]
        result["energy"][idx], result["Lz"][idx] = _energy_lz(pot, cyl)
        if n_samples:
            cov = ps.cov[idx]
            has_cov = np.all(np.isfinite(cov), axis=(1, 2))
            for i in idx[~has_cov]:
                ps.flags[i].append("no_covariance")
            sel = idx[has_cov]
            if sel.size == 0:
                return
            draws = _draw_samples(ps.xyz[sel], ps.cov[sel], n_samples, rng).reshape(-1, 6)
            dcyl = _cylindrical(draws)
            finite = np.all(np.isfinite(dcyl), axis=1)
            sample_out = {k: np.full(len(dcyl), np.nan) for k in names}
            if np.any(finite):
                sub = compute(dcyl[finite])
                for k in names:
                    sample_out[k][finite] = sub[k]
            e_s, lz_s = np.full(len(dcyl), np.nan), np.full(len(dcyl), np.nan)
            if np.any(finite):
                e_s[finite], lz_s[finite] = _energy_lz(pot, dcyl[finite])
            with np.errstate(invalid="ignore"):
                escapes = e_s >= phi_inf  # unbound draws have no pericentre/apocentre
            for k in names:
                sample_out[k][escapes] = np.nan
            sample_out["energy"], sample_out["Lz"] = e_s, lz_s
            n_used[sel] = np.isfinite(sample_out["rapo"].reshape(sel.size, n_samples)).sum(axis=1)
            for k, values in sample_out.items():
                values = values.reshape(sel.size, n_samples)
                with np.errstate(all="ignore"), _quiet_nan_warnings():
                    p16, p50, p84 = np.nanpercentile(values, [16, 50, 84], axis=1)
                bands[f"{k}_p16"][sel], bands[f"{k}_p50"][sel], bands[f"{k}_p84"][sel] = p16, p50, p84

    size = _chunk_size(chunk_size, _DEFAULT_CHUNK[method])
    _, remaining = _run_chunks(usable, size, work, _progress_in_stars(progress, n, n - usable.size), cancel)
    for i in remaining:
        ps.flags[i].append("cancelled")
    computed = np.setdiff1d(usable, remaining)
    for i in computed:
        if result["energy"][i] >= phi_inf:
            ps.flags[i].append("unbound")
            for k in names:
                result[k][i] = np.nan
        elif marks["staeckel_unphysical"][i] or marks["integration_timeout"][i]:
            ps.flags[i].append("staeckel_unphysical" if marks["staeckel_unphysical"][i] else "integration_timeout")
        elif method == "staeckel" and not np.isfinite(result["rapo"][i]):
            ps.flags[i].append("staeckel_failed")
        elif method == "integrate" and not np.isfinite(result["rapo"][i]):
            ps.flags[i].append("integration_failed")
        else:
            ps.flags[i].extend(reason for reason in sorted(ADVISORY_FLAGS) if reason in marks and marks[reason][i])
    table = _parameter_table(result, bands if n_samples else None, n_used if n_samples else None, ps, method)
    meta = _base_meta(pot, ps.frame, ps)
    meta.update({"method": method, "frame": ps.frame.describe(), "potential": pot.describe(),
                 "n_samples": n_samples})
    if method == "staeckel":
        meta["staeckel"] = ("galpy actionAngleStaeckel (C); delta per star from Sanders (2012) eq. 9, "
                            "vectorised as galpy's estimateDeltaStaeckel")
    else:
        meta.update({"integrator": _galpy.INTEGRATOR, "t_end_gyr": float(grid[-1]), "n_times": int(grid.size)})
    table.meta.update(meta)
    if remaining.size:
        raise OrbitCancelled(table, int(n - remaining.size), n)
    return table


class _quiet_nan_warnings:
    """Silence numpy's "All-NaN slice" warnings for stars whose samples all failed."""

    def __enter__(self):
        import warnings

        self._ctx = warnings.catch_warnings()
        self._ctx.__enter__()
        warnings.simplefilter("ignore", RuntimeWarning)

    def __exit__(self, *exc):
        return self._ctx.__exit__(*exc)


def _parameter_table(result, bands, n_used, ps, method):
    table = QTable()
    if ps.ids is not None:
        table["source_id"] = ps.ids
    for name, (unit, description) in PARAMETERS.items():
        table[name] = result[name] * unit
        table[name].info.description = description
    if method == "staeckel":
        table["staeckel_delta"] = result["staeckel_delta"] * u.kpc
        table["staeckel_delta"].info.description = "focal distance of the Staeckel coordinates used"
    if bands is not None:
        for key, values in bands.items():
            name, pct = key.rsplit("_", 1)
            table[key] = values * PARAMETERS[name][0]
            table[key].info.description = f"{pct[1:]}th percentile of {name} over the samples"
        table["n_samples_used"] = n_used
        table["n_samples_used"].info.description = "samples that gave a finite apocentre"
    table["flag"] = _flag_strings(ps.flags)
    table["flag"].info.description = "'' if fine, else ';'-joined reasons (mwkin.orbits.FLAGS)"
    table["method"] = np.full(len(table), method)
    return table
