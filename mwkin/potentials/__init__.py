"""Galactic mass models: published Milky Way potentials and an adjustable bulge + disc + halo model.

A :class:`Potential` is an immutable value: a sum of components, a name and a citation. It answers
questions about the model in physical units (circular velocity, rotation curve, Oort constants,
epicycle and vertical frequencies, escape speed) and is what :mod:`mwkin.orbits` integrates in. All
galpy-specific work (natural units, the models' own ``ro``/``vo``) happens in :mod:`mwkin.potentials._galpy` (the only module that imports galpy).

Conventions
-----------
* Radii are Galactocentric cylindrical R in the mid-plane (z = 0) unless stated, kpc; velocities
  km/s; frequencies and Oort constants km/s/kpc; potentials km^2/s^2.
* Potential values keep galpy's zero point for each model. That is *not* always zero at infinity:
  MWPotential2014's power-law bulge tends to +65,094 km^2/s^2 there. :meth:`Potential.potential_at_infinity`
  gives the value, and escape speeds are measured against it.

Layout
------
:mod:`~mwkin.potentials.presets` (errors, published presets with citations, the adjustable model's
parameters and defaults), :mod:`~mwkin.potentials.potential` (:class:`Potential`),
:mod:`~mwkin.potentials._galpy` (the galpy adapter).
"""

from __future__ import annotations

from .potential import OortConstants, Potential, sun_inplane_radius
from .presets import (
    DEFAULT_BULGE,
    DEFAULT_DISC,
    DEFAULT_HALO,
    MAX_PLAUSIBLE_VC_KMS,
    NotSerialisableError,
    PotentialError,
    PresetInfo,
    UnknownPotentialError,
)

__all__ = [
    "Potential",
    "PotentialError",
    "UnknownPotentialError",
    "NotSerialisableError",
    "OortConstants",
    "PresetInfo",
    "DEFAULT_BULGE",
    "DEFAULT_DISC",
    "DEFAULT_HALO",
    "MAX_PLAUSIBLE_VC_KMS",
    "sun_inplane_radius",
]
