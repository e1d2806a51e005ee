"""A plain, readable numpy implementation of the kinematics transforms and Jacobians: the tests' oracle.

This module computes what the fast path of :mod:`mwkin.kinematics` computes -- heliocentric Galactic
X, Y, Z, U, V, W, Galactocentric x, y, z, vx, vy, vz, cylindrical R, phi, v_R, v_phi, v_z, l and b,
and their linear (first-order) uncertainties and covariances -- written for a reader who checks the
physics, not for speed: one function per step, whole arrays, no blocks, threads, scratch buffers or
expression language, and the Jacobian written out analytically term by term. The tests compare the
fast path against it (``tests/core/kinematics/test_reference_oracle.py``). It is **not** meant for
large catalogues: it makes many (n, 3), (n, 20, 6) and (n, 20, 20) temporaries.

Conventions (those of :mod:`mwkin.kinematics`)
----------------------------------------------
* Inputs: ra, dec (deg, ICRS), distance (kpc), pmra = mu_alpha* = mu_alpha cos(dec) and pmdec (mas/yr),
  radial velocity (km/s). k = :data:`mwkin.coords.K_KMS_PER_MASYR_KPC` km/s per (mas/yr kpc).
* Heliocentric Galactic axes X, Y, Z (toward l = 0, l = 90 deg, the north Galactic pole) come from
  the Hipparcos ICRS-to-Galactic matrix :data:`mwkin.coords.ICRS_TO_GALACTIC`; U, V, W are the
  heliocentric velocity along them.
* Galactocentric axes are astropy's ``Galactocentric`` axes for the :class:`~mwkin.frames.SolarFrame`
  (built here from explicit rotations, see :func:`galactocentric_rotation`).
* Cylindrical: R = sqrt(x^2 + y^2), phi = atan2(y, -x) (0 at the Sun, increasing in the direction of
  Galactic rotation), v_R = (x vx + y vy)/R, v_phi = (y vx - x vy)/R (positive in the sense of
  rotation), v_z = vz.
* Uncertainty parameters, in this order: p = (ra*, dec, distance, pmra, pmdec, radial_velocity), in
  mas, mas, kpc, mas/yr, mas/yr, km/s. ra* is an offset toward the east, i.e. along e_ra (Gaia's
  ``ra_error`` is the uncertainty of ra cos(dec)). A parallax uncertainty enters through
  d(distance)/d(parallax) = -distance^2 (:func:`observables_covariance`).

The steps, one function each
----------------------------
:func:`icrs_unit_vectors` (r_hat, e_ra, e_dec) -> :func:`icrs_position_velocity` -> :func:`heliocentric`
(Galactic axes) and, with :func:`galactocentric_rotation`, :func:`galactocentric` ->
:func:`cylindrical`; :func:`galactic_longitude_latitude`; :func:`forward` gathers every output column
and :func:`observables` is the inverse. For the uncertainties: :func:`distance_of` (1/parallax with
the signal-to-noise cut, or a distance column), :func:`observables_covariance` (the 6x6 from the
error and correlation columns), :func:`jacobian` (analytic), :func:`propagate_covariance`
(J C J^T) and :func:`invalid_correlations`; :func:`to_galactocentric_reference` does it all for a
table.

References
----------
ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3 (Galactic axes).
Johnson, D. R. H. & Soderblom, D. R. 1987, AJ 93, 864 (space velocities and their uncertainties).
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np

from ..catalog import read_catalog
from ..columns import CORRELATION_PAIRS
from ..coords import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC
from ..distances import DistanceColumn, InverseParallax
from ..frames import ROLL0_DEG, SolarFrame  # astropy's fixed roll: its single home is mwkin.frames
from ._shared import EIGEN_TOLERANCE  # the correlation check's round-off allowance, shared with the fast path

__all__ = [
    "OUTPUT_NAMES",
    "PARAMETERS",
    "cylindrical",
    "distance_of",
    "forward",
    "galactic_longitude_latitude",
    "galactocentric",
    "galactocentric_rotation",
    "heliocentric",
    "icrs_position_velocity",
    "icrs_to_galactic_unit_vectors",
    "icrs_unit_vectors",
    "invalid_correlations",
    "inverse_parallax_distance",
    "jacobian",
    "observables",
    "observables_covariance",
    "propagate_covariance",
    "rotation_matrix",
    "to_galactocentric_reference",
]

K = K_KMS_PER_MASYR_KPC  # km/s per (mas/yr kpc): one au per Julian year
MAS_TO_RAD = math.pi / (180.0 * 3600.0 * 1000.0)
RAD_TO_DEG = 180.0 / math.pi

#: The uncertainty parameters, in the order of the Jacobian's columns and of the 6x6 covariances.
PARAMETERS = ("ra*", "dec", "distance", "pmra", "pmdec", "radial_velocity")

#: Rows of :func:`jacobian`, in the order of the fast path's output columns (angles in deg).
OUTPUT_NAMES = (
    "x",
    "y",
    "z",
    "vx",
    "vy",
    "vz",
    "R",
    "phi",
    "v_R",
    "v_phi",
    "v_z",
    "X",
    "Y",
    "Z",
    "U",
    "V",
    "W",
    "l",
    "b",
    "distance",
)

_VELOCITY_NAMES = ("vx", "vy", "vz", "v_R", "v_phi", "v_z", "U", "V", "W")


def _as_float_arrays(*values):
    """The arguments as 1-D float64 arrays of one common length (scalars are broadcast)."""
    arrays = np.broadcast_arrays(*[np.asarray(v, dtype=float) for v in values])
    return [np.array(a, dtype=float, ndmin=1).ravel() for a in arrays]


# ====================================================================== geometry
def rotation_matrix(axis, angle_rad):
    """Active rotation by ``angle_rad`` about a coordinate axis ("x", "y" or "z").

    The matrix turns a vector counterclockwise as seen from the tip of the axis (right-hand rule),
    e.g. ``rotation_matrix("z", pi / 2) @ [1, 0, 0] = [0, 1, 0]``.

    Parameters
    ----------
    axis : {"x", "y", "z"}
    angle_rad : float

    Returns
    -------
    numpy.ndarray, shape (3, 3)
    """
    c, s = math.cos(angle_rad), math.sin(angle_rad)
    if axis == "x":
        return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])
    if axis == "y":
        return np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])
    if axis == "z":
        return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
    raise ValueError(f"axis must be 'x', 'y' or 'z', got {axis!r}")


def galactocentric_rotation(frame=None):
    """Rotation and the Sun's position that take ICRS Cartesian vectors to Galactocentric ones.

    Parameters
    ----------
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    matrix : numpy.ndarray, shape (3, 3)
        ``x_gc = matrix @ r_icrs + sun`` for a heliocentric ICRS position r_icrs (kpc), and
        ``v_gc = matrix @ v_icrs + v_sun`` for a heliocentric ICRS velocity (km/s).
    sun : numpy.ndarray, shape (3,)
        The Sun's Galactocentric position, kpc.

    Notes
    -----
    The geometry of :class:`astropy.coordinates.Galactocentric`, as a sequence of active rotations
    of the heliocentric ICRS axes:

    1. about the ICRS z axis by -ra_gc, which brings the Galactic centre's meridian into the x-z plane;
    2. about the (new) y axis by +dec_gc, which brings the centre onto the +x axis (a right-handed
       turn about y takes z toward x, lowering the centre's elevation dec_gc to 0);
    3. about that x axis (the Sun-centre line) by roll - roll0, where roll0 = 58.5986320306 deg is
       astropy's fixed angle that puts the z axis on the Galactic north pole and ``roll`` is the
       frame's extra roll (0 normally);
    4. the origin moves to the centre, at +R0 along x, so the Sun sits at (-R0, 0, 0); finally a
       turn about y by asin(z_sun / R0) lifts the Sun to the height z_sun above the x-y plane
       (R0 is the Sun-centre distance, so the tilt keeps it).
    """
    frame = _frame_or_default(frame)
    centre_on_x = rotation_matrix("y", math.radians(frame.galcen_dec)) @ rotation_matrix(
        "z", -math.radians(frame.galcen_ra)
    )
    pole_on_z = rotation_matrix("x", math.radians(frame.roll - ROLL0_DEG))
    tilt = rotation_matrix("y", math.asin(frame.z_sun / 1000.0 / frame.R0))  # z_sun is in pc
    matrix = tilt @ pole_on_z @ centre_on_x
    sun = tilt @ np.array([-frame.R0, 0.0, 0.0])
    return matrix, sun


def _frame_or_default(frame):
    return SolarFrame.preset("astropy v4.0") if frame is None else frame


# ====================================================================== directions
def icrs_unit_vectors(ra_deg, dec_deg):
    """The local basis on the sky at each star, in ICRS Cartesian components.

    Parameters
    ----------
    ra_deg, dec_deg : array-like
        ICRS position, deg.

    Returns
    -------
    r_hat, e_ra, e_dec : numpy.ndarray, each shape (n, 3)
        The direction to the star, the unit vector toward increasing ra (east) and the unit vector
        toward increasing dec (north).
    """
    ra, dec = _as_float_arrays(np.radians(ra_deg), np.radians(dec_deg))
    zero = np.zeros_like(ra)
    r_hat = np.stack([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)], axis=-1)
    e_ra = np.stack([-np.sin(ra), np.cos(ra), zero], axis=-1)
    e_dec = np.stack([-np.sin(dec) * np.cos(ra), -np.sin(dec) * np.sin(ra), np.cos(dec)], axis=-1)
    return r_hat, e_ra, e_dec


def icrs_to_galactic_unit_vectors(ra_deg, dec_deg):
    """The same local basis as :func:`icrs_unit_vectors`, in heliocentric Galactic components.

    Returns
    -------
    r_hat, e_ra, e_dec : numpy.ndarray, each shape (n, 3)
        Components along X, Y, Z (toward l = 0, l = 90 deg and the north Galactic pole).
    """
    return tuple(vectors @ ICRS_TO_GALACTIC.T for vectors in icrs_unit_vectors(ra_deg, dec_deg))


def galactic_longitude_latitude(ra_deg, dec_deg):
    """Galactic longitude in [0, 360) and latitude, deg, from ICRS ra and dec (deg).

    Returns
    -------
    l_deg, b_deg : numpy.ndarray
    """
    g, _, _ = icrs_to_galactic_unit_vectors(ra_deg, dec_deg)
    l_deg = np.degrees(np.arctan2(g[:, 1], g[:, 0]))
    l_deg = np.where(l_deg < 0.0, l_deg + 360.0, l_deg)
    # A longitude a hair below 0 becomes 360 - tiny, which may round to 360: that is longitude 0.
    l_deg = np.where(l_deg >= 360.0, 0.0, l_deg)
    b_deg = np.degrees(np.arctan2(g[:, 2], np.hypot(g[:, 0], g[:, 1])))
    return l_deg, b_deg


# ====================================================================== the forward transform
def icrs_position_velocity(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms):
    """Heliocentric position (kpc) and velocity (km/s) in ICRS Cartesian axes.

    Parameters
    ----------
    ra_deg, dec_deg : array-like
        ICRS position, deg.
    distance_kpc : array-like
        Heliocentric distance, kpc.
    pmra, pmdec : array-like
        mu_alpha* = mu_alpha cos(dec) and mu_delta, mas/yr.
    rv_kms : array-like
        Radial velocity, km/s.

    Returns
    -------
    position, velocity : numpy.ndarray, each shape (n, 3)

    Notes
    -----
    r = d r_hat and v = v_r r_hat + k d (mu_alpha* e_ra + mu_delta e_dec): the proper motion is the
    angular velocity on the sky, and k d turns mas/yr at d kpc into km/s.
    """
    ra, dec, d, pa, pd, rv = _as_float_arrays(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms)
    r_hat, e_ra, e_dec = icrs_unit_vectors(ra, dec)
    position = d[:, None] * r_hat
    tangential = K * d[:, None] * (pa[:, None] * e_ra + pd[:, None] * e_dec)
    velocity = rv[:, None] * r_hat + tangential
    return position, velocity


def heliocentric(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms):
    """Heliocentric Galactic X, Y, Z (kpc) and U, V, W (km/s), each a 1-D array, in a dict.

    Parameters are those of :func:`icrs_position_velocity`. The Galactic components are the ICRS
    vectors rotated by :data:`mwkin.coords.ICRS_TO_GALACTIC`; U, V, W are relative to the Sun.
    """
    position, velocity = icrs_position_velocity(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms)
    galactic_position = position @ ICRS_TO_GALACTIC.T
    galactic_velocity = velocity @ ICRS_TO_GALACTIC.T
    return {
        "X": galactic_position[:, 0],
        "Y": galactic_position[:, 1],
        "Z": galactic_position[:, 2],
        "U": galactic_velocity[:, 0],
        "V": galactic_velocity[:, 1],
        "W": galactic_velocity[:, 2],
    }


def galactocentric(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame=None):
    """Galactocentric Cartesian x, y, z (kpc) and vx, vy, vz (km/s), each a 1-D array, in a dict.

    Parameters are those of :func:`icrs_position_velocity`, and ``frame`` (SolarFrame, default
    ``SolarFrame.preset("astropy v4.0")``). The heliocentric vectors are turned into the
    Galactocentric axes (:func:`galactocentric_rotation`), then the Sun's position and velocity
    are added.
    """
    frame = _frame_or_default(frame)
    matrix, sun = galactocentric_rotation(frame)
    position, velocity = icrs_position_velocity(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms)
    x = position @ matrix.T + sun
    v = velocity @ matrix.T + np.asarray(frame.v_sun, dtype=float)
    return {"x": x[:, 0], "y": x[:, 1], "z": x[:, 2], "vx": v[:, 0], "vy": v[:, 1], "vz": v[:, 2]}


def cylindrical(x, y, z, vx, vy, vz):
    """Galactocentric cylindrical coordinates from Cartesian ones.

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc.
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.

    Returns
    -------
    dict of numpy.ndarray
        ``R`` (kpc), ``phi`` (**radians**, in (-pi, pi]), ``z`` (kpc), ``v_R``, ``v_phi``, ``v_z``
        (km/s).

    Notes
    -----
    phi = atan2(y, -x) is 0 toward the Sun (which is near x = -R0) and grows in the direction of
    Galactic rotation (+y at the Sun). v_R is the velocity along (x, y)/R (outward) and v_phi along
    (y, -x)/R, the direction of growing phi, so the Sun has v_phi ~ +245 km/s. On the z axis (R = 0)
    v_R and v_phi are NaN.
    """
    x, y, z, vx, vy, vz = _as_float_arrays(x, y, z, vx, vy, vz)
    R = np.sqrt(x**2 + y**2)
    with np.errstate(invalid="ignore", divide="ignore"):
        v_R = (x * vx + y * vy) / R
        v_phi = (y * vx - x * vy) / R
    return {"R": R, "phi": np.arctan2(y, -x), "z": z, "v_R": v_R, "v_phi": v_phi, "v_z": vz}


def observables(x, y, z, vx, vy, vz, frame=None):
    """The inverse transform: ra, dec, distance, pmra, pmdec, radial velocity from Galactocentric x ... vz.

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc.
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    dict of numpy.ndarray
        ``ra`` in [0, 360) and ``dec`` (deg), ``distance`` (kpc), ``pmra`` (mu_alpha*), ``pmdec``
        (mas/yr), ``radial_velocity`` (km/s). A point at the Sun has distance 0 and NaN elsewhere.

    Notes
    -----
    The rotation is orthogonal, so its inverse is its transpose: r_icrs = M^T (x - sun) and
    v_icrs = M^T (v - v_sun). Then the radial velocity is v_icrs . r_hat and the proper motions are
    the components along e_ra and e_dec divided by k d.
    """
    frame = _frame_or_default(frame)
    x, y, z, vx, vy, vz = _as_float_arrays(x, y, z, vx, vy, vz)
    matrix, sun = galactocentric_rotation(frame)
    position = (np.stack([x, y, z], axis=-1) - sun) @ matrix  # row vectors: (M^T p)^T = p^T M
    velocity = (np.stack([vx, vy, vz], axis=-1) - np.asarray(frame.v_sun, dtype=float)) @ matrix
    d = np.sqrt(np.sum(position**2, axis=-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        at_sun = ~(d > 0)
        ra = np.arctan2(position[:, 1], position[:, 0])
        dec = np.arctan2(position[:, 2], np.hypot(position[:, 0], position[:, 1]))
        ra[at_sun] = np.nan
        dec[at_sun] = np.nan
        r_hat, e_ra, e_dec = icrs_unit_vectors(np.degrees(ra), np.degrees(dec))
        rv = np.sum(velocity * r_hat, axis=-1)
        pmra = np.sum(velocity * e_ra, axis=-1) / (K * d)
        pmdec = np.sum(velocity * e_dec, axis=-1) / (K * d)
    ra_deg = np.mod(np.degrees(ra), 360.0)
    ra_deg = np.where(ra_deg >= 360.0, 0.0, ra_deg)  # a hair below 0 deg may round to 360
    return {"ra": ra_deg, "dec": np.degrees(dec), "distance": d, "pmra": pmra, "pmdec": pmdec, "radial_velocity": rv}


def forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame=None):
    """Every output column of the forward transform, in a dict of 1-D arrays (angles in deg).

    Parameters are those of :func:`galactocentric`. Keys are :data:`OUTPUT_NAMES`: x ... vz, R, phi
    (deg), v_R, v_phi, v_z, X ... W, l, b (deg) and distance (the input distance).
    """
    ra, dec, d, pa, pd, rv = _as_float_arrays(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms)
    out = galactocentric(ra, dec, d, pa, pd, rv, frame)
    cyl = cylindrical(*(out[name] for name in ("x", "y", "z", "vx", "vy", "vz")))
    out.update(R=cyl["R"], phi=np.degrees(cyl["phi"]), v_R=cyl["v_R"], v_phi=cyl["v_phi"], v_z=cyl["v_z"])
    out.update(heliocentric(ra, dec, d, pa, pd, rv))
    out["l"], out["b"] = galactic_longitude_latitude(ra, dec)
    out["distance"] = d
    return {name: out[name] for name in OUTPUT_NAMES}


# ====================================================================== the Jacobian
def jacobian(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame=None):
    """Analytic Jacobian of every output column with respect to the six parameters.

    Parameters
    ----------
    ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms : array-like
        As for :func:`galactocentric` (deg, kpc, mas/yr, km/s).
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    numpy.ndarray, shape (n, 20, 6)
        ``J[:, i, j]`` = d(output i)/d(parameter j); rows :data:`OUTPUT_NAMES` (in their units, angles
        in deg), columns :data:`PARAMETERS` (per mas of ra* and dec, per kpc, per mas/yr, per km/s).

    Notes
    -----
    Moving a star by an angle xi (rad) toward the east along e_ra, or eta toward the north along
    e_dec, turns its local basis (d/d alpha of the basis, divided by cos(dec) for xi):

        d r_hat / d xi  = e_ra,                     d r_hat / d eta = e_dec,
        d e_ra  / d xi  = -r_hat + tan(dec) e_dec,  d e_ra  / d eta = 0,
        d e_dec / d xi  = -tan(dec) e_ra,           d e_dec / d eta = -r_hat.

    The proper motions are held fixed in the moved basis (they are the catalogue's parameters), so
    with r = d r_hat and v = v_r r_hat + k d (mu_a e_ra + mu_d e_dec):

        dr/dxi = d e_ra, dr/deta = d e_dec, dr/dd = r_hat;
        dv/dxi = v_r e_ra - k d mu_a r_hat + k d tan(dec) (mu_a e_dec - mu_d e_ra),
        dv/deta = v_r e_dec - k d mu_d r_hat,
        dv/dd = k (mu_a e_ra + mu_d e_dec), dv/dmu_a = k d e_ra, dv/dmu_d = k d e_dec, dv/dv_r = r_hat.

    The tan(dec) terms make the ra* derivative of the velocity blow up at the celestial poles: there
    the east direction itself turns infinitely fast with ra*. The constant rotations carry these into
    the Galactic and Galactocentric axes; the cylindrical and (l, b) rows follow by the chain rule
    (see the comments).
    """
    frame = _frame_or_default(frame)
    ra, dec, d, pa, pd, rv = _as_float_arrays(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms)
    n = ra.shape[0]
    r_hat, e_ra, e_dec = icrs_unit_vectors(ra, dec)
    dec_rad = np.radians(dec)
    tan_dec = (np.sin(dec_rad) / np.cos(dec_rad))[:, None]
    d_, pa_, pd_, rv_ = (a[:, None] for a in (d, pa, pd, rv))

    # d(position)/d(parameter) and d(velocity)/d(parameter) in ICRS axes, shape (n, 3, 6).
    # ra* and dec columns are per radian first, then turned into per mas below.
    zero = np.zeros((n, 3))
    dr = np.stack([d_ * e_ra, d_ * e_dec, r_hat, zero, zero, zero], axis=-1)
    dv_dxi = rv_ * e_ra - K * d_ * pa_ * r_hat + K * d_ * tan_dec * (pa_ * e_dec - pd_ * e_ra)
    dv_deta = rv_ * e_dec - K * d_ * pd_ * r_hat
    dv_dd = K * (pa_ * e_ra + pd_ * e_dec)
    dv = np.stack([dv_dxi, dv_deta, dv_dd, K * d_ * e_ra, K * d_ * e_dec, r_hat], axis=-1)
    per_mas = np.array([MAS_TO_RAD, MAS_TO_RAD, 1.0, 1.0, 1.0, 1.0])
    dr = dr * per_mas
    dv = dv * per_mas

    # Constant rotations into the Galactocentric and heliocentric Galactic axes.
    matrix, _ = galactocentric_rotation(frame)
    J_gc_r = matrix @ dr  # rows x, y, z
    J_gc_v = matrix @ dv  # rows vx, vy, vz
    J_h_r = ICRS_TO_GALACTIC @ dr  # rows X, Y, Z
    J_h_v = ICRS_TO_GALACTIC @ dv  # rows U, V, W

    # Cylindrical, by the chain rule on R = sqrt(x^2 + y^2), phi = atan2(y, -x) and
    # v_R = (x vx + y vy)/R, v_phi = (y vx - x vy)/R.
    gc = galactocentric(ra, dec, d, pa, pd, rv, frame)
    x, y, vx, vy = (gc[k][:, None] for k in ("x", "y", "vx", "vy"))
    dx, dy, dvx, dvy = J_gc_r[:, 0], J_gc_r[:, 1], J_gc_v[:, 0], J_gc_v[:, 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        R = np.sqrt(x**2 + y**2)
        v_R = (x * vx + y * vy) / R
        v_phi = (y * vx - x * vy) / R
        dR = (x * dx + y * dy) / R
        dphi = (y * dx - x * dy) / R**2 * RAD_TO_DEG  # d atan2(Y, X) = (X dY - Y dX)/(X^2 + Y^2), X = -x
        dv_R = (vx * dx + x * dvx + vy * dy + y * dvy) / R - v_R * dR / R
        dv_phi = (vx * dy + y * dvx - vy * dx - x * dvy) / R - v_phi * dR / R

    # l and b depend on the direction alone: g = A r_hat, l = atan2(g_y, g_x), b = asin(g_z).
    g = r_hat @ ICRS_TO_GALACTIC.T
    dg = ICRS_TO_GALACTIC @ np.stack([e_ra, e_dec, zero, zero, zero, zero], axis=-1) * per_mas
    gx, gy = g[:, 0, None], g[:, 1, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        dl = (gx * dg[:, 1] - gy * dg[:, 0]) / (gx**2 + gy**2) * RAD_TO_DEG
        db = dg[:, 2] / np.hypot(gx, gy) * RAD_TO_DEG  # d asin(g_z) = dg_z / cos b

    d_distance = np.zeros((n, 6))
    d_distance[:, 2] = 1.0

    rows = {
        "x": J_gc_r[:, 0],
        "y": J_gc_r[:, 1],
        "z": J_gc_r[:, 2],
        "vx": J_gc_v[:, 0],
        "vy": J_gc_v[:, 1],
        "vz": J_gc_v[:, 2],
        "R": dR,
        "phi": dphi,
        "v_R": dv_R,
        "v_phi": dv_phi,
        "v_z": J_gc_v[:, 2],
        "X": J_h_r[:, 0],
        "Y": J_h_r[:, 1],
        "Z": J_h_r[:, 2],
        "U": J_h_v[:, 0],
        "V": J_h_v[:, 1],
        "W": J_h_v[:, 2],
        "l": dl,
        "b": db,
        "distance": d_distance,
    }
    return np.stack([rows[name] for name in OUTPUT_NAMES], axis=1)


def propagate_covariance(jacobian, cov6):
    """First-order covariance of the outputs, J C J^T, for every star.

    Parameters
    ----------
    jacobian : numpy.ndarray, shape (n, k, 6)
    cov6 : numpy.ndarray, shape (n, 6, 6)
        Covariance of the parameters (:func:`observables_covariance`).

    Returns
    -------
    numpy.ndarray, shape (n, k, k)

    Notes
    -----
    A parameter an output does not depend on (a zero Jacobian entry) contributes nothing, even
    where its covariance entry is NaN: a star without a radial velocity uncertainty still has
    position uncertainties. Any other NaN (in the Jacobian or in a covariance entry that counts)
    makes the result NaN.
    """
    J = np.asarray(jacobian, dtype=float)
    C = np.asarray(cov6, dtype=float)
    unknown = np.isnan(C)
    result = J @ np.where(unknown, 0.0, C) @ np.swapaxes(J, 1, 2)
    # Which output pairs (i, j) meet a NaN covariance entry C_kl through J_ik != 0 and J_jl != 0.
    used = (J != 0.0).astype(float)
    spoiled = used @ unknown.astype(float) @ np.swapaxes(used, 1, 2) > 0
    result[spoiled] = np.nan
    return result


# ====================================================================== inputs from a table
def _column(table, name, unit):
    """Float64 values of a column in ``unit``, or None when the table has no such column."""
    if name not in table.colnames:
        return None
    column = table[name]
    values = column.to_value(unit) if isinstance(column, u.Quantity) else column
    return np.asarray(values, dtype=float).reshape(-1)


def inverse_parallax_distance(parallax_mas, parallax_error_mas=None, min_snr=5.0, zero_point_mas=0.0):
    """Distance = 1/(parallax - zero point), kpc, NaN where the parallax is not good enough.

    Parameters
    ----------
    parallax_mas, parallax_error_mas : numpy.ndarray
        Parallax and its uncertainty, mas (the error may be None when ``min_snr`` is 0).
    min_snr : float
        Smallest (parallax - zero point) / parallax_error for a usable distance; 0 switches the cut
        off.
    zero_point_mas : float
        Subtracted from every parallax.

    Returns
    -------
    numpy.ndarray
        NaN where the corrected parallax is NaN or not positive, or (with a cut) its uncertainty is
        NaN or its signal-to-noise is below ``min_snr``; otherwise 1 / corrected parallax.
    """
    corrected = np.asarray(parallax_mas, dtype=float) - zero_point_mas
    with np.errstate(invalid="ignore", divide="ignore"):
        usable = corrected > 0
        if min_snr > 0:
            if parallax_error_mas is None:
                raise ValueError("a signal-to-noise cut needs parallax uncertainties")
            usable &= corrected >= min_snr * np.asarray(parallax_error_mas, dtype=float)  # False for NaN
        return np.where(usable, 1.0 / corrected, np.nan)


def distance_of(table, choice=None):
    """Distances (kpc, NaN where unusable) of the rows of a standard table under a distance choice.

    Parameters
    ----------
    table : astropy.table.QTable
        As :func:`mwkin.catalog.read_catalog` returns it.
    choice : InverseParallax or DistanceColumn, optional
        Default ``InverseParallax()``.

    Returns
    -------
    distance_kpc : numpy.ndarray
    from_parallax : bool
        True when the distances are inverse parallaxes (the third parameter is then the parallax).
    """
    choice = InverseParallax() if choice is None else choice
    if isinstance(choice, DistanceColumn):
        d = _column(table, choice.column, u.kpc)
        with np.errstate(invalid="ignore"):
            return np.where(d > 0, d, np.nan), False
    if isinstance(choice, InverseParallax):
        plx = _column(table, "parallax", u.mas)
        return inverse_parallax_distance(
            plx, _column(table, "parallax_error", u.mas), choice.min_snr, choice.zero_point_mas
        ), True
    raise TypeError(f"distance must be InverseParallax or DistanceColumn, got {choice!r}")


def observables_covariance(table, distance=None):
    """Covariance of (ra*, dec, distance, pmra, pmdec, radial_velocity) for every row of a table.

    Parameters
    ----------
    table : astropy.table.QTable
        As :func:`mwkin.catalog.read_catalog` returns it: ``ra_error``, ``dec_error`` (mas; ra_error
        is the uncertainty of ra cos(dec)), ``parallax_error`` or ``<distance column>_error``,
        ``pmra_error``, ``pmdec_error``, ``radial_velocity_error`` and the ten Gaia ``*_corr``
        columns, each optional.
    distance : InverseParallax or DistanceColumn, optional
        Default ``InverseParallax()``.

    Returns
    -------
    numpy.ndarray, shape (n, 6, 6)
        In mas, mas, kpc, mas/yr, mas/yr, km/s (products thereof off the diagonal).

    Notes
    -----
    * A missing uncertainty column counts as zero uncertainty, a missing correlation column as an
      exact zero (the pair is independent). A present column multiplies, so a NaN uncertainty also
      spoils the pairs it is correlated with.
    * The radial velocity is uncorrelated with the astrometry. A distance column is taken as
      uncorrelated with everything: the catalogue's correlations refer to the parallax.
    * For inverse-parallax distances the covariance of (ra*, dec, parallax, ...) is made first, then
      the parallax row and column are multiplied by d(distance)/d(parallax) = -1/parallax^2 =
      -distance^2, the first-order change of variables; so sigma_distance = distance^2
      sigma_parallax.
    """
    distance = InverseParallax() if distance is None else distance
    d, from_parallax = distance_of(table, distance)
    n = len(table)
    third_error = "parallax_error" if from_parallax else f"{distance.column}_error"
    error_columns = (
        ("ra_error", u.mas),
        ("dec_error", u.mas),
        (third_error, u.mas if from_parallax else u.kpc),
        ("pmra_error", u.mas / u.yr),
        ("pmdec_error", u.mas / u.yr),
        ("radial_velocity_error", u.km / u.s),
    )
    sigma = np.zeros((n, 6))
    for i, (name, unit) in enumerate(error_columns):
        values = _column(table, name, unit)
        if values is not None:
            sigma[:, i] = values
    cov = np.zeros((n, 6, 6))
    for i in range(6):
        cov[:, i, i] = sigma[:, i] ** 2
    for (i, j), name in CORRELATION_PAIRS.items():
        if not from_parallax and 2 in (i, j):
            continue  # a distance column is independent of the astrometric solution
        rho = _column(table, name, u.dimensionless_unscaled)
        if rho is not None:
            cov[:, i, j] = cov[:, j, i] = rho * sigma[:, i] * sigma[:, j]
    if from_parallax:
        # Change of variables parallax -> distance = 1/parallax, to first order.
        dd_dplx = -d * d
        cov[:, 2, :] *= dd_dplx[:, None]
        cov[:, :, 2] *= dd_dplx[:, None]
    return cov


def invalid_correlations(table, distance=None):
    """True for rows whose correlation columns do not form a positive semi-definite matrix.

    The 5x5 correlation matrix of (ra*, dec, parallax, pmra, pmdec) from the columns present (absent
    pairs are zero; with a distance column the parallax pairs are left out) is invalid when its
    smallest eigenvalue is below -1e-12 (round-off allowed). Rows with a NaN correlation are not
    flagged: their uncertainties are NaN anyway.
    """
    distance = InverseParallax() if distance is None else distance
    from_parallax = not isinstance(distance, DistanceColumn)
    n = len(table)
    corr = np.tile(np.eye(5), (n, 1, 1))
    for (i, j), name in CORRELATION_PAIRS.items():
        rho = _column(table, name, u.dimensionless_unscaled)
        if rho is not None and (from_parallax or 2 not in (i, j)):
            corr[:, i, j] = corr[:, j, i] = rho
    finite = np.isfinite(corr).all(axis=(1, 2))
    invalid = np.zeros(n, dtype=bool)
    if finite.any():
        invalid[finite] = np.linalg.eigvalsh(corr[finite])[:, 0] < -EIGEN_TOLERANCE
    return invalid


# ====================================================================== the table level
def to_galactocentric_reference(stars, frame=None, errors="none", distance=None):
    """The reference counterpart of :func:`mwkin.kinematics.to_galactocentric`, as a dict of arrays.

    Parameters
    ----------
    stars : table, pandas.DataFrame or path
        Anything :func:`mwkin.catalog.read_catalog` reads.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.
    errors : {"none", "linear"}
        With "linear", first-order uncertainties and covariances as well.
    distance : InverseParallax or DistanceColumn, optional
        Default ``InverseParallax()``.

    Returns
    -------
    dict of numpy.ndarray
        Every name of :data:`OUTPUT_NAMES` (kpc, km/s, deg; l in [0, 360), phi in (-180, 180]),
        ``has_position`` and ``has_velocity``. With ``errors="linear"`` also ``sigma_<name>`` for
        each of them, ``invalid_correlation``, and ``cov_galactocentric`` and ``cov_heliocentric``,
        each (n, 6, 6) for (x, y, z, vx, vy, vz) and (X, Y, Z, U, V, W).

    Notes
    -----
    The same conventions as the fast path for what is missing: positions are NaN without a usable
    distance or without ra/dec; velocities also without proper motions or radial velocity; l and b
    need only ra and dec. Uncertainties are NaN where their values are, and all of a star's
    uncertainties are NaN when its correlations are invalid (:func:`invalid_correlations`); the
    velocity rows and columns of the covariances are NaN where there is no velocity.
    """
    if errors not in ("none", "linear"):
        raise ValueError(f"errors must be 'none' or 'linear', got {errors!r}")
    frame = _frame_or_default(frame)
    table = read_catalog(stars)
    ra = _column(table, "ra", u.deg)
    dec = _column(table, "dec", u.deg)
    pmra = _column(table, "pmra", u.mas / u.yr)
    pmdec = _column(table, "pmdec", u.mas / u.yr)
    rv = _column(table, "radial_velocity", u.km / u.s)
    d, _ = distance_of(table, distance)

    has_sky = ~(np.isnan(ra) | np.isnan(dec))
    has_position = has_sky & ~np.isnan(d)
    has_velocity = has_position & ~(np.isnan(pmra) | np.isnan(pmdec) | np.isnan(rv))
    d = np.where(has_position, d, np.nan)

    out = forward(ra, dec, d, pmra, pmdec, rv, frame)
    out["has_position"] = has_position
    out["has_velocity"] = has_velocity
    if errors == "none":
        return out

    cov6 = observables_covariance(table, distance)
    J = jacobian(ra, dec, d, pmra, pmdec, rv, frame)
    cov = propagate_covariance(J, cov6)
    invalid = invalid_correlations(table, distance)
    out["invalid_correlation"] = invalid
    variances = np.diagonal(cov, axis1=1, axis2=2)
    with np.errstate(invalid="ignore"):
        sigmas = np.sqrt(variances)
    for i, name in enumerate(OUTPUT_NAMES):
        if name in ("l", "b"):
            lacking = ~has_sky
        elif name in _VELOCITY_NAMES:
            lacking = ~has_velocity
        else:
            lacking = ~has_position
        out[f"sigma_{name}"] = np.where(lacking | invalid, np.nan, sigmas[:, i])

    for key, names in (
        ("cov_galactocentric", ("x", "y", "z", "vx", "vy", "vz")),
        ("cov_heliocentric", ("X", "Y", "Z", "U", "V", "W")),
    ):
        rows = [OUTPUT_NAMES.index(name) for name in names]
        block = cov[:, rows][:, :, rows]
        block[~has_position | invalid] = np.nan
        block[~has_velocity, 3:, :] = np.nan
        block[~has_velocity, :, 3:] = np.nan
        out[key] = block
    return out
