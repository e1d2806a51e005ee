"""The fast kinematics path against the plain numpy reference (mwkin.kinematics.reference).

The fast path (blocks, threads, scratch buffers, covariance rotations) and the reference (one clear
function per step, the analytic Jacobian, J C J^T) compute the same numbers by different routes, so
they must agree to round-off. The reference's own Jacobian is checked against central finite
differences of the reference transform (an independent check of the calculus). Comparisons with
astropy live in tests/reference/test_kinematics_reference.py.

Tolerance
---------
Every difference is divided by the natural scale of the quantity -- the size of the terms it is
made of, which is what sets its round-off (a component that cancels to nearly zero keeps the
round-off of its large terms) -- and must stay below RTOL = 1e-12:

* positions: the distance (heliocentric) or distance + R0 (Galactocentric); velocities:
  |v_r| + k d (|mu_a*| + |mu_d|) (+ |v_sun| for Galactocentric ones);
* R like a position; phi: position scale / R; v_R and v_phi: velocity scale + position scale
  (|vx| + |vy|) / R (both are ill-conditioned near the z axis); b: 1 rad, l: 1 rad / cos b;
* uncertainties are compared as variances, against |J|_max |C| |J|_max^T, where |J|_max bounds the
  size of each Jacobian entry's terms (e.g. d for the ra* derivative of a position). For R, phi,
  v_R and v_phi this is multiplied by (d + R0)/R, the conditioning of the azimuth direction
  (x, y)/R, and for l and b by 1 + 1/cos b, that of the east and north directions on the Galactic
  sphere (both undefined on the z axis or at the Galactic poles, where the comparison becomes
  void). The ra* derivative of a velocity has a k d tan(dec) term, and cos(dec), computed from dec
  in degrees, carries an absolute error of a few ulp; so that term's round-off grows as tan(dec)^2
  near the celestial poles, and its bound carries the factor tan(dec) (1 + tan(dec)).

Both codes round at the level of a few ulp (1 ulp = 2.2e-16) of these scales; RTOL = 1e-12 leaves a
wide margin without hiding any error of substance (k off by 1 part in 1e10 already fails). The
largest normalised differences seen are below 4e-15.

Known limits of the fast path
-----------------------------
* the variance of a Cartesian component that is ~0 along the line of sight (Z for stars in the
  Galactic plane, y and phi toward the Galactic centre, X and Y at the Galactic poles) is the
  difference of terms of size sigma_distance^2: it is accurate to round-off of that size, not
  relative to itself (values that round below zero are reported as 0, never NaN); the reference's
  J C J^T has no such cancellation. Tests comparing sigmas relatively along those directions
  therefore use sky errors of 0.1-10 arcsec, and
  ``test_fast_sigma_of_a_vanishing_component_is_finite`` checks the absolute agreement.
* (fixed) l could be exactly 360.0 (a longitude a hair below 0 plus 360); now 0.
"""

from __future__ import annotations

import ast
import math
import pathlib

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import mwkin
from mwkin import demo
from mwkin.catalog import read_catalog
from mwkin.columns import CORRELATION_PAIRS
from mwkin.coords import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC
from mwkin.distances import DistanceColumn, InverseParallax
from mwkin.frames import SolarFrame
from mwkin.kinematics import (
    cylindrical_from_cartesian,
    galactocentric_from_observables,
    heliocentric_from_observables,
    observables_from_galactocentric,
)
from mwkin.kinematics import reference as ref

K = K_KMS_PER_MASYR_KPC
KMS = u.km / u.s
MASYR = u.mas / u.yr
DEG = 180.0 / math.pi
RTOL = 1e-12

FRAMES = {
    "default": SolarFrame.preset("astropy v4.0"),
    "schoenrich": SolarFrame.preset("Schoenrich 2010 + GRAVITY 2019"),
    "tilted-rolled": SolarFrame(R0=7.9, z_sun=-30.0, v_sun=(-8.0, 230.0, 12.0), roll=5.0),
}
WRAPPING = ("l", "phi", "ra")  # angles compared modulo 360 deg
POSITIONS = ("x", "y", "z", "R", "X", "Y", "Z", "distance")
GC_CARTESIAN = ("x", "y", "z", "vx", "vy", "vz")
HELIO_CARTESIAN = ("X", "Y", "Z", "U", "V", "W")

#: Largest normalised difference seen per quantity (for the record; see the module notes).
WORST = {}


# ====================================================================== comparison helpers
def _difference(a, b, name):
    diff = np.asarray(a, dtype=float) - np.asarray(b, dtype=float)
    if name in WRAPPING:
        diff = (diff + 180.0) % 360.0 - 180.0
    return np.abs(diff)


def _assert_same(fast, expected, scale, name):
    """NaN in the same rows, and |fast - expected| <= RTOL x scale elsewhere."""
    fast = np.asarray(fast, dtype=float)
    expected = np.asarray(expected, dtype=float)
    assert fast.shape == expected.shape, f"{name}: shape {fast.shape} != {expected.shape}"
    assert np.array_equal(np.isnan(fast), np.isnan(expected)), (
        f"{name}: NaN in different rows: fast {np.flatnonzero(np.isnan(fast))[:10]}, "
        f"reference {np.flatnonzero(np.isnan(expected))[:10]}"
    )
    known = ~np.isnan(expected)
    if not known.any():
        return
    scale = np.broadcast_to(np.asarray(scale, dtype=float), expected.shape)[known]
    difference = _difference(fast[known], expected[known], name)
    # Equal values pass even where the scale is 0 (e.g. no motion at all); any difference there fails.
    relative = np.divide(difference, scale, out=np.zeros_like(difference), where=difference != 0)
    worst = float(np.max(relative))
    WORST[name] = max(WORST.get(name, 0.0), worst)
    assert worst <= RTOL, (
        f"{name}: largest difference {worst:.3g} x its scale (row "
        f"{np.flatnonzero(known)[np.argmax(relative)]}) exceeds {RTOL:g}"
    )


def _value_scales(obs, out, frame):
    """Round-off scale of every output column (see the module notes), in the output units."""
    d, pa, pd, rv = (np.abs(obs[k]) for k in ("d", "pmra", "pmdec", "rv"))
    helio_r = d
    helio_v = rv + K * d * (pa + pd)
    gc_r = d + frame.R0
    gc_v = helio_v + np.linalg.norm(frame.v_sun)
    R = out["R"]
    vxy = np.abs(out["vx"]) + np.abs(out["vy"])
    with np.errstate(invalid="ignore", divide="ignore"):
        cos_b = np.cos(np.radians(out["b"]))
        return {
            "x": gc_r,
            "y": gc_r,
            "z": gc_r,
            "vx": gc_v,
            "vy": gc_v,
            "vz": gc_v,
            "v_z": gc_v,
            "R": gc_r,
            "phi": gc_r / R * DEG,
            "v_R": gc_v + gc_r * vxy / R,
            "v_phi": gc_v + gc_r * vxy / R,
            "X": helio_r,
            "Y": helio_r,
            "Z": helio_r,
            "U": helio_v,
            "V": helio_v,
            "W": helio_v,
            "l": DEG / cos_b,
            "b": np.full_like(d, DEG),
            "distance": d,
        }


def _jacobian_bounds(obs, out):
    """|J|_max: (n, 20, 6) bounds on the size of the terms of each Jacobian entry (module notes)."""
    d, pa, pd, rv = (np.abs(obs[k]) for k in ("d", "pmra", "pmdec", "rv"))
    mas = ref.MAS_TO_RAD
    n = d.shape[0]
    one, zero = np.ones(n), np.zeros(n)
    tan = np.abs(np.tan(np.radians(obs["dec"])))
    kd = K * d
    position = np.stack([d * mas, d * mas, one, zero, zero, zero], axis=-1)
    velocity = np.stack(
        [(rv + kd * pa + kd * tan * (1.0 + tan) * (pa + pd)) * mas, (rv + kd * pd) * mas, K * (pa + pd), kd, kd, one],
        axis=-1,
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        R = out["R"][:, None]
        vxy = (np.abs(out["vx"]) + np.abs(out["vy"]))[:, None]
        cylindrical_v = velocity + position * vxy / R
        cos_b = np.cos(np.radians(out["b"]))[:, None]
        sky = np.stack([one * mas, one * mas, zero, zero, zero, zero], axis=-1) * DEG
        rows = {
            "phi": position / R * DEG,
            "v_R": cylindrical_v,
            "v_phi": cylindrical_v,
            "l": sky / cos_b,
            "b": sky,
            "distance": np.stack([zero, zero, one, zero, zero, zero], axis=-1),
        }
    for name in ref.OUTPUT_NAMES:
        if name not in rows:
            rows[name] = position if name in POSITIONS else velocity
    return np.stack([rows[name] for name in ref.OUTPUT_NAMES], axis=1)


def _variance_scales(obs, out, frame, cov6):
    """(n, 20): |J|_max |C| |J|_max^T on the diagonal, the scale of each variance's round-off."""
    bound = np.nan_to_num(_jacobian_bounds(obs, out), nan=0.0)
    # NaN entries count as zero here: where they matter the variance itself is NaN (compared apart).
    scale = np.einsum("nik,nkl,nil->ni", bound, np.nan_to_num(np.abs(cov6), nan=0.0), bound)
    # The cylindrical rows project onto the azimuth direction (x, y)/R, whose round-off is
    # ulp x (d + R0)/R: their variances carry that factor too (huge on the z axis, where the
    # direction is undefined).
    with np.errstate(invalid="ignore", divide="ignore"):
        conditioning = np.maximum(1.0, (obs["d"] + frame.R0) / out["R"])
    for name in ("R", "phi", "v_R", "v_phi"):
        scale[:, ref.OUTPUT_NAMES.index(name)] *= conditioning
    # Likewise l and b project onto the east and north directions of the Galactic sphere, whose
    # round-off is ulp / cos b (undefined at the Galactic poles).
    with np.errstate(divide="ignore"):
        conditioning = 1.0 + 1.0 / np.abs(np.cos(np.radians(out["b"])))
    for name in ("l", "b"):
        scale[:, ref.OUTPUT_NAMES.index(name)] *= conditioning
    return scale


def _observables(table, distance=None):
    """The reference's view of a table's inputs: ra, dec (deg), d (kpc, NaN if unusable), pm, rv."""
    std = read_catalog(table)
    d, _ = ref.distance_of(std, distance)
    obs = {
        "ra": std["ra"].to_value(u.deg),
        "dec": std["dec"].to_value(u.deg),
        "d": d,
        "pmra": std["pmra"].to_value(MASYR),
        "pmdec": std["pmdec"].to_value(MASYR),
        "rv": std["radial_velocity"].to_value(KMS),
    }
    return std, {k: np.asarray(v, dtype=float) for k, v in obs.items()}


def _column(table, name):
    col = table[name]
    return np.asarray(col.value if hasattr(col, "unit") and col.unit is not None else col, dtype=float)


def _compare_tables(table, frame, distance=None, linear=True, return_covariance=True):
    """Run the fast table path and the reference on one table and compare every shared column."""
    errors = "linear" if linear else "none"
    fast = mwkin.to_galactocentric(
        table, frame, errors=errors, distance=distance, return_covariance=linear and return_covariance
    )
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    expected = ref.to_galactocentric_reference(table, frame, errors=errors, distance=distance)
    std, obs = _observables(table, distance)
    frame = frame if frame is not None else FRAMES["default"]
    scales = _value_scales(obs, expected, frame)

    # Every column the fast path returns is one the reference makes too.
    extra = set(fast.colnames) - set(expected) - {"flag", "source_id"}
    assert extra == set(), f"the reference lacks {sorted(extra)}"
    for name in ref.OUTPUT_NAMES:
        _assert_same(_column(fast, name), expected[name], scales[name], name)
    assert np.array_equal(np.asarray(fast["has_velocity"]), expected["has_velocity"])
    # oracle: the reference's has_position -- the fast path states it through its NaN positions.
    assert np.array_equal(~np.isnan(_column(fast, "x")), expected["has_position"])
    if not linear:
        return fast, expected

    cov6 = ref.observables_covariance(std, distance)
    var_scale = _variance_scales(obs, expected, frame, cov6)
    for i, name in enumerate(ref.OUTPUT_NAMES):
        # oracle: reference J C J^T, compared as variances (module notes)
        _assert_same(
            _column(fast, f"sigma_{name}") ** 2, expected[f"sigma_{name}"] ** 2, var_scale[:, i], f"sigma_{name}^2"
        )
    flagged = np.array(["invalid_correlation" in f.split(",") for f in np.asarray(fast["flag"])])
    assert np.array_equal(flagged, expected["invalid_correlation"])
    if return_covariance:
        for key, names in (("cov_galactocentric", GC_CARTESIAN), ("cov_heliocentric", HELIO_CARTESIAN)):
            rows = [ref.OUTPUT_NAMES.index(name) for name in names]
            s = np.sqrt(var_scale[:, rows])
            # oracle: reference J C J^T, entry by entry, against sqrt(scale_i scale_j)
            _assert_same(np.asarray(fast[key]), expected[key], s[:, :, None] * s[:, None, :], key)
    return fast, expected


# ====================================================================== test data
def _random_correlations(rng, n, rank=8):
    """Valid correlation matrices (n, 5, 5): normalised W W^T (singular when rank < 5)."""
    w = rng.normal(size=(n, 5, rank))
    s = w @ w.transpose(0, 2, 1)
    scale = np.sqrt(np.einsum("nii->ni", s))
    return s / scale[:, :, None] / scale[:, None, :]


def _table(rng, ra, dec, distance, *, with_rv=True, ra_error_zero_every=0, log_sky_error=(-2.0, 4.0)):
    """A table of stars at the given directions and distances, with every error and correlation column.

    Sky errors are log-uniform in 10**log_sky_error mas (default 0.01 mas to 10 arcsec, so that the
    ra*/dec terms of the velocities matter); parallax errors are 1-15 per cent.
    """
    n = len(ra)
    parallax = 1.0 / np.asarray(distance, dtype=float)
    t = QTable(
        {
            "ra": np.asarray(ra, dtype=float) * u.deg,
            "dec": np.asarray(dec, dtype=float) * u.deg,
            "parallax": parallax * u.mas,
            "pmra": rng.normal(0.0, 30.0, n) * MASYR,
            "pmdec": rng.normal(0.0, 30.0, n) * MASYR,
        }
    )
    if with_rv:
        t["radial_velocity"] = rng.normal(0.0, 80.0, n) * KMS
        t["radial_velocity_error"] = rng.uniform(0.5, 5.0, n) * KMS
    t["ra_error"] = 10.0 ** rng.uniform(*log_sky_error, n) * u.mas
    if ra_error_zero_every:
        t["ra_error"][::ra_error_zero_every] = 0.0 * u.mas
    t["dec_error"] = 10.0 ** rng.uniform(*log_sky_error, n) * u.mas
    t["parallax_error"] = rng.uniform(0.01, 0.15, n) * parallax * u.mas
    t["pmra_error"] = rng.uniform(0.02, 2.0, n) * MASYR
    t["pmdec_error"] = rng.uniform(0.02, 2.0, n) * MASYR
    corr = _random_correlations(rng, n)
    for (i, j), name in CORRELATION_PAIRS.items():
        t[name] = corr[:, i, j]
    return t


def _icrs_direction(galactic_vector):
    """(ra, dec) in deg of a direction given in heliocentric Galactic axes."""
    v = ICRS_TO_GALACTIC.T @ np.asarray(galactic_vector, dtype=float)
    return math.degrees(math.atan2(v[1], v[0])) % 360.0, math.degrees(math.asin(v[2]))


def _special_directions(frame):
    """Celestial poles, ra = 0/360, the Galactic centre (astropy's and l = b = 0), anti-centre, Galactic poles."""
    directions = [
        (0.0, 90.0),
        (123.4, 90.0),
        (0.0, -90.0),
        (200.0, -90.0),
        (45.0, 90.0 - 1e-7),
        (300.0, -90.0 + 1e-5),
        (0.0, 10.0),
        (360.0, -20.0),
        (359.9999999999, 5.0),
        (1e-12, -45.0),
        (frame.galcen_ra, frame.galcen_dec),
        _icrs_direction([1.0, 0.0, 0.0]),
        _icrs_direction([-1.0, 0.0, 0.0]),
        _icrs_direction([0.0, 0.0, 1.0]),
        _icrs_direction([0.0, 0.0, -1.0]),
    ]
    ra, dec = np.array(directions).T
    return ra, dec


# ====================================================================== the table path
@pytest.mark.parametrize("frame_name", list(FRAMES))
def test_demo_survey_matches_reference(frame_name):
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    frame = FRAMES[frame_name]
    survey = demo.survey(n=2000, seed=3)
    _compare_tables(survey, frame, linear=False)
    _compare_tables(survey, frame, linear=True, return_covariance=False)
    fast, _ = _compare_tables(survey, frame, linear=True, return_covariance=True)
    # The survey really exercises the missing radial velocities and the uncertainties.
    assert 0 < np.count_nonzero(np.asarray(fast["has_velocity"])) < len(survey)


def test_default_frame_is_the_astropy_v4_preset():
    # oracle: mwkin.kinematics.reference with frame=None (plain numpy), common practice (no source)
    survey = demo.survey(n=200, seed=3)
    _compare_tables(survey, None, linear=True)


@pytest.mark.parametrize("frame_name", ["default", "tilted-rolled"])
def test_special_directions_match_reference(frame_name, rng):
    # Celestial poles (exactly and nearly), ra = 0 and 360, toward the Galactic centre (a star at
    # d = R0 sits near the z axis, where phi, v_R and v_phi are ill-conditioned), the anti-centre and
    # the Galactic poles (where l is undefined), each at three distances.
    frame = FRAMES[frame_name]
    ra, dec = _special_directions(frame)
    distances = np.array([0.3, frame.R0, 20.0])
    ra, dec = np.repeat(ra, 3), np.repeat(dec, 3)
    distance = np.tile(distances, len(ra) // 3)
    # Every other star without an ra* uncertainty: at the exact poles the ra* derivative of the
    # velocity is infinite (the east direction is undefined) and only those stars compare there.
    # Sky errors of 0.1-10 arcsec: along these directions some component of the line of sight
    # vanishes, and with smaller ones the fast path's variance of that component cancels below
    # round-off (see the known disagreements below).
    table = _table(rng, ra, dec, distance, ra_error_zero_every=2, log_sky_error=(2.0, 4.0))
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_tables(table, frame, distance=InverseParallax(min_snr=0), linear=False)
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_tables(table, frame, distance=InverseParallax(min_snr=0))

    # The array functions at the same directions, ra = 360 passed as it is (no catalogue wrapping).
    obs = {
        "ra": ra,
        "dec": dec,
        "d": distance,
        "pmra": np.asarray(table["pmra"].value),
        "pmdec": np.asarray(table["pmdec"].value),
        "rv": np.asarray(table["radial_velocity"].value),
    }
    _compare_array_functions(obs, frame)


# ---------------------------------------------------------------------- known disagreements
_CANCELLING = (
    "fast path: a variance that cancels to below ~ulp x sigma_distance^2 -- a component of the "
    "line of sight is ~0 -- can round to a negative number, and its sigma becomes NaN without "
    "a flag; the reference J C J^T gives the true, small value (d x sigma_angle)"
)


@pytest.mark.parametrize(
    "case",
    [
        # Stars exactly in the Galactic plane (as a mock catalogue puts them): Z is across the line of sight.
        "galactic plane",
        # Stars toward astropy's Galactic centre (Sgr A*) or the anticentre: y (and the azimuth) is across it.
        "sun-centre line",
    ],
)
def test_fast_sigma_of_a_vanishing_component_is_finite(case, rng):
    n = 200
    frame = FRAMES["default"]
    if case == "galactic plane":
        lon = rng.uniform(0.0, 2.0 * np.pi, n)
        direction = ICRS_TO_GALACTIC.T @ np.stack([np.cos(lon), np.sin(lon), np.zeros(n)])
        names = ("sigma_Z",)
    else:
        matrix, sun = ref.galactocentric_rotation(frame)
        toward_centre = matrix.T @ (-sun / np.linalg.norm(sun))
        direction = np.outer(toward_centre, np.where(np.arange(n) % 2 == 0, 1.0, -1.0))
        names = ("sigma_y", "sigma_phi")
    ra = np.degrees(np.arctan2(direction[1], direction[0])) % 360.0
    dec = np.degrees(np.arcsin(np.clip(direction[2], -1.0, 1.0)))
    table = _table(rng, ra, dec, rng.uniform(0.2, 2.0, n), log_sky_error=(-1.7, -1.7))  # 0.02 mas, Gaia-like
    # oracle: mwkin.kinematics.reference (plain numpy): finite, d x sigma_angle
    expected = ref.to_galactocentric_reference(table, frame, errors="linear")
    fast = mwkin.to_galactocentric(table, frame, errors="linear")
    # The fast path's variance of such a component is the difference of terms of size
    # sigma_X^2 + sigma_Y^2 + sigma_Z^2 (the whole position variance): it must be finite and agree with
    # the reference to round-off of that size (relative accuracy of the tiny variance itself is not
    # promised: see _CANCELLING).
    trace = sum(np.asarray(expected[f"sigma_{c}"]) ** 2 for c in "XYZ")
    R = _column(fast, "R")
    for name in names:
        assert np.all(np.isfinite(expected[name])), name
        got = _column(fast, name)
        assert np.all(np.isfinite(got)), f"{name}: {np.count_nonzero(np.isnan(got))} NaN"
        scale = trace * (np.degrees(1.0) / R) ** 2 if name == "sigma_phi" else trace
        assert np.all(np.abs(got**2 - np.asarray(expected[name]) ** 2) <= 1e-12 * scale), name


def test_fast_longitude_stays_below_360(rng):
    ra, dec = _icrs_direction([1.0, 0.0, 0.0])  # l = 0, b = 0 (Hipparcos axes)
    table = _table(rng, [ra] * 3, [dec] * 3, [0.5, 1.0, 8.0])
    # oracle: mwkin.kinematics.reference.galactic_longitude_latitude, l in [0, 360)
    l_ref, _ = ref.galactic_longitude_latitude([ra], [dec])
    assert 0.0 <= l_ref[0] < 360.0
    l_fast = _column(mwkin.to_galactocentric(table), "l")
    assert np.all((l_fast >= 0.0) & (l_fast < 360.0)), l_fast


# ---------------------------------------------------------------------- missing and unusable inputs
def test_nonpositive_and_unusable_parallaxes_are_nan_alike(rng):
    # Negative, zero, tiny negative, below the cut, NaN, NaN error, and good parallaxes.
    parallax = np.array([-1.0, 0.0, -1e-3, 0.1, np.nan, 2.0, 1.0, 0.5])
    error = np.array([0.1, 0.1, 0.1, 0.05, 0.1, np.nan, 0.05, 0.02])
    n = parallax.size
    table = _table(rng, rng.uniform(0, 360, n), rng.uniform(-80, 80, n), np.ones(n))
    table["parallax"] = parallax * u.mas
    table["parallax_error"] = error * u.mas
    for choice in (None, InverseParallax(min_snr=0), InverseParallax(min_snr=3, zero_point_mas=-0.05)):
        # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
        fast, expected = _compare_tables(table, None, distance=choice)
        nonpositive = parallax - (0.0 if choice is None else choice.zero_point_mas) <= 0
        # oracle: the documented flag of mwkin.to_galactocentric (its docstring, Notes)
        flags = np.asarray(fast["flag"])
        assert all("nonpositive_parallax" in f for f in flags[nonpositive])
        assert not np.any(expected["has_position"][nonpositive | np.isnan(parallax)])
        assert np.all(np.isfinite(expected["sigma_l"]))  # l and b need only the direction


def test_missing_radial_velocities_match_reference(rng):
    n = 30
    ra, dec = rng.uniform(0, 360, n), rng.uniform(-85, 85, n)
    # No radial_velocity column at all.
    table = _table(rng, ra, dec, rng.uniform(0.1, 5, n), with_rv=False)
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    fast, expected = _compare_tables(table, FRAMES["schoenrich"])
    assert not np.any(expected["has_velocity"])
    assert np.all(np.isfinite(expected["sigma_x"]))
    # Some radial velocities (and their errors) NaN.
    table = _table(rng, ra, dec, rng.uniform(0.1, 5, n))
    table["radial_velocity"][::3] = np.nan * KMS
    table["radial_velocity_error"][::4] = np.nan * KMS
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_tables(table, FRAMES["schoenrich"])


@pytest.mark.parametrize("frame_name", ["default", "schoenrich"])
def test_random_correlations_match_reference(frame_name, rng):
    n = 300
    ra = rng.uniform(0, 360, n)
    dec = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    table = _table(rng, ra, dec, 10.0 ** rng.uniform(-1.5, 1.0, n))
    # Singular (rank 3) but valid matrices for some stars, and three impossible ones.
    singular = _random_correlations(rng, 20, rank=3)
    for (i, j), name in CORRELATION_PAIRS.items():
        table[name][:20] = singular[:, i, j]
    for name, value in (("ra_dec_corr", 0.99), ("ra_pmra_corr", -0.99), ("dec_pmra_corr", 0.99)):
        table[name][20:23] = value
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _, expected = _compare_tables(table, FRAMES[frame_name])
    assert np.array_equal(np.flatnonzero(expected["invalid_correlation"]), [20, 21, 22])


def test_distance_column_matches_reference(rng):
    # A distance column: its error is independent of the astrometry (the parallax pairs are ignored).
    n = 40
    table = _table(rng, rng.uniform(0, 360, n), rng.uniform(-85, 85, n), np.ones(n))
    table["distance"] = rng.uniform(0.05, 15.0, n) * u.kpc
    table["distance_error"] = rng.uniform(0.0, 0.2, n) * table["distance"]
    table["distance"][[3, 7]] = np.nan * u.kpc
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_tables(table, FRAMES["tilted-rolled"], distance=DistanceColumn("distance"))


# ====================================================================== the array functions
def _compare_array_functions(obs, frame):
    """galactocentric_/heliocentric_from_observables, cylindrical_from_cartesian and the inverse."""
    args = (obs["ra"], obs["dec"], obs["d"], obs["pmra"], obs["pmdec"], obs["rv"])
    # oracle: mwkin.kinematics.reference.forward (plain numpy), common practice (no source)
    expected = ref.forward(*args, frame=frame)
    scales = _value_scales(obs, expected, frame)
    gc = galactocentric_from_observables(*args, frame=frame)
    for name in GC_CARTESIAN:
        _assert_same(gc[name], expected[name], scales[name], name)
    helio = heliocentric_from_observables(*args)
    # oracle: mwkin.kinematics.reference.heliocentric (plain numpy), common practice (no source)
    expected_helio = ref.heliocentric(*args)
    for name in HELIO_CARTESIAN:
        _assert_same(helio[name], expected_helio[name], scales[name], name)

    # Cylindrical from the same Cartesian input (phi in radians here).
    cartesian = [expected[name] for name in GC_CARTESIAN]
    cyl = cylindrical_from_cartesian(*cartesian)
    # oracle: mwkin.kinematics.reference.cylindrical (plain numpy), common practice (no source)
    expected_cyl = ref.cylindrical(*cartesian)
    for name in ("R", "phi", "z", "v_R", "v_phi", "v_z"):
        scale = scales.get(name, scales["z"])
        got, want = cyl[name], expected_cyl[name]
        if name == "phi":
            got, want = np.degrees(got), np.degrees(want)
        _assert_same(got, want, scale, name)

    # The inverse, from the reference's Galactocentric coordinates.
    back = observables_from_galactocentric(*cartesian, frame=frame)
    # oracle: mwkin.kinematics.reference.observables (plain numpy), common practice (no source)
    expected_back = ref.observables(*cartesian, frame=frame)
    d = np.abs(obs["d"])
    speed = np.abs(obs["rv"]) + K * d * (np.abs(obs["pmra"]) + np.abs(obs["pmdec"])) + np.linalg.norm(frame.v_sun)
    with np.errstate(divide="ignore"):
        direction = (d + frame.R0) / d  # rad per ulp of the position, seen from the Sun
        cos_dec = np.abs(np.cos(np.radians(obs["dec"])))
        inverse_scales = {
            "ra": direction / np.maximum(cos_dec, 1e-300) * DEG,
            "dec": direction * DEG,
            "distance": d + frame.R0,
            "radial_velocity": speed * (1.0 + direction),
            # e_ra and e_dec both turn with ra, which is ill-determined near the poles
            "pmra": speed * (1.0 + direction / np.maximum(cos_dec, 1e-300)) / (K * d),
            "pmdec": speed * (1.0 + direction / np.maximum(cos_dec, 1e-300)) / (K * d),
        }
    for name, scale in inverse_scales.items():
        _assert_same(back[name], expected_back[name], scale, f"inverse {name}" if name != "ra" else "ra")


@pytest.mark.parametrize("frame_name", list(FRAMES))
def test_array_functions_match_reference(frame_name, rng):
    n = 500
    obs = {
        "ra": rng.uniform(0, 360, n),
        "dec": np.degrees(np.arcsin(rng.uniform(-1, 1, n))),
        "d": 10.0 ** rng.uniform(-3.0, 1.7, n),
        "pmra": rng.normal(0, 50, n),
        "pmdec": rng.normal(0, 50, n),
        "rv": rng.normal(0, 100, n),
    }
    obs["rv"][::7] = np.nan  # missing radial velocities give NaN velocities in both
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_array_functions(obs, FRAMES[frame_name])


# ====================================================================== property tests
_FINITE = {"allow_nan": False, "allow_infinity": False, "allow_subnormal": False}
_star = st.tuples(
    st.floats(0.0, 360.0, **_FINITE),  # ra, deg
    st.floats(-90.0, 90.0, **_FINITE),  # dec, deg
    st.floats(1e-3, 100.0, **_FINITE),  # distance, kpc
    st.floats(-1000.0, 1000.0, **_FINITE),  # pmra, mas/yr
    st.floats(-1000.0, 1000.0, **_FINITE),  # pmdec, mas/yr
    st.floats(-1000.0, 1000.0, **_FINITE),  # radial velocity, km/s
)
_frame = st.builds(
    SolarFrame,
    R0=st.floats(4.0, 12.0, **_FINITE),
    z_sun=st.one_of(st.just(0.0), st.floats(1.0, 100.0, **_FINITE), st.floats(-100.0, -1.0, **_FINITE)),
    v_sun=st.tuples(*[st.floats(-400.0, 400.0, **_FINITE)] * 3),
    roll=st.floats(-180.0, 180.0, **_FINITE),
    galcen_ra=st.floats(0.0, 360.0, **_FINITE),
    galcen_dec=st.floats(-90.0, 90.0, **_FINITE),
)
_PROPERTY = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@_PROPERTY
@given(stars=st.lists(_star, min_size=1, max_size=8), frame=_frame)
def test_property_array_functions_match_reference(stars, frame):
    ra, dec, d, pmra, pmdec, rv = (np.array(column) for column in zip(*stars))
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_array_functions({"ra": ra, "dec": dec, "d": d, "pmra": pmra, "pmdec": pmdec, "rv": rv}, frame)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(stars=st.lists(_star, min_size=1, max_size=6), frame=_frame, seed=st.integers(0, 2**32 - 1))
def test_property_linear_errors_match_reference(stars, frame, seed):
    ra, dec, d, pmra, pmdec, rv = (np.array(column) for column in zip(*stars))
    rng = np.random.default_rng(seed)
    # Sky errors of 0.1-10 arcsec: hypothesis seeks out directions along the axes, where the fast
    # path's variances of vanishing components cancel below round-off with small sky errors (the
    # known disagreement below); small sky errors are compared on random directions above.
    table = _table(rng, ra, dec, d, log_sky_error=(2.0, 4.0))
    table["pmra"], table["pmdec"], table["radial_velocity"] = pmra * MASYR, pmdec * MASYR, rv * KMS
    # oracle: mwkin.kinematics.reference (plain numpy), common practice (no source)
    _compare_tables(table, frame, distance=InverseParallax(min_snr=0))


# ====================================================================== the Jacobian itself
def test_reference_jacobian_matches_finite_differences(rng):
    # common practice (no source): central differences of the reference transform, step h, agree
    # with the analytic Jacobian to O(h^2) truncation plus O(ulp / h) round-off, here ~1e-9 of the
    # column's size; 1e-6 leaves room and still catches any wrong term.
    n = 60
    frame = FRAMES["tilted-rolled"]
    ra, dec = rng.uniform(0, 360, n), rng.uniform(-75, 75, n)
    d = 10.0 ** rng.uniform(-1.0, 1.2, n)
    pmra, pmdec, rv = rng.normal(0, 40, n), rng.normal(0, 40, n), rng.normal(0, 100, n)
    out = ref.forward(ra, dec, d, pmra, pmdec, rv, frame=frame)
    keep = (out["R"] > 0.5) & (np.abs(out["b"]) < 80.0)  # away from the z axis and the Galactic poles
    ra, dec, d, pmra, pmdec, rv = (a[keep] for a in (ra, dec, d, pmra, pmdec, rv))
    analytic = ref.jacobian(ra, dec, d, pmra, pmdec, rv, frame=frame)

    cos_dec = np.cos(np.radians(dec))
    h_mas = 1e3  # 1 arcsec, ~5e-6 rad
    steps = [  # (the change of each input for a step of the parameter, the step)
        ({"ra": h_mas / 3.6e6 / cos_dec}, h_mas),  # ra* = ra cos(dec): ra moves by h / cos(dec)
        ({"dec": h_mas / 3.6e6}, h_mas),
        ({"d": 1e-5 * d}, 1e-5 * d),
        ({"pmra": 1e-3}, 1e-3),
        ({"pmdec": 1e-3}, 1e-3),
        ({"rv": 1e-3}, 1e-3),
    ]
    order = ("ra", "dec", "d", "pmra", "pmdec", "rv")
    base = {"ra": ra, "dec": dec, "d": d, "pmra": pmra, "pmdec": pmdec, "rv": rv}
    # The size of each entry's terms (as for the round-off scales); an entry bounded by 0 must be 0.
    bounds = _jacobian_bounds(base, ref.forward(ra, dec, d, pmra, pmdec, rv, frame=frame))
    worst = 0.0
    for j, (change, h) in enumerate(steps):
        f_plus = ref.forward(*(base[k] + change.get(k, 0.0) for k in order), frame=frame)
        f_minus = ref.forward(*(base[k] - change.get(k, 0.0) for k in order), frame=frame)
        for i, name in enumerate(ref.OUTPUT_NAMES):
            step = f_plus[name] - f_minus[name]
            if name in WRAPPING:  # l or phi may wrap between the two evaluations
                step = (step + 180.0) % 360.0 - 180.0
            mismatch = np.abs(step / (2.0 * h) - analytic[:, i, j])
            assert np.all(mismatch <= 1e-6 * bounds[:, i, j]), (
                f"d {name} / d {ref.PARAMETERS[j]}: off by {np.max(mismatch / bounds[:, i, j]):.3g} of its size"
            )
            with np.errstate(invalid="ignore", divide="ignore"):
                worst = max(worst, float(np.nanmax(np.where(bounds[:, i, j] > 0, mismatch / bounds[:, i, j], 0.0))))
    WORST["jacobian vs finite differences"] = worst

    # The parallax route: distance = 1/parallax, so d(output)/d(parallax) = -d^2 d(output)/d(distance).
    plx = 1.0 / d
    h = 1e-6 * plx
    f_plus = ref.forward(ra, dec, 1.0 / (plx + h), pmra, pmdec, rv, frame=frame)
    f_minus = ref.forward(ra, dec, 1.0 / (plx - h), pmra, pmdec, rv, frame=frame)
    for i, name in enumerate(ref.OUTPUT_NAMES):
        if name in WRAPPING:
            continue
        numeric = (f_plus[name] - f_minus[name]) / (2.0 * h)
        scale = np.maximum(bounds[:, i, 2] * d**2, 1e-300)
        assert np.all(np.abs(numeric - (-(d**2)) * analytic[:, i, 2]) <= 1e-6 * scale), name


def test_propagation_keeps_independent_nan_out():
    # common practice (no source): a NaN uncertainty of a parameter an output does not depend on
    # leaves that output's variance alone; one it depends on makes it NaN.
    J = np.zeros((1, 2, 6))
    J[0, 0, :3] = [1.0, 2.0, 3.0]  # depends on the first three parameters
    J[0, 1, :] = 1.0  # depends on all six
    cov = np.diag([1.0, 1.0, 1.0, 1.0, 1.0, np.nan])[None]
    out = ref.propagate_covariance(J, cov)
    assert out[0, 0, 0] == 14.0  # 1 + 4 + 9
    assert out[0, 0, 1] == out[0, 1, 0] == 6.0  # the pair meets the NaN only through J[0, 0, 5] = 0
    assert np.isnan(out[0, 1, 1])


def test_reference_is_independent_of_astropy_coordinates_and_widgets():
    # project rule (no outside source; the widget part as in tests/test_layering.py):
    # the oracle must not lean on what it is compared with elsewhere (astropy.coordinates) and must
    # stay a core module (no widget library).
    path = pathlib.Path(ref.__file__)
    imported = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            imported.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            imported.add(("." * node.level) + (node.module or ""))
    assert not any(name.startswith("astropy.coordinates") for name in imported), imported
    assert not any(
        name.split(".")[0] in ("ipywidgets", "bqplot", "anywidget", "traitlets") or "widgets" in name
        for name in imported
    ), imported
