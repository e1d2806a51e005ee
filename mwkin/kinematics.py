"""From astrometry to Galactic positions and velocities, with uncertainties, and back.

:func:`to_galactocentric` turns a star table (ra, dec, a distance choice, proper motions, radial
velocity) into heliocentric Galactic Cartesian coordinates (X, Y, Z, U, V, W), Galactocentric
Cartesian coordinates (x, y, z, vx, vy, vz) and Galactocentric cylindrical coordinates
(R, phi, z, v_R, v_phi, v_z), optionally with linear or Monte Carlo uncertainties.
:func:`from_galactocentric` is its exact inverse, for mock catalogues. The array-level functions
(:func:`galactocentric_from_observables`, :func:`heliocentric_from_observables`,
:func:`observables_from_galactocentric`, :func:`cylindrical_from_cartesian`) work on plain float64
arrays.

Conventions
-----------
* Galactocentric Cartesian axes are those of :class:`astropy.coordinates.Galactocentric` for the same
  :class:`~mwkin.frames.SolarFrame`: the Sun near x = -R0, y = 0, z = z_sun; y along Galactic
  rotation at the Sun; z toward the north Galactic pole. Results agree with astropy to round-off.
* Cylindrical: R = sqrt(x^2 + y^2); phi = atan2(y, -x), 0 at the Sun and **increasing in the
  direction of Galactic rotation**; v_R = (x vx + y vy) / R, positive outward;
  v_phi = (y vx - x vy) / R, **positive in the sense of rotation** (the Sun has about +245 km/s).
  astropy's cylindrical representation uses atan2(y, x) and the opposite sense of rotation.
* Heliocentric Galactic: X toward the Galactic centre (l = 0, b = 0), Y toward l = 90 deg, Z toward
  the north Galactic pole, built with the Hipparcos ICRS-to-Galactic matrix (:mod:`mwkin.galactic`);
  U, V, W are velocities along X, Y, Z relative to the Sun (U positive toward the centre).
* Units: kpc, km/s, mas/yr; angles in deg at the boundary (phi of :func:`cylindrical_from_cartesian`
  is in radians). k = 4.740470463533 km/s per (mas/yr kpc), one au per Julian year.

Implementation notes
--------------------
Stars are processed in blocks of a few thousand so that the working arrays stay in the processor
cache; the constant rotations are matrix products (BLAS), the rest plain numpy on 1-D arrays.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np
import astropy.units as u
from astropy.table import QTable

from .distances import InverseParallax, _column_values
from .frames import SolarFrame
from .galactic import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC
from .units import KMS, MASYR, to_value

__all__ = [
    "KinematicsError",
    "to_galactocentric",
    "from_galactocentric",
    "galactocentric_from_observables",
    "heliocentric_from_observables",
    "observables_from_galactocentric",
    "cylindrical_from_cartesian",
    "OUTPUT_COLUMNS",
    "ERROR_METHODS",
]

_K = K_KMS_PER_MASYR_KPC  # km/s per (mas/yr kpc)
_MAS_TO_RAD = math.pi / (180.0 * 3.6e6)
_DEG = 180.0 / math.pi
_BLOCK = 1 << 13  # stars per block (see the module notes)
_MC_DRAWS_PER_BLOCK = 1 << 18  # stars x samples per Monte Carlo block: bounds memory
#: Percentiles of a Gaussian at -1 and +1 sigma (15.87 and 84.13).
_SIGMA_LEVELS = (50.0 * math.erfc(1.0 / math.sqrt(2.0)), 50.0 * math.erfc(-1.0 / math.sqrt(2.0)))

ERROR_METHODS = ("none", "linear", "montecarlo")

_ROT = "in the direction of Galactic rotation"
#: Output column -> (unit, description) of :func:`to_galactocentric`, in output order.
OUTPUT_COLUMNS = {
    "x": (u.kpc, "Galactocentric x (astropy Galactocentric axes; the Sun is near x = -R0)"),
    "y": (u.kpc, f"Galactocentric y, {_ROT} at the Sun"),
    "z": (u.kpc, "Galactocentric z, toward the north Galactic pole (height above the mid-plane)"),
    "vx": (KMS, "Galactocentric velocity along x"),
    "vy": (KMS, "Galactocentric velocity along y"),
    "vz": (KMS, "Galactocentric velocity along z"),
    "R": (u.kpc, "Galactocentric cylindrical radius sqrt(x^2 + y^2)"),
    "phi": (u.deg, f"Galactocentric azimuth atan2(y, -x): 0 at the Sun, increasing {_ROT} "
                   "(astropy's cylindrical phi is atan2(y, x), the other sense)"),
    "v_R": (KMS, "Galactocentric radial velocity (x vx + y vy)/R, positive outward"),
    "v_phi": (KMS, f"Galactocentric azimuthal velocity (y vx - x vy)/R, positive {_ROT} (the Sun has "
                   "about +245 km/s); astropy's cylindrical differential has the opposite sign"),
    "v_z": (KMS, "Galactocentric vertical velocity (= vz)"),
    "X": (u.kpc, "heliocentric Galactic X, toward the Galactic centre (l = 0, b = 0)"),
    "Y": (u.kpc, "heliocentric Galactic Y, toward l = 90 deg (direction of rotation)"),
    "Z": (u.kpc, "heliocentric Galactic Z, toward the north Galactic pole"),
    "U": (KMS, "velocity along X relative to the Sun (positive toward the Galactic centre)"),
    "V": (KMS, "velocity along Y relative to the Sun (positive in the direction of rotation)"),
    "W": (KMS, "velocity along Z relative to the Sun (positive toward the north Galactic pole)"),
    "l": (u.deg, "Galactic longitude (Hipparcos ICRS-to-Galactic matrix)"),
    "b": (u.deg, "Galactic latitude (Hipparcos ICRS-to-Galactic matrix)"),
    "distance": (u.kpc, "heliocentric distance used (see meta['distance'])"),
}
_ANGLES = ("phi", "l", "b")  # radians inside, degrees in the output
_WRAPPING = ("phi", "l")  # Monte Carlo percentiles of these are taken around the nominal value
_CARTESIAN = ("x", "y", "z", "vx", "vy", "vz")
_HELIO = ("X", "Y", "Z", "U", "V", "W")
_POSITION_ROWS = ("X", "Y", "Z", "x", "y", "z")  # rows of the position block
_VELOCITY_ROWS = ("U", "V", "W", "vx", "vy", "vz")
_SCALARS = ("R", "phi", "v_R", "v_phi", "l", "b")
_VELOCITY_COLUMNS = ("vx", "vy", "vz", "v_R", "v_phi", "v_z", "U", "V", "W")

# Parameter order of the 6x6 covariance: (ra*, dec, parallax or distance, pmra, pmdec, radial_velocity).
_CORRELATIONS = {
    (0, 1): "ra_dec_corr", (0, 2): "ra_parallax_corr", (0, 3): "ra_pmra_corr", (0, 4): "ra_pmdec_corr",
    (1, 2): "dec_parallax_corr", (1, 3): "dec_pmra_corr", (1, 4): "dec_pmdec_corr",
    (2, 3): "parallax_pmra_corr", (2, 4): "parallax_pmdec_corr", (3, 4): "pmra_pmdec_corr",
}
# Unique entries of a symmetric 3x3 block, in the order the blocks are stored.
_SYM = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))
_SYM_DIAG = (0, 3, 5)
_FULL = tuple((i, j) for i in range(3) for j in range(3))

_SKY_REASON = "no_sky_position"


class KinematicsError(ValueError):
    """Bad arguments to a kinematics function (the message names the argument and the value)."""


# ====================================================================== frame geometry
def _sym_map(R):
    """Matrix acting on the unique entries (_SYM order) of S, giving those of R S R^T."""
    T = np.zeros((6, 6))
    for p, (a, b) in enumerate(_SYM):
        for q, (i, j) in enumerate(_SYM):
            T[p, q] = R[a, i] * R[b, j] + (R[a, j] * R[b, i] if i != j else 0.0)
    return T


def _full_map(R):
    """Matrix acting on the 9 entries (row-major) of S, giving those of R S R^T."""
    return np.array([[R[a, i] * R[b, j] for (i, j) in _FULL] for (a, b) in _FULL])


@dataclass(frozen=True)
class _Geometry:
    """Constant matrices of one solar frame, prepared once per call."""

    icrs_to_gc: np.ndarray
    offset: np.ndarray
    v_sun: np.ndarray
    position_map: np.ndarray  # (6, 4): [X Y Z x y z] = map @ [r_icrs; 1]
    velocity_map: np.ndarray  # (6, 4): [U V W vx vy vz] = map @ [v_icrs; 1]

    @classmethod
    def of(cls, frame):
        matrix, offset = frame.galactocentric_transform()
        v_sun = np.asarray(frame.v_sun, dtype=float)
        pos = np.zeros((6, 4))
        vel = np.zeros((6, 4))
        pos[:3, :3] = vel[:3, :3] = ICRS_TO_GALACTIC
        pos[3:, :3] = vel[3:, :3] = matrix
        pos[3:, 3] = offset
        vel[3:, 3] = v_sun
        return cls(matrix, offset, v_sun, pos, vel)

    def covariance_maps(self, full_helio):
        """Maps from ICRS block entries to (Galactocentric; heliocentric) block entries."""
        gc_sym, h_sym = _sym_map(self.icrs_to_gc), _sym_map(ICRS_TO_GALACTIC)
        if not full_helio:
            h_sym = h_sym[list(_SYM_DIAG)]
        maps = {"rr": np.vstack([gc_sym, h_sym]), "vv": np.vstack([gc_sym, h_sym]),
                "rv": _full_map(self.icrs_to_gc)}
        if full_helio:
            maps["rv"] = np.vstack([maps["rv"], _full_map(ICRS_TO_GALACTIC)])
        return maps


def _frame_or_default(frame):
    if frame is None:
        return SolarFrame.preset("astropy v4.0")
    if not isinstance(frame, SolarFrame):
        raise KinematicsError(f"frame must be a SolarFrame (or None for the default), got {type(frame).__name__}")
    return frame


# ====================================================================== forward conversion
def _sin_cos_deg(angle_deg):
    """sin and cos of angles in degrees, through the tangent of the half angle.

    numpy evaluates tan with SIMD instructions but not sin or cos; this is several times faster and
    accurate to a few 1e-16 (absolute) for any angle.
    """
    t = np.tan(np.asarray(angle_deg, dtype=float) * (math.pi / 360.0))
    t2 = t * t
    inv = 1.0 / (1.0 + t2)
    return 2.0 * t * inv, (1.0 - t2) * inv


def _workspace(n, block=_BLOCK):
    """Scratch arrays reused by every block of one call (fresh large temporaries would cost page faults)."""
    m = min(n, block)
    work = {"r": np.empty((4, m)), "v": np.empty((4, m)), "pos": np.empty((6, m)), "vel": np.empty((6, m))}
    work["r"][3] = work["v"][3] = 1.0
    return work


def _forward_block(sa, ca, sd, cd, d, pmra, pmdec, rv, geo, pos_out, vel_out, scalars, work):
    """Positions, velocities and derived quantities of one block of stars, written into the outputs.

    ``pos_out`` and ``vel_out`` are (6, n) views for _POSITION_ROWS and _VELOCITY_ROWS; ``scalars``
    maps _SCALARS to (n,) views; ``work`` comes from :func:`_workspace`. Distance in kpc, proper
    motions in mas/yr, velocities in km/s; angles in radians.
    """
    n = sa.shape[0]
    r, v, pos, vel = (work[k][:, :n] for k in ("r", "v", "pos", "vel"))  # rows 3 of r and v hold 1
    np.multiply(cd, ca, out=r[0])
    np.multiply(cd, sa, out=r[1])
    r[2] = sd
    g = ICRS_TO_GALACTIC @ r[:3]  # direction in Galactic axes, needs no distance
    r[:3] *= d
    # Heliocentric velocity in ICRS: v_r r_hat + k d (mu_a* e_ra + mu_d e_dec).
    kd = _K * d
    t_ra, t_dec = kd * pmra, kd * pmdec
    w = rv * cd - t_dec * sd
    np.subtract(ca * w, t_ra * sa, out=v[0])
    np.add(sa * w, t_ra * ca, out=v[1])
    np.add(rv * sd, t_dec * cd, out=v[2])
    np.matmul(geo.position_map, r, out=pos)  # [X Y Z x y z], the offset through the row of ones
    np.matmul(geo.velocity_map, v, out=vel)
    pos_out[...] = pos
    vel_out[...] = vel
    x, y, vx, vy = pos[3], pos[4], vel[3], vel[4]
    R = np.sqrt(x * x + y * y, out=scalars["R"])
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_R = 1.0 / R
    np.arctan2(y, -x, out=scalars["phi"])
    np.multiply(x * vx + y * vy, inv_R, out=scalars["v_R"])
    np.multiply(y * vx - x * vy, inv_R, out=scalars["v_phi"])
    lon = np.arctan2(g[1], g[0], out=scalars["l"])
    lon[lon < 0] += 2.0 * math.pi
    np.arctan2(g[2], np.sqrt(g[0] * g[0] + g[1] * g[1]), out=scalars["b"])


def _allocate(n):
    """Output arrays: position and velocity blocks (6, n) and the scalar columns; returns (blocks, columns)."""
    pos, vel = np.empty((6, n)), np.empty((6, n))
    columns = {name: pos[i] for i, name in enumerate(_POSITION_ROWS)}
    columns.update({name: vel[i] for i, name in enumerate(_VELOCITY_ROWS)})
    columns.update({name: np.empty(n) for name in _SCALARS})
    return (pos, vel), columns


def _forward_all(sa, ca, sd, cd, d, pmra, pmdec, rv, geo):
    """:func:`_forward_block` over arrays of any length; returns {column: array} (angles in radians)."""
    n = sa.shape[0]
    (pos, vel), columns = _allocate(n)
    work = _workspace(n)
    for start in range(0, n, _BLOCK):
        sl = slice(start, start + _BLOCK)
        _forward_block(sa[sl], ca[sl], sd[sl], cd[sl], d[sl], pmra[sl], pmdec[sl], rv[sl], geo,
                       pos[:, sl], vel[:, sl], {k: columns[k][sl] for k in _SCALARS}, work)
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    return columns


def _as_arrays(names_values):
    arrays = [np.asarray(v, dtype=float) for v in names_values.values()]
    try:
        arrays = np.broadcast_arrays(*arrays)
    except ValueError:
        shapes = ", ".join(f"{n} {np.shape(v)}" for n, v in names_values.items())
        raise KinematicsError(f"arrays of different shapes: {shapes}") from None
    return [np.array(a, dtype=float, ndmin=1).ravel() for a in arrays]


def _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame):
    ra, dec, d, pa, pd, rv = _as_arrays({"ra_deg": ra_deg, "dec_deg": dec_deg, "distance_kpc": distance_kpc,
                                         "pmra": pmra, "pmdec": pmdec, "rv_kms": rv_kms})
    sa, ca = _sin_cos_deg(ra)
    sd, cd = _sin_cos_deg(dec)
    return _forward_all(sa, ca, sd, cd, d, pa, pd, rv, _Geometry.of(_frame_or_default(frame)))


def galactocentric_from_observables(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame=None):
    """Galactocentric Cartesian positions and velocities from observables (plain arrays).

    Parameters
    ----------
    ra_deg, dec_deg : array-like
        ICRS position, deg.
    distance_kpc : array-like
        Heliocentric distance, kpc.
    pmra, pmdec : array-like
        Proper motions mu_alpha* = mu_alpha cos(dec) and mu_delta, mas/yr.
    rv_kms : array-like
        Heliocentric radial velocity, km/s (NaN gives NaN velocities).
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    dict of numpy.ndarray
        ``x, y, z`` (kpc) and ``vx, vy, vz`` (km/s) in astropy's Galactocentric axes (1-D arrays).

    Notes
    -----
    x_gc = M r_icrs + offset and v_gc = M v_icrs + v_sun with the matrix and offset of
    :meth:`SolarFrame.galactocentric_transform`; the same construction as astropy, so the results
    agree with ``SkyCoord(...).transform_to(Galactocentric)`` to round-off.
    """
    out = _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame)
    return {name: out[name].copy() for name in _CARTESIAN}


def heliocentric_from_observables(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms):
    """Heliocentric Galactic Cartesian positions and velocities (X, Y, Z, U, V, W) from observables.

    Parameters are as for :func:`galactocentric_from_observables` (deg, kpc, mas/yr, km/s).

    Returns
    -------
    dict of numpy.ndarray
        ``X, Y, Z`` (kpc) toward l = 0, l = 90 deg and the north Galactic pole; ``U, V, W`` (km/s)
        along them, relative to the Sun.

    References
    ----------
    ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3 (the rotation).
    Johnson, D. R. H. & Soderblom, D. R. 1987, AJ 93, 864 (space velocities from observables).
    """
    out = _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, None)
    return {name: out[name].copy() for name in _HELIO}


def cylindrical_from_cartesian(x, y, z, vx, vy, vz):
    """Galactocentric cylindrical coordinates from Galactocentric Cartesian ones (plain arrays).

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc (astropy axes).
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.

    Returns
    -------
    dict of numpy.ndarray
        ``R`` (kpc), ``phi`` (**radians**, in (-pi, pi]), ``z`` (kpc), ``v_R``, ``v_phi``, ``v_z`` (km/s).

    Notes
    -----
    phi = atan2(y, -x) is 0 at the Sun and increases in the direction of Galactic rotation;
    v_R = (x vx + y vy)/R is positive outward; v_phi = (y vx - x vy)/R is positive in the sense of
    rotation (the Sun has about +245 km/s). On the z axis (R = 0) v_R and v_phi are NaN.
    """
    x, y, z, vx, vy, vz = _as_arrays(dict(x=x, y=y, z=z, vx=vx, vy=vy, vz=vz))
    R = np.sqrt(x * x + y * y)
    with np.errstate(invalid="ignore", divide="ignore"):
        v_R = (x * vx + y * vy) / R
        v_phi = (y * vx - x * vy) / R
    return {"R": R, "phi": np.arctan2(y, -x), "z": z, "v_R": v_R, "v_phi": v_phi, "v_z": vz}


def observables_from_galactocentric(x, y, z, vx, vy, vz, frame=None):
    """Observables from Galactocentric Cartesian positions and velocities (plain arrays).

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc (astropy axes).
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    dict of numpy.ndarray
        ``ra`` in [0, 360) and ``dec`` (deg), ``distance`` (kpc), ``pmra`` (mu_alpha* = mu_alpha cos dec)
        and ``pmdec`` (mas/yr), ``radial_velocity`` (km/s).

    Notes
    -----
    The exact inverse of :func:`galactocentric_from_observables`. A point at the Sun's position has no
    direction: its distance is 0 and everything else NaN.
    """
    x, y, z, vx, vy, vz = _as_arrays(dict(x=x, y=y, z=z, vx=vx, vy=vy, vz=vz))
    geo = _Geometry.of(_frame_or_default(frame))
    # The inverse of the rotation is its transpose.
    r = geo.icrs_to_gc.T @ (np.stack([x, y, z]) - geo.offset[:, None])
    w = geo.icrs_to_gc.T @ (np.stack([vx, vy, vz]) - geo.v_sun[:, None])
    d = np.sqrt(np.einsum("ij,ij->j", r, r))
    with np.errstate(invalid="ignore", divide="ignore"):
        ra = np.where(d > 0, np.arctan2(r[1], r[0]), np.nan)
        dec = np.where(d > 0, np.arctan2(r[2], np.hypot(r[0], r[1])), np.nan)
        sa, ca, sd, cd = np.sin(ra), np.cos(ra), np.sin(dec), np.cos(dec)
        rv = np.einsum("ij,ij->j", r, w) / d
        kd = _K * d
        pmra = (-sa * w[0] + ca * w[1]) / kd
        pmdec = (-sd * ca * w[0] - sd * sa * w[1] + cd * w[2]) / kd
    ra_deg = np.degrees(ra)
    ra_deg[ra_deg < 0] += 360.0
    ra_deg[ra_deg >= 360.0] -= 360.0
    return {"ra": ra_deg, "dec": np.degrees(dec), "distance": d, "pmra": pmra, "pmdec": pmdec,
            "radial_velocity": rv}


# ====================================================================== linear propagation
def _nonzero(value):
    return not (isinstance(value, float) and value == 0.0)


def _sum_terms(terms):
    """Sum of arrays (or 0.0 when there are none), without an initial array of zeros."""
    total = 0.0
    for t in terms:
        total = total + t
    return total


def _times(value, sigma):
    """value * sigma, or 0.0 when sigma is the float 0.0 (a parameter without uncertainty)."""
    return value * sigma if _nonzero(sigma) else 0.0


def _local_covariance(H, rho):
    """Covariance H rho H^T for sparse rows H (list of {parameter: array}) and correlations rho.

    ``rho`` maps (k, l) with k < l to the correlation of parameters k and l (absent = 0; the diagonal
    is 1). Returns {(i, j): array or 0.0} for i <= j. Only non-zero terms are evaluated.
    """
    G = []
    for row in H:
        g = {}
        for k, h in row.items():
            for col in range(6):
                if k == col:
                    term = h
                else:
                    c = rho.get((min(k, col), max(k, col)))
                    if c is None:
                        continue
                    term = h * c
                g[col] = g[col] + term if col in g else term
        G.append(g)
    return {(i, j): _sum_terms(G[i][col] * h for col, h in H[j].items() if col in G[i])
            for i in range(6) for j in range(i, 6)}


def _lin(*pairs):
    """sum of a * b over the pairs whose factors are both non-zero (arrays, numbers or the float 0.0)."""
    return _sum_terms(a * b for a, b in pairs if _nonzero(a) and _nonzero(b))


class _PlaneRotation:
    """Rotation by an angle with cosine c and sine s in the plane of axes (i, j), for congruences."""

    def __init__(self, c, s, i, j):
        self.c, self.s, self.i, self.j = c, s, i, j
        self.c2, self.s2, self.cs = c * c, s * s, c * s
        self.two_cs, self.c2_s2 = 2.0 * self.cs, self.c2 - self.s2

    def symmetric(self, P):
        """G P G^T for symmetric P given as {(a, b): value} with a <= b; the same form back."""
        i, j, c, s = self.i, self.j, self.c, self.s
        Q = dict(P)
        pii, pij, pjj = P[i, i], P[min(i, j), max(i, j)], P[j, j]
        Q[i, i] = _lin((self.c2, pii), (-self.two_cs, pij), (self.s2, pjj))
        Q[j, j] = _lin((self.s2, pii), (self.two_cs, pij), (self.c2, pjj))
        diff = _lin((1.0, pii), (-1.0, pjj))
        Q[min(i, j), max(i, j)] = _lin((self.cs, diff), (self.c2_s2, pij))
        for k in {0, 1, 2} - {i, j}:
            pik, pjk = P[min(i, k), max(i, k)], P[min(j, k), max(j, k)]
            Q[min(i, k), max(i, k)] = _lin((c, pik), (-s, pjk))
            Q[min(j, k), max(j, k)] = _lin((s, pik), (c, pjk))
        return Q

    def general(self, X):
        """G X G^T for any 3x3 X given as {(a, b): value}; the same form back."""
        i, j, c, s = self.i, self.j, self.c, self.s
        Y = dict(X)
        for k in range(3):  # rows
            Y[i, k] = _lin((c, X[i, k]), (-s, X[j, k]))
            Y[j, k] = _lin((s, X[i, k]), (c, X[j, k]))
        Z = dict(Y)
        for k in range(3):  # columns
            Z[k, i] = _lin((c, Y[k, i]), (-s, Y[k, j]))
            Z[k, j] = _lin((s, Y[k, i]), (c, Y[k, j]))
        return Z


def _rows(block, entries, n):
    """Stack the entries of a block into an array of shape (len(entries), n)."""
    out = np.empty((len(entries), n))
    for row, key in enumerate(entries):
        out[row] = block[key]
    return out


def _linear_block(sa, ca, sd, cd, d, dd_dp, pmra, pmdec, rv, sig, rho, nominal, maps, sigma_out, cov_out):
    """Linear uncertainties of one block of stars, written into ``sigma_out`` (and ``cov_out``).

    ``sig`` holds the six standard deviations (ra* and dec in rad, parallax in mas or distance in kpc,
    proper motions in mas/yr, rv in km/s), the float 0.0 for a parameter without uncertainty;
    ``dd_dp`` is the derivative of the distance with respect to the third parameter.

    The Jacobian is written in each star's local basis (r_hat, e_ra, e_dec), where it is sparse. The
    covariance there goes to ICRS axes with the per-star basis E, then to the Galactocentric and
    Galactic axes with constant matrices acting on the covariance entries (matrix products).
    """
    s_a, s_d, s_p, s_ma, s_md, s_v = sig
    n = sa.shape[0]
    kd = _K * d
    with np.errstate(invalid="ignore", divide="ignore"):
        tan_dec = sd / cd
    a_sp = _times(dd_dp, s_p)
    # Jacobian rows (position along r_hat, e_ra, e_dec; velocity along the same) times the standard
    # deviation of each parameter (ra*, dec, parallax or distance, pmra, pmdec, rv). The tan(dec) terms
    # come from the turning of e_ra and e_dec when the position moves in ra.
    H = [
        {2: a_sp},
        {0: _times(d, s_a)},
        {1: _times(d, s_d)},
        {0: _times(-kd * pmra, s_a), 1: _times(-kd * pmdec, s_d), 5: s_v},
        {0: _times(rv - kd * tan_dec * pmdec, s_a), 2: _times(_K * pmra, a_sp), 3: _times(kd, s_ma)},
        {0: _times(kd * tan_dec * pmra, s_a), 1: _times(rv, s_d), 2: _times(_K * pmdec, a_sp),
         4: _times(kd, s_md)},
    ]
    H = [{k: h for k, h in row.items() if _nonzero(h)} for row in H]
    S = _local_covariance(H, rho)
    # Local basis to ICRS: E = [r_hat, e_ra, e_dec] = Rz(ra) B(dec), two plane rotations, so that
    # E P E^T costs two cheap congruences.
    to_icrs = (_PlaneRotation(cd, sd, 0, 2), _PlaneRotation(ca, sa, 0, 1))
    blocks = {}
    for name, (i0, j0), entries in (("rr", (0, 0), _SYM), ("vv", (3, 3), _SYM), ("rv", (0, 3), _FULL)):
        if name == "rv":
            P = {(a, b): S[i0 + a, j0 + b] for a, b in _FULL}
            for rot in to_icrs:
                P = rot.general(P)
        else:
            P = {(a, b): S[i0 + a, j0 + b] for a, b in _SYM}
            for rot in to_icrs:
                P = rot.symmetric(P)
        blocks[name] = maps[name] @ _rows(P, entries, n)
    rr, vv, rv_ = blocks["rr"], blocks["vv"], blocks["rv"]
    var = {}
    for i, p in enumerate(_SYM_DIAG):
        var[_CARTESIAN[i]], var[_CARTESIAN[i + 3]] = rr[p], vv[p]
    helio_diag = [6 + p for p in _SYM_DIAG] if cov_out is not None else [6, 7, 8]
    for i, p in enumerate(helio_diag):
        var[_HELIO[i]], var[_HELIO[i + 3]] = rr[p], vv[p]

    # Cylindrical. With (c, s) = (x, y)/R, the rotated offsets p = (dR, R dphi) = (c dx + s dy,
    # s dx - c dy) and w = (c dvx + s dvy, s dvx - c dvy) give dv_R = w0 + (v_phi/R) p1 and
    # dv_phi = w1 - (v_R/R) p1.
    x, y, v_R, v_phi, R = (nominal[k] for k in ("x", "y", "v_R", "v_phi", "R"))
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_R = 1.0 / R
    cyl = _PlaneRotation(x * inv_R, y * inv_R, 0, 1)
    c, s = cyl.c, cyl.s
    var_p0 = cyl.c2 * rr[0] + cyl.two_cs * rr[1] + cyl.s2 * rr[3]
    var_p1 = cyl.s2 * rr[0] - cyl.two_cs * rr[1] + cyl.c2 * rr[3]
    var_w0 = cyl.c2 * vv[0] + cyl.two_cs * vv[1] + cyl.s2 * vv[3]
    var_w1 = cyl.s2 * vv[0] - cyl.two_cs * vv[1] + cyl.c2 * vv[3]
    # rv_ rows: (x,vx) (x,vy) (x,vz) (y,vx) (y,vy) ...
    cov_p1_w0 = cyl.cs * (rv_[0] - rv_[4]) + cyl.s2 * rv_[1] - cyl.c2 * rv_[3]
    cov_p1_w1 = cyl.s2 * rv_[0] - cyl.cs * (rv_[1] + rv_[3]) + cyl.c2 * rv_[4]
    f_R, f_phi = v_phi * inv_R, v_R * inv_R
    var["R"] = var_p0
    var["phi"] = var_p1 * (inv_R * inv_R)
    var["v_R"] = var_w0 + f_R * (2.0 * cov_p1_w0 + f_R * var_p1)
    var["v_phi"] = var_w1 - f_phi * (2.0 * cov_p1_w1 - f_phi * var_p1)

    # Galactic longitude and latitude depend on (ra*, dec) alone. With the Galactic pole n (ICRS), the
    # Galactic north at the star is (n - (n.r_hat) r_hat) / cos b, so its components along e_ra and
    # e_dec are p / cos b and q / cos b; east is the perpendicular direction.
    n_gp = ICRS_TO_GALACTIC[2]
    p = -n_gp[0] * sa + n_gp[1] * ca
    q = -sd * (n_gp[0] * ca + n_gp[1] * sa) + n_gp[2] * cd
    sin_b = n_gp[0] * cd * ca + n_gp[1] * cd * sa + n_gp[2] * sd
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_cb2 = 1.0 / (1.0 - sin_b * sin_b)
    r_ad = rho.get((0, 1), 0.0)
    for name, (ja, jd), scale in (("l", (q, -p), inv_cb2 * inv_cb2), ("b", (p, q), inv_cb2)):
        ja, jd = _times(ja, s_a), _times(jd, s_d)
        var[name] = _sum_terms([ja * ja, jd * jd, 2.0 * r_ad * ja * jd]) * scale

    with np.errstate(invalid="ignore"):
        for name, v in var.items():
            np.sqrt(v, out=sigma_out[name])
    for name in _ANGLES:
        sigma_out[name] *= _DEG
    np.abs(a_sp, out=sigma_out["distance"])
    if cov_out is not None:
        for target, rows in ((cov_out["cov_galactocentric"], slice(0, 6)), (cov_out["cov_heliocentric"], slice(6, 12))):
            _fill_covariance(target, rr[rows], rv_[(slice(0, 9) if rows.start == 0 else slice(9, 18))], vv[rows])


def _fill_covariance(cov, rr, rv, vv):
    """(n, 6, 6) covariance from the unique entries of the position, cross and velocity blocks.

    The 36 entries are stacked along the last axis in one pass (row by row of the 6x6 matrix).
    """
    sym = {key: p for p, key in enumerate(_SYM)}
    entries = []
    for i in range(6):
        for j in range(6):
            if i < 3 and j < 3:
                entries.append(rr[sym[min(i, j), max(i, j)]])
            elif i >= 3 and j >= 3:
                entries.append(vv[sym[min(i, j) - 3, max(i, j) - 3]])
            elif i < 3:
                entries.append(rv[3 * i + (j - 3)])
            else:
                entries.append(rv[3 * j + (i - 3)])
    # (measured: stacking into a new array and copying beats np.stack(..., out=cov) several times)
    cov[...] = np.stack(entries, axis=1).reshape(-1, 6, 6)


def _error_inputs(table, res, d):
    """Standard deviations, correlations and d(distance)/d(parameter) for the propagation.

    A missing uncertainty column gives the float 0.0 (so its terms are skipped), a missing correlation
    column no entry.
    """
    def err(name, unit, scale=None):
        if name not in table.colnames:
            return 0.0
        values = _column_values(table, name, unit)
        return values if scale is None else values * scale

    p_err = res.parameter_error
    if p_err is not None and not np.any(p_err):
        p_err = 0.0
    sig = [err("ra_error", u.mas, _MAS_TO_RAD), err("dec_error", u.mas, _MAS_TO_RAD),
           0.0 if p_err is None else p_err,
           err("pmra_error", MASYR), err("pmdec_error", MASYR), err("radial_velocity_error", KMS)]
    rho = {}
    for key, name in _CORRELATIONS.items():
        if res.parameter != "parallax" and 2 in key:
            continue  # a distance column is independent of the astrometric solution
        if name in table.colnames:
            rho[key] = _column_values(table, name, u.dimensionless_unscaled)
    dd_dp = -d * d if res.parameter == "parallax" else np.ones_like(d)
    return sig, rho, dd_dp


def _take(value, index):
    """value[index] for arrays, the value itself for the float 0.0."""
    return value[index] if _nonzero(value) else value


# ====================================================================== Monte Carlo
def _sqrt_correlation(rho, n):
    """Per-star L, shape (n, 6, 6), with L L^T = the correlation matrix (rv uncorrelated).

    A symmetric square root from the eigen-decomposition, so that singular or slightly invalid
    correlation matrices still work; negative eigenvalues are set to zero and counted. Stars with a
    NaN correlation get NaN.
    """
    corr = np.zeros((n, 5, 5))
    corr[:, range(5), range(5)] = 1.0
    for (k, col), c in rho.items():
        corr[:, k, col] = corr[:, col, k] = c
    bad = ~np.isfinite(corr).all(axis=(1, 2))
    corr[bad] = np.eye(5)
    lam, vec = np.linalg.eigh(corr)
    clipped = (lam < -1e-12).any(axis=1) & ~bad
    L = np.zeros((n, 6, 6))
    L[:, :5, :5] = vec * np.sqrt(np.clip(lam, 0.0, None))[:, None, :]
    L[:, 5, 5] = 1.0
    L[bad] = np.nan
    return L, int(np.count_nonzero(clipped))


def _sorted_percentiles(values, levels):
    """Linear-interpolation percentiles along axis 1 ignoring NaN (numpy's default method)."""
    v = np.sort(values, axis=1)  # NaN sort last
    m = np.count_nonzero(~np.isnan(v), axis=1)
    top = np.maximum(m - 1, 0)
    rows = np.arange(v.shape[0])
    out = []
    for q in levels:
        pos = q / 100.0 * top
        lo = np.floor(pos).astype(int)
        hi = np.minimum(lo + 1, top)
        lo_v, hi_v = v[rows, lo], v[rows, hi]
        res = lo_v + (pos - lo) * (hi_v - lo_v)
        res[m == 0] = np.nan
        out.append(res)
    return out


def _montecarlo_block(inp, sig, rho, n_samples, rng, parameter, geo, levels):
    """Monte Carlo percentiles for one block of stars.

    Returns ({column: [one array per level]}, counts, excluded fraction per star).
    """
    n = inp["d"].shape[0]
    L, n_clipped = _sqrt_correlation(rho, n)
    z = rng.standard_normal((n, n_samples, 6))
    scale = np.stack([np.broadcast_to(s, (n,)) for s in sig], axis=1)
    noise = np.matmul(z, L.transpose(0, 2, 1)) * scale[:, None, :]
    sa, ca, sd, cd = (inp[k][:, None] for k in ("sa", "ca", "sd", "cd"))
    # Offsets in ra* and dec move the direction on the sphere (no trouble at the poles).
    da, dd = noise[..., 0], noise[..., 1]
    ux = cd * ca - da * sa - dd * sd * ca
    uy = cd * sa + da * ca - dd * sd * sa
    uz = sd + dd * cd
    norm = 1.0 / np.sqrt(ux * ux + uy * uy + uz * uz)
    ux, uy, uz = ux * norm, uy * norm, uz * norm
    cd_s = np.sqrt(ux * ux + uy * uy)
    with np.errstate(invalid="ignore", divide="ignore"):
        ca_s = np.where(cd_s > 0, ux / cd_s, 1.0)
        sa_s = np.where(cd_s > 0, uy / cd_s, 0.0)
        p = inp["p"][:, None] + noise[..., 2]
        bad_draw = ~(p > 0) & np.isfinite(p)
        d = np.where(p > 0, 1.0 / p if parameter == "parallax" else p, np.nan)
    pmra = inp["pmra"][:, None] + noise[..., 3]
    pmdec = inp["pmdec"][:, None] + noise[..., 4]
    rv = inp["rv"][:, None] + noise[..., 5]
    draws = _forward_all(sa_s.ravel(), ca_s.ravel(), uz.ravel(), cd_s.ravel(), d.ravel(), pmra.ravel(),
                         pmdec.ravel(), rv.ravel(), geo)
    result = {}
    for name in OUTPUT_COLUMNS:
        values = draws[name].reshape(n, n_samples)
        if name in _WRAPPING:  # percentiles of the offset from the nominal angle, wrapped to [-pi, pi)
            centre = inp["nominal_" + name][:, None]
            offsets = np.mod(values - centre + math.pi, 2.0 * math.pi) - math.pi
            qs = [q + centre[:, 0] for q in _sorted_percentiles(offsets, levels)]
        else:
            qs = _sorted_percentiles(values, levels)
        result[name] = [q * _DEG for q in qs] if name in _ANGLES else qs
    counts = {"draws": int(np.count_nonzero(bad_draw)), "stars": int(np.count_nonzero(bad_draw.any(axis=1))),
              "clipped": n_clipped}
    return result, counts, bad_draw.mean(axis=1)


def _montecarlo(table, res, d, has_position, inp, n_samples, seed, levels, geo):
    """Monte Carlo columns {name: (values, unit, description)} and meta for :func:`to_galactocentric`."""
    n = len(table)
    sig_all, rho_all, _ = _error_inputs(table, res, d)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    all_levels = tuple(levels) + _SIGMA_LEVELS
    stats = {name: [np.full(n, np.nan) for _ in all_levels] for name in OUTPUT_COLUMNS}
    excluded = np.full(n, np.nan)
    rows = np.flatnonzero(has_position)
    block = max(1, _MC_DRAWS_PER_BLOCK // n_samples)
    totals = {"draws": 0, "stars": 0, "clipped": 0}
    for start in range(0, rows.size, block):
        idx = rows[start:start + block]
        chunk = {k: v[idx] for k, v in inp.items()}
        chunk["d"] = d[idx]
        chunk["p"] = res.parameter_value[idx]
        result, counts, frac = _montecarlo_block(
            chunk, [_take(s, idx) for s in sig_all], {k: v[idx] for k, v in rho_all.items()},
            n_samples, rng, res.parameter, geo, all_levels)
        for name, qs in result.items():
            for target, q in zip(stats[name], qs):
                target[idx] = q
        excluded[idx] = frac
        for k in totals:
            totals[k] += counts[k]
    columns = {}
    for name, (unit, _) in OUTPUT_COLUMNS.items():
        for q, values in zip(levels, stats[name]):
            columns[f"{name}_p{q:g}"] = (values, unit, f"Monte Carlo {q:g}th percentile of {name}")
    for name, (unit, _) in OUTPUT_COLUMNS.items():
        lo, hi = stats[name][-2], stats[name][-1]
        columns[f"sigma_{name}"] = (0.5 * (hi - lo), unit,
                                    f"Monte Carlo uncertainty of {name}: half the central 68.27% width")
    columns["mc_excluded_fraction"] = (
        excluded, None, "fraction of Monte Carlo draws excluded for a non-positive parallax or distance")
    meta = {"mc_nonpositive_draws": totals["draws"], "mc_stars_with_nonpositive_draws": totals["stars"],
            "mc_clipped_correlations": totals["clipped"]}
    return columns, meta


# ====================================================================== table level
def _standard_table(stars):
    """The input as a checked table with standard column names (through mwkin.catalog)."""
    from .catalog import read_catalog  # imported here: catalog is a sibling with its own job

    return read_catalog(stars)


def _flags(reason_arrays, n):
    """Comma-joined reasons per star from {reason: bool array}, through a small integer code."""
    names = [name for name, mask in reason_arrays.items() if mask.any()]
    if not names:
        return np.zeros(n, dtype="<U1")  # all "" (zeroed memory costs nothing until read)
    code = np.zeros(n, dtype=np.uint16)
    for bit, name in enumerate(names):
        code[reason_arrays[name]] |= np.uint16(1 << bit)
    present = np.flatnonzero(np.bincount(code))
    labels = {int(c): ",".join(name for bit, name in enumerate(names) if c >> bit & 1) for c in present if c}
    flags = np.zeros(n, dtype=f"<U{max(len(s) for s in labels.values())}")
    for c, label in labels.items():
        flags[code == c] = label
    return flags


def _check_options(errors, n_samples, percentiles, return_covariance, distance):
    if errors not in ERROR_METHODS:
        raise KinematicsError(f"errors must be one of {', '.join(map(repr, ERROR_METHODS))}, got {errors!r}")
    if errors == "montecarlo":
        if isinstance(n_samples, bool) or not isinstance(n_samples, numbers.Integral) or n_samples < 2:
            raise KinematicsError(f"n_samples must be an integer >= 2, got {n_samples!r}")
        try:
            levels = np.asarray(percentiles, dtype=float).ravel()
        except (TypeError, ValueError):
            levels = np.array([np.nan])
        if levels.size == 0 or not np.all((levels >= 0) & (levels <= 100)):
            raise KinematicsError(f"percentiles must be numbers in [0, 100], got {percentiles!r}")
    if return_covariance and errors != "linear":
        raise KinematicsError(f"return_covariance=True needs errors='linear', got errors={errors!r}")
    if distance is not None and not (hasattr(distance, "resolve") and hasattr(distance, "to_dict")):
        raise KinematicsError(
            f"distance must be a distance choice such as InverseParallax() or DistanceColumn(), got {distance!r}"
        )


def to_galactocentric(stars, frame=None, *, errors="none", distance=None, n_samples=1000, seed=None,
                      percentiles=(16, 50, 84), return_covariance=False):
    """Galactocentric and heliocentric positions and velocities of the stars in a table.

    Parameters
    ----------
    stars : table, pandas.DataFrame or path
        Anything :func:`mwkin.catalog.read_catalog` reads: ra, dec (deg), parallax (mas) and/or
        distance (kpc), pmra (mu_alpha*), pmdec (mas/yr), radial_velocity (km/s, optional), their
        ``*_error`` columns and the Gaia ``*_corr`` columns (optional).
    frame : SolarFrame, optional
        The Sun's position and velocity; default ``SolarFrame.preset("astropy v4.0")``.
    errors : {"none", "linear", "montecarlo"}
        Uncertainty propagation, see Notes.
    distance : InverseParallax or DistanceColumn, optional
        How distances are obtained; default ``InverseParallax()`` (1/parallax, parallax/error >= 5).
    n_samples : int, default 1000
        Monte Carlo draws per star.
    seed : int, numpy.random.Generator or None
        Seed of the Monte Carlo draws (the same seed gives the same numbers).
    percentiles : sequence of float, default (16, 50, 84)
        Monte Carlo percentiles to report, in [0, 100].
    return_covariance : bool, default False
        With ``errors="linear"``: add ``cov_galactocentric`` and ``cov_heliocentric``, each (N, 6, 6)
        for (x, y, z, vx, vy, vz) and (X, Y, Z, U, V, W), in kpc and km/s.

    Returns
    -------
    astropy.table.QTable
        One row per input star, in input order: ``source_id`` (if given), then the columns of
        :data:`OUTPUT_COLUMNS` with units and descriptions (x y z vx vy vz R phi v_R v_phi v_z X Y Z U V
        W l b distance), ``flag`` ("" when fully usable, else comma-joined reasons) and ``has_velocity``.
        ``errors="linear"`` adds ``sigma_<col>`` for every column; ``errors="montecarlo"`` adds
        ``<col>_p16``, ``<col>_p50``, ``<col>_p84`` (for the percentiles asked), ``sigma_<col>`` and
        ``mc_excluded_fraction``. ``meta`` holds ``frame`` and ``distance`` (their ``to_dict()``),
        ``n_input``, ``n_position``, ``n_velocity``, ``dropped`` (reason -> number of stars, each
        reason counted for every star it applies to), ``errors`` and ``provenance`` (one line).

    Raises
    ------
    mwkin.catalog.CatalogError
        For a table that cannot be read or has bad values (see :func:`~mwkin.catalog.read_catalog`).
    mwkin.distances.DistanceError
        If the table lacks the columns the distance choice needs.
    KinematicsError
        For bad arguments.

    Notes
    -----
    **Missing inputs.** Rows are never dropped and nothing raises for missing values: a star without a
    usable distance (no parallax, parallax below the cut, non-positive parallax, no distance) or
    without ra/dec gets NaN positions and velocities; a star without proper motions or radial velocity
    gets its positions and NaN velocities. ``flag`` says why; ``l`` and ``b`` need only ra and dec.

    **Linear errors** (``errors="linear"``). The covariance of (ra*, dec, parallax or distance, pmra,
    pmdec, radial_velocity) -- ra_error and dec_error in mas, with the ten Gaia correlations; the radial
    velocity uncorrelated with the astrometry -- is propagated to first order through the analytic
    Jacobian. A missing uncertainty column counts as zero uncertainty, a missing correlation column
    as zero correlation; a NaN uncertainty or correlation of a star gives NaN sigmas for what depends
    on it, and correlations that do not form a valid (positive semi-definite) matrix can give NaN.
    A distance column is taken as uncorrelated with the astrometry. Velocity sigmas (and the velocity
    rows of the covariances) are NaN where a star has no velocity. ``sigma_distance`` is
    sigma_parallax / parallax^2; ``sigma_l`` is in degrees of longitude (sigma of l cos b over cos b,
    so it grows near the Galactic poles); ``sigma_phi`` is in degrees. First order is good while
    sigma_parallax / parallax is small (a few per cent: the Monte Carlo agrees within ~1-2 per cent
    at 6 per cent); at ~20 per cent and beyond the distance distribution is visibly skewed and
    ``errors="montecarlo"`` is the honest choice.

    **Monte Carlo** (``errors="montecarlo"``). ``n_samples`` draws per star from the same
    covariance (seeded numpy Generator, processed in blocks to bound memory). Offsets in ra* and dec
    move the direction on the sphere. Percentiles use numpy's linear interpolation;
    ``sigma_<col>`` is half the width between the 15.87th and 84.13th percentiles. Percentiles of
    ``l`` and ``phi`` are taken around the nominal value, so they may run slightly outside
    [0, 360) deg. Draws with a non-positive parallax (or distance) have no distance: they are excluded
    (set to NaN) and the percentiles use the remaining draws, so with many such draws the far side is
    under-represented; ``mc_excluded_fraction`` gives the excluded fraction per star and
    ``meta["mc_nonpositive_draws"]`` / ``meta["mc_stars_with_nonpositive_draws"]`` the totals.
    Stars whose correlation matrix is not positive semi-definite are drawn from its nearest
    semi-definite version (negative eigenvalues set to zero), counted in
    ``meta["mc_clipped_correlations"]``. ``meta`` also records ``n_samples``, ``percentiles`` and an
    integer ``seed``.

    References
    ----------
    Johnson, D. R. H. & Soderblom, D. R. 1987, AJ 93, 864 (space velocities and their uncertainties).
    ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3 (Galactic axes).
    Bailer-Jones, C. A. L. 2015, PASP 127, 994 (why 1/parallax needs a signal-to-noise cut).
    """
    _check_options(errors, n_samples, percentiles, return_covariance, distance)
    frame = _frame_or_default(frame)
    choice = InverseParallax() if distance is None else distance
    table = _standard_table(stars)
    n = len(table)
    res = choice.resolve(table)

    ra = _column_values(table, "ra", u.deg)
    dec = _column_values(table, "dec", u.deg)
    pmra = _column_values(table, "pmra", MASYR)
    pmdec = _column_values(table, "pmdec", MASYR)
    rv = _column_values(table, "radial_velocity", KMS)

    no_sky = np.isnan(ra) | np.isnan(dec)
    reasons = {_SKY_REASON: no_sky}
    reasons.update({name: res.reason_code == i for i, name in enumerate(res.reason_names, start=1)})
    reasons["no_proper_motion"] = np.isnan(pmra) | np.isnan(pmdec)
    reasons["no_radial_velocity"] = np.isnan(rv)
    has_position = res.usable & ~no_sky
    has_velocity = has_position & ~reasons["no_proper_motion"] & ~reasons["no_radial_velocity"]
    d = res.distance_kpc  # NaN where the distance is unusable
    if no_sky.any():
        d = np.where(no_sky, np.nan, d)

    geo = _Geometry.of(frame)
    (pos, vel), columns = _allocate(n)
    linear = errors == "linear"
    block = _BLOCK  # measured best for both paths (larger blocks fall out of the cache)
    work = _workspace(n, block)
    if linear:
        sig_all, rho_all, dd_dp_all = _error_inputs(table, res, d)
        maps = geo.covariance_maps(full_helio=return_covariance)
        sigmas = {name: np.empty(n) for name in OUTPUT_COLUMNS if name != "v_z"}
        covs = ({k: np.empty((n, 6, 6)) for k in ("cov_galactocentric", "cov_heliocentric")}
                if return_covariance else None)
    montecarlo = errors == "montecarlo"
    if montecarlo:
        trig = {k: np.empty(n) for k in ("sa", "ca", "sd", "cd")}
    for start in range(0, n, block):
        sl = slice(start, start + block)
        sa, ca = _sin_cos_deg(ra[sl])
        sd, cd = _sin_cos_deg(dec[sl])
        scalars = {k: columns[k][sl] for k in _SCALARS}
        _forward_block(sa, ca, sd, cd, d[sl], pmra[sl], pmdec[sl], rv[sl], geo, pos[:, sl], vel[:, sl], scalars,
                       work)
        if linear:
            nominal = {k: columns[k][sl] for k in ("x", "y", "R", "v_R", "v_phi")}
            _linear_block(sa, ca, sd, cd, d[sl], dd_dp_all[sl], pmra[sl], pmdec[sl], rv[sl],
                          [_take(s, sl) for s in sig_all], {k: v[sl] for k, v in rho_all.items()},
                          nominal, maps, {k: v[sl] for k, v in sigmas.items()},
                          None if covs is None else {k: v[sl] for k, v in covs.items()})
        elif montecarlo:
            for k, v in zip(("sa", "ca", "sd", "cd"), (sa, ca, sd, cd)):
                trig[k][sl] = v
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    extra = {}
    if montecarlo:
        inp = dict(trig, pmra=pmra, pmdec=pmdec, rv=rv, nominal_phi=columns["phi"].copy(),
                   nominal_l=columns["l"].copy())
        levels = tuple(float(q) for q in np.ravel(percentiles))
        mc_columns, mc_meta = _montecarlo(table, res, d, has_position, inp, n_samples, seed, levels, geo)
    for name in _ANGLES:
        columns[name] *= _DEG
    # l and b need only the direction; stars without ra/dec have none.
    columns["l"][no_sky] = np.nan
    columns["b"][no_sky] = np.nan

    meta = {
        "frame": frame.to_dict(),
        "distance": choice.to_dict(),
        "n_input": n,
        "n_position": int(np.count_nonzero(has_position)),
        "n_velocity": int(np.count_nonzero(has_velocity)),
        "dropped": {name: int(np.count_nonzero(mask)) for name, mask in reasons.items()},
        "errors": errors,
        "provenance": f"frame {frame.describe()}; {choice.describe()}",
    }
    if linear:
        sigmas["v_z"] = sigmas["vz"]
        no_position, no_velocity = ~has_position, ~has_velocity
        for name, values in sigmas.items():
            missing = no_sky if name in ("l", "b") else (no_velocity if name in _VELOCITY_COLUMNS else no_position)
            if missing.any():
                values[missing] = np.nan
            extra[f"sigma_{name}"] = (values, OUTPUT_COLUMNS[name][0], f"linear uncertainty (1 sigma) of {name}")
        for key, cov in (covs or {}).items():
            cov[no_position] = np.nan
            cov[no_velocity, 3:, :] = np.nan
            cov[no_velocity, :, 3:] = np.nan
            order = "x, y, z, vx, vy, vz" if key == "cov_galactocentric" else "X, Y, Z, U, V, W"
            extra[key] = (cov, None, f"linear 6x6 covariance of ({order}); kpc and km/s "
                                     "(kpc^2, kpc km/s, km^2/s^2)")
    elif montecarlo:
        extra.update(mc_columns)
        meta.update(mc_meta)
        meta.update(n_samples=int(n_samples), percentiles=list(levels),
                    seed=int(seed) if isinstance(seed, numbers.Integral) else None)

    cols, descriptions = {}, {}
    if "source_id" in table.colnames:
        cols["source_id"] = np.array(table["source_id"])
    for name, (unit, description) in OUTPUT_COLUMNS.items():
        cols[name], descriptions[name] = columns[name] << unit, description
    cols["flag"] = _flags(reasons, n)
    descriptions["flag"] = "why a star lacks positions or velocities (comma-joined reasons); '' if nothing is missing"
    cols["has_velocity"] = has_velocity
    descriptions["has_velocity"] = "True where velocities could be computed"
    for name, (values, unit, description) in extra.items():
        cols[name], descriptions[name] = (values if unit is None else values << unit), description
    result = QTable(cols, copy=False)  # built once; every array above is our own
    for name, description in descriptions.items():
        result[name].info.description = description
    result.meta.update(meta)
    return result


# ====================================================================== inverse, for mocks
_PHASE_SPACE = {"x": u.kpc, "y": u.kpc, "z": u.kpc, "vx": KMS, "vy": KMS, "vz": KMS}


def from_galactocentric(phase_space, frame=None):
    """Observables of stars given by Galactocentric positions and velocities (the inverse conversion).

    Parameters
    ----------
    phase_space : table, mapping, pandas.DataFrame or array of shape (N, 6)
        Columns ``x y z`` (kpc) and ``vx vy vz`` (km/s) in astropy's Galactocentric axes, as
        :func:`to_galactocentric` returns them (Quantity or plain numbers in those units); or a plain
        array whose columns are x, y, z, vx, vy, vz. A ``source_id`` column is carried over.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    astropy.table.QTable
        ``ra``, ``dec`` (deg), ``parallax`` (mas, = 1/distance), ``distance`` (kpc), ``pmra``
        (mu_alpha*), ``pmdec`` (mas/yr), ``radial_velocity`` (km/s), in the standard column names of
        :mod:`mwkin.catalog`; ``meta["frame"]`` is the frame's ``to_dict()``.

    Raises
    ------
    KinematicsError
        If a column is missing or the array has the wrong shape.
    mwkin.units.UnitMismatchError
        If a column carries a unit that is not a length (positions) or a speed (velocities).

    Notes
    -----
    Exact inverse of :func:`to_galactocentric` (to round-off). No noise is added and no uncertainty
    columns are made. A point exactly at the Sun has no direction: NaN everywhere but ``distance`` = 0.
    """
    frame = _frame_or_default(frame)
    source_id = None
    if isinstance(phase_space, np.ndarray) and phase_space.dtype.names is None:
        arr = np.asarray(phase_space, dtype=float)
        if arr.ndim != 2 or arr.shape[1] != 6:
            raise KinematicsError(
                f"a phase-space array must have shape (N, 6) with columns x y z vx vy vz, got shape {arr.shape}")
        values = [arr[:, i] for i in range(6)]
    else:
        if hasattr(phase_space, "colnames"):
            names = list(phase_space.colnames)
        elif hasattr(phase_space, "columns"):
            names = [str(c) for c in phase_space.columns]
        elif hasattr(phase_space, "keys"):
            names = list(phase_space.keys())
        else:
            raise KinematicsError(
                f"phase_space must be a table, a mapping or an (N, 6) array, got {type(phase_space).__name__}")
        missing = [k for k in _PHASE_SPACE if k not in names]
        if missing:
            raise KinematicsError(f"from_galactocentric needs columns x y z (kpc) and vx vy vz (km/s); "
                                  f"missing: {', '.join(missing)}")
        values = []
        for name, unit in _PHASE_SPACE.items():
            col = phase_space[name]
            values.append(to_value(col if isinstance(col, u.Quantity) else np.asarray(col, dtype=float), unit, name))
        if "source_id" in names:
            source_id = np.array(phase_space["source_id"])
    obs = observables_from_galactocentric(*values, frame=frame)
    with np.errstate(divide="ignore"):
        parallax = np.where(obs["distance"] > 0, 1.0 / obs["distance"], np.nan)
    cols = {}
    if source_id is not None:
        cols["source_id"] = source_id
    spec = (
        ("ra", u.deg, obs["ra"], "ICRS right ascension"),
        ("dec", u.deg, obs["dec"], "ICRS declination"),
        ("parallax", u.mas, parallax, "parallax = 1/distance (exact, no noise)"),
        ("distance", u.kpc, obs["distance"], "heliocentric distance"),
        ("pmra", MASYR, obs["pmra"], "proper motion mu_alpha* = mu_alpha cos(dec)"),
        ("pmdec", MASYR, obs["pmdec"], "proper motion mu_delta"),
        ("radial_velocity", KMS, obs["radial_velocity"], "heliocentric radial velocity"),
    )
    for name, unit, values, _ in spec:
        cols[name] = values << unit
    result = QTable(cols, copy=False)
    for name, _, _, description in spec:
        result[name].info.description = description
    result.meta["frame"] = frame.to_dict()
    return result
