"""Unit tests of the Oort-constant fit (mwkin.oort, mwkin.oort_sample, mwkin.oort_solver).

The mocks here are built directly in heliocentric Galactic coordinates and rotated to ICRS with the
transpose of the Hipparcos matrix, which is fast; the checks against astropy's exact kinematics and
other outside sources are in tests/reference/test_oort_reference.py.
"""

from __future__ import annotations

import json
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from mwkin.coords import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC, proper_motions_to_galactic
from mwkin.distances import DistanceColumn, InverseParallax
from mwkin.frames import SolarFrame
from mwkin.oort import UNCONSTRAINED_ERROR, OortFit, OortInputError, fit_in_distance_bins, fit_oort
from mwkin.oort.sample import galactic_geometry, prepare_sample, sky_motions

k = K_KMS_PER_MASYR_KPC
KMS = u.km / u.s
MASYR = u.mas / u.yr
NAMES = ("A", "B", "C", "K", "U", "V", "W")
TRUTH = dict(A=15.0, B=-12.0, C=-3.0, K=-2.5, U=11.0, V=12.0, W=7.0)


def sky_basis(lon, lat):
    sl, cl, sb, cb = np.sin(lon), np.cos(lon), np.sin(lat), np.cos(lat)
    return (np.array([cb * cl, cb * sl, sb]), np.array([-sl, cl, 0 * sl]), np.array([-sb * cl, -sb * sl, cb]))


def table_from_galactic(pos, vel, rng, *, pm_err=0.03, rv_err=1.0, plx_err=0.02, rho=0.3):
    """Observables (ICRS, with noise) of heliocentric Galactic positions/velocities, shape (3, n)."""
    n = pos.shape[1]
    pos_icrs, vel_icrs = ICRS_TO_GALACTIC.T @ pos, ICRS_TO_GALACTIC.T @ vel
    d = np.linalg.norm(pos_icrs, axis=0)
    ra = np.mod(np.arctan2(pos_icrs[1], pos_icrs[0]), 2 * np.pi)
    dec = np.arcsin(pos_icrs[2] / d)
    r_hat, e_ra, e_dec = sky_basis(ra, dec)
    err_a, err_d = np.full(n, pm_err), np.full(n, 1.4 * pm_err)
    z1, z2 = rng.normal(size=(2, n))
    t = QTable()
    t["ra"] = np.degrees(ra) * u.deg
    t["dec"] = np.degrees(dec) * u.deg
    t["parallax"] = (1 / d + plx_err * rng.normal(size=n)) * u.mas
    t["parallax_error"] = np.full(n, plx_err) * u.mas
    t["pmra"] = ((e_ra * vel_icrs).sum(0) / (k * d) + err_a * z1) * MASYR
    t["pmdec"] = ((e_dec * vel_icrs).sum(0) / (k * d) + err_d * (rho * z1 + np.sqrt(1 - rho**2) * z2)) * MASYR
    t["pmra_error"] = err_a * MASYR
    t["pmdec_error"] = err_d * MASYR
    t["pmra_pmdec_corr"] = np.full(n, rho)
    t["radial_velocity"] = ((r_hat * vel_icrs).sum(0) + rv_err * rng.normal(size=n)) * KMS
    t["radial_velocity_error"] = np.full(n, rv_err) * KMS
    t["distance"] = d * u.kpc
    return t


def mock(n=4000, seed=0, *, truth=TRUTH, sigma=(30.0, 20.0, 15.0), r_max=0.4, in_plane=False, **noise):
    """Stars in the linear field with gradient [[K + C, A - B], [A + B, K - C]] and a Gaussian ellipsoid."""
    rng = np.random.default_rng(seed)
    r = r_max * rng.random(n) ** (1 / 3)
    direction = rng.normal(size=(3, n))
    if in_plane:
        direction[2] = 0.0
    pos = r * direction / np.linalg.norm(direction, axis=0)
    grad = np.array(
        [[truth["K"] + truth["C"], truth["A"] - truth["B"]], [truth["A"] + truth["B"], truth["K"] - truth["C"]]]
    )
    vel = np.zeros((3, n))
    vel[:2] = grad @ pos[:2]
    vel -= np.array([truth["U"], truth["V"], truth["W"]])[:, None]
    vel += rng.normal(size=(3, n)) * np.asarray(sigma)[:, None]
    return table_from_galactic(pos, vel, rng, **noise)


@pytest.fixture(scope="module")
def stars():
    return mock(4000, seed=1)


@pytest.fixture(scope="module")
def fit(stars):
    return fit_oort(stars, use="both")


# ---------------------------------------------------------------------------------- geometry
def test_galactic_geometry_matches_the_hipparcos_rotation(rng):
    # Hipparcos ICRS -> Galactic rotation (ESA 1997, SP-1200, Vol. 1, Sect. 1.5.3) as implemented in
    # mwkin.coords; the fit's faster rotation must agree to round-off.
    ra = rng.uniform(0, 360, 500)
    dec = np.degrees(np.arcsin(rng.uniform(-1, 1, 500)))
    pmra, pmdec = rng.normal(0, 10, (2, 500))
    lon, lat, mu_l, mu_b = proper_motions_to_galactic(np.radians(ra), np.radians(dec), pmra, pmdec)
    sl, cl, sb, cb, c1, c2 = galactic_geometry(ra, dec)
    np.testing.assert_allclose(sl, np.sin(lon), atol=1e-12)
    np.testing.assert_allclose(cl, np.cos(lon), atol=1e-12)
    np.testing.assert_allclose(sb, np.sin(lat), atol=1e-12)
    np.testing.assert_allclose(cb, np.cos(lat), atol=1e-12)
    np.testing.assert_allclose(c1 * pmra + c2 * pmdec, mu_l, atol=1e-11)
    np.testing.assert_allclose(-c2 * pmra + c1 * pmdec, mu_b, atol=1e-11)


def test_sky_motions_are_the_galactic_coordinates_the_fit_uses(rng):
    # The same Hipparcos rotation as mwkin.coords.proper_motions_to_galactic (ESA 1997, SP-1200,
    # Vol. 1, Sect. 1.5.3), with l in [0, 360) deg; units of the columns are honoured.
    n = 400
    ra = rng.uniform(0, 360, n)
    dec = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    pmra, pmdec = rng.normal(0, 10, (2, n))
    lon, lat, mu_l, mu_b = proper_motions_to_galactic(np.radians(ra), np.radians(dec), pmra, pmdec)
    table = QTable(
        {
            "ra": ra * u.deg,
            "dec": np.radians(dec) * u.rad,
            "pmra": pmra * MASYR,
            "pmdec": pmdec * 1e-3 * u.arcsec / u.yr,
        }
    )
    l_deg, b_deg, mu_l_star, mu_b_out = sky_motions(table)
    np.testing.assert_allclose(l_deg, np.degrees(np.mod(lon, 2 * np.pi)), atol=1e-9)
    assert np.all((l_deg >= 0) & (l_deg < 360))
    np.testing.assert_allclose(b_deg, np.degrees(lat), atol=1e-9)
    np.testing.assert_allclose(mu_l_star, mu_l, atol=1e-11)
    np.testing.assert_allclose(mu_b_out, mu_b, atol=1e-11)
    # in the standard units, exactly the numbers of the rotation the solver blocks are built with
    sl, cl, sb, cb, c1, c2 = galactic_geometry(ra, dec)
    plain = QTable({"ra": ra, "dec": dec, "pmra": pmra, "pmdec": pmdec})
    np.testing.assert_array_equal(sky_motions(plain)[2], c1 * pmra + c2 * pmdec)
    np.testing.assert_array_equal(sky_motions(plain)[3], -c2 * pmra + c1 * pmdec)
    # a missing entry stays a NaN in that row only; a missing column is named
    table["pmra"][3] = np.nan * MASYR
    _, _, mu_l_star, _ = sky_motions(table)
    assert np.isnan(mu_l_star[3]) and np.isfinite(np.delete(mu_l_star, 3)).all()
    table.remove_column("pmdec")
    with pytest.raises(OortInputError, match="'pmdec'"):
        sky_motions(table)


def test_fit_inverts_the_first_order_equations_exactly(rng):
    # Noise-free data made from the first-order equations of REFERENCES.md ("Oort constants") in
    # Galactic coordinates; the fit must give the parameters back to round-off.
    n = 300
    lon = rng.uniform(0, 2 * np.pi, n)
    lat = np.arcsin(rng.uniform(-1, 1, n))
    d = rng.uniform(0.05, 0.5, n)
    A, B, C, K, U, V, W = (TRUTH[name] for name in NAMES)
    sl, cl, sb, cb = np.sin(lon), np.cos(lon), np.sin(lat), np.cos(lat)
    s2, c2 = np.sin(2 * lon), np.cos(2 * lon)
    mu_l = ((A * c2 - C * s2 + B) * cb + (U * sl - V * cl) / d) / k
    mu_b = (-(A * s2 + C * c2 + K) * sb * cb + ((U * cl + V * sl) * sb - W * cb) / d) / k
    v_r = d * (K + A * s2 + C * c2) * cb**2 - (U * cl + V * sl) * cb - W * sb
    r_hat, e_l, e_b = sky_basis(lon, lat)
    vel = k * d * (mu_l * e_l + mu_b * e_b) + v_r * r_hat
    table = table_from_galactic(d * r_hat, vel, rng, pm_err=1e-6, rv_err=1e-6, plx_err=1e-9)
    # (The helper adds noise of 1e-6 mas/yr and km/s only, far below the tolerance.)
    result = fit_oort(table, use="both", distance=DistanceColumn(), distance_range=(0, 1))
    for name in NAMES:
        assert result.values[name] == pytest.approx(TRUTH[name], abs=1e-4)
    assert max(result.sigma_intrinsic) < 1e-2


def test_rotated_proper_motion_covariance_and_distance_term_match_a_numerical_jacobian():
    # Linear error propagation (common practice, no source): the covariance the fit gives one star's
    # velocity residual must equal J Sigma J^T with J from finite differences of the whole chain
    # (parallax -> distance, proper motions -> Galactic velocity, model position), Sigma from the
    # Gaia-style errors and correlations.
    base = dict(ra=123.4, dec=-31.2, parallax=3.0, pmra=12.0, pmdec=-7.0, radial_velocity=25.0)
    errs = dict(parallax=0.3, pmra=0.2, pmdec=0.35, radial_velocity=2.0)
    corr = dict(parallax_pmra_corr=0.4, parallax_pmdec_corr=-0.3, pmra_pmdec_corr=0.2)
    p = np.array([15.0, -12.0, -3.0, -2.5, 11.0, 12.0, 7.0])

    def one_row(values):
        t = QTable({name: [values[name]] for name in base})
        for name, e in errs.items():
            t[f"{name}_error"] = [e]
        for name, c in corr.items():
            t[name] = [c]
        t.meta["mwkin_source"] = "test"
        return t

    def block_of(values):
        prep = prepare_sample(one_row(values), use="both", distance=InverseParallax(min_snr=0), distance_range=(0, 10))
        (block,) = prep.blocks
        return block

    names = ("parallax", "pmra", "pmdec", "radial_velocity")
    jac = np.empty((3, 4))
    for j, name in enumerate(names):
        h = 1e-6 * max(abs(base[name]), 1.0)
        up, down = dict(base), dict(base)
        up[name] += h
        down[name] -= h
        jac[:, j] = (block_of(up).residual(p)[:, 0] - block_of(down).residual(p)[:, 0]) / (2 * h)
    sig = np.array([errs[n] for n in names])
    rho = np.eye(4)
    rho[0, 1] = rho[1, 0] = corr["parallax_pmra_corr"]
    rho[0, 2] = rho[2, 0] = corr["parallax_pmdec_corr"]
    rho[1, 2] = rho[2, 1] = corr["pmra_pmdec_corr"]
    expected = jac @ (rho * np.outer(sig, sig)) @ jac.T
    got6 = block_of(base).measurement_covariance(p)[:, 0]
    got = np.array([[got6[0], got6[1], got6[2]], [got6[1], got6[3], got6[4]], [got6[2], got6[4], got6[5]]])
    np.testing.assert_allclose(got, expected, rtol=1e-5, atol=1e-8 * np.abs(expected).max())


# ---------------------------------------------------------------------------------- recovery
@pytest.mark.parametrize("use", ["both", "proper_motions", "radial_velocities"])
def test_recovers_the_injected_field(use):
    table = mock(6000, seed=2)
    result = fit_oort(table, use=use)
    for name in NAMES:
        if use == "radial_velocities" and name == "B":
            continue
        assert abs(result.values[name] - TRUTH[name]) < 3.5 * result.errors[name], name
    for s, e, true in zip(result.sigma_intrinsic, result.sigma_intrinsic_error, (30.0, 20.0, 15.0)):
        assert abs(s - true) < 4 * e


def test_radial_velocities_alone_do_not_measure_B():
    # B does not appear in v_r (REFERENCES.md first-order equations), so it must be reported as such.
    result = fit_oort(mock(3000, seed=3), use="radial_velocities")
    assert not result.constrained["B"]
    assert np.isnan(result.B) and np.isnan(result.errors["B"])
    assert np.isnan(result.Omega0) and np.isnan(result.kappa) and np.isnan(result.V0)
    assert all(result.constrained[name] for name in NAMES if name != "B")
    assert "B does not appear in v_r" in result.summary()
    table = result.table()
    row = table[list(table["parameter"]).index("B")]
    assert not row["constrained"]


def test_proper_motions_in_the_plane_do_not_measure_K():
    # In the plane (b = 0) K enters mu_b only as K sin b cos b = 0: no information at all.
    result = fit_oort(mock(3000, seed=4, in_plane=True), use="proper_motions")
    assert not result.constrained["K"]
    assert np.isnan(result.K)
    assert result.constrained["A"] and result.constrained["B"] and result.constrained["W"]
    assert "not constrained by these data" in result.summary()


def test_a_large_error_is_reported_as_unconstrained():
    # Thirty stars with a 60 km/s dispersion: the Oort constants come out with errors far above the
    # limit, so they are flagged, while their (meaningless) values are still finite.
    result = fit_oort(mock(30, seed=5, sigma=(60.0, 60.0, 60.0)), use="proper_motions")
    for name in ("A", "B", "C", "K"):
        assert result.errors[name] > UNCONSTRAINED_ERROR[name]
        assert not result.constrained[name]
        assert np.isfinite(result.values[name])
    assert np.isnan(result.Omega0)


def test_isotropic_dispersion_model():
    table = mock(4000, seed=6, sigma=(22.0, 22.0, 22.0))
    result = fit_oort(table, dispersion="isotropic")
    assert result.dispersion == "isotropic"
    assert result.sigma_intrinsic[0] == result.sigma_intrinsic[1] == result.sigma_intrinsic[2]
    assert abs(result.sigma_intrinsic[0] - 22.0) < 4 * result.sigma_intrinsic_error[0]


def test_normalised_residuals_are_aligned_and_unit_normal(stars):
    fit = fit_oort(stars, distance_range=(0.0, 0.3))
    res = fit.residuals
    assert len(res) == len(stars)
    used = np.asarray(res["used"])
    assert used.sum() == fit.n_used
    # Rows outside the distance range have no residual.
    outside = np.asarray(res["status"]) == "distance_range"
    assert outside.any()
    assert np.all(np.isnan(res["z_mu_l_star"][outside]))
    for name in ("z_mu_l_star", "z_mu_b", "z_v_r"):
        z = np.asarray(res[name])[used]
        assert abs(z.mean()) < 0.1 and 0.9 < z.std() < 1.1
    # Per-star chi2 averages to the number of data per star; the total is the fit's chi2.
    assert np.nansum(res["chi2"][used]) == pytest.approx(fit.chi2, rel=1e-9)
    assert fit.chi2 / fit.dof == pytest.approx(1.0, abs=0.05)
    assert fit.dof == 3 * fit.n_used - 7 - 3


# ---------------------------------------------------------------------------------- selections and counts
def test_drop_counts_by_reason():
    table = mock(2000, seed=7)
    table["parallax"][:10] = -1.0 * u.mas  # no usable distance
    table["parallax_error"][10:20] = 1.0 * u.mas  # below the signal-to-noise cut
    table["radial_velocity"][20:40] = np.nan * KMS
    quality = np.ones(len(table), dtype=bool)
    quality[40:45] = False
    result = fit_oort(table, use="radial_velocities", quality=quality)
    assert result.n_dropped["quality"] == 5
    assert result.n_dropped["no_distance"] == 20
    assert result.distance_reasons == {"nonpositive_parallax": 10, "parallax_below_cut": 10}
    assert result.n_dropped["no_radial_velocity"] == 20
    n_far = result.n_dropped.get("distance_range", 0)
    assert result.n_used == 2000 - 5 - 20 - 20 - n_far
    # With use="both" the stars without radial velocity keep their proper motions.
    both = fit_oort(table, use="both", quality=quality)
    assert "no_radial_velocity" not in both.n_dropped
    assert both.n_used == 2000 - 5 - 20 - n_far
    assert both.n_data == 3 * both.n_used - 20


def test_rows_without_position_or_proper_motion_are_left_out_not_propagated():
    table = mock(1000, seed=12)
    clean = fit_oort(table, use="proper_motions")
    table["ra"][3] = np.nan * u.deg
    table["pmdec"][5] = np.nan * MASYR
    table["pmra_error"][7] = np.nan * MASYR
    result = fit_oort(table, use="proper_motions")
    assert result.n_dropped["no_position"] == 1
    assert result.n_dropped["no_proper_motion"] == 1
    assert result.n_dropped["no_error"] == 1
    assert result.n_used == clean.n_used - 3
    assert np.isfinite(result.A) and abs(result.A - clean.A) < 0.2 * clean.errors["A"]


def test_plain_dataframe_input_goes_through_read_catalog():
    table = mock(1500, seed=13)
    frame = table.to_pandas()  # no units: the standard units are assumed
    from_table = fit_oort(table)
    from_frame = fit_oort(frame)
    assert from_frame.n_used == from_table.n_used
    assert from_frame.A == pytest.approx(from_table.A, rel=1e-12)


def test_quality_as_column_name_and_callable():
    table = mock(1000, seed=8)
    table["good"] = np.arange(len(table)) % 2 == 0
    by_name = fit_oort(table, quality="good")
    by_call = fit_oort(table, quality=lambda t: np.asarray(t["good"]))
    assert by_name.n_dropped["quality"] == by_call.n_dropped["quality"] == 500
    assert by_name.A == by_call.A


def test_notes_for_missing_uncertainties_and_radial_velocities():
    table = mock(1500, seed=9)
    del table["pmra_error"], table["radial_velocity"], table["radial_velocity_error"]
    result = fit_oort(table, use="both", distance=DistanceColumn())
    text = " ".join(result.notes)
    assert "no proper-motion uncertainties" in text
    assert "fitted the proper motions only" in text
    assert result.n_data == 2 * result.n_used


def test_caveat_notes_follow_the_settings(stars):
    far = fit_oort(stars, distance_range=(0.0, 1.5))
    assert any("beyond ~1 kpc" in note for note in far.notes)
    near = fit_oort(stars)
    assert not any("beyond ~1 kpc" in note for note in near.notes)
    assert any(note.startswith("first-order model") for note in near.notes)
    assert any("V0 = R0 (A - B)" in note for note in near.notes)
    pm = fit_oort(stars, use="proper_motions")
    assert any(note.startswith("proper motions only") for note in pm.notes)


# ---------------------------------------------------------------------------------- robust and bootstrap
def test_sigma_clipping_rejects_injected_outliers():
    table = mock(5000, seed=10)
    bad = np.arange(0, 5000, 100)  # 50 stars
    table["radial_velocity"][bad] += 400.0 * KMS
    table["pmra"][bad] += 300.0 / (k * table["distance"][bad].value) * MASYR
    plain = fit_oort(table)
    robust = fit_oort(table, robust=True, clip=4.0)
    status = np.asarray(robust.residuals["status"])
    n_bad_in_range = int(np.count_nonzero(status[bad] != "distance_range"))
    assert np.all(status[bad][status[bad] != "distance_range"] == "outlier")
    # A 4-sigma clip also removes a few genuine stars (chi-square tail probability 6e-5 per star).
    assert n_bad_in_range <= robust.n_rejected <= n_bad_in_range + 5
    assert robust.n_dropped["outlier"] == robust.n_rejected
    assert robust.n_used == plain.n_used - robust.n_rejected
    assert f"sigma clipping at 4 sigma rejected {robust.n_rejected} stars" in robust.summary()
    for name in NAMES:
        assert abs(robust.values[name] - TRUTH[name]) < 3.5 * robust.errors[name], name
    # Without clipping the outliers inflate the dispersion.
    assert plain.sigma_intrinsic[0] > robust.sigma_intrinsic[0] + 3


def test_bootstrap_is_seeded_and_agrees_with_the_fisher_errors(stars):
    first = fit_oort(stars, bootstrap=200, seed=42)
    again = fit_oort(stars, bootstrap=200, seed=42)
    other = fit_oort(stars, bootstrap=200, seed=43)
    np.testing.assert_array_equal(first.bootstrap["samples"], again.bootstrap["samples"])
    assert not np.array_equal(first.bootstrap["samples"], other.bootstrap["samples"])
    samples = first.bootstrap["samples"]
    for j, name in enumerate(NAMES):
        ratio = samples[:, j].std(ddof=1) / first.errors[name]
        assert 0.75 < ratio < 1.3, (name, ratio)
    table = first.table()
    for row in table:
        if row["parameter"] in NAMES:
            assert row["ci95_low"] < row["ci68_low"] < row["value"] < row["ci68_high"] < row["ci95_high"]


# ---------------------------------------------------------------------------------- bins, potential, output
def test_fits_in_distance_bins(stars):
    bins = [(0.0, 0.2), (0.2, 0.3), (0.3, 0.4)]
    table = fit_in_distance_bins(stars, bins)
    assert list(table["d_min"]) == [0.0, 0.2, 0.3]
    assert table["A"].unit == u.km / u.s / u.kpc
    full = fit_oort(stars, distance_range=(0.0, 0.4), bins=bins)
    assert sum(table["n_used"]) == full.n_used
    assert full.bins is not None and len(full.bins) == 3
    np.testing.assert_allclose(full.bins["A"], table["A"])
    for row in table:
        assert row["d_min"] <= row["d_median"] < row["d_max"]
        if np.isfinite(row["A"]):
            assert abs(row["A"] - TRUTH["A"]) < 4 * row["A_error"]
    assert "distance bins" in full.summary()


def test_potential_comparison_takes_the_in_plane_R0():
    class Flat:
        """Flat rotation curve, 220 km/s (A = -B = 110 / R)."""

        def oort_constants(self, R0):
            return {"A": 110.0 / R0 * u.km / u.s / u.kpc, "B": -110.0 / R0}

        def describe(self):
            return "flat test curve"

    frame = SolarFrame(R0=8.0, z_sun=100.0)  # in-plane R0 = sqrt(8^2 - 0.1^2)
    result = fit_oort(mock(800, seed=11), frame=frame, potential=Flat())
    R = np.sqrt(8.0**2 - 0.1**2)
    assert result.potential_oort["R_kpc"] == pytest.approx(R)
    assert result.potential_oort["A"] == pytest.approx(110.0 / R)
    assert result.potential_oort["B"] == pytest.approx(-110.0 / R)
    assert "flat test curve" in result.summary()


def test_derived_quantities_and_their_errors(fit):
    A, B = fit.A, fit.B
    cov = fit.covariance[:2, :2]
    assert fit.Omega0 == pytest.approx(A - B)
    assert fit.dVdR == pytest.approx(-(A + B))
    assert fit.V0 == pytest.approx(fit.frame.R0 * (A - B))
    assert fit.kappa == pytest.approx(np.sqrt(-4 * B * (A - B)))
    assert fit.derived["Omega0"][1] == pytest.approx(np.sqrt(cov[0, 0] + cov[1, 1] - 2 * cov[0, 1]))
    # kappa's error by finite differences of sqrt(-4 B (A - B)) (first-order propagation).
    h = 1e-6
    grad = np.array(
        [
            (np.sqrt(-4 * B * (A + h - B)) - np.sqrt(-4 * B * (A - h - B))) / (2 * h),
            (np.sqrt(-4 * (B + h) * (A - B - h)) - np.sqrt(-4 * (B - h) * (A - B + h))) / (2 * h),
        ]
    )
    assert fit.derived["kappa"][1] == pytest.approx(np.sqrt(grad @ cov @ grad), rel=1e-5)


def test_table_summary_and_dict_round_trip(stars):
    result = fit_oort(stars, bootstrap=20, seed=1, bins=[(0, 0.2), (0.2, 0.4)])
    table = result.table()
    assert list(table.colnames[:5]) == ["parameter", "value", "error", "unit", "constrained"]
    assert list(table["parameter"][:7]) == list(NAMES)
    text = result.summary()
    for piece in ("A ", "Omega0", "kappa", "Caveats", "frame:", "distances:", "bootstrap: 20"):
        assert piece in text
    data = json.loads(json.dumps(result.to_dict()))
    back = OortFit.from_dict(data)
    assert back.values == result.values
    assert back.errors == result.errors
    np.testing.assert_array_equal(back.covariance, result.covariance)
    assert back.frame == result.frame
    assert back.summary() == text
    assert back.residuals is None
    np.testing.assert_array_equal(back.bootstrap["samples"], result.bootstrap["samples"])


# ---------------------------------------------------------------------------------- bad input
@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(use="velocities"), "use must be one of"),
        (dict(dispersion="spherical"), "dispersion must be one of"),
        (dict(distance_range=(0.5, 0.1)), "0 <= min < max"),
        (dict(distance_range=0.5), "distance_range must be (min, max)"),
        (dict(bins=[(0.3, 0.1)]), "each distance bin"),
        (dict(bins=[0.1, 0.2]), "bins must be a sequence"),
        (dict(quality=np.ones(3, dtype=bool)), "one boolean per row"),
        (dict(quality="no_such_column"), "no column 'no_such_column'"),
        (dict(robust=True, clip=0.0), "clip must be a positive"),
        (dict(bootstrap=-1), "bootstrap must be"),
        (dict(distance="parallax"), "distance must be a distance choice"),
        (dict(frame="astropy"), "frame must be a SolarFrame"),
    ],
)
def test_bad_options_are_named(stars, kwargs, message):
    with pytest.raises(OortInputError, match=message.replace("(", r"\(").replace(")", r"\)")):
        fit_oort(stars, **kwargs)


def test_empty_selection_reports_the_counts(stars):
    with pytest.raises(OortInputError, match=r"no star is left.*distance_range: 4000.*5-6 kpc"):
        fit_oort(stars, distance_range=(5.0, 6.0))


def test_missing_columns_are_named(stars):
    table = stars.copy()
    del table["radial_velocity"]
    table.meta["mwkin_source"] = "test"
    with pytest.raises(OortInputError, match="'radial_velocity' column"):
        fit_oort(table, use="radial_velocities")


def test_core_import_pulls_in_no_widget_library():
    code = (
        "import sys, mwkin.oort; bad = [m for m in ('ipywidgets', 'bqplot', 'anywidget', 'traitlets') "
        "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)"
    )
    assert subprocess.run([sys.executable, "-c", code], capture_output=True).returncode == 0


@pytest.mark.parametrize("clip", [2.5, 4.0, 6.0])
def test_clipping_thresholds_match_scipy(clip):
    # The chi-square limit with the two-sided Gaussian tail probability of `clip` sigma, for 1-3 data per
    # star, against scipy.stats (reference library).
    from scipy import stats

    from mwkin.oort.fit import _chi2_limit

    for dof in (1, 2, 3):
        expected = stats.chi2.isf(2 * stats.norm.sf(clip), dof)
        assert _chi2_limit(clip, dof) == pytest.approx(expected, rel=1e-9)
