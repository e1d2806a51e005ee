"""Screening before and after integration: singular starts (axis, centre), time limits, time grids too coarse or too short to resolve an orbit, and chunked runs with progress and cancel."""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ..units import KMS
from .flags import OrbitError

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
        radial = (
            ~on_axis
            & ~overflow
            & (np.abs(z) <= _AXIS_TOL * r)
            & (np.abs(v_z) <= _AXIS_TOL * v)
            & (np.abs(v_phi) <= _AXIS_TOL * v)
        )
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
    model = pot.model
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
                    accel = (
                        vR[maybe] ** 2 + vphi[maybe] ** 2 + vz[maybe] ** 2 - rdot**2 + wR[maybe] * f_R + wz[maybe] * f_z
                    ) / rr[maybe]
                accel = sign * accel * _KMS_TO_KPC_PER_GYR**2
                parabola = np.where(accel < 0, rate[maybe] ** 2 / (2.0 * np.abs(accel)), np.inf)
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
        chunk = indices[start : start + step]
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
