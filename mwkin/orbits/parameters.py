""":func:`orbit_parameters`: pericentre, apocentre, zmax, eccentricity, energy and L_z, from the Staeckel approximation or from integrated orbits, with percentile bands from the measurement uncertainties."""

from __future__ import annotations

from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from ..potentials import _galpy
from . import screening
from .flags import (
    _DEFAULT_CHUNK,
    _DEFAULT_PARAMETER_GRID,
    ADVISORY_FLAGS,
    PARAMETERS,
    OrbitCancelled,
    OrbitError,
)
from .inputs import _check_potential, _cylindrical, _phase_space, _time_grid
from .integrate import _progress_in_stars
from .orbitset import _base_meta, _energy_lz, _flag_strings, _parameters_from_tracks
from .screening import (
    _chunk_size,
    _coarse_grid,
    _run_chunks,
    _short_grid,
    _timeouts,
)

if TYPE_CHECKING:
    from ..frames import SolarFrame
    from ..potentials import Potential

__all__ = ["orbit_parameters", "draw_phase_space_samples", "span_parameters"]

# --------------------------------------------------------------------------------------- parameters
#: Per-star marks returned by the parameter blocks -> the flag they become.
_BLOCK_FLAGS = (
    ("unphysical", "staeckel_unphysical"),
    ("timed_out", "integration_timeout"),
    ("unreliable", "staeckel_unreliable"),
    ("coarse", "coarse_time_grid"),
    ("short", "short_time_grid"),
)

#: Staeckel validity limits (see the Notes of :func:`orbit_parameters`): |Lz| / (R |v|) below the first,
#: or eccentricity above the second, flags "staeckel_unreliable".
_STAECKEL_LIMITS = (0.2, 0.7)


def _staeckel_block(pot, cyl):
    """Parameters for (M, 6) finite points via the Staeckel approximation; NaN on failure.

    Impossible values (zmax < 0, rperi > rapo, e outside [0, 1]) become NaN and are marked in
    ``unphysical``; ``unreliable`` marks finite values outside the tested validity.
    """
    model = pot.model
    delta = _galpy.estimate_delta(model, cyl[:, 0], cyl[:, 2])
    out = {k: np.full(len(cyl), np.nan) for k in ("eccentricity", "zmax", "rperi", "rapo")}
    ok = np.isfinite(delta) & (delta > 0)
    if np.any(ok):
        res = _galpy.staeckel_parameters(model, cyl[ok], delta[ok])
        for k in out:
            out[k][ok] = res[k]
    with np.errstate(invalid="ignore"):
        unphysical = (
            (out["zmax"] < 0)
            | (out["rperi"] < 0)
            | (out["rperi"] > out["rapo"])
            | (out["eccentricity"] < 0)
            | (out["eccentricity"] > 1)
        )
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
    track, method, timed_out = _galpy.integrate(
        pot.model, cyl, t, numcores=numcores, timeout=chunk_limit, star_timeout=star_limit
    )
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


def draw_phase_space_samples(phase_space, covariance, n_samples, seed=None):
    """Phase-space points drawn from each star's Gaussian uncertainty in x..vz.

    The sampler :func:`orbit_parameters` uses for ``n_samples > 0``: with the same seed, the same stars
    and covariances, the draws are the ones whose orbits it summarises in its ``_p16`` / ``_p50`` /
    ``_p84`` columns.

    Parameters
    ----------
    phase_space : array_like, shape (6,) or (M, 6)
        Galactocentric x, y, z (kpc), vx, vy, vz (km/s) of one star or M stars (astropy's axes).
    covariance : array_like, shape (6, 6) or (M, 6, 6)
        Their covariance in the same units, e.g. ``cov_galactocentric`` of
        ``to_galactocentric(errors="linear", return_covariance=True)``. It is symmetrised, and
        negative eigenvalues from round-off are treated as zero.
    n_samples : int
        Draws per star (>= 1).
    seed : int, numpy.random.Generator or None, optional
        Seed of the draws (None: fresh entropy).

    Returns
    -------
    numpy.ndarray, shape (M, n_samples, 6)
        The draws (M = 1 for a single star given with shape (6,)).

    Raises
    ------
    OrbitError
        For arrays of the wrong shape, a non-finite position, velocity or covariance (name the star), or
        ``n_samples`` that is not a whole number >= 1.

    Examples
    --------
    >>> import numpy as np
    >>> cov = np.diag([0.01, 0.01, 0.01, 4.0, 4.0, 4.0])
    >>> draws = draw_phase_space_samples([-8.0, 0.0, 0.02, 11.0, 245.0, 7.0], cov, 1000, seed=1)
    >>> draws.shape
    (1, 1000, 6)
    """
    xyz = np.asarray(phase_space, dtype=float)
    cov = np.asarray(covariance, dtype=float)
    if xyz.ndim == 1:
        xyz = xyz[None, :]
    if cov.ndim == 2:
        cov = cov[None, :, :]
    if xyz.ndim != 2 or xyz.shape[1] != 6:
        raise OrbitError(
            f"phase_space must have shape (6,) or (M, 6) (x, y, z, vx, vy, vz), got {np.shape(phase_space)}"
        )
    if cov.shape != (len(xyz), 6, 6):
        raise OrbitError(
            f"covariance must have shape (6, 6) or ({len(xyz)}, 6, 6) to go with the phase space, "
            f"got {np.shape(covariance)}"
        )
    if (
        isinstance(n_samples, bool)
        or not isinstance(n_samples, (int, float, np.integer, np.floating))
        or not n_samples >= 1
        or int(n_samples) != n_samples
    ):
        raise OrbitError(f"n_samples must be a whole number >= 1, got {n_samples!r}")
    bad = np.flatnonzero(~(np.all(np.isfinite(xyz), axis=1) & np.all(np.isfinite(cov), axis=(1, 2))))
    if bad.size:
        raise OrbitError(
            f"star {int(bad[0])} has a non-finite phase space or covariance ({bad.size} star(s) in "
            "all): no uncertainty to draw from"
        )
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    return _draw_samples(xyz, cov, int(n_samples), rng)


def span_parameters(orbit_sets):
    """Orbital parameters over several integrations of the same stars taken together.

    For an orbit followed backward and forward from the present, the extremes over the whole span are
    those of both :class:`OrbitSet` s together; this gives them, with the definitions of the module
    notes (spherical ``rperi`` / ``rapo``, ``zmax`` = max |z|, e = (rapo - rperi) / (rapo + rperi)).

    Parameters
    ----------
    orbit_sets : sequence of OrbitSet
        Integrations of the same N stars from the same starting points (e.g. forward and backward);
        None entries are skipped.

    Returns
    -------
    QTable
        One row per star: ``rperi``, ``rapo``, ``zmax`` (kpc), ``eccentricity``, ``energy``
        (km^2/s^2) and ``Lz`` (kpc km/s) -- energy and Lz are conserved, taken from the first set --
        and ``flag``, the reasons of all sets (";"-joined, each once). A star without parameters in any
        of the sets (unbound, failed) has none over the span (NaN).

    Raises
    ------
    OrbitError
        If no set is given or the sets hold different numbers of stars.
    """
    sets = [s for s in orbit_sets if s is not None]
    if not sets:
        raise OrbitError("span_parameters needs at least one OrbitSet")
    n = len(sets[0])
    if any(len(s) != n for s in sets):
        raise OrbitError(f"span_parameters: the orbit sets hold different numbers of stars ({[len(s) for s in sets]})")
    tracks = np.concatenate([s.cylindrical for s in sets], axis=1)
    values = dict(zip(("rperi", "rapo", "zmax", "eccentricity"), _parameters_from_tracks(tracks)))
    missing = np.zeros(n, dtype=bool)
    for s in sets:
        missing |= ~np.isfinite(s.rapo.to_value(u.kpc))
    table = QTable()
    for name, (unit, description) in PARAMETERS.items():
        if name in values:
            column = np.where(missing, np.nan, values[name]) * unit
        else:
            column = getattr(sets[0], name).to(unit)
        table[name] = column
        table[name].info.description = description
    flags = []
    for i in range(n):
        reasons = []
        for s in sets:
            reasons += [r for r in str(s.flags[i]).split(";") if r and r not in reasons]
        flags.append(reasons)
    table["flag"] = _flag_strings(flags)
    return table


def orbit_parameters(
    stars_or_phase_space,
    pot: Potential,
    frame: SolarFrame | None = None,
    method="staeckel",
    t=None,
    n_samples=0,
    seed=None,
    progress=None,
    cancel=None,
    chunk_size=None,
    numcores=None,
    distance=None,
    timeout=None,
) -> QTable:
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
    ``|Lz| < 0.2 R |v|`` (a nearly polar or radial orbit) or e > 0.7: against integrated orbits
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

    Examples
    --------
    The default method is the Staeckel approximation:

    >>> from mwkin import Potential
    >>> table = orbit_parameters([[-8.1, 0.0, 0.02, 11.0, 245.0, 7.0]], Potential.preset("MWPotential2014"))
    >>> table.meta["method"], bool(0 < table["eccentricity"][0] < 0.2)
    ('staeckel', True)
    """
    pot = _check_potential(pot)
    if method not in ("staeckel", "integrate"):
        raise OrbitError(f"method must be 'staeckel' or 'integrate', got {method!r}")
    if method == "staeckel" and not pot.is_axisymmetric:
        raise OrbitError(
            f"the Staeckel approximation needs an axisymmetric potential; {pot.name} is not. Use method='integrate'"
        )
    if int(n_samples) != n_samples or n_samples < 0:
        raise OrbitError(f"n_samples must be a non-negative integer, got {n_samples!r}")
    n_samples = int(n_samples)
    grid = (
        _time_grid(t if t is not None else np.linspace(0.0, *_DEFAULT_PARAMETER_GRID))
        if method == "integrate"
        else None
    )
    if method == "integrate":
        _timeouts(timeout, 1, grid)  # validate before any work
    ps = _phase_space(stars_or_phase_space, frame, need_cov=n_samples > 0, distance=distance)
    screening._screen_singular(ps)  # looked up at call time (tests switch the screen off)
    n = len(ps.flags)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    names = ("rperi", "rapo", "zmax", "eccentricity")
    result = {k: np.full(n, np.nan) for k in names + ("energy", "Lz", "staeckel_delta")}
    bands = {f"{k}_{p}": np.full(n, np.nan) for k in names + ("energy", "Lz") for p in ("p16", "p50", "p84")}
    n_used = np.zeros(n, dtype=int)
    marks = {reason: np.zeros(n, dtype=bool) for _, reason in _BLOCK_FLAGS}
    usable = np.flatnonzero(ps.usable)
    phi_inf = pot.model.potential_at_infinity_kms2()[0]

    # Points per call: integrated tracks take nt x 48 bytes each, so sampled batches are split up.
    block = 20000 if method == "staeckel" else _DEFAULT_CHUNK["integrate"]

    def compute(cyl):
        parts = []
        for start in range(0, len(cyl), block):
            sub = cyl[start : start + block]
            parts.append(
                _staeckel_block(pot, sub)
                if method == "staeckel"
                else _integrated_block(pot, sub, grid, numcores, timeout)
            )
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
                per_star = values.reshape(sel.size, n_samples)
                with np.errstate(all="ignore"), _quiet_nan_warnings():
                    p16, p50, p84 = np.nanpercentile(per_star, [16, 50, 84], axis=1)
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
    meta.update({"method": method, "frame": ps.frame.describe(), "potential": pot.describe(), "n_samples": n_samples})
    if method == "staeckel":
        meta["staeckel"] = (
            "galpy actionAngleStaeckel (C); delta per star from Sanders (2012) eq. 9, "
            "vectorised as galpy's estimateDeltaStaeckel"
        )
    else:
        assert grid is not None  # method == "integrate"
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
