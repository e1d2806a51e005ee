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
  the north Galactic pole, built with the Hipparcos ICRS-to-Galactic matrix (:mod:`mwkin.coords`);
  U, V, W are velocities along X, Y, Z relative to the Sun (U positive toward the centre).
* Units: kpc, km/s, mas/yr; angles in deg at the boundary (phi of :func:`cylindrical_from_cartesian`
  is in radians). k = 4.740470463533 km/s per (mas/yr kpc), one au per Julian year.

Layout
------
:mod:`~mwkin.kinematics.transforms` (array-level transforms), :mod:`~mwkin.kinematics.linear`
(linear uncertainties), :mod:`~mwkin.kinematics.montecarlo` (correlation checks, Monte Carlo),
:mod:`~mwkin.kinematics.table` (the table-level functions), and :mod:`~mwkin.kinematics.reference`
(a plain, readable numpy implementation of the same transforms and Jacobians, the tests' oracle).

Implementation notes
--------------------
Stars are processed in blocks of 32768 (:func:`mwkin._blocks.run_blocks`) on ``MWKIN_THREADS``
threads (default min(2, CPUs)): numpy releases the interpreter lock inside its loops, and each
block's scratch arrays are made once per thread and reused, so that no large temporary arrays are
made. Smaller blocks would fit the cache better, but then the threads spend their time waiting for
the interpreter lock between the short numpy calls; 32768 was measured best for both the plain
conversion and the linear uncertainties. Outputs are rows of one preallocated array, written in
place. The constant rotations are matrix products (BLAS, in chunks small enough that OpenBLAS does
not start threads of its own), the rest plain numpy.
"""

from __future__ import annotations

from ..columns import OUTPUT_COLUMNS
from ._shared import ERROR_METHODS, KinematicsError
from .table import from_galactocentric, to_galactocentric
from .transforms import (
    cylindrical_from_cartesian,
    galactocentric_from_observables,
    heliocentric_from_observables,
    observables_from_galactocentric,
)

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
