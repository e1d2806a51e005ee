""":func:`integrate_orbits`: orbits of one star or many in a :class:`~mwkin.Potential`."""

from __future__ import annotations

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np

from ..potentials import _galpy
from ..units import KMS
from . import screening
from .flags import OrbitCancelled
from .inputs import _check_potential, _phase_space, _time_grid
from .orbitset import (
    OrbitSet,
    _base_meta,
    _energy_lz,
    _flag_strings,
    _parameters_from_tracks,
)
from .screening import (
    _chunk_size,
    _coarse_grid,
    _run_chunks,
    _timeouts,
)

if TYPE_CHECKING:
    from ..frames import SolarFrame
    from ..potentials import Potential


# --------------------------------------------------------------------------------------- integration
def integrate_orbits(
    stars_or_phase_space,
    pot: Potential,
    frame: SolarFrame | None = None,
    *,
    t,
    distance=None,
    numcores=None,
    progress=None,
    cancel=None,
    chunk_size=None,
    timeout=None,
) -> OrbitSet:
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
    see :mod:`mwkin.potentials._galpy` for the choice. Stars with non-finite input get NaN tracks and a flag.

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
    the sampled one. For that, each sample that is a local extreme of r (``|z|`` for zmax) is extended to
    its turning point, ``(dr/dt)^2 / (2 |d2r/dt2|)`` beyond it (a parabola, with the acceleration from
    the potential), at most ``|dr/dt|`` times the step; the largest of these is compared with the sampled
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
    screening._screen_singular(ps)  # looked up at call time (tests switch the screen off)
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
        out, method, stopped = _galpy.integrate(
            pot.model, ps.cyl[idx], t, numcores=numcores, timeout=chunk_limit, star_timeout=star_limit
        )
        method_used["method"] = method
        timed_out[idx] = stopped
        if track is None:
            track = out
        else:
            track[idx] = out

    done, remaining = _run_chunks(
        usable,
        _chunk_size(chunk_size, usable.size or 1),
        work,
        _progress_in_stars(progress, n, n - usable.size),
        cancel,
    )
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
        phi_inf = pot.model.potential_at_infinity_kms2()[0]
        for i in computed[energy[computed] >= phi_inf]:
            ps.flags[i].append("unbound")
            rperi[i] = rapo[i] = zmax[i] = ecc[i] = np.nan
        resolved = good[np.isfinite(rapo[good])]
        if resolved.size:
            for i in resolved[_coarse_grid(pot, ps.cyl[resolved], track[resolved], t)]:
                ps.flags[i].append("coarse_time_grid")
    meta = _base_meta(pot, ps.frame, ps)
    meta.update(
        {
            "method": "integrate",
            "integrator": method_used.get("method", _galpy.INTEGRATOR),
            "t_end_gyr": float(t[-1]),
            "n_times": int(nt),
            "parameter_definition": "extremes over the output times; r spherical",
        }
    )
    result = OrbitSet(
        t=t * u.Gyr,
        cylindrical=track,
        rperi=rperi * u.kpc,
        rapo=rapo * u.kpc,
        zmax=zmax * u.kpc,
        eccentricity=ecc * u.dimensionless_unscaled,
        energy=energy * KMS**2,
        Lz=lz * u.kpc * KMS,
        flags=_flag_strings(ps.flags),
        frame=ps.frame,
        potential=pot,
        meta=meta,
        ids=ps.ids,
    )
    if remaining.size:
        raise OrbitCancelled(result, int(n - remaining.size), n)
    return result


def _progress_in_stars(progress, total, already):
    """Adapt a progress(done, total) callback: flagged stars count as done from the start."""
    if progress is None:
        return None
    return lambda done, _total: progress(int(done + already), int(total))
