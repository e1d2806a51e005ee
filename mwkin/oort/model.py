"""The first-order model of the local velocity field: its parameters, units, design and predictions.

One home for the model every other part of the Oort fit (and every view of it) uses:

* :data:`PARAMETERS` (A, B, C, K, U, V, W) and their :data:`UNITS`;
* the design of the model in velocity space (:func:`design_coefficients`);
* the quantities derived from A and B (:data:`DERIVED`, :func:`derived`);
* the model's predicted observables at a sky position and distance (:func:`predicted_observables`).

To first order in the distance d (kpc), with k = 4.740470463533 km/s per (mas/yr kpc):

- k mu_l* = (A cos 2l - C sin 2l + B) cos b + (U sin l - V cos l) / d
- k mu_b = -(A sin 2l + C cos 2l + K) sin b cos b + [(U cos l + V sin l) sin b - W cos b] / d
- v_r = d (K + A sin 2l + C cos 2l) cos^2 b - (U cos l + V sin l) cos b - W sin b

(the textbook first-order set; REFERENCES.md). In velocity space the same model reads
u_model = M (x, y) - (U, V, W) with M = [[K + C, A - B], [A + B, K - C]] acting on the heliocentric
Galactic position (x toward the centre, y toward rotation), which is what the solver fits.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np

from ..coords import K_KMS_PER_MASYR_KPC
from ..units import KMS

__all__ = [
    "PARAMETERS",
    "UNITS",
    "KMS_KPC",
    "DERIVED",
    "design_coefficients",
    "derived_quantities",
    "derived_from_samples",
    "predicted_observables",
    "unit_text",
]

#: The fitted parameters, in the solver's order.
PARAMETERS = ("A", "B", "C", "K", "U", "V", "W")
N_PARAMETERS = len(PARAMETERS)

KMS_KPC = KMS / u.kpc
#: Unit of each parameter.
UNITS = {"A": KMS_KPC, "B": KMS_KPC, "C": KMS_KPC, "K": KMS_KPC, "U": KMS, "V": KMS, "W": KMS}

#: Quantities derived from A and B (and R0): name -> (meaning, unit).
DERIVED = {
    "Omega0": ("A - B: angular velocity of the local mean flow", KMS_KPC),
    "dV/dR": ("-(A + B): slope of the rotation curve of the mean flow", KMS_KPC),
    "V0": ("R0 (A - B): speed of the local mean flow, first-order model", KMS),
    "kappa": ("sqrt(-4 B (A - B)): epicyclic frequency", KMS_KPC),
}

# DESIGN[a, j, f]: coefficient of basis function f (0: 1, 1: x, 2: y) in row a (velocity x, y, z) and
# column j (A, B, C, K, U, V, W) of the design, from u_model above.
DESIGN = np.zeros((3, N_PARAMETERS, 3))
DESIGN[0, 0, 2], DESIGN[0, 1, 2], DESIGN[0, 2, 1], DESIGN[0, 3, 1], DESIGN[0, 4, 0] = 1.0, -1.0, 1.0, 1.0, -1.0
DESIGN[1, 0, 1], DESIGN[1, 1, 1], DESIGN[1, 2, 2], DESIGN[1, 3, 2], DESIGN[1, 5, 0] = 1.0, 1.0, -1.0, 1.0, -1.0
DESIGN[2, 6, 0] = -1.0
DESIGN.setflags(write=False)


def unit_text(unit):
    """How a unit is written in tables and summaries ("km/s/kpc" rather than astropy's "km / (kpc s)")."""
    return {KMS_KPC: "km/s/kpc", KMS: "km/s"}.get(unit, unit.to_string())


def design_coefficients(p):
    """Coefficients ``c[a, f]`` with model velocity component a = c[a,0] + c[a,1] x + c[a,2] y.

    Parameters
    ----------
    p : array_like, shape (7,)
        The parameters in the order of :data:`PARAMETERS`.

    Returns
    -------
    numpy.ndarray, shape (3, 3)
    """
    return np.einsum("ajf,j->af", DESIGN, np.asarray(p, dtype=float))


def derived_quantities(p, cov, null, R0):
    """Omega0, dV/dR, V0, kappa with first-order propagated errors (NaN when A or B is missing).

    Parameters
    ----------
    p : array_like, shape (7,)
        The parameters (:data:`PARAMETERS` order).
    cov : numpy.ndarray, shape (7, 7)
        Their covariance.
    null : sequence of bool
        Whether each parameter is unconstrained by the data.
    R0 : float
        Sun-centre distance, kpc (for V0).

    Returns
    -------
    dict
        name -> (value, error).
    """
    a, b = p[0], p[1]
    nan = (float("nan"), float("nan"))
    if null[0] or null[1]:
        return {name: nan for name in DERIVED}
    cab = cov[:2, :2]

    def prop(grad):
        g = np.asarray(grad, dtype=float)
        return float(math.sqrt(max(g @ cab @ g, 0.0)))

    out = {
        "Omega0": (a - b, prop([1.0, -1.0])),
        "dV/dR": (-(a + b), prop([-1.0, -1.0])),
        "V0": (R0 * (a - b), prop([R0, -R0])),
    }
    k2 = -4.0 * b * (a - b)
    if k2 > 0:
        kappa = math.sqrt(k2)
        out["kappa"] = (kappa, prop([-2.0 * b / kappa, (-2.0 * a + 4.0 * b) / kappa]))
    else:
        out["kappa"] = nan
    return out


def derived_from_samples(samples, R0):
    """The derived quantities for each row of parameter samples (e.g. bootstrap draws)."""
    a, b = samples[:, 0], samples[:, 1]
    with np.errstate(invalid="ignore"):
        return {"Omega0": a - b, "dV/dR": -(a + b), "V0": R0 * (a - b), "kappa": np.sqrt(-4.0 * b * (a - b))}


def predicted_observables(l_deg, b_deg, distance_kpc, parameters):
    """mu_l* (mas/yr), mu_b (mas/yr) and v_r (km/s) of the first-order model.

    Parameters
    ----------
    l_deg, b_deg : float or array_like
        Galactic longitude and latitude, deg.
    distance_kpc : float or array_like
        Heliocentric distance, kpc.
    parameters : mapping or OortFit
        A, B, C, K (km/s/kpc) and U, V, W (km/s): a mapping with those keys, or an object with
        attributes A, B, C, K and ``solar_motion`` (an :class:`~mwkin.OortFit`). Parameters that are
        NaN (not constrained by the data) count as zero.

    Returns
    -------
    mu_l_star, mu_b, v_r : numpy.ndarray

    Examples
    --------
    A pure rotation (B = -12 km/s/kpc, the rest zero) gives mu_l* = B / k at b = 0:

    >>> mu_l, mu_b, v_r = predicted_observables(30.0, 0.0, 1.0, {"B": -12.0})
    >>> round(float(mu_l), 4), float(v_r)
    (-2.5314, 0.0)
    """
    if hasattr(parameters, "solar_motion"):
        values = dict(zip(("A", "B", "C", "K"), (parameters.A, parameters.B, parameters.C, parameters.K)))
        values.update(zip(("U", "V", "W"), parameters.solar_motion))
    else:
        values = dict(parameters)
    A, B, C, K, U, V, W = (float(values.get(name, 0.0)) for name in PARAMETERS)
    A, B, C, K, U, V, W = (v if math.isfinite(v) else 0.0 for v in (A, B, C, K, U, V, W))
    l = np.radians(np.asarray(l_deg, dtype=float))
    b = np.radians(np.asarray(b_deg, dtype=float))
    d = np.asarray(distance_kpc, dtype=float)
    cl, sl, c2l, s2l = np.cos(l), np.sin(l), np.cos(2 * l), np.sin(2 * l)
    cb, sb = np.cos(b), np.sin(b)
    with np.errstate(divide="ignore", invalid="ignore"):
        mu_l = ((A * c2l - C * s2l + B) * cb + (U * sl - V * cl) / d) / K_KMS_PER_MASYR_KPC
        mu_b = (-(A * s2l + C * c2l + K) * sb * cb + ((U * cl + V * sl) * sb - W * cb) / d) / K_KMS_PER_MASYR_KPC
    v_r = d * (K + A * s2l + C * c2l) * cb**2 - (U * cl + V * sl) * cb - W * sb
    return mu_l, mu_b, v_r
