"""A flat-rotation disc near the Sun made with astropy's Galactocentric frame (not mwkin's code).

Shared by the sample widgets' tests, so their checks rest on an outside transformation.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
from astropy.coordinates import ICRS, CartesianDifferential, CartesianRepresentation, SkyCoord
from astropy.table import QTable

import mwkin as mk

R0 = 8.122  # kpc, the astropy v4.0 frame the mock is made in


def flat_disc_sample(
    n, seed, *, v_flat=230.0, r_max=1.0, z_scale=0.15, plx_error=(0.02, 0.06), pm_error=(0.02, 0.05), rv_fraction=0.6
):
    """Stars within ``r_max`` kpc of the Sun, mean flow ``v_flat`` km/s, dispersions (30, 20, 15) km/s.

    Gaussian parallax (uniform errors in ``plx_error`` mas) and proper-motion noise (``pm_error`` mas/yr);
    a radial velocity with 1 km/s noise for ``rv_fraction`` of the stars.
    """
    rng = np.random.default_rng(seed)
    gc_frame = mk.SolarFrame.preset("astropy v4.0").to_astropy()
    r = r_max * np.sqrt(rng.uniform(0.0025, 1.0, n))
    theta = rng.uniform(0, 2 * np.pi, n)
    x = -R0 + r * np.cos(theta)
    y = r * np.sin(theta)
    z = rng.normal(0.0, z_scale, n)
    R = np.hypot(x, y)
    v_phi = v_flat + rng.normal(0, 20, n)
    v_R = rng.normal(0, 30, n)
    v_z = rng.normal(0, 15, n)
    # phi = atan2(y, -x) increases with rotation: e_R = (x, y)/R, e_phi = (y, -x)/R
    vx = v_R * x / R + v_phi * y / R
    vy = v_R * y / R - v_phi * x / R
    gc = SkyCoord(
        CartesianRepresentation(x, y, z, unit=u.kpc, differentials=CartesianDifferential(vx, vy, v_z, unit=u.km / u.s)),
        frame=gc_frame,
    )
    icrs = gc.transform_to(ICRS())
    t = QTable()
    t["ra"] = icrs.ra.to(u.deg)
    t["dec"] = icrs.dec.to(u.deg)
    err = rng.uniform(*plx_error, n)
    t["parallax"] = (1.0 / icrs.distance.to_value(u.kpc) + rng.normal(0, 1, n) * err) * u.mas
    t["parallax_error"] = err * u.mas
    pm_err = rng.uniform(*pm_error, n)
    t["pmra"] = icrs.pm_ra_cosdec.to(u.mas / u.yr) + rng.normal(0, 1, n) * pm_err * u.mas / u.yr
    t["pmdec"] = icrs.pm_dec.to(u.mas / u.yr) + rng.normal(0, 1, n) * pm_err * u.mas / u.yr
    t["pmra_error"] = pm_err * u.mas / u.yr
    t["pmdec_error"] = pm_err * u.mas / u.yr
    rv = icrs.radial_velocity.to_value(u.km / u.s) + rng.normal(0, 1, n)
    rv[rng.uniform(size=n) > rv_fraction] = np.nan
    t["radial_velocity"] = rv * u.km / u.s
    t["radial_velocity_error"] = np.where(np.isfinite(rv), 1.0, np.nan) * u.km / u.s
    return t
