"""Unit tests of mwkin.demo.survey: determinism, columns, truth, and that the data follow the stated model."""

from __future__ import annotations

import json

import astropy.units as u
import numpy as np
import pytest

from mwkin.catalog import CORRELATION_COLUMNS, read_catalog
from mwkin.demo import DEFAULTS, survey
from mwkin.distances import InverseParallax
from mwkin.frames import SolarFrame
from mwkin.kinematics import to_galactocentric

N = 6000


@pytest.fixture(scope="module")
def noisy():
    return survey(N, seed=11)


@pytest.fixture(scope="module")
def exact():
    return survey(N, seed=11, noise=False)


@pytest.fixture(scope="module")
def exact_phase_space(exact):
    return to_galactocentric(exact, distance=InverseParallax(min_snr=0))


def test_same_seed_same_table_other_seed_other_table(noisy):
    again = survey(N, seed=11)
    for col in noisy.colnames:
        np.testing.assert_array_equal(np.asarray(again[col]), np.asarray(noisy[col]), err_msg=col)
    other = survey(N, seed=12)
    assert not np.array_equal(np.asarray(other["ra"]), np.asarray(noisy["ra"]))


def test_gaia_columns_and_units(noisy):
    assert len(noisy) == N
    units = {
        "ra": u.deg,
        "dec": u.deg,
        "parallax": u.mas,
        "pmra": u.mas / u.yr,
        "pmdec": u.mas / u.yr,
        "radial_velocity": u.km / u.s,
        "ra_error": u.mas,
        "dec_error": u.mas,
        "parallax_error": u.mas,
        "pmra_error": u.mas / u.yr,
        "pmdec_error": u.mas / u.yr,
        "radial_velocity_error": u.km / u.s,
    }
    for col, unit in units.items():
        assert noisy[col].unit == unit, col
    for col in CORRELATION_COLUMNS:
        assert col in noisy.colnames
    assert np.array_equal(noisy["source_id"], np.arange(1, N + 1))
    stars = read_catalog(noisy)  # the catalogue reader accepts it as it is
    assert stars.meta["renamed"] == {}


def test_truth_is_complete_and_json_able(noisy):
    truth = noisy.meta["truth"]
    json.dumps(truth)
    assert "synthetic" in truth["description"] and "not real data" in noisy.meta["description"]
    assert SolarFrame.from_dict(truth["frame"]) == SolarFrame.preset("astropy v4.0")
    assert noisy.meta["frame"] == truth["frame"]
    assert truth["C_kms_kpc"] == 0.0 and truth["K_kms_kpc"] == 0.0
    for key in (
        "v0_kms",
        "beta",
        "R_sun_kpc",
        "A_kms_kpc",
        "B_kms_kpc",
        "Omega0_kms_kpc",
        "solar_motion_kms",
        "dispersions_kms",
        "rotation_curve",
    ):
        assert key in truth


def test_truth_oort_constants_follow_the_rotation_curve(noisy):
    # Rotation-curve form of the Oort constants (Binney & Tremaine 2008; REFERENCES.md) [pub]:
    # A = (V0/R0 - dV/dR)/2, B = -(V0/R0 + dV/dR)/2; for V = v0 (R/R0)^beta, dV/dR = beta v0/R0.
    t = noisy.meta["truth"]
    omega = t["v0_kms"] / t["R_sun_kpc"]
    slope = t["beta"] * omega
    assert t["A_kms_kpc"] == pytest.approx(0.5 * (omega - slope))
    assert t["B_kms_kpc"] == pytest.approx(-0.5 * (omega + slope))
    assert t["A_kms_kpc"] - t["B_kms_kpc"] == pytest.approx(t["Omega0_kms_kpc"])
    # Close to the measured solar neighbourhood values, e.g. Feast & Whitelock 1997 (A = 14.82, B = -12.37)
    # and Bovy 2017 (A = 15.3, B = -11.9) [pub].
    assert 14.0 < t["A_kms_kpc"] < 16.0 and -13.0 < t["B_kms_kpc"] < -11.0


def test_solar_motion_relative_to_the_mean_flow(noisy):
    t = noisy.meta["truth"]
    vx, vy, vz = SolarFrame.from_dict(t["frame"]).v_sun
    assert t["solar_motion_kms"] == pytest.approx({"U": vx, "V": vy - t["v0_kms"], "W": vz})


def test_other_frame_is_used_and_recorded():
    frame = SolarFrame.preset("astropy pre-v4.0")
    s = survey(200, seed=2, frame=frame)
    assert SolarFrame.from_dict(s.meta["truth"]["frame"]) == frame
    assert s.meta["truth"]["R_sun_kpc"] == pytest.approx(np.hypot(*frame.sun_position[:2]))


def test_noise_free_table_has_the_same_stars(noisy, exact):
    # Same seed, same stars: the noisy parallaxes scatter around the exact ones by their stated errors.
    pull = ((noisy["parallax"] - exact["parallax"]) / exact["parallax_error"]).to_value(u.one)
    assert abs(np.mean(pull)) < 4 / np.sqrt(N)
    assert np.std(pull) == pytest.approx(1.0, abs=0.05)
    for col in ("pmra", "pmdec"):
        p = ((noisy[col] - exact[col]) / exact[f"{col}_error"]).to_value(u.one)
        assert np.std(p) == pytest.approx(1.0, abs=0.05)
    has_rv = np.isfinite(noisy["radial_velocity"].value)
    assert np.isfinite(exact["radial_velocity"].value).all()  # the truth has every radial velocity
    p = ((noisy["radial_velocity"] - exact["radial_velocity"]) / exact["radial_velocity_error"]).to_value(u.one)[has_rv]
    assert np.std(p) == pytest.approx(1.0, abs=0.08)


def test_noise_follows_the_stated_correlations(noisy, exact):
    # For each pair, the mean product of the two pulls estimates the mean stated correlation.
    dra = (noisy["ra"] - exact["ra"]).to_value(u.mas) * np.cos(exact["dec"].to_value(u.rad))
    dra = (dra + 180 * 3.6e6) % (360 * 3.6e6) - 180 * 3.6e6
    pulls = [
        dra / exact["ra_error"].value,
        (noisy["dec"] - exact["dec"]).to_value(u.mas) / exact["dec_error"].value,
        ((noisy["parallax"] - exact["parallax"]) / exact["parallax_error"]).value,
        ((noisy["pmra"] - exact["pmra"]) / exact["pmra_error"]).value,
        ((noisy["pmdec"] - exact["pmdec"]) / exact["pmdec_error"]).value,
    ]
    pairs = [(0, 1), (0, 2), (0, 3), (0, 4), (1, 2), (1, 3), (1, 4), (2, 3), (2, 4), (3, 4)]
    for name, (i, j) in zip(CORRELATION_COLUMNS, pairs):
        stated = np.asarray(exact[name])
        assert np.mean(pulls[i] * pulls[j]) == pytest.approx(stated.mean(), abs=5 / np.sqrt(N)), name


def test_correlation_matrices_are_valid(noisy):
    pairs = [(0, 1), (0, 2), (0, 3), (0, 4), (1, 2), (1, 3), (1, 4), (2, 3), (2, 4), (3, 4)]
    corr = np.tile(np.eye(5), (N, 1, 1))
    for name, (i, j) in zip(CORRELATION_COLUMNS, pairs):
        corr[:, i, j] = corr[:, j, i] = np.asarray(noisy[name])
    assert np.linalg.eigvalsh(corr).min() > 0
    spread = np.std([np.asarray(noisy[name]) for name in CORRELATION_COLUMNS], axis=1)
    assert np.all(spread > 0.1)  # they vary from star to star


def test_uncertainties_and_radial_velocities_look_like_a_survey(noisy):
    err = noisy["parallax_error"].to_value(u.mas)
    assert 0.01 < err.min() and err.max() < 0.8  # 0.02-0.5 mas, with a 10% star-to-star scatter
    assert np.percentile(err, 95) > 0.1  # the faint end is noisy
    mag = noisy["phot_g_mean_mag"].value
    bright, faint = mag < np.percentile(mag, 10), mag > np.percentile(mag, 90)
    assert np.median(err[faint]) > 4 * np.median(err[bright])  # errors grow with magnitude
    has_rv = np.isfinite(noisy["radial_velocity"].value)
    assert has_rv.mean() == pytest.approx(DEFAULTS["rv_fraction"], abs=1e-3)
    assert mag[has_rv].max() <= mag[~has_rv].min()  # the brighter stars have them
    rv_err = noisy["radial_velocity_error"].value
    assert np.nanmin(rv_err) >= 1.0 and np.nanmax(rv_err) <= 5.0
    assert np.isnan(rv_err[~has_rv]).all()


def test_positions_follow_the_model(exact_phase_space):
    out = exact_phase_space
    d = out["distance"].value
    assert d.max() <= DEFAULTS["max_distance_kpc"] + 1e-9 and d.min() >= DEFAULTS["min_distance_kpc"] - 1e-12
    assert np.median(d) < 0.6 * DEFAULTS["max_distance_kpc"]  # denser near the Sun
    # exponential vertical profile exp(-|z|/h): the mean |z| is h for a full profile; the 3 kpc sphere
    # and the magnitude limit keep it at or below that.
    mean_abs_z = np.mean(np.abs(out["z"].value))
    assert 0.15 < mean_abs_z <= DEFAULTS["scale_height_kpc"] * 1.1


def test_velocities_follow_the_model(noisy, exact_phase_space):
    out = exact_phase_space
    truth = noisy.meta["truth"]
    R, v_phi = out["R"].value, out["v_phi"].value
    v_model = truth["v0_kms"] * (R / truth["R_sun_kpc"]) ** truth["beta"]
    resid = v_phi - v_model
    assert abs(np.mean(resid)) < 4 * DEFAULTS["sigma_phi_kms"] / np.sqrt(N)
    for col, key in (("v_phi", "sigma_phi_kms"), ("v_R", "sigma_R_kms"), ("v_z", "sigma_z_kms")):
        values = resid if col == "v_phi" else out[col].value
        assert np.std(values) == pytest.approx(DEFAULTS[key], rel=0.04), col
    assert abs(np.mean(out["v_R"].value)) < 4 * DEFAULTS["sigma_R_kms"] / np.sqrt(N)
    # the slope of the mean flow, dV/dR = beta v0 / R_sun = -(A + B)
    slope = np.polyfit(R - truth["R_sun_kpc"], v_phi, 1)[0]
    expected = -(truth["A_kms_kpc"] + truth["B_kms_kpc"])
    stderr = DEFAULTS["sigma_phi_kms"] / (np.std(R) * np.sqrt(N))
    assert abs(slope - expected) < 5 * stderr


def test_bad_n():
    with pytest.raises(ValueError, match="positive integer"):
        survey(0)
    with pytest.raises(ValueError, match="positive integer"):
        survey(10.5)
