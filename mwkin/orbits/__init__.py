"""Orbits of stars in a Galactic potential: integration and orbital parameters.

:func:`integrate_orbits` follows one star or many forward or backward in time and returns an
:class:`OrbitSet`; :func:`orbit_parameters` gives pericentre, apocentre, maximum height, eccentricity,
energy and angular momentum for a whole sample, either from the fast Staeckel approximation or from
integrated orbits, optionally with percentile bands drawn from the measurement uncertainties.

Conventions
-----------
* Input stars are either observables (ra, dec, parallax or distance, pmra, pmdec, radial_velocity),
  turned into Galactocentric coordinates by :func:`mwkin.kinematics.to_galactocentric` with the given
  frame, or Galactocentric Cartesian phase space ``x y z vx vy vz`` (kpc, km/s) in astropy's axes
  (the Sun near x = -R0), as ``to_galactocentric`` returns. The frame enters only there: the orbit
  starts from the star's own Galactocentric position and velocity, not from galpy's solar-motion
  machinery.
* Tracks are given in the same Cartesian axes and in cylindrical coordinates R, phi, z, v_R, v_phi,
  v_z with phi = atan2(y, -x) (the Sun near 0, increasing with Galactic rotation, wrapped to
  [-pi, pi) along tracks) and **v_phi positive in the sense of rotation**. ``Lz = R v_phi`` (kpc km/s) is positive
  for prograde orbits.
* ``rperi``/``rapo`` are spherical radii r = sqrt(R^2 + z^2); ``zmax`` is max |z|; eccentricity
  e = (rapo - rperi) / (rapo + rperi). Integrated values are the extremes over the output times.
* Energies per unit mass in km^2/s^2 keep galpy's zero point of the potential (see
  :meth:`Potential.describe_zero_point`; for MWPotential2014 Phi(infinity) = +65,094 km^2/s^2, not 0).
* Flags: a ``flag`` string per star, "" when all is well, otherwise ";"-joined reasons from
  :data:`FLAGS`. Bad stars get NaN; they never stop the batch. Unbound orbits (E >= Phi(infinity))
  keep their energy, Lz and track but get NaN rperi, rapo, zmax and eccentricity.

Layout
------
:mod:`~mwkin.orbits.flags` (flags, parameter columns, errors), :mod:`~mwkin.orbits.inputs` (one
normalisation path for every input), :mod:`~mwkin.orbits.screening` (singular starts, time limits,
coarse grids, chunked runs), :mod:`~mwkin.orbits.orbitset` (:class:`OrbitSet`),
:mod:`~mwkin.orbits.integrate` and :mod:`~mwkin.orbits.parameters` (the two public functions).
"""

from __future__ import annotations

from .flags import (
    ADVISORY_FLAGS,
    FLAGS,
    PARAMETERS,
    OrbitCancelled,
    OrbitError,
    TimeGridError,
)
from .integrate import integrate_orbits
from .orbitset import OrbitSet
from .parameters import draw_phase_space_samples, orbit_parameters, span_parameters

__all__ = [
    "integrate_orbits",
    "orbit_parameters",
    "OrbitSet",
    "OrbitError",
    "TimeGridError",
    "OrbitCancelled",
    "FLAGS",
    "ADVISORY_FLAGS",
    "PARAMETERS",
    "draw_phase_space_samples",
    "span_parameters",
]
