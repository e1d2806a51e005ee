"""Constants, output columns and the error class shared by the kinematics modules."""

from __future__ import annotations

import math

import astropy.units as u

from ..galactic import K_KMS_PER_MASYR_KPC
from ..units import KMS

_K = K_KMS_PER_MASYR_KPC  # km/s per (mas/yr kpc)
_MAS_TO_RAD = math.pi / (180.0 * 3.6e6)
_DEG = 180.0 / math.pi
_BLOCK = 1 << 15  # stars per block (see the module notes)
_BLAS_CHUNK = 1 << 19  # multiply-adds per matrix product call (see _matmul)
_ROTATION_CHUNK = 1 << 13  # stars per step of the covariance rotations (see _Linear)
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

_SKY_REASON = "no_sky_position"
_CORR_REASON = "invalid_correlation"
# A correlation matrix is accepted when its smallest eigenvalue is at least -_EIGEN_TOLERANCE (positive
# semi-definite up to round-off); the same tolerance decides which Monte Carlo draws count as clipped.
_EIGEN_TOLERANCE = 1e-12
# Pivots of the LDL^T factorisation above this settle "positive definite" at once; smaller ones
# (singular or invalid matrices, rare) are decided by the eigenvalues.
_PIVOT_TOLERANCE = 1e-9


class KinematicsError(ValueError):
    """Bad arguments to a kinematics function (the message names the argument and the value)."""


