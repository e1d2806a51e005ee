"""mwkin: Milky Way kinematics from astrometric surveys.

The core (this package outside :mod:`mwkin.widgets`) is pure numpy / astropy / galpy and never imports a
widget library, so it runs in scripts and batch jobs. See the README for the conventions.
"""

from . import demo
from ._version import __version__
from .catalog import CatalogError, read_catalog
from .distances import DistanceColumn, InverseParallax
from .frames import SolarFrame
from .kinematics import from_galactocentric, to_galactocentric
from .oort import OortFit, fit_in_distance_bins, fit_oort
from .orbits import OrbitSet, integrate_orbits, orbit_parameters
from .potentials import Potential

__all__ = [
    "SolarFrame",
    "read_catalog",
    "CatalogError",
    "Potential",
    "integrate_orbits",
    "orbit_parameters",
    "OrbitSet",
    "to_galactocentric",
    "from_galactocentric",
    "InverseParallax",
    "DistanceColumn",
    "fit_oort",
    "fit_in_distance_bins",
    "OortFit",
    "demo",
    "__version__",
]
