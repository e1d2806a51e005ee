"""Oort constants: the local velocity field of the disc fitted to a stellar sample.

:func:`fit_oort` fits the first-order (linear) velocity field of the stars around the Sun -- the Oort
constants A, B, C, K -- together with the Sun's motion (U, V, W) relative to the local mean flow, to
proper motions and/or radial velocities in Galactic coordinates, and returns an :class:`OortFit`.

Conventions
-----------
* Oort constants in km/s/kpc; (U, V, W) in km/s with U toward the Galactic centre, V in the direction
  of rotation, W toward the north Galactic pole; mu_l* = mu_l cos b.
* To first order in the distance d (kpc), with k = 4.740470463533 km/s per (mas/yr kpc):

  - k mu_l* = (A cos 2l - C sin 2l + B) cos b + (U sin l - V cos l) / d
  - k mu_b = -(A sin 2l + C cos 2l + K) sin b cos b + [(U cos l + V sin l) sin b - W cos b] / d
  - v_r = d (K + A sin 2l + C cos 2l) cos^2 b - (U cos l + V sin l) cos b - W sin b

  so A and B describe the shear and rotation of the mean flow, C and K its radial shear and
  divergence (a radial outflow with dv_R/dR = +6 km/s/kpc gives C = K = +3).
* Derived: Omega0 = A - B, dV/dR = -(A + B), V0 = R0 (A - B) with R0 from the frame,
  kappa = sqrt(-4 B (A - B)).

Layout
------
:mod:`~mwkin.oort.model` (the first-order model: parameters, units, design, derived quantities,
predictions), :mod:`~mwkin.oort.sample` (sample preparation: geometry, distances, cuts, blocks),
:mod:`~mwkin.oort.solver` (weighted least squares with the fitted velocity ellipsoid, bootstrap),
:mod:`~mwkin.oort.result` (:class:`OortFit`), :mod:`~mwkin.oort.fit` (the public fit functions).
"""

from __future__ import annotations

from .fit import (
    DISPERSIONS,
    MAX_BOOTSTRAP,
    UNCONSTRAINED_ERROR,
    OortOutlierWarning,
    fit_in_distance_bins,
    fit_oort,
    heavy_tail_outliers,
)
from .model import DERIVED, PARAMETERS, UNITS, predicted_observables
from .result import OortFit
from .sample import OortInputError, galactic_geometry, sky_motions

__all__ = [
    "fit_oort",
    "fit_in_distance_bins",
    "OortFit",
    "OortInputError",
    "OortOutlierWarning",
    "heavy_tail_outliers",
    "predicted_observables",
    "galactic_geometry",
    "sky_motions",
    "UNCONSTRAINED_ERROR",
    "DISPERSIONS",
    "MAX_BOOTSTRAP",
    "PARAMETERS",
    "UNITS",
    "DERIVED",
]
