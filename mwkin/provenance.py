"""One-line provenance records: which frame, potential, distance choice and library versions made a result."""

from __future__ import annotations

import functools
import platform
from importlib import metadata

__all__ = ["library_versions", "provenance_line"]

_LIBRARIES = ("mwkin", "numpy", "scipy", "astropy", "galpy")


def library_versions():
    """Installed versions of the libraries a result depends on, as a dict name -> version string."""
    return dict(_library_versions())


@functools.lru_cache(maxsize=1)
def _library_versions():
    # Read once per process: importlib.metadata parses each package's METADATA file (~1 ms each),
    # which live widgets would otherwise pay on every result.
    versions = {"python": platform.python_version()}
    for name in _LIBRARIES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def provenance_line(frame=None, potential=None, distance=None, extra=None):
    """A short human-readable line saying how a result was made.

    Parameters
    ----------
    frame : SolarFrame, optional
    potential : Potential, optional
        Anything with a ``describe()`` method.
    distance : InverseParallax or DistanceColumn, optional
        Anything with a ``describe()`` method.
    extra : str, optional
        Appended as is (e.g. the error method).

    Returns
    -------
    str
    """
    parts = []
    for label, obj in (("frame", frame), ("potential", potential), ("distance", distance)):
        if obj is not None:
            parts.append(f"{label}: {obj.describe()}")
    if extra:
        parts.append(extra)
    versions = library_versions()
    parts.append(" ".join(f"{k} {v}" for k, v in versions.items()))
    return " | ".join(parts)
