"""The ICRS to Galactic rotation and the proper-motion conversion constant.

The rotation is the one defined for the Hipparcos catalogue (ESA 1997, ESA SP-1200, Vol. 1,
Sect. 1.5.3), built from its defining constants. Note that astropy's ``Galactic`` frame is built from
the FK4/B1950 pole instead and differs from this matrix by up to ~1e-7 (about 25 mas on the sky).

Everything here works on plain float64 arrays: angles in radians, proper motions in mas/yr.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "ALPHA_NGP_DEG",
    "DELTA_NGP_DEG",
    "L_OMEGA_DEG",
    "AU_KM",
    "JULIAN_YEAR_S",
    "K_KMS_PER_MASYR_KPC",
    "ICRS_TO_GALACTIC",
    "unit_vectors",
    "radec_to_lb",
    "tangent_basis",
    "proper_motions_to_galactic",
]

#: Defining constants of the Galactic system in ICRS (ESA 1997, Vol. 1, Sect. 1.5.3), exact by convention.
ALPHA_NGP_DEG = 192.85948
DELTA_NGP_DEG = 27.12825
L_OMEGA_DEG = 32.93192

#: Astronomical unit in km (IAU 2012 Resolution B2) and the Julian year in seconds.
AU_KM = 149597870.700
JULIAN_YEAR_S = 365.25 * 86400.0

#: km/s per (mas/yr x kpc): one au per Julian year.
K_KMS_PER_MASYR_KPC = AU_KM / JULIAN_YEAR_S


def _rot(angle_rad, axis):
    """Passive rotation matrix about one coordinate axis (the astropy/ERFA convention)."""
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    if axis == "x":
        return np.array([[1.0, 0.0, 0.0], [0.0, c, s], [0.0, -s, c]])
    if axis == "y":
        return np.array([[c, 0.0, -s], [0.0, 1.0, 0.0], [s, 0.0, c]])
    return np.array([[c, s, 0.0], [-s, c, 0.0], [0.0, 0.0, 1.0]])


def _icrs_to_galactic_matrix():
    alpha = np.radians(ALPHA_NGP_DEG)
    delta = np.radians(DELTA_NGP_DEG)
    l_omega = np.radians(L_OMEGA_DEG)
    # r_gal = A r_icrs: node of the Galactic plane at alpha_NGP + 90 deg, tilt 90 deg - delta_NGP, then the
    # node's Galactic longitude l_Omega (ESA 1997, Vol. 1, eq. 1.5.9).
    return _rot(-l_omega, "z") @ _rot(np.pi / 2.0 - delta, "x") @ _rot(alpha + np.pi / 2.0, "z")


#: Matrix A with r_Galactic = A @ r_ICRS (rows: the Galactic axes X, Y, Z in ICRS).
ICRS_TO_GALACTIC = _icrs_to_galactic_matrix()


def unit_vectors(lon_rad, lat_rad):
    """Cartesian unit vectors, shape (3, N), for longitudes and latitudes in radians."""
    lon = np.asarray(lon_rad, dtype=float)
    lat = np.asarray(lat_rad, dtype=float)
    cos_lat = np.cos(lat)
    return np.stack([cos_lat * np.cos(lon), cos_lat * np.sin(lon), np.sin(lat)])


def radec_to_lb(ra_rad, dec_rad):
    """Galactic longitude in [0, 2 pi) and latitude, radians, from ICRS ra and dec in radians."""
    x, y, z = ICRS_TO_GALACTIC @ unit_vectors(ra_rad, dec_rad)
    lon = np.mod(np.arctan2(y, x), 2.0 * np.pi)
    # a hair below 0 modulo a full turn rounds to exactly 2 pi: that is l = 0
    lon = np.where(lon >= 2.0 * np.pi, 0.0, lon)
    lat = np.arctan2(z, np.hypot(x, y))
    return lon, lat


def tangent_basis(lon_rad, lat_rad):
    """Local basis (r_hat, e_lon, e_lat), each of shape (3, N), at the given spherical position.

    ``e_lon`` points toward increasing longitude (east on the sky), ``e_lat`` toward increasing latitude.
    """
    lon = np.asarray(lon_rad, dtype=float)
    lat = np.asarray(lat_rad, dtype=float)
    sl, cl = np.sin(lon), np.cos(lon)
    sb, cb = np.sin(lat), np.cos(lat)
    r_hat = np.stack([cb * cl, cb * sl, sb])
    e_lon = np.stack([-sl, cl, np.zeros_like(sl)])
    e_lat = np.stack([-sb * cl, -sb * sl, cb])
    return r_hat, e_lon, e_lat


def proper_motions_to_galactic(ra_rad, dec_rad, pmra, pmdec):
    """Rotate proper motions from ICRS to Galactic.

    Parameters
    ----------
    ra_rad, dec_rad : array-like
        ICRS position, radians.
    pmra, pmdec : array-like
        mu_alpha* = mu_alpha cos(dec) and mu_delta, any unit (mas/yr by convention).

    Returns
    -------
    lon, lat, pm_l_star, pm_b : numpy.ndarray
        Galactic longitude and latitude (radians), mu_l* = mu_l cos(b) and mu_b, in the unit of the input.

    Notes
    -----
    The proper-motion vector is rebuilt in ICRS Cartesian from the local east/north basis, rotated with
    :data:`ICRS_TO_GALACTIC`, and projected on the Galactic east/north basis. This is exact for any
    position (no small-angle or pole approximation).
    """
    scalar = np.ndim(ra_rad) == 0 and np.ndim(dec_rad) == 0 and np.ndim(pmra) == 0 and np.ndim(pmdec) == 0
    if scalar:  # one star given as plain numbers: the same numbers as for one-element arrays
        out = proper_motions_to_galactic(
            *(np.atleast_1d(np.asarray(v, dtype=float)) for v in (ra_rad, dec_rad, pmra, pmdec))
        )
        return tuple(float(v[0]) for v in out)
    _, e_ra, e_dec = tangent_basis(ra_rad, dec_rad)
    pm_vec = ICRS_TO_GALACTIC @ (e_ra * np.asarray(pmra, dtype=float) + e_dec * np.asarray(pmdec, dtype=float))
    lon, lat = radec_to_lb(ra_rad, dec_rad)
    _, e_l, e_b = tangent_basis(lon, lat)
    return lon, lat, np.einsum("ij,ij->j", e_l, pm_vec), np.einsum("ij,ij->j", e_b, pm_vec)
