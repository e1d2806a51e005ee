"""Orbits against analytic results, an independent integrator and galpy's own machinery (sources beside each)."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import G
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from mwkin.frames import SolarFrame
from mwkin.orbits import integrate_orbits, orbit_parameters
from mwkin.orbits.inputs import _cartesian
from mwkin.potentials import Potential

G_KPC_KMS2_PER_MSUN = G.to_value(u.kpc * (u.km / u.s) ** 2 / u.Msun)
GYR_PER_KPC_S_PER_KM = (1 * u.kpc / (u.km / u.s)).to_value(u.Gyr)
RO, VO = 8.0, 220.0  # galpy natural units used to build the test potentials (any choice works)


def _isochrone(gm, b):
    from galpy.potential import IsochronePotential

    return Potential.from_galpy(IsochronePotential(amp=gm / (VO**2 * RO), b=b / RO), ro=RO, vo=VO)


def _isochrone_phi(gm, b, r):
    # Henon 1959; Binney & Tremaine 2008, Sect. 2.2.2 (eq. 2.47, from memory): Phi = -GM / (b + sqrt(b^2 + r^2)).
    return -gm / (b + np.sqrt(b**2 + r**2))


def _turning_points(gm, b, E, L, r0):
    """Roots of E - Phi(r) - L^2 / (2 r^2) on either side of r0 (scipy brentq)."""
    f = lambda r: E - _isochrone_phi(gm, b, r) - L**2 / (2 * r**2)  # noqa: E731
    return brentq(f, 1e-6, r0, xtol=1e-14), brentq(f, r0, 1e4, xtol=1e-14)


@pytest.mark.parametrize("b", [1.5, 1e-6])  # a cored isochrone and its Kepler limit b -> 0
def test_isochrone_radial_period_azimuth_advance_and_turning_points(b):
    gm = G_KPC_KMS2_PER_MSUN * 2e11
    pot = _isochrone(gm, b)
    r0, v_R, v_phi = 8.0, 60.0, 150.0
    start = np.array([-r0, 0.0, 0.0, -v_R, v_phi, 0.0])  # in the mid-plane, moving outward and prograde
    E = _isochrone_phi(gm, b, r0) + 0.5 * (v_R**2 + v_phi**2)
    L = r0 * v_phi
    # Binney & Tremaine 2008, Sect. 3.5.2 (eqs. 3.225-3.226, numbers from memory):
    # T_r = 2 pi G M / (-2E)^(3/2); the azimuth advances by pi (1 + L / sqrt(L^2 + 4 G M b)) per radial period.
    T_r = 2 * math.pi * gm / (-2 * E) ** 1.5 * GYR_PER_KPC_S_PER_KM
    dpsi = math.pi * (1 + L / math.sqrt(L**2 + 4 * gm * b))
    orbits = integrate_orbits(start, pot, t=np.linspace(0, T_r, 20001))
    track = orbits.track(0)
    assert orbits.energy[0].value == pytest.approx(E, rel=1e-12)  # galpy's isochrone is 0 at infinity
    # After one radial period the radial phase space repeats ...
    assert track["R"][-1].value == pytest.approx(r0, rel=1e-9)
    assert track["v_R"][-1].value == pytest.approx(v_R, abs=1e-6)
    # ... and the azimuth has advanced by Delta psi.
    advance = np.unwrap(track["phi"].value)[-1] - track["phi"][0].value
    assert advance == pytest.approx(dpsi, rel=1e-9)
    # Pericentre and apocentre against the turning points from E and L (the track's extremes sit within
    # ~1e-7 of them: the sampling error of 20,001 output times per radial period).
    rperi, rapo = _turning_points(gm, b, E, L, r0)
    assert orbits.rperi[0].value == pytest.approx(rperi, rel=1e-6)
    assert orbits.rapo[0].value == pytest.approx(rapo, rel=1e-6)
    if b < 1e-3:
        # Kepler limit (Binney & Tremaine 2008, Sect. 3.1, from memory): T = 2 pi a^(3/2) / sqrt(G M) with
        # a = -G M / (2 E) = (rperi + rapo) / 2, and the orbit closes: Delta psi = 2 pi.
        a = 0.5 * (rperi + rapo)
        assert T_r == pytest.approx(2 * math.pi * a**1.5 / math.sqrt(gm) * GYR_PER_KPC_S_PER_KM, rel=1e-12)
        assert advance == pytest.approx(2 * math.pi, rel=1e-6)
        e = (rapo - rperi) / (rapo + rperi)
        assert orbits.eccentricity[0].value == pytest.approx(e, rel=1e-6)
        # Kepler e from E and L; b = 1e-6 kpc shifts it by O(b / rperi) ~ 1e-6.
        assert e == pytest.approx(math.sqrt(1 + 2 * E * L**2 / gm**2), rel=1e-5)


# Miyamoto-Nagai disc + Plummer bulge, written out here so the forces are independent of galpy.
GM_DISC, A_DISC, B_DISC = G_KPC_KMS2_PER_MSUN * 7e10, 3.0, 0.3
GM_BULGE, B_BULGE = G_KPC_KMS2_PER_MSUN * 1.5e10, 0.5


def _analytic_acceleration(pos):
    """-grad Phi for Phi = -GM_d / sqrt(R^2 + (a + sqrt(z^2 + b^2))^2) - GM_b / sqrt(r^2 + b_b^2).

    Miyamoto & Nagai 1975, PASJ 27, 533; Plummer 1911, MNRAS 71, 460 (potentials from memory).
    """
    x, y, z = pos
    zb = math.sqrt(z * z + B_DISC**2)
    d_disc = (x * x + y * y + (A_DISC + zb) ** 2) ** 1.5
    d_bulge = (x * x + y * y + z * z + B_BULGE**2) ** 1.5
    ax = -GM_DISC * x / d_disc - GM_BULGE * x / d_bulge
    ay = -GM_DISC * y / d_disc - GM_BULGE * y / d_bulge
    az = -GM_DISC * z * (A_DISC + zb) / (zb * d_disc) - GM_BULGE * z / d_bulge
    return np.array([ax, ay, az])


def test_independent_solve_ivp_integration_agrees():
    from galpy.potential import MiyamotoNagaiPotential, PlummerPotential

    unit = VO**2 * RO
    galpy_pot = MiyamotoNagaiPotential(amp=GM_DISC / unit, a=A_DISC / RO, b=B_DISC / RO) + PlummerPotential(
        amp=GM_BULGE / unit, b=B_BULGE / RO
    )
    pot = Potential.from_galpy(galpy_pot, ro=RO, vo=VO)
    starts = np.array([[-8.0, 0.5, 0.4, 25.0, 190.0, 30.0], [-5.0, -2.0, -0.8, -60.0, 120.0, -20.0]])
    t_gyr = np.linspace(0, 2.0, 201)
    ours = integrate_orbits(starts, pot, t=t_gyr)
    t_internal = t_gyr / GYR_PER_KPC_S_PER_KM  # kpc / (km/s)
    for i, w0 in enumerate(starts):
        # scipy's DOP853 (Hairer, Norsett & Wanner 1993) at tight tolerances, Cartesian, astropy axes.
        sol = solve_ivp(
            lambda t, w: np.concatenate([w[3:], _analytic_acceleration(w[:3])]),
            (0, t_internal[-1]),
            w0,
            method="DOP853",
            t_eval=t_internal,
            rtol=1e-12,
            atol=1e-12,
        )
        assert sol.success
        for k, name in enumerate(("x", "y", "z", "vx", "vy", "vz")):
            scale = 1.0 if k < 3 else 100.0
            np.testing.assert_allclose(getattr(ours, name)[i].value, sol.y[k], rtol=0, atol=1e-7 * scale)
    # Energy: ours (galpy's zero point, 0 at infinity for both components) against the analytic potential.
    r2 = starts[:, 0] ** 2 + starts[:, 1] ** 2
    phi = -GM_DISC / np.sqrt(r2 + (A_DISC + np.sqrt(starts[:, 2] ** 2 + B_DISC**2)) ** 2) - GM_BULGE / np.sqrt(
        r2 + starts[:, 2] ** 2 + B_BULGE**2
    )
    np.testing.assert_allclose(ours.energy.value, phi + 0.5 * np.sum(starts[:, 3:] ** 2, axis=1), rtol=1e-12)


@pytest.mark.filterwarnings("ignore:Using C implementation")  # galpy's notice when called directly
def test_matches_galpys_own_solar_frame_conversion():
    # galpy (Bovy 2015) initialised from an astropy SkyCoord through its own ro / zo / solarmotion handling,
    # with the frame chosen so that galpy's ro (in-plane distance, and its length unit) equals ours.
    from astropy.coordinates import SkyCoord
    from galpy.orbit import Orbit
    from galpy.potential import MWPotential2014

    z_sun = 0.0208
    frame = SolarFrame(R0=math.sqrt(8.0**2 + z_sun**2), z_sun=1000 * z_sun, v_sun=(12.9, 245.6, 7.78))
    xyz = np.array([[-7.5, 0.8, 0.3, 20.0, 230.0, -15.0], [-9.0, -1.0, -0.2, -30.0, 200.0, 10.0]])
    kms = u.km / u.s
    coord = SkyCoord(
        x=xyz[:, 0] * u.kpc,
        y=xyz[:, 1] * u.kpc,
        z=xyz[:, 2] * u.kpc,
        v_x=xyz[:, 3] * kms,
        v_y=xyz[:, 4] * kms,
        v_z=xyz[:, 5] * kms,
        frame=frame.to_astropy(),
    ).transform_to("icrs")
    vx, vy, vz = frame.v_sun
    reference = Orbit(coord, ro=8.0, vo=220.0, zo=z_sun, solarmotion=[-vx, vy - 220.0, vz] * kms)
    t = np.linspace(0, 1.0, 11) * u.Gyr
    reference.integrate(t, MWPotential2014, method="dop853_c")
    ours = integrate_orbits(xyz, Potential.preset("MWPotential2014"), frame=frame, t=t)
    np.testing.assert_allclose(ours.R.value, reference.R(t), rtol=1e-9)
    np.testing.assert_allclose(ours.z.value, reference.z(t), rtol=1e-8, atol=1e-9)
    np.testing.assert_allclose(ours.v_phi.value, reference.vT(t), rtol=1e-9)
    np.testing.assert_allclose(ours.v_R.value, reference.vR(t), rtol=1e-8, atol=1e-7)
    np.testing.assert_allclose(np.unwrap(ours.phi.value, axis=1), np.unwrap(reference.phi(t), axis=1), atol=1e-9)
    np.testing.assert_allclose(ours.energy.value, reference.E(pot=MWPotential2014), rtol=1e-10)


@pytest.fixture(scope="module")
def disc_sample():
    """A demo-like sample of disc stars near the Sun (no demo survey module yet; drawn here)."""
    rng = np.random.default_rng(11)
    n = 150
    R = rng.uniform(6.0, 10.0, n)
    phi = rng.uniform(-0.3, 0.3, n)
    z = rng.normal(0.0, 0.3, n)
    cyl = (R, phi, z, rng.normal(0, 35, n), rng.normal(215, 25, n), rng.normal(0, 20, n))
    return np.column_stack(_cartesian(*cyl))


def test_staeckel_agrees_with_integrated_parameters_for_disc_orbits(disc_sample):
    # Mackereth & Bovy 2018, PASP 130, 114094: Staeckel orbital parameters for disc orbits agree with integrated
    # ones to ~1 per cent. Measured here (MWPotential2014, 150 disc stars, 5 Gyr at 0.5 Myr): median relative
    # differences rperi 0.02 %, rapo 0.01 %, zmax 0.3 %, eccentricity 0.07 % (|de| ~ 1e-4); 90th percentiles
    # 0.15 %, 0.1 %, 1.2 %, 0.7 %. The thresholds below are about three times those.
    pot = Potential.preset("MWPotential2014")
    staeckel = orbit_parameters(disc_sample, pot, method="staeckel")
    integrated = orbit_parameters(disc_sample, pot, method="integrate", t=np.linspace(0, 5.0, 10001))
    assert set(staeckel["flag"]) == {""} and set(integrated["flag"]) == {""}
    limits = {"rperi": (0.001, 0.005), "rapo": (0.001, 0.005), "zmax": (0.01, 0.04), "eccentricity": (0.003, 0.03)}
    for name, (median_limit, p90_limit) in limits.items():
        rel = np.abs(staeckel[name].value / integrated[name].value - 1)
        assert np.median(rel) < median_limit, name
        assert np.percentile(rel, 90) < p90_limit, name
    np.testing.assert_allclose(staeckel["energy"].value, integrated["energy"].value, rtol=1e-14)


@pytest.mark.filterwarnings("ignore::UserWarning")  # galpy's SCF notices when called directly
@pytest.mark.parametrize("name", ["MWPotential2014", "Irrgang13I"])
def test_vectorised_delta_and_staeckel_match_galpy(name, disc_sample):
    # galpy (Bovy 2015): estimateDeltaStaeckel (Sanders 2012, MNRAS 426, 128, eq. 9) per star, and the
    # Orbit-level Staeckel parameters, as the reference for our vectorised path and unit/sign conversion.
    from galpy.actionAngle import estimateDeltaStaeckel
    from galpy.orbit import Orbit

    pot = Potential.preset(name)
    model = pot._model
    sample = disc_sample[:40]
    ours = orbit_parameters(sample, pot)
    R, z = np.hypot(sample[:, 0], sample[:, 1]), sample[:, 2]
    ref_delta = (
        estimateDeltaStaeckel(model.pot, R / model.ro, z / model.ro, no_median=True, use_physical=False) * model.ro
    )
    np.testing.assert_allclose(ours["staeckel_delta"].value, ref_delta, rtol=1e-12)
    cyl = np.column_stack(
        [
            R,
            np.arctan2(sample[:, 1], -sample[:, 0]),
            z,
            (sample[:, 0] * sample[:, 3] + sample[:, 1] * sample[:, 4]) / R,
            (sample[:, 1] * sample[:, 3] - sample[:, 0] * sample[:, 4]) / R,
            sample[:, 5],
        ]
    )
    orbit = Orbit(cyl[:, [0, 3, 4, 2, 5, 1]] / [model.ro, model.vo, model.vo, model.ro, model.vo, 1.0])
    kw = dict(analytic=True, type="staeckel", pot=model.pot, delta=ref_delta / model.ro, use_physical=False)
    np.testing.assert_allclose(ours["rperi"].value, orbit.rperi(**kw) * model.ro, rtol=1e-10)
    np.testing.assert_allclose(ours["rapo"].value, orbit.rap(**kw) * model.ro, rtol=1e-10)
    np.testing.assert_allclose(ours["zmax"].value, orbit.zmax(**kw) * model.ro, rtol=1e-10)
    np.testing.assert_allclose(ours["eccentricity"].value, orbit.e(**kw), rtol=1e-10)
