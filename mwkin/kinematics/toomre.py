"""The Toomre diagram: its coordinates and its curves of constant speed relative to the LSR.

The diagram plots, for each star, the azimuthal velocity v_phi against the speed perpendicular to
rotation, sqrt(v_R^2 + v_z^2). A star moving with the local standard of rest (v_phi = v_LSR,
v_R = v_z = 0) sits at (v_LSR, 0); stars at a peculiar speed s from it lie on the half circle of
radius s about that point, the usual guides separating thin disc, thick disc and halo.
"""

from __future__ import annotations

import numpy as np

__all__ = ["toomre_ordinate", "constant_speed_curve"]


def toomre_ordinate(v_R, v_z):
    """The Toomre diagram's ordinate: the speed perpendicular to rotation, sqrt(v_R^2 + v_z^2), km/s.

    Parameters
    ----------
    v_R, v_z : array_like
        Galactocentric radial and vertical velocities, km/s (NaN stays NaN).

    Returns
    -------
    numpy.ndarray

    Examples
    --------
    >>> float(toomre_ordinate(30.0, 40.0))
    50.0
    """
    return np.hypot(np.asarray(v_R, dtype=float), np.asarray(v_z, dtype=float))


def constant_speed_curve(v_lsr, speed, n_points=91):
    """Points of constant peculiar speed ``speed`` about the LSR in the Toomre diagram.

    Parameters
    ----------
    v_lsr : float
        v_phi of the local standard of rest, km/s.
    speed : float
        Peculiar speed |v - v_LSR|, km/s.
    n_points : int
        Points along the half circle.

    Returns
    -------
    v_phi, v_perp : numpy.ndarray
        The half circle from v_lsr + speed to v_lsr - speed.

    Examples
    --------
    >>> x, y = constant_speed_curve(230.0, 100.0, n_points=3)
    >>> [round(float(v), 6) for v in x], [round(float(v), 6) for v in y]
    ([330.0, 230.0, 130.0], [0.0, 100.0, 0.0])
    """
    t = np.linspace(0.0, np.pi, int(n_points))
    return v_lsr + speed * np.cos(t), speed * np.sin(t)
