"""Per-star flags, the parameter columns and the errors of the orbit functions."""

from __future__ import annotations

import astropy.units as u

from ..columns import PHASE_SPACE_COLUMNS
from ..units import KMS

#: Reasons that can appear in the ``flag`` column.
FLAGS = {
    "nonfinite_input": "position or velocity not finite (NaN or inf)",
    "no_velocity": "the input row has no full velocity (has_velocity is False)",
    "integration_failed": "the integrated track contains non-finite values",
    "unbound": "energy at or above the potential at infinity; the orbit escapes",
    "staeckel_failed": "the Staeckel approximation gave no finite value",
    "no_covariance": "no finite covariance to draw samples from",
    "cancelled": "not computed because the run was cancelled",
    "overflow": "finite input too large for float64 arithmetic (|x| or |v| near 1e154 or more)",
    "on_z_axis": "starts on the z axis (R <= 1e-9 r or R <= 1e-9 kpc): phi is undefined there and galpy's "
    "integrator stalls",
    "radial_through_centre": "starts in the mid-plane with |z|, |v_z|, |v_phi| <= 1e-9 r, |v|: it falls straight "
    "through the centre, where galpy's integrator stalls",
    "integration_timeout": "the integration of this star alone exceeded the time limit and was stopped",
    "coarse_time_grid": "the output step is too coarse to resolve rperi, rapo or zmax (values kept; see Notes of "
    "integrate_orbits)",
    "short_time_grid": "the integration does not cover a pericentre, an apocentre and a vertical turning point "
    "(values kept; they are extremes of an arc, not of the orbit)",
    "staeckel_unphysical": "the Staeckel approximation gave an impossible value (zmax < 0, rperi > rapo or e outside "
    "[0, 1]); set to NaN",
    "staeckel_unreliable": "outside the validity tested for the Staeckel approximation (|Lz| < 0.2 R |v| or e > 0.7); "
    "values kept, use method='integrate'",
}

#: Flags that keep the star's values (they qualify them); every other flag comes with NaN values.
ADVISORY_FLAGS = frozenset({"coarse_time_grid", "short_time_grid", "staeckel_unreliable"})

#: Orbital parameters: name -> (unit, description).
PARAMETERS = {
    "rperi": (u.kpc, "pericentre, spherical Galactocentric radius"),
    "rapo": (u.kpc, "apocentre, spherical Galactocentric radius"),
    "zmax": (u.kpc, "maximum distance from the mid-plane"),
    "eccentricity": (u.dimensionless_unscaled, "(rapo - rperi) / (rapo + rperi)"),
    "energy": (KMS**2, "energy per unit mass, galpy's zero point of the potential (see meta)"),
    "Lz": (u.kpc * KMS, "angular momentum about the z axis, R v_phi, positive for prograde orbits"),
}

_CARTESIAN = PHASE_SPACE_COLUMNS
_CART_UNITS = ("kpc",) * 3 + (KMS,) * 3
_DEFAULT_PARAMETER_GRID = (3.0, 3001)  # Gyr, points: ~15 radial and ~35 vertical periods near the Sun
_DEFAULT_CHUNK = {"staeckel": 2000, "integrate": 200}


class OrbitError(ValueError):
    """Invalid input to an orbit computation."""


class TimeGridError(OrbitError):
    """A time grid that does not start at 0 or is not evenly spaced."""


class OrbitCancelled(Exception):
    """The run was cancelled between chunks.

    Attributes
    ----------
    partial : OrbitSet or QTable
        The result so far: rows not yet computed are NaN and flagged "cancelled".
    done, total : int
        Stars computed and stars requested.
    """

    def __init__(self, partial, done, total):
        super().__init__(f"orbit computation cancelled after {done} of {total} stars")
        self.partial = partial
        self.done = done
        self.total = total
