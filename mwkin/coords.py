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


def _sin_cos(angle_rad):
    """sin and cos from one tangent of the half angle (cheaper than np.sin plus np.cos, same accuracy)."""
    t = np.tan(0.5 * angle_rad)
    t2 = t * t
    inv = 1.0 / (1.0 + t2)
    return 2.0 * t * inv, (1.0 - t2) * inv


def galactic_geometry(ra_deg, dec_deg):
    """sin/cos of Galactic l and b and the proper-motion rotation, from ICRS ra, dec in degrees.

    Returns
    -------
    sl, cl, sb, cb, c1, c2 : numpy.ndarray
        ``(mu_l*, mu_b) = [[c1, c2], [-c2, c1]] (mu_alpha*, mu_delta)``.

    Notes
    -----
    The Galactic unit vector is the Hipparcos matrix applied to the ICRS one; the rotation angle of
    the proper motions comes from the north Galactic pole n (the matrix's third row): c1 = n . e_delta
    / cos b, c2 = -n . e_alpha / cos b. Exact at every position except the Galactic poles, where l is
    undefined.
    """
    sa, ca = _sin_cos(np.radians(ra_deg))
    sd, cd = _sin_cos(np.radians(dec_deg))
    g = ICRS_TO_GALACTIC
    ux, uy = cd * ca, cd * sa
    gx = g[0, 0] * ux + g[0, 1] * uy + g[0, 2] * sd
    gy = g[1, 0] * ux + g[1, 1] * uy + g[1, 2] * sd
    gz = g[2, 0] * ux + g[2, 1] * uy + g[2, 2] * sd
    n_dot_ea = -g[2, 0] * sa + g[2, 1] * ca
    n_dot_ed = -sd * (g[2, 0] * ca + g[2, 1] * sa) + g[2, 2] * cd
    cb = np.sqrt(n_dot_ed * n_dot_ed + n_dot_ea * n_dot_ea)
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_cb = 1.0 / cb
        rho = np.sqrt(gx * gx + gy * gy)
        cl = np.where(rho > 0, gx / rho, 1.0)
        sl = np.where(rho > 0, gy / rho, 0.0)
    return sl, cl, gz, cb, n_dot_ed * inv_cb, -n_dot_ea * inv_cb


def rotate_proper_motions(c1, c2, pmra, pmdec):
    """(mu_l*, mu_b) from (mu_alpha*, mu_delta) with the rotation (c1, c2) of :func:`galactic_geometry`."""
    return c1 * pmra + c2 * pmdec, -c2 * pmra + c1 * pmdec


def radec_to_lb(ra_rad, dec_rad):
    """Galactic longitude in [0, 2 pi) and latitude, radians, from ICRS ra and dec in radians."""
    sl, cl, sb, cb, _, _ = galactic_geometry(np.degrees(ra_rad), np.degrees(dec_rad))
    lon = np.mod(np.arctan2(sl, cl), 2.0 * np.pi)
    # a hair below 0 modulo a full turn rounds to exactly 2 pi: that is l = 0
    lon = np.where(lon >= 2.0 * np.pi, 0.0, lon)
    return lon, np.arctan2(sb, cb)


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
    The rotation angle between the equatorial and Galactic east/north bases at the star comes from the
    north Galactic pole (:func:`galactic_geometry`, the same geometry the Oort fit uses). Exact at
    every position except the Galactic poles, where l is undefined.
    """
    ra, dec, mu_a, mu_d = (np.asarray(v, dtype=float) for v in (ra_rad, dec_rad, pmra, pmdec))
    sl, cl, sb, cb, c1, c2 = galactic_geometry(np.degrees(ra), np.degrees(dec))
    lon = np.mod(np.arctan2(sl, cl), 2.0 * np.pi)
    lon = np.where(lon >= 2.0 * np.pi, 0.0, lon)
    pm_l, pm_b = rotate_proper_motions(c1, c2, mu_a, mu_d)
    return lon, np.arctan2(sb, cb), pm_l, pm_b
