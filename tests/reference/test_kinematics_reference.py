"""Space velocities against outside references.

Sources (see REFERENCES.md):
- astropy's ``SkyCoord(...).transform_to(Galactocentric)`` and its cylindrical representation [lib].
- ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3, eq. 1.5.11: the
  ICRS -> Galactic matrix and its defining constants [pub]; ERFA's ``icrs2g`` [lib].
- IAU 2012 Resolution B2 (au = 149597870.700 km) and the Julian year (365.25 d) for k [pub].
- Johnson & Soderblom 1987, AJ 93, 864: UVW as the Galactic components of the heliocentric velocity [pub].
"""

from __future__ import annotations

import math

import astropy.units as u
import erfa
import numpy as np
import pytest
from astropy.coordinates import CylindricalDifferential, CylindricalRepresentation, SkyCoord
from astropy.table import QTable

from mwkin.coords import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC
from mwkin.distances import InverseParallax
from mwkin.frames import SolarFrame
from mwkin.kinematics import galactocentric_from_observables, heliocentric_from_observables, to_galactocentric

KMS = u.km / u.s
MASYR = u.mas / u.yr

FRAMES = {
    "v4.0": SolarFrame.preset("astropy v4.0"),
    "non-default": SolarFrame(R0=7.9, z_sun=-30.0, v_sun=(-8.0, 230.0, 12.0), roll=5.0),
}


@pytest.fixture
def stars(rng):
    """Random stars over the whole sky, with some near the poles and some very near the Sun."""
    n = 600
    ra = rng.uniform(0.0, 360.0, n)
    dec = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    dec[:20] = 90.0 - 10.0 ** rng.uniform(-9, -3, 20)  # within 3.6 arcsec of the north pole
    dec[20:40] = -90.0 + 10.0 ** rng.uniform(-9, -3, 20)
    distance = 10.0 ** rng.uniform(-1.0, 1.3, n)  # 0.1 to 20 kpc
    distance[40:60] = 10.0 ** rng.uniform(-5.0, -2.0, 20)  # 10 mau to 10 pc: near the Sun
    return dict(
        ra=ra,
        dec=dec,
        distance=distance,
        pmra=rng.normal(0, 30, n),
        pmdec=rng.normal(0, 30, n),
        rv=rng.normal(0, 80, n),
    )


def _astropy(stars, frame):
    c = SkyCoord(
        ra=stars["ra"] * u.deg,
        dec=stars["dec"] * u.deg,
        distance=stars["distance"] * u.kpc,
        pm_ra_cosdec=stars["pmra"] * MASYR,
        pm_dec=stars["pmdec"] * MASYR,
        radial_velocity=stars["rv"] * KMS,
        frame="icrs",
    )
    return c.transform_to(frame.to_astropy())


def _table(stars):
    return QTable(
        {
            "ra": stars["ra"] * u.deg,
            "dec": stars["dec"] * u.deg,
            "parallax": (1.0 / stars["distance"]) * u.mas,
            "pmra": stars["pmra"] * MASYR,
            "pmdec": stars["pmdec"] * MASYR,
            "radial_velocity": stars["rv"] * KMS,
        }
    )


def _assert_roundoff(ours, ref, scale, rel=1e-12):
    """|ours - ref| below rel x a scale of the quantity (R0 for positions, |v_sun| for velocities)."""
    err = np.max(np.abs(np.asarray(ours) - np.asarray(ref)))
    assert err <= rel * scale, f"largest difference {err:.3g} exceeds {rel * scale:.3g}"


@pytest.mark.parametrize("name", list(FRAMES))
def test_cartesian_matches_astropy(stars, name):
    # Reference: astropy SkyCoord.transform_to(Galactocentric) (astropy) [lib], to round-off.
    frame = FRAMES[name]
    ref = _astropy(stars, frame)
    out = to_galactocentric(_table(stars), frame, distance=InverseParallax(min_snr=0))
    r_scale = frame.R0 + stars["distance"].max()
    v_scale = 300.0 + K_KMS_PER_MASYR_KPC * 50 * stars["distance"].max()
    for col, attr in zip(("x", "y", "z"), ("x", "y", "z")):
        _assert_roundoff(out[col].to_value(u.kpc), getattr(ref, attr).to_value(u.kpc), r_scale)
    for col, attr in zip(("vx", "vy", "vz"), ("v_x", "v_y", "v_z")):
        _assert_roundoff(out[col].to_value(KMS), getattr(ref, attr).to_value(KMS), v_scale)


@pytest.mark.parametrize("name", list(FRAMES))
def test_array_function_matches_astropy(stars, name):
    # Same reference through the array-level function.
    frame = FRAMES[name]
    ref = _astropy(stars, frame)
    out = galactocentric_from_observables(
        stars["ra"], stars["dec"], stars["distance"], stars["pmra"], stars["pmdec"], stars["rv"], frame
    )
    _assert_roundoff(out["x"], ref.x.to_value(u.kpc), frame.R0 + 20)
    _assert_roundoff(out["vy"], ref.v_y.to_value(KMS), 300.0 + K_KMS_PER_MASYR_KPC * 50 * 20)


@pytest.mark.parametrize("name", list(FRAMES))
def test_cylindrical_signs_against_astropy(stars, name):
    # astropy's CylindricalRepresentation (astropy) [lib]: rho = R, its phi = atan2(y, x) and its d_phi
    # have the opposite sense to ours, so phi_ours = 180 deg - phi_astropy and v_phi = -rho d_phi.
    frame = FRAMES[name]
    cyl = _astropy(stars, frame).represent_as(CylindricalRepresentation, CylindricalDifferential)
    dif = cyl.differentials["s"]
    out = to_galactocentric(_table(stars), frame, distance=InverseParallax(min_snr=0))
    _assert_roundoff(out["R"].to_value(u.kpc), cyl.rho.to_value(u.kpc), 30.0)
    wrapped = np.mod(out["phi"].to_value(u.deg) - (180.0 - cyl.phi.to_value(u.deg)) + 180.0, 360.0) - 180.0
    assert np.max(np.abs(wrapped)) < 1e-10
    v_phi_ref = -(cyl.rho * dif.d_phi).to_value(KMS, u.dimensionless_angles())
    _assert_roundoff(out["v_phi"].to_value(KMS), v_phi_ref, 3000.0)
    _assert_roundoff(out["v_R"].to_value(KMS), dif.d_rho.to_value(KMS), 3000.0)
    _assert_roundoff(out["v_z"].to_value(KMS), dif.d_z.to_value(KMS), 3000.0)


def test_sun_has_positive_v_phi_and_phi_zero():
    # Common practice (no source): a star at the Sun with zero heliocentric velocity moves with the Sun,
    # so its Galactocentric velocity is v_sun; our convention puts it at phi = 0 with v_phi ~ +v_sun_y.
    frame = SolarFrame.preset("astropy v4.0")
    gc = galactocentric_from_observables(123.0, -45.0, 0.0, 0.0, 0.0, 0.0, frame)
    np.testing.assert_allclose([gc[k][0] for k in ("x", "y", "z")], frame.sun_position, atol=1e-15)
    np.testing.assert_allclose([gc[k][0] for k in ("vx", "vy", "vz")], frame.v_sun, atol=1e-13)
    out = to_galactocentric(
        QTable(
            {"ra": [10.0], "dec": [20.0], "parallax": [1e9], "pmra": [0.0], "pmdec": [0.0], "radial_velocity": [0.0]}
        ),
        frame,
        distance=InverseParallax(min_snr=0),
    )
    assert out["phi"][0].to_value(u.deg) == pytest.approx(0.0, abs=1e-7)  # 1e-9 kpc from the Sun
    assert out["v_phi"][0].to_value(KMS) == pytest.approx(245.6, abs=0.01)
    assert out["U"][0].to_value(KMS) == pytest.approx(0.0, abs=1e-12)


def _hipparcos_matrix_from_constants():
    # ESA 1997, Vol. 1, Sect. 1.5.3: the Galactic pole at alpha_G = 192.85948 deg, delta_G = 27.12825 deg,
    # and the longitude of the ascending node l_Omega = 32.93192 deg (exact by convention) [pub].
    # Built here independently: the rows are the Galactic X, Y, Z axes in ICRS.
    a, d, lo = np.radians(192.85948), np.radians(27.12825), np.radians(32.93192)
    pole = np.array([math.cos(d) * math.cos(a), math.cos(d) * math.sin(a), math.sin(d)])
    node = np.array([-math.sin(a), math.cos(a), 0.0])  # ascending node of the Galactic plane, alpha_G + 90 deg
    node_perp = np.cross(pole, node)
    x_axis = math.cos(lo) * node - math.sin(lo) * node_perp  # l = 0 lies l_Omega before the node
    y_axis = np.cross(pole, x_axis)
    return np.array([x_axis, y_axis, pole])


def _erfa_matrix():
    # ERFA's icrs2g (IAU SOFA implementation of the Hipparcos rotation) [lib]: the Galactic directions of
    # the three ICRS axes are the columns of the matrix.
    cols = []
    for ra, dec in ((0.0, 0.0), (math.pi / 2, 0.0), (0.0, math.pi / 2)):
        lon, lat = erfa.icrs2g(ra, dec)
        cols.append([math.cos(lat) * math.cos(lon), math.cos(lat) * math.sin(lon), math.sin(lat)])
    return np.array(cols).T


def test_galactic_matrix_against_hipparcos_and_erfa():
    # ESA 1997 eq. 1.5.11 (rows of A_G', 10 decimals) [pub] and ERFA icrs2g [lib].
    published = np.array(
        [
            [-0.0548755604, -0.8734370902, -0.4838350155],
            [+0.4941094279, -0.4448296300, +0.7469822445],
            [-0.8676661490, -0.1980763734, +0.4559837762],
        ]
    )
    np.testing.assert_allclose(ICRS_TO_GALACTIC, published, atol=1e-10)
    np.testing.assert_allclose(ICRS_TO_GALACTIC, _hipparcos_matrix_from_constants(), atol=1e-14)
    np.testing.assert_allclose(ICRS_TO_GALACTIC, _erfa_matrix(), atol=1e-10)


def test_l_b_against_erfa(stars):
    # ERFA icrs2g (SOFA) [lib]: Galactic longitude and latitude to ~1e-10 rad (REFERENCES.md).
    out = to_galactocentric(_table(stars), distance=InverseParallax(min_snr=0))
    lon, lat = erfa.icrs2g(np.radians(stars["ra"]), np.radians(stars["dec"]))
    dl = np.mod(out["l"].to_value(u.rad) - lon + math.pi, 2 * math.pi) - math.pi
    assert np.max(np.abs(dl * np.cos(lat))) < 1e-10
    assert np.max(np.abs(out["b"].to_value(u.rad) - lat)) < 1e-10


def test_l_b_differ_from_astropy_galactic_by_less_than_30_mas(stars):
    # REFERENCES.md: astropy's Galactic frame comes from the FK4/B1950 pole and differs from the Hipparcos
    # axes by up to ~25 mas; this checks that we use the Hipparcos matrix, not astropy's frame.
    out = to_galactocentric(_table(stars), distance=InverseParallax(min_snr=0))
    gal = SkyCoord(ra=stars["ra"] * u.deg, dec=stars["dec"] * u.deg).galactic
    sep = SkyCoord(l=out["l"], b=out["b"], frame="galactic").separation(gal).to_value(u.mas)
    assert sep.max() < 30.0
    assert sep.max() > 1.0


def test_uvw_against_hipparcos_matrix(stars):
    # Johnson & Soderblom 1987, AJ 93, 864 [pub]: (U, V, W) = T (v_icrs); here v_icrs from astropy's ICRS
    # Cartesian differential [lib] and T rebuilt from the ESA 1997 constants [pub], to ~1e-10 relative.
    c = SkyCoord(
        ra=stars["ra"] * u.deg,
        dec=stars["dec"] * u.deg,
        distance=stars["distance"] * u.kpc,
        pm_ra_cosdec=stars["pmra"] * MASYR,
        pm_dec=stars["pmdec"] * MASYR,
        radial_velocity=stars["rv"] * KMS,
        frame="icrs",
    )
    r_icrs = c.cartesian.xyz.to_value(u.kpc)
    v_icrs = c.velocity.d_xyz.to_value(KMS)
    matrix = _erfa_matrix()
    out = heliocentric_from_observables(
        stars["ra"], stars["dec"], stars["distance"], stars["pmra"], stars["pmdec"], stars["rv"]
    )
    v_ref = matrix @ v_icrs
    r_ref = matrix @ r_icrs
    speed = np.linalg.norm(v_icrs, axis=0)
    for i, k in enumerate("UVW"):
        assert np.all(np.abs(out[k] - v_ref[i]) <= 1e-9 * speed + 1e-12)
    for i, k in enumerate("XYZ"):
        assert np.all(np.abs(out[k] - r_ref[i]) <= 1e-9 * stars["distance"])


def test_uvw_of_a_star_toward_the_galactic_centre():
    # Johnson & Soderblom 1987 conventions [pub]: U positive toward the centre, V toward rotation, W north.
    # A star at l = b = 0 receding at 10 km/s has U = +10; one at l = 90 deg, b = 0 with rv 10 has V = +10.
    for lon, comp in ((0.0, "U"), (90.0, "V")):
        ra, dec = _lb_to_radec(lon, 0.0)
        out = heliocentric_from_observables(ra, dec, 1.0, 0.0, 0.0, 10.0)
        assert out[comp][0] == pytest.approx(10.0, abs=1e-9)
    ra, dec = _lb_to_radec(0.0, 90.0)
    assert heliocentric_from_observables(ra, dec, 1.0, 0.0, 0.0, 10.0)["W"][0] == pytest.approx(10.0, abs=1e-9)


def _lb_to_radec(lon_deg, lat_deg):
    gal = np.array(
        [
            math.cos(math.radians(lat_deg)) * math.cos(math.radians(lon_deg)),
            math.cos(math.radians(lat_deg)) * math.sin(math.radians(lon_deg)),
            math.sin(math.radians(lat_deg)),
        ]
    )
    x, y, z = ICRS_TO_GALACTIC.T @ gal
    return math.degrees(math.atan2(y, x)) % 360.0, math.degrees(math.asin(z))


def test_k_from_the_au_and_the_julian_year():
    # IAU 2012 Resolution B2: au = 149 597 870.700 km; Julian year = 365.25 x 86400 s [pub].
    assert K_KMS_PER_MASYR_KPC == pytest.approx(149597870.700 / (365.25 * 86400.0), rel=1e-15)
    assert K_KMS_PER_MASYR_KPC == pytest.approx(4.740470463533, abs=1e-12)
    # Hipparcos Vol. 1, Table 1.2.2 quotes A_v = 4.740470446 (from an older au) [pub]: close, not equal.
    assert K_KMS_PER_MASYR_KPC == pytest.approx(4.740470446, abs=2e-8)
    # astropy's units give the same conversion [lib].
    k_astropy = (1.0 * MASYR * u.kpc).to_value(KMS, u.dimensionless_angles())
    assert K_KMS_PER_MASYR_KPC == pytest.approx(k_astropy, rel=1e-14)


def test_galactocentric_velocity_minus_v_sun_is_the_heliocentric_velocity(stars):
    # Physics (common practice, no source): the Galactocentric velocity is the rotated heliocentric velocity
    # plus v_sun, so its difference from v_sun has the speed of (U, V, W).
    frame = FRAMES["non-default"]
    out = to_galactocentric(_table(stars), frame, distance=InverseParallax(min_snr=0))
    rel = np.stack([out[k].to_value(KMS) for k in ("vx", "vy", "vz")]) - np.asarray(frame.v_sun)[:, None]
    uvw = np.stack([out[k].to_value(KMS) for k in "UVW"])
    np.testing.assert_allclose(np.linalg.norm(rel, axis=0), np.linalg.norm(uvw, axis=0), rtol=1e-12)


def test_cov_galactocentric_against_astropy_jacobian(rng):
    # Reference: the Jacobian of astropy's transform by central differences [lib], propagated with the
    # same input covariance, gives the same 6x6 covariance to ~1e-6 relative.
    frame = FRAMES["non-default"]
    n = 8
    base = dict(
        ra=rng.uniform(0, 360, n),
        dec=rng.uniform(-80, 80, n),
        parallax=rng.uniform(0.3, 3, n),
        pmra=rng.normal(0, 20, n),
        pmdec=rng.normal(0, 20, n),
        rv=rng.normal(0, 50, n),
    )
    sig = np.array([2.0, 1.5, 0.05, 0.08, 0.06, 2.0])  # mas, mas, mas, mas/yr, mas/yr, km/s
    table = QTable(
        {
            "ra": base["ra"],
            "dec": base["dec"],
            "parallax": base["parallax"],
            "pmra": base["pmra"],
            "pmdec": base["pmdec"],
            "radial_velocity": base["rv"],
            "ra_error": np.full(n, sig[0]),
            "dec_error": np.full(n, sig[1]),
            "parallax_error": np.full(n, sig[2]),
            "pmra_error": np.full(n, sig[3]),
            "pmdec_error": np.full(n, sig[4]),
            "radial_velocity_error": np.full(n, sig[5]),
            "parallax_pmra_corr": np.full(n, 0.3),
            "ra_dec_corr": np.full(n, -0.2),
        }
    )
    out = to_galactocentric(table, frame, errors="linear", distance=InverseParallax(min_snr=0), return_covariance=True)

    def transform(ra, dec, plx, pmra, pmdec, rv):
        c = SkyCoord(
            ra=ra * u.deg,
            dec=dec * u.deg,
            distance=(1 / plx) * u.kpc,
            pm_ra_cosdec=pmra * MASYR,
            pm_dec=pmdec * MASYR,
            radial_velocity=rv * KMS,
        ).transform_to(frame.to_astropy())
        return np.concatenate([c.cartesian.xyz.to_value(u.kpc), c.velocity.d_xyz.to_value(KMS)])

    for i in range(n):
        p0 = np.array([base[k][i] for k in ("ra", "dec", "parallax", "pmra", "pmdec", "rv")])
        # steps: ra* and dec in mas, converted to deg (ra by 1/cos dec)
        to_param = np.array([1 / 3.6e6 / math.cos(math.radians(p0[1])), 1 / 3.6e6, 1, 1, 1, 1])
        J = np.empty((6, 6))
        for j in range(6):
            h = 1e-3 * sig[j]
            dp = np.zeros(6)
            dp[j] = h * to_param[j]
            J[:, j] = (transform(*(p0 + dp)) - transform(*(p0 - dp))) / (2 * h)
        corr = np.eye(6)
        corr[2, 3] = corr[3, 2] = 0.3
        corr[0, 1] = corr[1, 0] = -0.2
        cov_in = corr * np.outer(sig, sig)
        cov_ref = J @ cov_in @ J.T
        np.testing.assert_allclose(out["cov_galactocentric"][i], cov_ref, rtol=1e-5, atol=1e-9 * np.abs(cov_ref).max())
