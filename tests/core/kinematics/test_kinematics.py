"""Unit tests of mwkin.kinematics and mwkin.distances.

Checks against outside sources live in tests/reference/test_kinematics_reference.py; here: the output
table, flags and counts, the distance choices, the linear and Monte Carlo uncertainties (against
numerical derivatives, against each other and against closed forms), round trips and property tests.
"""

from __future__ import annotations

import json
import math

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable, Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.stats import norm

from mwkin.catalog import CORRELATION_COLUMNS
from mwkin.coords import K_KMS_PER_MASYR_KPC
from mwkin.distances import REASONS, DistanceColumn, DistanceError, InverseParallax, distance_from_dict
from mwkin.frames import SolarFrame
from mwkin.kinematics import (
    OUTPUT_COLUMNS,
    KinematicsError,
    cylindrical_from_cartesian,
    from_galactocentric,
    galactocentric_from_observables,
    heliocentric_from_observables,
    observables_from_galactocentric,
    to_galactocentric,
)

KMS = u.km / u.s
MASYR = u.mas / u.yr
FRAME = SolarFrame(R0=8.0, z_sun=15.0, v_sun=(10.0, 235.0, 7.0), roll=2.0)
CORR_INDEX = dict(
    zip(CORRELATION_COLUMNS, [(0, 1), (0, 2), (0, 3), (0, 4), (1, 2), (1, 3), (1, 4), (2, 3), (2, 4), (3, 4)])
)


def _random_correlations(rng, n):
    """Valid (positive definite) 5x5 correlation matrices, shape (n, 5, 5)."""
    w = rng.normal(size=(n, 5, 8))
    s = w @ w.transpose(0, 2, 1)
    d = np.sqrt(np.einsum("nii->ni", s))
    return s / d[:, :, None] / d[:, None, :]


def _stars(rng, n=40, rel_plx_error=0.05, big_sky_errors=False, correlated=True):
    """A table of stars with all Gaia uncertainty and correlation columns."""
    plx = rng.uniform(0.3, 3.0, n)
    t = QTable(
        {
            "ra": rng.uniform(0, 360, n) * u.deg,
            "dec": np.degrees(np.arcsin(rng.uniform(-0.98, 0.98, n))) * u.deg,
            "parallax": plx * u.mas,
            "pmra": rng.normal(0, 20, n) * MASYR,
            "pmdec": rng.normal(0, 20, n) * MASYR,
            "radial_velocity": rng.normal(0, 50, n) * KMS,
        }
    )
    sky = 3e3 if big_sky_errors else 0.1  # mas; big values make the ra/dec terms visible
    t["ra_error"] = rng.uniform(0.3, 1.0, n) * sky * u.mas
    t["dec_error"] = rng.uniform(0.3, 1.0, n) * sky * u.mas
    t["parallax_error"] = rel_plx_error * plx * u.mas
    t["pmra_error"] = rng.uniform(0.05, 0.5, n) * MASYR
    t["pmdec_error"] = rng.uniform(0.05, 0.5, n) * MASYR
    t["radial_velocity_error"] = rng.uniform(0.5, 5.0, n) * KMS
    if correlated:
        corr = _random_correlations(rng, n)
        for name, (i, j) in CORR_INDEX.items():
            t[name] = corr[:, i, j]
    return t


def _input_covariance(t):
    """The 6x6 covariance of (ra*, dec, parallax, pmra, pmdec, rv) per star, in mas, mas/yr, km/s."""
    n = len(t)
    sig = np.stack(
        [
            np.asarray(t[c].value)
            for c in ("ra_error", "dec_error", "parallax_error", "pmra_error", "pmdec_error", "radial_velocity_error")
        ],
        axis=1,
    )
    corr = np.tile(np.eye(6), (n, 1, 1))
    for name, (i, j) in CORR_INDEX.items():
        if name in t.colnames:
            corr[:, i, j] = corr[:, j, i] = np.asarray(t[name])
    return corr * sig[:, :, None] * sig[:, None, :]


def _numerical_jacobian(t, frame):
    """Central-difference Jacobian of every output column with respect to the six inputs."""
    names = ("ra", "dec", "parallax", "pmra", "pmdec", "radial_velocity")
    base = {k: np.asarray(t[k].value, dtype=float) for k in names}
    sig = [
        np.asarray(t[c].value)
        for c in ("ra_error", "dec_error", "parallax_error", "pmra_error", "pmdec_error", "radial_velocity_error")
    ]
    jac = {c: np.zeros((len(t), 6)) for c in OUTPUT_COLUMNS}
    for p, name in enumerate(names):
        h = 1e-3 * sig[p]
        step = h / 3.6e6 / np.cos(np.radians(base["dec"])) if p == 0 else (h / 3.6e6 if p == 1 else h)
        plus, minus = dict(base), dict(base)
        plus[name] = base[name] + step
        minus[name] = base[name] - step
        op = to_galactocentric(QTable(plus), frame, distance=InverseParallax(min_snr=0))
        om = to_galactocentric(QTable(minus), frame, distance=InverseParallax(min_snr=0))
        for c in OUTPUT_COLUMNS:
            diff = op[c].value - om[c].value
            if c in ("l", "phi"):
                diff = np.mod(diff + 180.0, 360.0) - 180.0
            jac[c][:, p] = diff / (2 * h)
    return jac


# ----------------------------------------------------------------------------------------- output table
def test_output_columns_units_and_descriptions(rng):
    out = to_galactocentric(_stars(rng, 5), FRAME)
    for name, (unit, description) in OUTPUT_COLUMNS.items():
        assert out[name].unit == unit
        assert out[name].info.description == description
    assert list(out.colnames[: len(OUTPUT_COLUMNS)]) == list(OUTPUT_COLUMNS)
    assert "positive in the direction of Galactic rotation" in out["v_phi"].info.description
    assert "+245" in out["v_phi"].info.description
    assert "increasing in the direction of Galactic rotation" in out["phi"].info.description
    assert out["flag"].dtype.kind == "U" and out["has_velocity"].dtype == bool
    assert not any(c.startswith("sigma_") for c in out.colnames)


def test_meta_records_frame_distance_and_counts(rng):
    choice = InverseParallax(min_snr=3, zero_point_mas=-0.017)
    out = to_galactocentric(_stars(rng, 7), FRAME, distance=choice)
    assert SolarFrame.from_dict(out.meta["frame"]) == FRAME
    assert distance_from_dict(out.meta["distance"]) == choice
    assert out.meta["n_input"] == 7 and out.meta["n_position"] == 7 and out.meta["n_velocity"] == 7
    assert out.meta["errors"] == "none"
    assert "Bailer-Jones 2015" in out.meta["provenance"]
    json.dumps({k: out.meta[k] for k in ("frame", "distance", "dropped", "n_input")})


def test_source_id_is_carried_over(rng):
    t = _stars(rng, 4)
    t["source_id"] = np.array([11, 12, 13, 14], dtype=np.int64)
    out = to_galactocentric(t, FRAME)
    assert list(out["source_id"]) == [11, 12, 13, 14]
    assert out.colnames[0] == "source_id"


def test_default_frame_is_astropy_v4(rng):
    t = _stars(rng, 3)
    a = to_galactocentric(t)
    b = to_galactocentric(t, SolarFrame.preset("astropy v4.0"))
    np.testing.assert_array_equal(a["x"].value, b["x"].value)
    assert a.meta["frame"]["label"] == "astropy v4.0"


def test_accepts_plain_table_and_pandas(rng):
    t = _stars(rng, 6)
    plain = Table({k: np.asarray(t[k].value) for k in t.colnames})
    df = plain.to_pandas()
    a, b, c = (to_galactocentric(x, FRAME) for x in (t, plain, df))
    np.testing.assert_allclose(a["vx"].value, b["vx"].value, rtol=1e-15)
    np.testing.assert_allclose(a["vx"].value, c["vx"].value, rtol=1e-15)


def test_cylindrical_columns_follow_the_cartesian_ones(rng):
    out = to_galactocentric(_stars(rng, 30), FRAME)
    cyl = cylindrical_from_cartesian(*(out[k].value for k in ("x", "y", "z", "vx", "vy", "vz")))
    np.testing.assert_allclose(out["R"].value, cyl["R"], rtol=1e-14)
    np.testing.assert_allclose(out["phi"].to_value(u.rad), cyl["phi"], atol=1e-14)
    np.testing.assert_allclose(out["v_phi"].value, cyl["v_phi"], rtol=1e-12)
    # Lz = R v_phi = y vx - x vy: prograde (positive) for nearby disc-like stars
    lz = out["y"].value * out["vx"].value - out["x"].value * out["vy"].value
    np.testing.assert_allclose(out["R"].value * out["v_phi"].value, lz, rtol=1e-12)


def test_cylindrical_sign_convention_by_hand():
    # common practice (no source): at the Sun's position (x < 0, y = 0) moving along +y the star rotates
    # with the disc: phi = 0 and v_phi = +vy; a star ahead along the rotation has phi > 0.
    cyl = cylindrical_from_cartesian([-8.0, -8.0], [0.0, 1.0], [0.0, 0.0], [5.0, 0.0], [240.0, 240.0], [1.0, 0.0])
    assert cyl["phi"][0] == 0.0 and cyl["phi"][1] > 0
    assert cyl["v_phi"][0] == pytest.approx(240.0)
    assert cyl["v_R"][0] == pytest.approx(-5.0)  # vx > 0 at x < 0 points toward the centre: inward
    assert cyl["z"][0] == 0.0 and cyl["v_z"][0] == 1.0


# ----------------------------------------------------------------------------------------- flags & counts
def _problem_table():
    """Rows: fine, NaN parallax, low S/N, negative parallax, no RV, NaN pmra, NaN ra, zero-error parallax."""
    return QTable(
        {
            "ra": [10.0, 20.0, 30.0, 40.0, 50.0, 60.0, np.nan, 80.0] * u.deg,
            "dec": [0.0, 10.0, 20.0, 30.0, -40.0, -50.0, 0.0, 5.0] * u.deg,
            "parallax": [2.0, np.nan, 0.3, -0.5, 1.0, 1.0, 1.0, 1.5] * u.mas,
            "parallax_error": [0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, np.nan] * u.mas,
            "pmra": [1.0, 2.0, 3.0, 4.0, 5.0, np.nan, 7.0, 8.0] * MASYR,
            "pmdec": [1.0] * 8 * MASYR,
            "radial_velocity": [10.0, 10.0, 10.0, 10.0, np.nan, 10.0, 10.0, 10.0] * KMS,
        }
    )


def test_flags_and_counts_for_missing_inputs():
    out = to_galactocentric(_problem_table(), FRAME)  # default: InverseParallax(min_snr=5)
    flags = list(out["flag"])
    assert flags == [
        "",
        "no_parallax",
        "parallax_below_cut",
        "nonpositive_parallax",
        "no_radial_velocity",
        "no_proper_motion",
        "no_sky_position",
        "no_parallax_error",
    ]
    assert list(out["has_velocity"]) == [True, False, False, False, False, False, False, False]
    assert out.meta["n_position"] == 3  # rows 0, 4, 5
    assert out.meta["n_velocity"] == 1
    assert out.meta["dropped"] == {
        "no_sky_position": 1,
        "no_parallax": 1,
        "nonpositive_parallax": 1,
        "no_parallax_error": 1,
        "parallax_below_cut": 1,
        "no_proper_motion": 1,
        "no_radial_velocity": 1,
    }
    pos = np.isfinite(out["x"].value)
    vel = np.isfinite(out["vx"].value)
    assert list(pos) == [True, False, False, False, True, True, False, False]
    assert list(vel) == list(out["has_velocity"])
    # l and b need only the direction
    assert np.isfinite(out["l"].value[:6]).all() and np.isnan(out["l"].value[6])
    for col in ("X", "R", "phi", "distance"):
        assert np.isfinite(out[col].value[4]) and np.isnan(out[col].value[1])
    for col in ("U", "v_phi", "v_z"):
        assert np.isnan(out[col].value[4]) and np.isfinite(out[col].value[0])


def test_several_reasons_are_joined():
    t = QTable(
        {"ra": [10.0], "dec": [5.0], "parallax": [0.1], "parallax_error": [0.2], "pmra": [np.nan], "pmdec": [1.0]}
    )
    out = to_galactocentric(t, FRAME)
    assert out["flag"][0] == "parallax_below_cut,no_proper_motion,no_radial_velocity"
    assert out.meta["dropped"]["no_radial_velocity"] == 1


def test_nan_propagation_with_errors_does_not_raise():
    t = _problem_table()
    t["pmra_error"] = [0.1] * 8 * MASYR
    t["pmdec_error"] = [0.1] * 8 * MASYR
    t["radial_velocity_error"] = [1.0] * 8 * KMS
    lin = to_galactocentric(t, FRAME, errors="linear", return_covariance=True)
    assert np.isfinite(lin["sigma_vx"].value[0]) and np.isnan(lin["sigma_vx"].value[4])
    assert np.isfinite(lin["sigma_x"].value[4]) and np.isnan(lin["sigma_x"].value[1])
    assert np.isnan(lin["cov_galactocentric"][1]).all()
    assert np.isfinite(lin["cov_galactocentric"][4][:3, :3]).all()
    mc = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=200, seed=1)
    assert np.isfinite(mc["x_p50"].value[4]) and np.isnan(mc["vx_p50"].value[4])
    assert np.isnan(mc["x_p50"].value[1])


def test_empty_table_gives_empty_result():
    t = QTable({k: np.zeros(0) for k in ("ra", "dec", "parallax", "parallax_error", "pmra", "pmdec")})
    out = to_galactocentric(t, FRAME, errors="linear")
    assert len(out) == 0 and out.meta["n_input"] == 0
    assert "sigma_x" in out.colnames


# ----------------------------------------------------------------------------------------- distances
def test_inverse_parallax_cut_and_zero_point():
    t = QTable({"parallax": [1.0, 0.4, -0.01, -0.05] * u.mas, "parallax_error": [0.1, 0.1, 0.1, 0.1] * u.mas})
    res = InverseParallax(min_snr=5, zero_point_mas=-0.017).resolve(t)
    # corrected parallax = parallax - zero point = parallax + 0.017 mas (so -0.01 becomes +0.007)
    np.testing.assert_allclose(res.distance_kpc[0], 1.0 / 1.017)
    assert list(res.usable) == [True, False, False, False]
    assert list(res.reason) == ["", "parallax_below_cut", "parallax_below_cut", "nonpositive_parallax"]
    assert res.counts == {"no_parallax": 0, "nonpositive_parallax": 1, "no_parallax_error": 0, "parallax_below_cut": 2}
    np.testing.assert_allclose(res.distance_error_kpc[0], 0.1 / 1.017**2)
    assert np.isnan(res.distance_kpc[1:]).all()
    assert set(res.reason) <= set(REASONS) | {""}


def test_inverse_parallax_without_cut_uses_every_positive_parallax():
    t = QTable({"parallax": [1.0, 0.01, 0.0]})
    res = InverseParallax(min_snr=0).resolve(t)
    assert list(res.usable) == [True, True, False]
    assert res.distance_error_kpc is None
    assert res.distance_kpc[1] == pytest.approx(100.0)


def test_inverse_parallax_needs_parallax_error_for_a_cut():
    with pytest.raises(DistanceError, match="parallax_error"):
        InverseParallax(min_snr=5).resolve(QTable({"parallax": [1.0]}))


def test_inverse_parallax_needs_parallax_and_hints_at_distance_column():
    with pytest.raises(DistanceError, match="DistanceColumn"):
        InverseParallax().resolve(QTable({"distance": [1.0]}))


def test_distance_column_with_units_and_errors():
    t = QTable({"d": [500.0, -1.0, np.nan] * u.pc, "d_error": [50.0, 1.0, 1.0] * u.pc})
    res = DistanceColumn("d").resolve(t)
    np.testing.assert_allclose(res.distance_kpc[0], 0.5)
    np.testing.assert_allclose(res.distance_error_kpc[0], 0.05)
    assert list(res.reason) == ["", "no_distance", "no_distance"]
    assert res.counts == {"no_distance": 2}
    with pytest.raises(DistanceError, match="'dist'"):
        DistanceColumn("dist").resolve(t)


def test_to_galactocentric_with_a_distance_column(rng):
    t = _stars(rng, 10)
    t["distance"] = (1.0 / t["parallax"].value) * u.kpc
    t["distance_error"] = 0.01 * t["distance"]
    a = to_galactocentric(t, FRAME, distance=DistanceColumn(), errors="linear")
    b = to_galactocentric(t, FRAME, distance=InverseParallax(min_snr=0))
    np.testing.assert_allclose(a["x"].value, b["x"].value, rtol=1e-14)
    np.testing.assert_allclose(a["sigma_distance"].value, 0.01 * t["distance"].value, rtol=1e-12)
    assert a.meta["distance"] == {"method": "distance_column", "column": "distance"}


def test_default_distance_choice_on_a_distance_only_table_is_an_error():
    t = QTable({"ra": [1.0], "dec": [2.0], "distance": [1.0], "pmra": [0.0], "pmdec": [0.0]})
    with pytest.raises(DistanceError, match="DistanceColumn"):
        to_galactocentric(t)


@pytest.mark.parametrize(
    "choice", [InverseParallax(), InverseParallax(min_snr=10, zero_point_mas=-0.017), DistanceColumn("d_kpc")]
)
def test_distance_choice_round_trip_and_describe(choice):
    data = json.loads(json.dumps(choice.to_dict()))
    assert distance_from_dict(data) == choice
    assert type(choice).from_dict(data) == choice
    assert isinstance(choice.describe(), str) and "\n" not in choice.describe()


def test_inverse_parallax_describe_carries_the_bias_caveat():
    text = InverseParallax(min_snr=5, zero_point_mas=-0.017).describe()
    assert "Bailer-Jones 2015" in text and "5" in text and "-0.017" in text
    assert "Bailer-Jones" in InverseParallax.__doc__ and "PASP 127, 994" in InverseParallax.__doc__


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(min_snr=-1), "min_snr"),
        (dict(min_snr=float("nan")), "min_snr"),
        (dict(zero_point_mas=float("inf")), "zero_point"),
    ],
)
def test_bad_inverse_parallax_settings(kwargs, match):
    with pytest.raises(DistanceError, match=match):
        InverseParallax(**kwargs)


def test_bad_distance_dicts():
    with pytest.raises(DistanceError, match="unknown distance method"):
        distance_from_dict({"method": "photometric"})
    with pytest.raises(DistanceError, match="min_snrr"):
        distance_from_dict({"method": "inverse_parallax", "min_snrr": 5})
    with pytest.raises(DistanceError, match="column"):
        DistanceColumn("")


# ----------------------------------------------------------------------------------------- bad arguments
@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(errors="bootstrap"), "errors must be one of"),
        (dict(errors="montecarlo", n_samples=1), "n_samples"),
        (dict(errors="montecarlo", n_samples=10.5), "n_samples"),
        (dict(errors="montecarlo", percentiles=(16, 120)), "percentiles"),
        (dict(errors="none", return_covariance=True), "return_covariance"),
        (dict(distance=5.0), "distance must be a distance choice"),
        (dict(frame="v4.0"), "frame must be a SolarFrame"),
    ],
)
def test_bad_arguments(rng, kwargs, match):
    with pytest.raises(KinematicsError, match=match):
        to_galactocentric(_stars(rng, 2), **kwargs)


def test_kinematics_error_is_a_value_error():
    assert issubclass(KinematicsError, ValueError)


def test_bad_catalogue_values_are_reported_by_the_catalogue_reader():
    from mwkin.catalog import CatalogError

    t = QTable({"ra": [1.0], "dec": [95.0], "parallax": [1.0], "pmra": [0.0], "pmdec": [0.0]})
    with pytest.raises(CatalogError, match="dec"):
        to_galactocentric(t)


# ----------------------------------------------------------------------------------------- linear errors
def test_linear_sigmas_match_numerical_jacobian(rng):
    t = _stars(rng, 25, big_sky_errors=True)
    out = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    jac = _numerical_jacobian(t, FRAME)
    cov = _input_covariance(t)
    for col in OUTPUT_COLUMNS:
        expected = np.sqrt(np.einsum("ni,nij,nj->n", jac[col], cov, jac[col]))
        np.testing.assert_allclose(out[f"sigma_{col}"].value, expected, rtol=1e-5, err_msg=col)
        assert out[f"sigma_{col}"].unit == OUTPUT_COLUMNS[col][0]


def test_linear_covariances_are_consistent(rng):
    t = _stars(rng, 30)
    out = to_galactocentric(t, FRAME, errors="linear", return_covariance=True)
    for key, cols in (
        ("cov_galactocentric", ("x", "y", "z", "vx", "vy", "vz")),
        ("cov_heliocentric", ("X", "Y", "Z", "U", "V", "W")),
    ):
        cov = np.asarray(out[key])
        assert cov.shape == (30, 6, 6)
        np.testing.assert_allclose(cov, cov.transpose(0, 2, 1), rtol=0, atol=0)
        assert np.linalg.eigvalsh(cov).min() > -1e-9 * np.abs(cov).max()
        sig = np.stack([out[f"sigma_{c}"].value for c in cols], axis=1)
        np.testing.assert_allclose(np.sqrt(np.einsum("nii->ni", cov)), sig, rtol=1e-12)
    # The two are rotations of each other, so the traces of the blocks agree.
    g, h = np.asarray(out["cov_galactocentric"]), np.asarray(out["cov_heliocentric"])
    np.testing.assert_allclose(
        np.trace(g[:, :3, :3], axis1=1, axis2=2), np.trace(h[:, :3, :3], axis1=1, axis2=2), rtol=1e-12
    )
    np.testing.assert_allclose(
        np.trace(g[:, 3:, 3:], axis1=1, axis2=2), np.trace(h[:, 3:, 3:], axis1=1, axis2=2), rtol=1e-12
    )


def test_linear_without_correlation_columns_equals_zero_correlation(rng):
    t = _stars(rng, 10, correlated=False)
    t0 = t.copy()
    for name in CORRELATION_COLUMNS:
        t0[name] = np.zeros(len(t))
    a = to_galactocentric(t, FRAME, errors="linear")
    b = to_galactocentric(t0, FRAME, errors="linear")
    for col in OUTPUT_COLUMNS:
        np.testing.assert_allclose(a[f"sigma_{col}"].value, b[f"sigma_{col}"].value, rtol=1e-13)


def test_linear_with_only_a_parallax_error(rng):
    # Only the parallax is uncertain: sigma_d = sigma_plx / plx^2 and the position error is radial.
    t = _stars(rng, 10)
    for c in t.colnames:
        if c.endswith("_error") and c != "parallax_error" or c.endswith("_corr"):
            del t[c]
    out = to_galactocentric(t, FRAME, errors="linear")
    plx, err = t["parallax"].value, t["parallax_error"].value
    np.testing.assert_allclose(out["sigma_distance"].value, err / plx**2, rtol=1e-13)
    pos = np.sqrt(sum(out[f"sigma_{c}"].value ** 2 for c in ("X", "Y", "Z")))
    np.testing.assert_allclose(pos, err / plx**2, rtol=1e-12)
    assert np.all(out["sigma_l"].value == 0) and np.all(out["sigma_b"].value == 0)


def test_sigma_of_velocity_grows_with_the_rv_error(rng):
    t = _stars(rng, 10)
    a = to_galactocentric(t, FRAME, errors="linear")
    t["radial_velocity_error"] = t["radial_velocity_error"] * 3
    b = to_galactocentric(t, FRAME, errors="linear")
    speed_a = sum(a[f"sigma_{c}"].value ** 2 for c in "UVW")
    speed_b = sum(b[f"sigma_{c}"].value ** 2 for c in "UVW")
    # The rv adds sigma_rv^2 to the trace of the velocity covariance: 9x minus 1x.
    np.testing.assert_allclose(speed_b - speed_a, 8 * (t["radial_velocity_error"].value / 3) ** 2, rtol=1e-10)


# ----------------------------------------------------------------------------------------- Monte Carlo
def test_montecarlo_is_seeded_and_reproducible(rng):
    t = _stars(rng, 5)
    a = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=300, seed=42)
    b = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=300, seed=42)
    c = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=300, seed=43)
    np.testing.assert_array_equal(a["vx_p50"].value, b["vx_p50"].value)
    assert not np.array_equal(a["vx_p50"].value, c["vx_p50"].value)
    assert a.meta["seed"] == 42 and a.meta["n_samples"] == 300 and a.meta["errors"] == "montecarlo"
    gen = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=300, seed=np.random.default_rng(42))
    np.testing.assert_array_equal(a["vx_p50"].value, gen["vx_p50"].value)


def test_montecarlo_columns_and_percentile_names(rng):
    t = _stars(rng, 3)
    out = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=100, seed=1, percentiles=(2.5, 50, 97.5))
    for col in OUTPUT_COLUMNS:
        for q in ("2.5", "50", "97.5"):
            assert f"{col}_p{q}" in out.colnames
            assert out[f"{col}_p{q}"].unit == OUTPUT_COLUMNS[col][0]
        assert f"sigma_{col}" in out.colnames
    assert (out["x_p2.5"].value <= out["x_p97.5"].value).all()


def test_linear_and_montecarlo_agree_at_small_parallax_errors(rng):
    # REFERENCES.md: at sigma_plx/plx = 6% a linear propagation and a Monte Carlo agree within ~2%
    # (measured there with 4e5 samples; here 12000 samples, so a few per cent per star).
    t = _stars(rng, 24, rel_plx_error=0.06)
    lin = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    mc = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=12000, seed=7, distance=InverseParallax(min_snr=0))
    for col in OUTPUT_COLUMNS:
        ratio = mc[f"sigma_{col}"].value / lin[f"sigma_{col}"].value
        assert abs(np.median(ratio) - 1) < 0.02, col
        assert np.all(np.abs(ratio - 1) < 0.06), col
    # The Monte Carlo median of a monotonic function (distance) equals the function of the median.
    np.testing.assert_allclose(mc["distance_p50"].value * t["parallax"].value, 1.0, atol=0.01)


def test_linear_and_montecarlo_part_ways_at_large_parallax_errors(rng):
    # Bailer-Jones 2015, PASP 127, 994 [pub]: 1/parallax is skewed at low signal-to-noise. For a Gaussian
    # parallax the distance percentiles are exactly 1/(plx -+ z sigma) (percentiles of a monotonic map),
    # so at f = sigma/plx = 0.3 the 68% half-width is (1/(1-f) - 1/(1+f))/2 / plx, 10% above f / plx.
    f = 0.3
    t = _stars(rng, 20, rel_plx_error=f)
    lin = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    mc = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=12000, seed=9, distance=InverseParallax(min_snr=0))
    plx = t["parallax"].value
    ratio = mc["sigma_distance"].value / lin["sigma_distance"].value
    expected = (1 / (1 - f) - 1 / (1 + f)) / 2 / f
    assert expected == pytest.approx(1.099, abs=1e-3)
    assert np.median(ratio) == pytest.approx(expected, rel=0.015)
    np.testing.assert_allclose(ratio, expected, rtol=0.07)  # 12000 draws: a few per cent per star
    z84 = norm.ppf(0.84)  # scipy [lib]
    np.testing.assert_allclose(mc["distance_p16"].value, 1 / (plx * (1 + z84 * f)), rtol=0.02)
    np.testing.assert_allclose(mc["distance_p84"].value, 1 / (plx * (1 - z84 * f)), rtol=0.03)
    upper = mc["distance_p84"].value - mc["distance_p50"].value
    lower = mc["distance_p50"].value - mc["distance_p16"].value
    assert np.all(upper / lower > 1.5)  # strongly skewed, unlike the symmetric linear interval
    # velocities scale with the distance, so their Monte Carlo spread also exceeds the linear one
    assert np.median(mc["sigma_V"].value / lin["sigma_V"].value) > 1.03


def test_montecarlo_counts_nonpositive_parallax_draws(rng):
    t = _stars(rng, 4, rel_plx_error=1.0)  # parallax S/N = 1: 15.9% of the draws are <= 0
    out = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=8000, seed=3, distance=InverseParallax(min_snr=0))
    frac = out["mc_excluded_fraction"]
    np.testing.assert_allclose(frac, norm.cdf(-1.0), atol=0.015)  # scipy [lib]
    assert out.meta["mc_nonpositive_draws"] == pytest.approx(4 * 8000 * norm.cdf(-1.0), rel=0.05)
    assert out.meta["mc_stars_with_nonpositive_draws"] == 4
    assert np.isfinite(out["distance_p84"].value).all()


def test_montecarlo_angles_do_not_wrap(rng):
    # A star right at l = 0 has draws on both sides of 0/360; percentiles stay next to the nominal value.
    ra, dec = 266.40499, -28.93618  # the Hipparcos (l, b) = (0, 0) direction (REFERENCES.md)
    t = QTable(
        {
            "ra": [ra],
            "dec": [dec],
            "parallax": [0.5],
            "parallax_error": [0.01],
            "pmra": [0.0],
            "pmdec": [0.0],
            "ra_error": [5000.0],
            "dec_error": [5000.0],
        }
    )
    out = to_galactocentric(t, FRAME, errors="montecarlo", n_samples=2000, seed=1)
    l16, l50, l84 = (out[f"l_p{q}"].value[0] for q in (16, 50, 84))
    assert l16 < l50 < l84 and l84 - l16 < 0.01
    assert abs(out["l"].value[0] - 360.0 * round(out["l"].value[0] / 360.0)) < 1e-3
    lin = to_galactocentric(t, FRAME, errors="linear")
    assert out["sigma_l"].value[0] == pytest.approx(lin["sigma_l"].value[0], rel=0.1)


# ----------------------------------------------------------------------------------------- inverse, round trips
def test_round_trip_through_tables(rng):
    t = _stars(rng, 50)
    gc = to_galactocentric(t, FRAME, distance=InverseParallax(min_snr=0))
    back = from_galactocentric(gc, FRAME)
    dra = np.mod(back["ra"].value - t["ra"].value + 180, 360) - 180
    assert np.max(np.abs(dra * np.cos(np.radians(t["dec"].value)))) < 1e-10
    for col, scale in (("dec", 90), ("parallax", 3), ("pmra", 50), ("pmdec", 50), ("radial_velocity", 150)):
        np.testing.assert_allclose(back[col].value, t[col].value, rtol=0, atol=1e-11 * scale, err_msg=col)
    assert back.meta["frame"] == FRAME.to_dict()
    assert back["pmra"].unit == MASYR and back["distance"].unit == u.kpc


def test_from_galactocentric_accepts_arrays_dicts_and_units():
    ps = np.array([[-8.0, 0.5, 0.1, 10.0, 230.0, 5.0], [-7.0, -1.0, -0.2, -30.0, 200.0, 0.0]])
    a = from_galactocentric(ps, FRAME)
    b = from_galactocentric(dict(zip(("x", "y", "z", "vx", "vy", "vz"), ps.T)), FRAME)
    c = from_galactocentric(
        QTable(
            {
                "x": ps[:, 0] * 1000 * u.pc,
                "y": ps[:, 1] * u.kpc,
                "z": ps[:, 2] * u.kpc,
                "vx": ps[:, 3] * 1000 * u.m / u.s,
                "vy": ps[:, 4] * KMS,
                "vz": ps[:, 5] * KMS,
                "source_id": [5, 6],
            }
        ),
        FRAME,
    )
    for col in ("ra", "dec", "parallax", "pmra", "radial_velocity"):
        np.testing.assert_allclose(a[col].value, b[col].value, rtol=1e-15)
        np.testing.assert_allclose(a[col].value, c[col].value, rtol=1e-12)
    assert list(c["source_id"]) == [5, 6]


def test_from_galactocentric_bad_input():
    with pytest.raises(KinematicsError, match="shape"):
        from_galactocentric(np.zeros((3, 5)))
    with pytest.raises(KinematicsError, match="vz"):
        from_galactocentric({"x": [1.0], "y": [1.0], "z": [1.0], "vx": [1.0], "vy": [1.0]})
    from mwkin.units import UnitMismatchError

    with pytest.raises(UnitMismatchError, match="vx"):
        from_galactocentric(QTable({"x": [1.0], "y": [1.0], "z": [1.0], "vx": [1.0] * u.kpc, "vy": [1.0], "vz": [1.0]}))


def test_point_at_the_sun_has_no_direction():
    x, y, z = FRAME.sun_position
    obs = observables_from_galactocentric(x, y, z, 1.0, 2.0, 3.0, FRAME)
    assert obs["distance"][0] == 0.0
    assert np.isnan(obs["ra"][0]) and np.isnan(obs["pmra"][0]) and np.isnan(obs["radial_velocity"][0])


def test_array_functions_broadcast_and_check_shapes():
    out = galactocentric_from_observables([10.0, 20.0], 5.0, 1.0, 0.0, 0.0, [1.0, 2.0], FRAME)
    assert out["x"].shape == (2,)
    with pytest.raises(KinematicsError, match="shapes"):
        galactocentric_from_observables([1.0, 2.0], [1.0, 2.0, 3.0], 1.0, 0.0, 0.0, 0.0, FRAME)
    helio = heliocentric_from_observables(10.0, 5.0, 2.0, 0.0, 0.0, 0.0)
    assert math.hypot(helio["X"][0], helio["Y"][0], helio["Z"][0]) == pytest.approx(2.0)


# ----------------------------------------------------------------------------------------- property tests
_sky = st.tuples(
    st.floats(0.0, 360.0, exclude_max=True),
    st.one_of(st.floats(-90.0, 90.0), st.floats(89.9999, 90.0), st.floats(-90.0, -89.9999)),
)
_distance = st.one_of(st.floats(1e-6, 1e-3), st.floats(1e-3, 50.0))
_pm = st.floats(-1000.0, 1000.0)
_rv = st.floats(-1000.0, 1000.0)
# The table-level functions refuse subnormal values (a sign of a damaged file, see mwkin.catalog);
# the array-level functions above take them. These draw the same values without subnormals.
_sky_table = st.tuples(
    st.floats(0.0, 360.0, exclude_max=True, allow_subnormal=False),
    st.one_of(st.floats(-90.0, 90.0, allow_subnormal=False), st.floats(89.9999, 90.0), st.floats(-90.0, -89.9999)),
)
_pm_table = st.floats(-1000.0, 1000.0, allow_subnormal=False)
_rv_table = _pm_table


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sky=_sky, d=_distance, pmra=_pm, pmdec=_pm, rv=_rv)
def test_property_round_trip(sky, d, pmra, pmdec, rv):
    ra, dec = sky
    gc = galactocentric_from_observables(ra, dec, d, pmra, pmdec, rv, FRAME)
    obs = observables_from_galactocentric(*(gc[k] for k in ("x", "y", "z", "vx", "vy", "vz")), frame=FRAME)
    # Positions come back to ~1e-16 of R0 (the Sun's offset sets the scale of the round-off).
    assert obs["distance"][0] == pytest.approx(d, rel=1e-12, abs=1e-13)
    tol_ang = 1e-13 * FRAME.R0 / d + 1e-12  # radians
    sep = math.acos(
        min(
            1.0,
            math.sin(math.radians(dec)) * math.sin(math.radians(obs["dec"][0]))
            + math.cos(math.radians(dec))
            * math.cos(math.radians(obs["dec"][0]))
            * math.cos(math.radians(obs["ra"][0] - ra)),
        )
    )
    assert sep < 10 * tol_ang + 1e-7  # acos near 1 loses half the digits
    speed = math.hypot(K_KMS_PER_MASYR_KPC * d * math.hypot(pmra, pmdec), rv)
    tol_v = 1e-12 * (300.0 + speed) * (1.0 + FRAME.R0 / d * 1e-3)
    assert obs["radial_velocity"][0] == pytest.approx(rv, abs=tol_v * 10)
    tol_pm = tol_v * 10 / (K_KMS_PER_MASYR_KPC * d)
    # the direction of e_ra is undefined at the exact pole; compare the total proper motion there
    assert math.hypot(obs["pmra"][0], obs["pmdec"][0]) == pytest.approx(math.hypot(pmra, pmdec), abs=tol_pm)
    if abs(dec) < 89.0:
        assert obs["pmra"][0] == pytest.approx(pmra, abs=tol_pm)
        assert obs["pmdec"][0] == pytest.approx(pmdec, abs=tol_pm)


@settings(max_examples=100, deadline=None)
@given(sky=_sky, d=_distance, pmra=_pm, pmdec=_pm, rv=_rv)
def test_property_invariants(sky, d, pmra, pmdec, rv):
    ra, dec = sky
    gc = galactocentric_from_observables(ra, dec, d, pmra, pmdec, rv, FRAME)
    helio = heliocentric_from_observables(ra, dec, d, pmra, pmdec, rv)
    # distance from the Sun and speed relative to the Sun are rotation invariants (physics, no source)
    rel_pos = np.array([gc[k][0] for k in ("x", "y", "z")]) - np.array(FRAME.sun_position)
    assert np.linalg.norm(rel_pos) == pytest.approx(d, rel=1e-9, abs=1e-13)
    assert math.hypot(helio["X"][0], helio["Y"][0], helio["Z"][0]) == pytest.approx(d, rel=1e-12)
    speed = math.hypot(K_KMS_PER_MASYR_KPC * d * math.hypot(pmra, pmdec), rv)
    rel_vel = np.array([gc[k][0] for k in ("vx", "vy", "vz")]) - np.array(FRAME.v_sun)
    assert np.linalg.norm(rel_vel) == pytest.approx(speed, rel=1e-9, abs=1e-9)
    assert math.hypot(helio["U"][0], helio["V"][0], helio["W"][0]) == pytest.approx(speed, rel=1e-12, abs=1e-12)
    # the line-of-sight component of (U, V, W) is the radial velocity
    los = (helio["X"][0] * helio["U"][0] + helio["Y"][0] * helio["V"][0] + helio["Z"][0] * helio["W"][0]) / d
    assert los == pytest.approx(rv, abs=1e-9 * (speed + 1.0))
    cyl = cylindrical_from_cartesian(*(gc[k] for k in ("x", "y", "z", "vx", "vy", "vz")))
    assert -math.pi <= cyl["phi"][0] <= math.pi
    assert cyl["v_R"][0] ** 2 + cyl["v_phi"][0] ** 2 == pytest.approx(
        gc["vx"][0] ** 2 + gc["vy"][0] ** 2, rel=1e-10, abs=1e-8
    )


@settings(max_examples=25, deadline=None)
@given(
    sky=_sky_table, plx=st.floats(0.05, 50.0), rel=st.floats(0.001, 0.1), pmra=_pm_table, pmdec=_pm_table, rv=_rv_table
)
def test_property_linear_errors_are_finite_and_scale(sky, plx, rel, pmra, pmdec, rv):
    # Doubling every input uncertainty doubles every linear sigma (linearity of the propagation).
    # (Draws without subnormal values since the catalogue reader refuses them; see _sky_table.)
    ra, dec = sky
    row = {
        "ra": [ra],
        "dec": [dec],
        "parallax": [plx],
        "pmra": [pmra],
        "pmdec": [pmdec],
        "radial_velocity": [rv],
        "ra_error": [0.1],
        "dec_error": [0.1],
        "parallax_error": [rel * plx],
        "pmra_error": [0.2],
        "pmdec_error": [0.1],
        "radial_velocity_error": [2.0],
        "parallax_pmra_corr": [0.4],
        "ra_dec_corr": [-0.3],
    }
    a = to_galactocentric(QTable(row), FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    row2 = {k: ([2 * v[0]] if k.endswith("_error") else v) for k, v in row.items()}
    b = to_galactocentric(QTable(row2), FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    for col in ("x", "vx", "R", "v_phi", "U", "distance"):
        sa, sb = a[f"sigma_{col}"].value[0], b[f"sigma_{col}"].value[0]
        assert np.isfinite(sa) and sa >= 0
        assert sb == pytest.approx(2 * sa, rel=1e-9, abs=1e-300)


# ----------------------------------------------------------------------------------------- invalid correlations
# ra_dec_corr = 0.99, ra_pmra_corr = -0.99, dec_pmra_corr = 0.99 cannot be: if ra and dec go together
# and dec and pmra go together, ra and pmra cannot go against each other (the 3x3 determinant is
# 1 - 3 * 0.99^2 - 2 * 0.99^3 < 0; linear algebra, no source).
_IMPOSSIBLE = {"ra_dec_corr": 0.99, "ra_pmra_corr": -0.99, "dec_pmra_corr": 0.99}


def _with_correlations(t, row, values):
    for name in CORRELATION_COLUMNS:
        if name not in t.colnames:
            t[name] = np.zeros(len(t))
    for name, value in values.items():
        t[name][row] = value
    return t


def test_impossible_correlations_are_flagged_not_propagated(rng):
    t = _with_correlations(_stars(rng, 6, correlated=False), 2, _IMPOSSIBLE)
    assert np.linalg.eigvalsh(_input_covariance(t)[2])[0] < 0  # really not a covariance
    alone = to_galactocentric(t[[0, 1, 3, 4, 5]], FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    for errors in ("linear", "montecarlo"):
        out = to_galactocentric(t, FRAME, errors=errors, distance=InverseParallax(min_snr=0), n_samples=50, seed=3)
        assert list(out["flag"]) == ["", "", "invalid_correlation", "", "", ""]
        assert out.meta["dropped"]["invalid_correlation"] == 1
        assert bool(out["has_velocity"][2])  # the values themselves do not depend on the correlations
        assert np.isfinite(out["vx"][2].value)
        for name in ("x", "vx", "v_phi", "l", "distance"):
            assert np.isnan(out[f"sigma_{name}"][2].value), (errors, name)
            assert np.isfinite(out[f"sigma_{name}"][[0, 1, 3, 4, 5]].value).all(), (errors, name)
        if errors == "linear":
            # the other stars get exactly what they get without the bad one
            np.testing.assert_array_equal(out["sigma_vx"][[0, 1, 3, 4, 5]].value, alone["sigma_vx"].value)
        else:
            assert np.isnan(out["x_p50"][2].value) and np.isfinite(out["x_p50"][0].value)
    cov = to_galactocentric(t, FRAME, errors="linear", return_covariance=True, distance=InverseParallax(min_snr=0))
    assert np.isnan(cov["cov_galactocentric"][2]).all() and np.isfinite(cov["cov_galactocentric"][0]).all()
    # without uncertainties nothing is flagged (the correlations are not used)
    assert list(to_galactocentric(t, FRAME, distance=InverseParallax(min_snr=0))["flag"]) == [""] * 6


def test_singular_but_valid_correlations_are_not_flagged(rng):
    # |r| = 1 gives a singular, positive semi-definite matrix: allowed (e.g. ra and dec fully correlated)
    t = _with_correlations(_stars(rng, 3, correlated=False), 1, {"ra_dec_corr": 1.0, "pmra_pmdec_corr": -1.0})
    out = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    assert list(out["flag"]) == ["", "", ""]
    assert np.isfinite(out["sigma_x"].value).all()


def test_correlation_check_against_eigenvalues(rng):
    # Random correlation sets, many invalid: the flag must agree with the smallest eigenvalue
    # (numpy.linalg.eigvalsh) of each star's 5x5 matrix.
    n = 400
    t = _stars(rng, n, correlated=False)
    for name in CORRELATION_COLUMNS:
        t[name] = rng.uniform(-0.7, 0.7, n)
    out = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    corr = _input_covariance(t)
    sig = np.sqrt(np.einsum("nii->ni", corr))
    lowest = np.linalg.eigvalsh(corr / sig[:, :, None] / sig[:, None, :])[:, 0]
    flagged = out["flag"] == "invalid_correlation"
    assert 20 < flagged.sum() < n - 20  # both kinds are there
    np.testing.assert_array_equal(flagged, lowest < -1e-12)


def test_correlations_with_a_parallax_are_not_checked_under_a_distance_column(rng):
    # a distance column is independent of the astrometry, so parallax correlations are not used
    t = _stars(rng, 2, correlated=False)
    t["distance"] = [1.0, 2.0] * u.kpc
    t = _with_correlations(t, 0, {"ra_parallax_corr": 0.99, "dec_parallax_corr": 0.99, "ra_dec_corr": -0.99})
    out = to_galactocentric(t, FRAME, errors="linear", distance=DistanceColumn())
    assert list(out["flag"]) == ["", ""]
    flagged = to_galactocentric(t, FRAME, errors="linear", distance=InverseParallax(min_snr=0))
    assert flagged["flag"][0] == "invalid_correlation"


# ----------------------------------------------------------------------------------------- ignored distance columns
def test_ignored_parallax_is_recorded(rng):
    t = _stars(rng, 3)
    t["distance"] = [1.0, 2.0, 3.0] * u.kpc
    out = to_galactocentric(t, FRAME, distance=DistanceColumn())
    assert out.meta["distance_ignored_columns"] == ["parallax"]
    assert out.meta["distance_notes"] == ["the table's 'parallax' column is not used: distances come from 'distance'"]
    assert "'parallax' column is not used" in out.meta["provenance"]
    assert distance_from_dict(out.meta["distance"]) == DistanceColumn()  # still round-trips
    by_parallax = to_galactocentric(t, FRAME, distance=InverseParallax(min_snr=0))
    assert by_parallax.meta["distance_ignored_columns"] == ["distance"]
    t.remove_column("distance")
    assert to_galactocentric(t, FRAME, distance=InverseParallax(min_snr=0)).meta["distance_ignored_columns"] == []


def test_distance_column_of_plain_numbers_in_pc_warns():
    from mwkin.distances import DistanceUnitWarning

    t = Table({"d": [100.0, 250.0, np.nan, 3000.0]})
    with pytest.warns(DistanceUnitWarning, match=r"DistanceColumn\('d'\): the median distance is 250, taken as kpc"):
        res = DistanceColumn("d").resolve(t)
    np.testing.assert_array_equal(res.distance_kpc[:2], [100.0, 250.0])
    t["d"].unit = u.pc  # stated: converted, no warning
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        np.testing.assert_allclose(DistanceColumn("d").resolve(t).distance_kpc[:2], [0.1, 0.25])


def test_a_negative_monte_carlo_seed_is_named():
    import mwkin as mk
    from mwkin.kinematics import KinematicsError

    with pytest.raises(KinematicsError, match="seed must be a whole number >= 0.*got -5"):
        mk.to_galactocentric(mk.demo.survey(n=10, seed=1), errors="montecarlo", n_samples=10, seed=-5)
