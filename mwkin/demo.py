"""A synthetic survey with known truth, for demonstrations, notebooks and tests.

:func:`survey` makes a star table in Gaia archive column names from a simple disc model of our own:
stars within 3 kpc of the Sun, an axisymmetric mean flow that follows a power-law rotation curve, a
Gaussian velocity ellipsoid, survey-like astrometric noise (magnitude-dependent, correlated) and radial
velocities for the brighter stars only. Everything that went into it is in ``table.meta["truth"]``, so
a fit of the Oort constants or the solar motion can be checked against the truth. The data are
synthetic; they describe no real survey.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
from astropy.table import QTable

from .columns import CORRELATION_COLUMNS, CORRELATION_PAIRS
from .coords import K_KMS_PER_MASYR_KPC
from .frames import SolarFrame
from .kinematics import from_galactocentric
from .units import KMS, MASYR

__all__ = ["survey", "DEFAULTS"]

#: Model parameters of :func:`survey` (units in the names).
DEFAULTS = {
    "v0_kms": 220.0,  # mean azimuthal velocity at the Sun's Galactocentric radius
    "beta": -0.1,  # power-law slope of the mean flow, v_mean(R) = v0 (R / R_sun)^beta
    "sigma_R_kms": 35.0,
    "sigma_phi_kms": 25.0,
    "sigma_z_kms": 18.0,
    "scale_height_kpc": 0.3,  # exponential vertical profile exp(-|z| / h)
    "scale_length_kpc": 0.8,  # in-plane surface density around the Sun ~ exp(-s / L)
    "max_distance_kpc": 3.0,
    "min_distance_kpc": 0.02,
    "abs_mag_mean": 5.0,  # absolute G magnitudes ~ N(mean, sd)
    "abs_mag_sd": 2.0,
    "mag_limit": 20.0,  # stars fainter than this are not observed
    "rv_fraction": 0.3,  # the brightest 30% get radial velocities
}

_CORR_NAMES = CORRELATION_COLUMNS
_CORR_INDEX = tuple(CORRELATION_PAIRS)
_N_FACTORS = 7  # latent factors behind the correlated noise
_RIDGE = 0.05  # added to the diagonal so that every correlation matrix is positive definite


def _positions(n, rng, sun, p):
    """Galactocentric positions (3, n) and absolute magnitudes of stars that pass the survey limits."""
    chunks, mags, have = [], [], 0
    while have < n:
        m = int(1.5 * (n - have)) + 64
        s = rng.gamma(2.0, p["scale_length_kpc"], m)  # 2-D density ~ exp(-s/L) around the Sun
        theta = rng.uniform(0.0, 2.0 * math.pi, m)
        z = rng.laplace(0.0, p["scale_height_kpc"], m)  # height above the mid-plane
        pos = np.stack([sun[0] + s * np.cos(theta), sun[1] + s * np.sin(theta), z])
        dist = np.sqrt(s * s + (z - sun[2]) ** 2)
        abs_mag = rng.normal(p["abs_mag_mean"], p["abs_mag_sd"], m)
        app_mag = abs_mag + 5.0 * np.log10(dist * 100.0)  # distance modulus with d in units of 10 pc
        keep = (dist <= p["max_distance_kpc"]) & (dist >= p["min_distance_kpc"]) & (app_mag <= p["mag_limit"])
        chunks.append(pos[:, keep])
        mags.append(app_mag[keep])
        have += int(keep.sum())
    return np.concatenate(chunks, axis=1)[:, :n], np.concatenate(mags)[:n]


def _velocities(pos, rng, R_sun, p):
    """Galactocentric Cartesian velocities (3, n) from the mean flow and the velocity ellipsoid."""
    x, y = pos[0], pos[1]
    R = np.hypot(x, y)
    n = R.size
    v_R = rng.normal(0.0, p["sigma_R_kms"], n)
    v_phi = p["v0_kms"] * (R / R_sun) ** p["beta"] + rng.normal(0.0, p["sigma_phi_kms"], n)
    v_z = rng.normal(0.0, p["sigma_z_kms"], n)
    c, s = x / R, y / R  # phi = atan2(y, -x) grows with rotation: v_x = c v_R + s v_phi, v_y = s v_R - c v_phi
    return np.stack([c * v_R + s * v_phi, s * v_R - c * v_phi, v_z])


def _uncertainties(mag, rng):
    """Per-star standard deviations (ra*, dec, parallax in mas; pmra, pmdec in mas/yr), shape (5, n)."""
    # Parallax uncertainty growing with magnitude: 0.02 mas for bright stars, ~0.5 mas at G = 20,
    # with a 10% star-to-star scatter. Positions and proper motions scale with it.
    sigma_plx = (0.02 + 0.5 * 10.0 ** (0.4 * (mag - 20.0))) * rng.lognormal(0.0, 0.1, mag.size)
    return np.stack([f * sigma_plx for f in (0.75, 0.65, 1.0, 1.1, 1.0)])


def _correlation_factors(ra_deg, rng):
    """Loadings W (n, 5, k) whose normalised W W^T + ridge are the correlation matrices.

    A sky-dependent part (varying with 2 ra, as scanning patterns do) plus a random part per star.
    """
    n = ra_deg.size
    W = 0.6 * rng.standard_normal((n, 5, _N_FACTORS))
    two_ra = np.radians(2.0 * ra_deg)
    pattern_a = np.array([0.8, -0.5, 0.6, 0.3, -0.4])
    pattern_b = np.array([-0.3, 0.7, 0.2, -0.6, 0.5])
    W[:, :, 0] += np.cos(two_ra)[:, None] * pattern_a
    W[:, :, 1] += np.sin(two_ra)[:, None] * pattern_b
    return W


def _correlated_noise(sigma, W, rng):
    """Noise (5, n) with standard deviations ``sigma`` and correlations from the loadings ``W``.

    Returns the noise and the correlation coefficients (10, n) in Gaia order.
    """
    n = W.shape[0]
    S = np.einsum("nik,njk->nij", W, W)
    S[:, range(5), range(5)] += _RIDGE
    norm = 1.0 / np.sqrt(S[:, range(5), range(5)])  # (n, 5)
    corr = np.stack([S[:, i, j] * norm[:, i] * norm[:, j] for i, j in _CORR_INDEX])
    # W z + sqrt(ridge) z' has covariance W W^T + ridge I = S; scaling by norm gives the correlations.
    latent = np.einsum("nik,nk->ni", W, rng.standard_normal((n, _N_FACTORS)))
    latent += math.sqrt(_RIDGE) * rng.standard_normal((n, 5))
    return (latent * norm).T * sigma, corr


def _move_on_sky(ra_deg, dec_deg, d_ra_star_mas, d_dec_mas):
    """ra, dec (deg) moved by small offsets along east (ra*) and north, exactly on the sphere."""
    ra, dec = np.radians(ra_deg), np.radians(dec_deg)
    a, b = d_ra_star_mas * (math.pi / 180.0 / 3.6e6), d_dec_mas * (math.pi / 180.0 / 3.6e6)
    sa, ca, sd, cd = np.sin(ra), np.cos(ra), np.sin(dec), np.cos(dec)
    x = cd * ca - a * sa - b * sd * ca
    y = cd * sa + a * ca - b * sd * sa
    z = sd + b * cd
    new_ra = np.degrees(np.arctan2(y, x)) % 360.0
    new_dec = np.degrees(np.arctan2(z, np.hypot(x, y)))
    return new_ra, new_dec


def survey(n=20000, seed=1, frame=None, *, noise=True):
    """A synthetic survey of disc stars around the Sun, with the truth in ``meta``.

    Parameters
    ----------
    n : int, default 20000
        Number of stars.
    seed : int or None, default 1
        Seed of the random numbers; the same seed gives the same table.
    frame : SolarFrame, optional
        The Sun's position and velocity used to observe the stars; default
        ``SolarFrame.preset("astropy v4.0")``.
    noise : bool, default True
        False gives the exact observables of the same stars (same seed, same stars), with the same
        uncertainty and correlation columns: the truth the noisy table was drawn around. The exact
        table has the radial velocity of every star (its ``radial_velocity_error`` is NaN where the
        noisy table has no radial velocity).

    Returns
    -------
    astropy.table.QTable
        Gaia archive column names and units: ``source_id``, ``ra``, ``dec`` (deg), ``parallax`` (mas),
        ``pmra`` (mu_alpha*), ``pmdec`` (mas/yr), ``radial_velocity`` (km/s, NaN for the fainter ~70%),
        ``ra_error``, ``dec_error``, ``parallax_error`` (mas), ``pmra_error``, ``pmdec_error`` (mas/yr),
        ``radial_velocity_error`` (km/s), the ten ``*_corr`` columns and ``phot_g_mean_mag``.
        ``meta["truth"]`` holds the model: rotation curve, Oort constants A, B (C = K = 0), Omega0, the
        solar motion relative to the local mean flow (U, V, W), the velocity dispersions, the frame
        (``to_dict()``) and the other model parameters; ``meta["frame"]`` is the frame's ``to_dict()`` and
        ``meta["description"]`` says the data are synthetic.

    Raises
    ------
    ValueError
        If ``n`` is not a positive integer.

    Notes
    -----
    The model (our own, chosen to resemble the solar neighbourhood):

    * positions: in-plane surface density around the Sun ~ exp(-s / 0.8 kpc), vertical density
      ~ exp(-``|z|`` / 0.3 kpc) about the mid-plane, heliocentric distances 0.02-3 kpc, absolute magnitudes
      M_G ~ N(5, 2) and a magnitude limit G <= 20 (no extinction), so the sample thins out with
      distance as a real magnitude-limited one does;
    * velocities: mean flow v_phi = v0 (R / R_sun)^beta with v0 = 220 km/s and beta = -0.1 (R_sun the
      Sun's in-plane Galactocentric radius), no mean radial or vertical motion, dispersions
      (sigma_R, sigma_phi, sigma_z) = (35, 25, 18) km/s. Then A = (v0/R_sun)(1 - beta)/2 ~ 14.9 and
      B = -(v0/R_sun)(1 + beta)/2 ~ -12.2 km/s/kpc;
    * noise: sigma_parallax = (0.02 + 0.5 x 10^(0.4 (G - 20))) mas with 10% scatter (0.02-0.5 mas),
      ra*/dec errors 0.75/0.65 and proper-motion errors 1.1/1.0 times that (mas, mas/yr); correlations
      from seven latent factors, partly varying with 2 ra over the sky, always a valid (positive
      definite) correlation matrix; radial velocities for the brightest ``rv_fraction`` of the stars
      with errors from 1 to 5 km/s growing with magnitude.

    Examples
    --------
    >>> sample = survey(n=1000, seed=3)
    >>> round(sample.meta["truth"]["A_kms_kpc"], 1), round(sample.meta["truth"]["B_kms_kpc"], 1)
    (14.9, -12.2)
    """
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise ValueError(f"n must be a positive integer number of stars, got {n!r}")
    n = int(n)
    frame = SolarFrame.preset("astropy v4.0") if frame is None else frame
    p = dict(DEFAULTS)
    rng = np.random.default_rng(seed)
    sun = np.asarray(frame.sun_position)
    R_sun = float(np.hypot(sun[0], sun[1]))

    pos, mag = _positions(n, rng, sun, p)
    vel = _velocities(pos, rng, R_sun, p)
    obs = from_galactocentric(np.concatenate([pos, vel]).T, frame=frame)
    ra, dec = obs["ra"].to_value(u.deg), obs["dec"].to_value(u.deg)
    plx = obs["parallax"].to_value(u.mas)
    pmra, pmdec = obs["pmra"].to_value(MASYR), obs["pmdec"].to_value(MASYR)
    rv = obs["radial_velocity"].to_value(KMS)

    sigma = _uncertainties(mag, rng)
    W = _correlation_factors(ra, rng)
    offsets, corr = _correlated_noise(sigma, W, rng)
    n_rv = int(round(p["rv_fraction"] * n))
    order = np.argsort(mag, kind="stable")
    has_rv = np.zeros(n, dtype=bool)
    has_rv[order[:n_rv]] = True
    g_lo, g_hi = mag[order[0]], mag[order[max(n_rv - 1, 0)]]
    rv_error = np.where(has_rv, 1.0 + 4.0 * np.clip((mag - g_lo) / max(g_hi - g_lo, 1e-9), 0.0, 1.0), np.nan)
    rv_offsets = rng.standard_normal(n) * rv_error
    if noise:
        ra, dec = _move_on_sky(ra, dec, offsets[0], offsets[1])
        plx = plx + offsets[2]
        pmra = pmra + offsets[3]
        pmdec = pmdec + offsets[4]
        rv = np.where(has_rv, rv + rv_offsets, np.nan)

    columns = {
        "source_id": np.arange(1, n + 1, dtype=np.int64),
        "ra": ra * u.deg,
        "ra_error": sigma[0] * u.mas,
        "dec": dec * u.deg,
        "dec_error": sigma[1] * u.mas,
        "parallax": plx * u.mas,
        "parallax_error": sigma[2] * u.mas,
        "pmra": pmra * MASYR,
        "pmra_error": sigma[3] * MASYR,
        "pmdec": pmdec * MASYR,
        "pmdec_error": sigma[4] * MASYR,
        **{name: corr[i] * u.dimensionless_unscaled for i, name in enumerate(_CORR_NAMES)},
        "radial_velocity": rv * KMS,
        "radial_velocity_error": rv_error * KMS,
        "phot_g_mean_mag": mag * u.mag,
    }
    table = QTable(columns)
    table["phot_g_mean_mag"].info.description = "apparent G magnitude of the model (no extinction)"

    omega0 = p["v0_kms"] / R_sun
    vx, vy, vz = frame.v_sun
    table.meta["frame"] = frame.to_dict()  # the frame the stars were observed with, as on every result
    table.meta["description"] = (
        "Synthetic survey made by mwkin.demo.survey: a model disc around the Sun with known truth (not real data)"
    )
    table.meta["truth"] = {
        "description": "synthetic: axisymmetric disc, power-law mean flow, Gaussian velocity ellipsoid",
        "rotation_curve": "v_mean(R) = v0 (R / R_sun)^beta",
        "v0_kms": p["v0_kms"],
        "beta": p["beta"],
        "R_sun_kpc": R_sun,
        "A_kms_kpc": 0.5 * omega0 * (1.0 - p["beta"]),
        "B_kms_kpc": -0.5 * omega0 * (1.0 + p["beta"]),
        "C_kms_kpc": 0.0,
        "K_kms_kpc": 0.0,
        "Omega0_kms_kpc": omega0,
        "solar_motion_kms": {"U": vx, "V": vy - p["v0_kms"], "W": vz},
        "dispersions_kms": {"sigma_R": p["sigma_R_kms"], "sigma_phi": p["sigma_phi_kms"], "sigma_z": p["sigma_z_kms"]},
        "frame": frame.to_dict(),
        "model": {k: v for k, v in p.items()},
        "seed": seed,
        "n": n,
        "noise": bool(noise),
        "k_kms_per_masyr_kpc": K_KMS_PER_MASYR_KPC,
    }
    return table
