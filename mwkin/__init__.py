"""mwkin: Milky Way kinematics from astrometric surveys.

The core (this package outside :mod:`mwkin.widgets`) is pure numpy / astropy / galpy and never imports a
widget library, so it runs in scripts and batch jobs. See the README for the conventions.
"""

from .frames import SolarFrame
from .catalog import CatalogError, read_catalog

__version__ = "0.1.0"

__all__ = ["SolarFrame", "read_catalog", "CatalogError", "__version__"]
