"""The Oort-constant fit against outside sources: exact astropy kinematics, galpy's warm-disc
distribution function, the MWPotential2014 rotation curve, and published local values.

Mocks are built in astropy's Galactocentric frame and turned into ICRS observables with astropy's own
transformation (`SkyCoord.transform_to(ICRS)`), so the fit sees exactly what a survey would see.
"""

from __future__ import annotations

import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import ICRS, SkyCoord
from astropy.table import QTable

from mwkin.coords import ICRS_TO_GALACTIC
from mwkin.distances import DistanceColumn, InverseParallax
from mwkin.frames import SolarFrame
from mwkin.oort import fit_oort

KMS = u.km / u.s
MASYR = u.mas / u.yr
NAMES = ("A", "B", "C", "K", "U", "V", "W")


# ---------------------------------------------------------------------------------------------- mocks
def galactic_to_galactocentric(frame):
    """Rotation from heliocentric Galactic (Hipparcos) axes to astropy's Galactocentric axes, and the
    Sun's Galactocentric position (from the frame's own transform, which matches astropy to round-off)."""
    matrix, offset = frame.galactocentric_transform()
    return matrix @ ICRS_TO_GALACTIC.T, offset


def random_positions(n, rng, r_max):
    """Heliocentric Galactic positions uniform in a sphere of radius r_max (kpc), shape (3, n)."""
    r = r_max * rng.random(n) ** (1.0 / 3.0)
    v = rng.normal(size=(3, n))
    return r * v / np.linalg.norm(v, axis=0)


def observe(frame, pos_gc, vel_gc, rng, pm_err=0.02, rv_err=0.5, plx_err=0.01, rho=0.25):
    """ICRS observables of Galactocentric phase-space points through astropy, with Gaussian noise.

    Proper-motion errors are correlated (pmra_pmdec_corr = rho); the pmdec error is 1.3 times the
    pmra error so that the rotation to Galactic axes mixes unequal errors.
    """
    gc = SkyCoord(
        x=pos_gc[0] * u.kpc,
        y=pos_gc[1] * u.kpc,
        z=pos_gc[2] * u.kpc,
        v_x=vel_gc[0] * KMS,
        v_y=vel_gc[1] * KMS,
        v_z=vel_gc[2] * KMS,
        frame=frame.to_astropy(),
    )
    icrs = gc.transform_to(ICRS())
    n = pos_gc.shape[1]
    d = icrs.distance.to_value(u.kpc)
    err_a, err_d = np.full(n, pm_err), np.full(n, 1.3 * pm_err)
    z1, z2 = rng.normal(size=(2, n))
    t = QTable()
    t["ra"] = icrs.ra.to(u.deg)
    t["dec"] = icrs.dec.to(u.deg)
    t["parallax"] = (1.0 / d + plx_err * rng.normal(size=n)) * u.mas
    t["parallax_error"] = np.full(n, plx_err) * u.mas
    t["pmra"] = icrs.pm_ra_cosdec.to(MASYR) + err_a * z1 * MASYR
    t["pmdec"] = icrs.pm_dec.to(MASYR) + err_d * (rho * z1 + np.sqrt(1.0 - rho**2) * z2) * MASYR
    t["pmra_error"] = err_a * MASYR
    t["pmdec_error"] = err_d * MASYR
    t["pmra_pmdec_corr"] = np.full(n, rho)
    t["radial_velocity"] = icrs.radial_velocity.to(KMS) + rv_err * rng.normal(size=n) * KMS
    t["radial_velocity_error"] = np.full(n, rv_err) * KMS
    t["distance"] = d * u.kpc
    return t


def linear_field_mock(
    n, seed, frame, *, A, B, C, K, sun=(11.1, 12.2, 7.3), sigma=(30.0, 20.0, 15.0), r_max=0.4, **noise
):
    """Stars in an exactly linear velocity field around the Sun, defined in Galactic axes.

    Mean velocity at heliocentric Galactic position X: v_flow(sun) + M X with the planar gradient
    M = [[K + C, A - B], [A + B, K - C]] (x toward the centre, y toward rotation); v_flow(sun) =
    v_sun - sun, so the Sun moves by ``sun`` relative to the local flow. Velocities get a Gaussian
    ellipsoid ``sigma`` along the Galactic axes, then are rotated to Galactocentric axes and observed.
    """
    rng = np.random.default_rng(seed)
    rot, offset = galactic_to_galactocentric(frame)
    X = random_positions(n, rng, r_max)
    grad = np.zeros((3, 3))
    grad[:2, :2] = [[K + C, A - B], [A + B, K - C]]
    v_flow_sun = rot.T @ np.asarray(frame.v_sun) - np.asarray(sun)
    vel_gal = v_flow_sun[:, None] + grad @ X + rng.normal(size=(3, n)) * np.asarray(sigma)[:, None]
    table = observe(frame, rot @ X + offset[:, None], rot @ vel_gal, rng, **noise)
    truth = dict(A=A, B=B, C=C, K=K, U=sun[0], V=sun[1], W=sun[2])
    return table, truth


def axisymmetric_mock(n, seed, frame, *, v_phi, v_R=None, sigma=(30.0, 20.0, 15.0), r_max=0.3, **noise):
    """Stars in an axisymmetric disc: mean v_phi(R) (rotation-positive) and v_R(R) (outward positive).

    Returns the table and the Sun's motion relative to the mean flow at the Sun, in Galactic axes.
    """
    rng = np.random.default_rng(seed)
    rot, offset = galactic_to_galactocentric(frame)
    pos = rot @ random_positions(n, rng, r_max) + offset[:, None]
    R = np.hypot(pos[0], pos[1])
    phi = np.arctan2(pos[1], -pos[0])  # increases in the direction of rotation
    vp = v_phi(R)
    vr = np.zeros_like(R) if v_R is None else v_R(R)
    # R_hat = (-cos phi, sin phi), phi_hat = (sin phi, cos phi) in astropy's Galactocentric axes.
    vel = np.array([-vr * np.cos(phi) + vp * np.sin(phi), vr * np.sin(phi) + vp * np.cos(phi), 0.0 * R])
    vel += rng.normal(size=(3, n)) * np.asarray(sigma)[:, None]
    table = observe(frame, pos, vel, rng, **noise)
    R_sun = np.hypot(offset[0], offset[1])
    v_flow_sun = np.array([0.0, float(v_phi(np.array([R_sun]))[0]), 0.0])
    if v_R is not None:
        v_flow_sun[0] = -float(v_R(np.array([R_sun]))[0])
    sun = rot.T @ (np.asarray(frame.v_sun) - v_flow_sun)
    return table, dict(U=sun[0], V=sun[1], W=sun[2]), R_sun


def assert_within(fit, truth, n_sigma=3.0, names=NAMES, slack=None):
    slack = slack or {}
    for name in names:
        diff = fit.values[name] - truth[name]
        limit = n_sigma * fit.errors[name] + slack.get(name, 0.0)
        assert abs(diff) < limit, f"{name}: fit {fit.values[name]:.3f}, truth {truth[name]:.3f}, limit {limit:.3f}"


# ---------------------------------------------------------------------------------------------- tests
def test_linear_field_recovered_from_exact_astropy_kinematics():
    # Exact astropy Galactocentric -> ICRS kinematics (astropy.coordinates); the field is linear, so the
    # first-order equations of REFERENCES.md ("Oort constants") hold exactly for it.
    frame = SolarFrame()
    truth_in = dict(A=15.3, B=-11.9, C=-3.2, K=-3.3)  # Bovy 2017, MNRAS 468, L63 values as the injection
    table, truth = linear_field_mock(20000, 11, frame, **truth_in)
    fit = fit_oort(table, frame, use="both", distance=InverseParallax(min_snr=5))
    assert fit.n_used > 19000
    assert_within(fit, truth)
    assert all(fit.constrained.values())
    # The fitted velocity ellipsoid is the injected one (the dispersion is fitted, not assumed).
    for s, e, true in zip(fit.sigma_intrinsic, fit.sigma_intrinsic_error, (30.0, 20.0, 15.0)):
        assert abs(s - true) < 4 * e + 0.05


def test_reported_errors_match_the_scatter_over_seeds():
    # Pull distribution over 30 independent astropy mocks: (fit - truth) / error should have unit
    # standard deviation if the reported errors are right (common practice, no source). With 30 seeds
    # the sample standard deviation itself scatters by ~13%, hence the 0.7-1.4 band.
    frame = SolarFrame()
    pulls = {name: [] for name in NAMES}
    for seed in range(30):
        table, truth = linear_field_mock(2000, 100 + seed, frame, A=14.8, B=-12.4, C=-3.0, K=-3.0)
        fit = fit_oort(table, frame, use="both")
        for name in NAMES:
            pulls[name].append((fit.values[name] - truth[name]) / fit.errors[name])
    for name, values in pulls.items():
        values = np.asarray(values)
        assert 0.7 < values.std(ddof=1) < 1.4, (name, values.std(ddof=1))
        assert abs(values.mean()) < 3.0 / np.sqrt(len(values)) * 1.4, (name, values.mean())


def test_axisymmetric_rotation_curve_recovered():
    # Power-law rotation curve v_phi = V0 (R / R0)^beta: A = V0/(2 R0) (1 - beta), B = -V0/(2 R0) (1 + beta)
    # from the rotation-curve definitions (Binney & Tremaine 2008, Sect. 3.2.3; REFERENCES.md), C = K = 0.
    # Mock through astropy's Galactocentric frame. The second-order terms at d < 0.3 kpc shift A by
    # ~0.004 km/s/kpc and V by ~0.03 km/s (measured here on a cold mock), far below the errors.
    frame = SolarFrame()
    v0, beta = 230.0, -0.1
    _, offset = galactic_to_galactocentric(frame)
    R_sun = np.hypot(offset[0], offset[1])
    table, sun, _ = axisymmetric_mock(15000, 5, frame, v_phi=lambda R: v0 * (R / R_sun) ** beta)
    truth = dict(A=0.5 * v0 / R_sun * (1 - beta), B=-0.5 * v0 / R_sun * (1 + beta), C=0.0, K=0.0, **sun)
    fit = fit_oort(table, frame, use="both", distance=DistanceColumn("distance"))
    assert_within(fit, truth)
    assert fit.Omega0 == pytest.approx(truth["A"] - truth["B"], abs=3 * fit.derived["Omega0"][1])
    # V0 = R0 (A - B) with the frame's R0 is the mean-flow speed at the Sun: v0 here.
    assert fit.V0 == pytest.approx(v0 * frame.R0 / R_sun, abs=3 * fit.derived["V0"][1])


def test_radial_outflow_gives_positive_C_and_K():
    # Sign check of REFERENCES.md ("Oort constants"): a radial flow with dv_R/dR = +6 km/s/kpc (v_R = 0 at
    # the Sun, outward positive) gives C = K = +3 km/s/kpc, from C = 1/2 (-v_R/R + dv_R/dR) and
    # K = 1/2 (v_R/R + dv_R/dR). A flat rotation curve adds A = -B = V0 / (2 R0) and nothing to C, K.
    frame = SolarFrame()
    _, offset = galactic_to_galactocentric(frame)
    R_sun = np.hypot(offset[0], offset[1])
    table, sun, _ = axisymmetric_mock(
        20000,
        7,
        frame,
        v_phi=lambda R: np.full_like(R, 230.0),
        v_R=lambda R: 6.0 * (R - R_sun),
        sigma=(10.0, 8.0, 6.0),
    )
    fit = fit_oort(table, frame, use="both")
    truth = dict(A=115.0 / R_sun, B=-115.0 / R_sun, C=3.0, K=3.0, **sun)
    assert_within(fit, truth)
    assert fit.C > 0 and fit.K > 0
    assert fit.C / fit.errors["C"] > 5 and fit.K / fit.errors["K"] > 5


@pytest.mark.slow
def test_warm_disc_from_galpy_dehnendf_matches_its_own_oort_constants():
    # galpy's dehnendf (Dehnen 1999, AJ 118, 1201; galpy.df.dehnendf, flat rotation curve beta = 0 and the
    # default profile: h_R = ro/3, sigma_R(ro) = 0.2 vo): velocities from its sampleVRVT at each radius,
    # compared with the distribution function's own oortA, oortB (natural units, times vo/ro). These
    # include the asymmetric drift of the warm disc (A = 11.9, not the cold 13.75 km/s/kpc).
    from galpy.df import dehnendf

    ro, vo = 8.0, 220.0
    rng = np.random.default_rng(3)
    df = dehnendf(beta=0.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # galpy's integrals warn about overflow in tails
        mean_vt = df.meanvT(1.0) * vo
        truth = dict(A=df.oortA(1.0) * vo / ro, B=df.oortB(1.0) * vo / ro, C=0.0, K=0.0)
    sun = (11.1, 12.2, 7.3)
    # z_sun = 0, so the frame's in-plane R0 is galpy's ro.
    frame = SolarFrame(R0=ro, z_sun=0.0, v_sun=(sun[0], mean_vt + sun[1], sun[2]))
    d_max, n_radii, per_radius = 0.5, 30, 400
    pos, vel = [], []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for R in np.linspace(ro - d_max, ro + d_max, n_radii + 2)[1:-1]:
            vr, vt = (df.sampleVRVT(R / ro, n=per_radius) * vo).T
            # Azimuths that keep the star within d_max of the Sun in the plane.
            phi_max = np.arccos(np.clip((R**2 + ro**2 - d_max**2) / (2 * R * ro), -1, 1))
            phi = rng.uniform(-phi_max, phi_max, per_radius)
            z = rng.uniform(-0.15, 0.15, per_radius)
            vz = rng.normal(0.0, 15.0, per_radius)
            pos.append([-R * np.cos(phi), R * np.sin(phi), z])
            vel.append([-vr * np.cos(phi) + vt * np.sin(phi), vr * np.sin(phi) + vt * np.cos(phi), vz])
    table = observe(frame, np.concatenate(pos, axis=1), np.concatenate(vel, axis=1), rng)
    truth.update(U=sun[0], V=sun[1], W=sun[2])
    fit = fit_oort(table, frame, use="both", distance=DistanceColumn("distance"), distance_range=(0, 0.6))
    assert fit.n_used == n_radii * per_radius
    assert_within(fit, truth, names=("A", "B", "C", "K"))
    # The solar motion relative to the DF's mean flow (the mean flow has the DF's meanvT at R0).
    assert_within(fit, truth, names=("U", "V", "W"), n_sigma=4.0)
    # The dispersion is the DF's: sigma_R(ro) = 0.2 vo = 44 km/s at the Sun, sigma_T smaller (galpy's
    # sigmaR2, sigmaT2); the fitted ellipsoid is the volume average, so only a loose check.
    assert 38 < fit.sigma_intrinsic[0] < 48
    assert fit.sigma_intrinsic[1] < fit.sigma_intrinsic[0]


def test_mwpotential2014_oort_constants_alongside_the_fit():
    # MWPotential2014 (Bovy 2015, ApJS 216, 29) at R0 = 8 kpc, vc = 220 km/s: A = 15.1376, B = -12.3624
    # km/s/kpc (REFERENCES.md [lib], from galpy's rotation curve). Through Potential.oort_constants.
    from galpy.potential import MWPotential2014, vcirc

    from mwkin.potentials import Potential

    frame = SolarFrame(R0=8.0, z_sun=0.0, v_sun=(11.1, 232.2, 7.3))  # in-plane R0 = 8 kpc = galpy's ro
    potential = Potential.preset("MWPotential2014")

    def v_phi(R):
        return vcirc(MWPotential2014, R / 8.0, use_physical=False) * 220.0

    table, sun, _ = axisymmetric_mock(20000, 9, frame, v_phi=v_phi, sigma=(6.0, 4.0, 3.0))
    fit = fit_oort(table, frame, use="both", distance=DistanceColumn("distance"), potential=potential)
    assert fit.potential_oort["R_kpc"] == pytest.approx(8.0)
    assert fit.potential_oort["A"] == pytest.approx(15.1376, abs=1e-3)
    assert fit.potential_oort["B"] == pytest.approx(-12.3624, abs=1e-3)
    # A cold disc following the potential's rotation curve gives back the potential's A and B.
    # Second-order terms at d < 0.3 kpc: < 0.01 km/s/kpc (see the rotation-curve test).
    truth = dict(A=15.1376, B=-12.3624, C=0.0, K=0.0, **sun)
    assert_within(fit, truth, slack={"A": 0.01, "B": 0.01})
    assert "MWPotential2014" in fit.summary()


def test_demo_survey_gives_plausible_local_oort_constants():
    # The demo survey is built to resemble the solar neighbourhood, so its fit must land in the range of
    # the published local values: Bovy 2017, MNRAS 468, L63 (Gaia DR1/TGAS): A = 15.3 +/- 0.4,
    # B = -11.9 +/- 0.4 km/s/kpc; Feast & Whitelock 1997, MNRAS 291, 683 (Hipparcos Cepheids):
    # A = 14.82 +/- 0.84, B = -12.37 +/- 0.64 km/s/kpc. The range is the envelope of both at 3 sigma,
    # widened by three times the fit's own error. It must also recover the survey's own truth.
    from mwkin import demo

    sample = demo.survey(n=20000, seed=1)
    truth = sample.meta["truth"]
    frame = sample.meta.get("frame")
    if isinstance(frame, dict):
        frame = SolarFrame.from_dict(frame)
    fit = fit_oort(sample, frame if isinstance(frame, SolarFrame) else None, use="both", distance_range=(0.0, 0.5))
    published = {"A": [(15.3, 0.4), (14.82, 0.84)], "B": [(-11.9, 0.4), (-12.37, 0.64)]}
    for name, values in published.items():
        lo = min(v - 3 * e for v, e in values) - 3 * fit.errors[name]
        hi = max(v + 3 * e for v, e in values) + 3 * fit.errors[name]
        assert lo < fit.values[name] < hi, (name, fit.values[name], lo, hi)
        # The survey's truth (its rotation curve's A, B); a warm population's mean flow may differ by
        # its asymmetric-drift gradient, ~1 km/s/kpc for a disc like the local one.
        assert abs(fit.values[name] - float(truth[f"{name}_kms_kpc"])) < 4 * fit.errors[name] + 1.0, name
