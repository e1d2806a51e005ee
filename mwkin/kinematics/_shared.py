"""Constants, output columns and the error class shared by the kinematics modules."""

from __future__ import annotations

import math

from ..columns import CORRELATION_PAIRS, PHASE_SPACE_COLUMNS
from ..coords import K_KMS_PER_MASYR_KPC

_K = K_KMS_PER_MASYR_KPC  # km/s per (mas/yr kpc)
_MAS_TO_RAD = math.pi / (180.0 * 3.6e6)
_DEG = 180.0 / math.pi
#: Stars per block (see the notes in :mod:`mwkin.kinematics`); read at call time, so tests can vary it.
BLOCK = 1 << 15
_BLAS_CHUNK = 1 << 19  # multiply-adds per matrix product call (see _matmul)
_ROTATION_CHUNK = 1 << 13  # stars per step of the covariance rotations (see _Linear)
_MC_DRAWS_PER_BLOCK = 1 << 18  # stars x samples per Monte Carlo block: bounds memory
#: Percentiles of a Gaussian at -1 and +1 sigma (15.87 and 84.13).
_SIGMA_LEVELS = (50.0 * math.erfc(1.0 / math.sqrt(2.0)), 50.0 * math.erfc(-1.0 / math.sqrt(2.0)))

ERROR_METHODS = ("none", "linear", "montecarlo")

_ANGLES = ("phi", "l", "b")  # radians inside, degrees in the output
_WRAPPING = ("phi", "l")  # Monte Carlo percentiles of these are taken around the nominal value
_CARTESIAN = PHASE_SPACE_COLUMNS
_HELIO = ("X", "Y", "Z", "U", "V", "W")
_POSITION_ROWS = ("X", "Y", "Z", "x", "y", "z")  # rows of the position block
_VELOCITY_ROWS = ("U", "V", "W", "vx", "vy", "vz")
_SCALARS = ("R", "phi", "v_R", "v_phi", "l", "b")
_VELOCITY_COLUMNS = ("vx", "vy", "vz", "v_R", "v_phi", "v_z", "U", "V", "W")

# Parameter order of the 6x6 covariance: (ra*, dec, parallax or distance, pmra, pmdec, radial_velocity).
_CORRELATIONS = CORRELATION_PAIRS  # (the sixth parameter, the radial velocity, has none)
# Unique entries of a symmetric 3x3 block, in the order the blocks are stored.
_SYM = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))
_SYM_DIAG = (0, 3, 5)

_SKY_REASON = "no_sky_position"
_CORR_REASON = "invalid_correlation"
# A correlation matrix is accepted when its smallest eigenvalue is at least -EIGEN_TOLERANCE (positive
# semi-definite up to round-off); the same tolerance decides which Monte Carlo draws count as clipped.
EIGEN_TOLERANCE = 1e-12
# Pivots of the LDL^T factorisation above this settle "positive definite" at once; smaller ones
# (singular or invalid matrices, rare) are decided by the eigenvalues.
_PIVOT_TOLERANCE = 1e-9


class KinematicsError(ValueError):
    """Bad arguments to a kinematics function (the message names the argument and the value)."""
