"""Unit tests of mwkin.coords: the Hipparcos ICRS-to-Galactic rotation, K, and the proper-motion rotation.

The expected values come from outside the code under test: the defining constants of the Galactic
system (ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3), the IAU 2012
astronomical unit, and astropy's own ``Galactic`` frame. Geometric facts (orthonormality, round trips)
are checked with hypothesis on random positions.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from hypothesis import given, settings
from hypothesis import strategies as st

from mwkin.coords import (
    ALPHA_NGP_DEG,
    AU_KM,
    DELTA_NGP_DEG,
    ICRS_TO_GALACTIC,
    JULIAN_YEAR_S,
    K_KMS_PER_MASYR_KPC,
    L_OMEGA_DEG,
    proper_motions_to_galactic,
    radec_to_lb,
    tangent_basis,
    unit_vectors,
)

FAST = settings(max_examples=60, deadline=None)

# Defining constants of the Galactic system in ICRS: ESA 1997, ESA SP-1200, Vol. 1, Sect. 1.5.3.
HIP_ALPHA_G_DEG = 192.85948
HIP_DELTA_G_DEG = 27.12825
HIP_L_OMEGA_DEG = 32.93192

# astropy's Galactic frame is defined through FK4/B1950 (the IAU 1958 pole of Blaauw et al. 1960, MNRAS 121,
# 123, transformed to ICRS; from memory), not through the Hipparcos constants. The module docstring puts the difference at "up to ~1e-7 (about
# 25 mas on the sky)". Bound used here: 30 mas = 1.45e-7 rad, the documented ~25 mas with a margin.
ASTROPY_FRAME_BOUND_RAD = (30.0 * u.mas).to_value(u.rad)

lons = st.floats(min_value=0.0, max_value=2.0 * math.pi, allow_nan=False)
# Latitudes kept 1e-6 rad away from the poles, where longitude is undefined and round trips in longitude
# lose their meaning (positions are still compared as vectors below).
lats = st.floats(min_value=-math.pi / 2 + 1e-6, max_value=math.pi / 2 - 1e-6, allow_nan=False)
pms = st.floats(min_value=-1.0e4, max_value=1.0e4, allow_nan=False)


def _radec(ra_deg, dec_deg):
    return np.radians(np.atleast_1d(ra_deg)), np.radians(np.atleast_1d(dec_deg))


def _random_sky(rng, n):
    """Points uniform on the sphere (radians)."""
    lon = rng.uniform(0.0, 2.0 * np.pi, n)
    lat = np.arcsin(rng.uniform(-1.0, 1.0, n))
    return lon, lat


# ---------------------------------------------------------------------------------------------------------
# The matrix
# ---------------------------------------------------------------------------------------------------------


def test_defining_constants_are_the_hipparcos_ones():
    # ESA 1997, ESA SP-1200, Vol. 1, Sect. 1.5.3 (alpha_G, delta_G, l_Omega), exact by convention.
    assert ALPHA_NGP_DEG == HIP_ALPHA_G_DEG
    assert DELTA_NGP_DEG == HIP_DELTA_G_DEG
    assert L_OMEGA_DEG == HIP_L_OMEGA_DEG


def test_matrix_is_orthonormal_with_determinant_plus_one():
    a = ICRS_TO_GALACTIC
    assert a.shape == (3, 3)
    assert a.dtype == np.float64
    np.testing.assert_allclose(a @ a.T, np.eye(3), rtol=0, atol=1e-15)
    np.testing.assert_allclose(a.T @ a, np.eye(3), rtol=0, atol=1e-15)
    assert np.linalg.det(a) == pytest.approx(1.0, abs=1e-15)  # a rotation, not a reflection


def test_matrix_equals_one_built_independently_from_pole_and_node():
    # Geometry of ESA 1997, Vol. 1, Sect. 1.5.3: the Galactic Z axis is the north Galactic pole
    # (alpha_G, delta_G); the ascending node of the Galactic plane on the equator lies at alpha_G + 90 deg
    # and has Galactic longitude l_Omega; X (l = 0) is the node turned back by l_Omega about Z; Y = Z x X.
    # Built here by Rodrigues' rotation, not by the module's product of Euler rotations.
    a_g, d_g, l_om = np.radians([HIP_ALPHA_G_DEG, HIP_DELTA_G_DEG, HIP_L_OMEGA_DEG])
    z = np.array([np.cos(d_g) * np.cos(a_g), np.cos(d_g) * np.sin(a_g), np.sin(d_g)])
    node = np.array([np.cos(a_g + np.pi / 2), np.sin(a_g + np.pi / 2), 0.0])
    x = np.cos(l_om) * node - np.sin(l_om) * np.cross(z, node)
    y = np.cross(z, x)
    np.testing.assert_allclose(ICRS_TO_GALACTIC, np.vstack([x, y, z]), rtol=0, atol=1e-14)


def test_matrix_matches_the_published_hipparcos_matrix():
    # ESA 1997, ESA SP-1200, Vol. 1, Sect. 1.5.3, eq. (1.5.11), the matrix A_G' (r_Gal = A_G' r_ICRS),
    # printed to 10 decimals. Digits quoted from memory.
    published = np.array(
        [
            [-0.0548755604, -0.8734370902, -0.4838350155],
            [+0.4941094279, -0.4448296300, +0.7469822445],
            [-0.8676661490, -0.1980763734, +0.4559837762],
        ]
    )
    np.testing.assert_allclose(ICRS_TO_GALACTIC, published, rtol=0, atol=1e-10)


def test_north_galactic_pole_maps_to_b_plus_90():
    # The pole's ICRS position (ESA 1997, Vol. 1, Sect. 1.5.3).
    _, b = radec_to_lb(*_radec(HIP_ALPHA_G_DEG, HIP_DELTA_G_DEG))
    assert b[0] == pytest.approx(np.pi / 2, abs=1e-12)
    # and the antipode to the south Galactic pole
    _, b = radec_to_lb(*_radec(HIP_ALPHA_G_DEG + 180.0, -HIP_DELTA_G_DEG))
    assert b[0] == pytest.approx(-np.pi / 2, abs=1e-12)


def test_ascending_node_has_longitude_l_omega_and_latitude_zero():
    # ESA 1997, Vol. 1, Sect. 1.5.3: the Galactic plane crosses the equator (ascending) at
    # alpha = alpha_G + 90 deg, at Galactic longitude l_Omega.
    l, b = radec_to_lb(*_radec(HIP_ALPHA_G_DEG + 90.0, 0.0))
    assert np.degrees(l[0]) == pytest.approx(HIP_L_OMEGA_DEG, abs=1e-10)
    assert b[0] == pytest.approx(0.0, abs=1e-14)


def test_galactic_centre_direction_in_icrs():
    # The ICRS direction of (l, b) = (0, 0) is the first row of A (column of A^T).
    gc_icrs = ICRS_TO_GALACTIC.T @ np.array([1.0, 0.0, 0.0])
    ra = np.degrees(np.arctan2(gc_icrs[1], gc_icrs[0])) % 360.0
    dec = np.degrees(np.arcsin(gc_icrs[2]))
    # alpha = 266.40499 deg, delta = -28.93617 deg: the Galactic centre implied by the Hipparcos
    # constants (ESA 1997, Vol. 1, Sect. 1.5.3); digits from memory, 1e-5 deg is their last place.
    assert ra == pytest.approx(266.40499, abs=1e-5)
    assert dec == pytest.approx(-28.93617, abs=1e-5)
    # and mapping it forward gives l = 0, b = 0 (l may come out as 2 pi - tiny)
    l, b = radec_to_lb(np.radians([ra]), np.radians([dec]))
    assert min(l[0], 2 * np.pi - l[0]) == pytest.approx(0.0, abs=1e-9)
    assert b[0] == pytest.approx(0.0, abs=1e-9)


def test_matrix_agrees_with_astropy_galactic_frame_within_documented_bound(rng):
    ra, dec = _random_sky(rng, 2000)
    # the poles and axes, where errors in one coordinate would hide
    ra = np.concatenate([ra, np.radians([HIP_ALPHA_G_DEG, 0.0, 90.0, 0.0, 266.40499])])
    dec = np.concatenate([dec, np.radians([HIP_DELTA_G_DEG, 0.0, 0.0, 90.0, -28.93617])])
    l, b = radec_to_lb(ra, dec)
    gal = SkyCoord(ra=ra * u.rad, dec=dec * u.rad, frame="icrs").galactic
    ours = unit_vectors(l, b)
    theirs = unit_vectors(gal.l.to_value(u.rad), gal.b.to_value(u.rad))
    separation = np.arctan2(np.linalg.norm(np.cross(ours.T, theirs.T), axis=1), np.einsum("ij,ij->j", ours, theirs))
    assert separation.max() <= ASTROPY_FRAME_BOUND_RAD


def test_matrix_elements_agree_with_astropy_within_documented_bound():
    # astropy's matrix, read off by transforming the ICRS axes.
    axes = SkyCoord(
        x=[1.0, 0.0, 0.0], y=[0.0, 1.0, 0.0], z=[0.0, 0.0, 1.0], representation_type="cartesian", frame="icrs"
    ).galactic.cartesian.xyz.value
    # The module docstring: the two matrices "differ by up to ~1e-7".
    assert np.abs(ICRS_TO_GALACTIC - axes).max() <= ASTROPY_FRAME_BOUND_RAD
    # the rotation angle between the two frames, from the trace of A_ours A_astropy^T
    delta = ICRS_TO_GALACTIC @ axes.T
    angle = math.acos(min(1.0, (np.trace(delta) - 1.0) / 2.0))
    assert angle <= ASTROPY_FRAME_BOUND_RAD


# ---------------------------------------------------------------------------------------------------------
# The proper-motion constant
# ---------------------------------------------------------------------------------------------------------


def test_au_and_julian_year():
    # IAU 2012 Resolution B2: 1 au = 149 597 870 700 m exactly.
    assert AU_KM == 149597870.700
    # Julian year = 365.25 days of 86400 s (IAU definition; from memory).
    assert JULIAN_YEAR_S == 365.25 * 86400.0 == 31557600.0


def test_k_is_one_au_per_julian_year():
    assert K_KMS_PER_MASYR_KPC == AU_KM / JULIAN_YEAR_S
    # 4.740470463533 km/s per (mas/yr kpc): 149597870.700 km / 31557600 s, computed by hand from the IAU 2012
    # au (Resolution B2) and the Julian year; the usual "4.74047" of the literature (common practice).
    assert K_KMS_PER_MASYR_KPC == pytest.approx(4.740470463533, rel=1e-12)


def test_k_agrees_with_astropy_units():
    # astropy uses the IAU 2012 au and the Julian year for u.yr (astropy documentation; from memory).
    k = (1.0 * u.mas / u.yr * u.kpc).to_value(u.km / u.s, equivalencies=u.dimensionless_angles())
    assert K_KMS_PER_MASYR_KPC == pytest.approx(k, rel=1e-13)


# ---------------------------------------------------------------------------------------------------------
# unit_vectors, radec_to_lb, tangent_basis
# ---------------------------------------------------------------------------------------------------------


def test_unit_vectors_of_the_axes():
    v = unit_vectors([0.0, np.pi / 2, 1.234, np.pi], [0.0, 0.0, np.pi / 2, 0.0])
    assert v.shape == (3, 4)
    np.testing.assert_allclose(v.T, [[1, 0, 0], [0, 1, 0], [0, 0, 1], [-1, 0, 0]], atol=1e-15)


def test_radec_to_lb_takes_scalars_and_gives_longitude_in_0_2pi(rng):
    l, b = radec_to_lb(0.3, -0.4)
    assert np.ndim(l) == 0 and np.ndim(b) == 0
    ra, dec = _random_sky(rng, 5000)
    l, b = radec_to_lb(ra, dec)
    assert l.shape == b.shape == (5000,)
    assert np.all((l >= 0.0) & (l < 2.0 * np.pi))
    assert np.all(np.abs(b) <= np.pi / 2)


def test_longitude_just_below_zero_stays_below_2pi(rng):
    # Documented range [0, 2 pi): a direction a hair below l = 0 (Galactic y = -1e-17, say) must come out
    # as l ~ 2 pi - 1e-17, which rounds to 2 pi in float64, or as 0 -- never as 2 pi (= 360 deg, a longitude
    # outside the documented range that compares unequal to 0).
    # The Galactic centre direction as the matrix defines it (its first row), as ra, dec:
    gc = ICRS_TO_GALACTIC[0]
    ra, dec = np.arctan2(gc[1], gc[0]), np.arcsin(gc[2])
    l, _ = radec_to_lb(np.array([ra]), np.array([dec]))
    assert 0.0 <= l[0] < 2.0 * np.pi
    # and a ring of directions within 1e-15 rad of the l = 0 meridian, either side
    n = 2000
    gal = np.stack([np.ones(n), rng.uniform(-1e-15, 1e-15, n), rng.uniform(-0.5, 0.5, n)])
    gal /= np.linalg.norm(gal, axis=0)
    icrs = ICRS_TO_GALACTIC.T @ gal
    l, _ = radec_to_lb(np.arctan2(icrs[1], icrs[0]), np.arcsin(icrs[2]))
    assert np.all((l >= 0.0) & (l < 2.0 * np.pi))


def test_tangent_basis_is_orthonormal_and_right_handed(rng):
    lon, lat = _random_sky(rng, 1000)
    r, e_lon, e_lat = tangent_basis(lon, lat)
    basis = np.stack([r, e_lon, e_lat])  # (3 vectors, 3 components, N)
    gram = np.einsum("aij,bij->jab", basis, basis)
    np.testing.assert_allclose(gram, np.broadcast_to(np.eye(3), gram.shape), atol=1e-15)
    # r x e_lon = e_lat: east and north as seen from inside the sphere, the sky convention
    np.testing.assert_allclose(np.cross(r.T, e_lon.T), e_lat.T, atol=1e-15)
    np.testing.assert_allclose(r, unit_vectors(lon, lat), atol=0)


def test_tangent_basis_points_toward_increasing_lon_and_lat():
    # d r_hat / d lon = cos(lat) e_lon and d r_hat / d lat = e_lat (central differences)
    lon = np.array([0.1, 2.0, 4.5])
    lat = np.array([-1.0, 0.2, 1.3])
    h = 1e-6
    _, e_lon, e_lat = tangent_basis(lon, lat)
    d_lon = (unit_vectors(lon + h, lat) - unit_vectors(lon - h, lat)) / (2 * h)
    d_lat = (unit_vectors(lon, lat + h) - unit_vectors(lon, lat - h)) / (2 * h)
    np.testing.assert_allclose(d_lon, np.cos(lat) * e_lon, atol=1e-9)
    np.testing.assert_allclose(d_lat, e_lat, atol=1e-9)
    assert np.all(e_lon[2] == 0.0)  # east is parallel to the equator


@FAST
@given(lon=lons, lat=lats)
def test_tangent_basis_orthonormal_property(lon, lat):
    r, e_lon, e_lat = (v[:, 0] for v in tangent_basis(np.array([lon]), np.array([lat])))
    for v in (r, e_lon, e_lat):
        assert np.dot(v, v) == pytest.approx(1.0, abs=1e-14)
    for v, w in ((r, e_lon), (r, e_lat), (e_lon, e_lat)):
        assert abs(np.dot(v, w)) <= 1e-14


@FAST
@given(ra=lons, dec=lats)
def test_radec_to_lb_round_trip_property(ra, dec):
    l, b = radec_to_lb(np.array([ra]), np.array([dec]))
    # back to ICRS with the transpose: the same direction
    back = ICRS_TO_GALACTIC.T @ unit_vectors(l, b)
    np.testing.assert_allclose(back, unit_vectors(np.array([ra]), np.array([dec])), atol=1e-14)
    # and the Galactic vector is the matrix times the ICRS vector
    np.testing.assert_allclose(unit_vectors(l, b), ICRS_TO_GALACTIC @ unit_vectors([ra], [dec]), atol=1e-14)


# ---------------------------------------------------------------------------------------------------------
# proper_motions_to_galactic
# ---------------------------------------------------------------------------------------------------------


def _pm_from_galactic(l, b, pm_l_star, pm_b):
    """ICRS (ra, dec, pmra, pmdec) of a star given in Galactic coordinates: the inverse rotation."""
    _, e_l, e_b = tangent_basis(l, b)
    vec = ICRS_TO_GALACTIC.T @ (e_l * pm_l_star + e_b * pm_b)
    pos = ICRS_TO_GALACTIC.T @ unit_vectors(l, b)
    ra = np.mod(np.arctan2(pos[1], pos[0]), 2 * np.pi)
    dec = np.arctan2(pos[2], np.hypot(pos[0], pos[1]))
    _, e_ra, e_dec = tangent_basis(ra, dec)
    return ra, dec, np.einsum("ij,ij->j", e_ra, vec), np.einsum("ij,ij->j", e_dec, vec)


def test_pm_returns_the_galactic_position(rng):
    ra, dec = _random_sky(rng, 200)
    lon, lat, _, _ = proper_motions_to_galactic(ra, dec, np.ones(200), np.zeros(200))
    l, b = radec_to_lb(ra, dec)
    np.testing.assert_array_equal(lon, l)
    np.testing.assert_array_equal(lat, b)


def test_pm_preserves_the_total_proper_motion(rng):
    ra, dec = _random_sky(rng, 3000)
    pmra, pmdec = rng.normal(0.0, 20.0, (2, 3000))
    _, _, pml, pmb = proper_motions_to_galactic(ra, dec, pmra, pmdec)
    np.testing.assert_allclose(np.hypot(pml, pmb), np.hypot(pmra, pmdec), rtol=1e-13, atol=1e-13)


def test_motion_toward_the_north_galactic_pole_is_pure_pm_b(rng):
    # A star moving along the great circle to the NGP has mu_l* = 0 and mu_b = +|mu| (definition of b).
    ra, dec = _random_sky(rng, 500)
    r, e_ra, e_dec = tangent_basis(ra, dec)
    pole = unit_vectors(np.radians(HIP_ALPHA_G_DEG), np.radians(HIP_DELTA_G_DEG))[:, None]
    toward = pole - np.einsum("ij,ij->j", r, np.broadcast_to(pole, r.shape)) * r
    toward /= np.linalg.norm(toward, axis=0)
    speed = 7.5
    pmra = speed * np.einsum("ij,ij->j", e_ra, toward)
    pmdec = speed * np.einsum("ij,ij->j", e_dec, toward)
    _, _, pml, pmb = proper_motions_to_galactic(ra, dec, pmra, pmdec)
    np.testing.assert_allclose(pml, 0.0, atol=1e-12)
    np.testing.assert_allclose(pmb, speed, rtol=1e-12)


def test_pm_agrees_with_astropy_within_the_frame_difference(rng):
    n = 2000
    ra, dec = _random_sky(rng, n)
    pmra, pmdec = rng.normal(0.0, 30.0, (2, n))
    _, lat, pml, pmb = proper_motions_to_galactic(ra, dec, pmra, pmdec)
    gal = SkyCoord(
        ra=ra * u.rad, dec=dec * u.rad, pm_ra_cosdec=pmra * u.mas / u.yr, pm_dec=pmdec * u.mas / u.yr, frame="icrs"
    ).galactic
    d_pm = np.hypot(pml - gal.pm_l_cosb.to_value(u.mas / u.yr), pmb - gal.pm_b.to_value(u.mas / u.yr))
    # Bound: a frame rotation by eps (|eps| <= ASTROPY_FRAME_BOUND_RAD) turns the local (l, b) basis by at
    # most |eps| (1 + |tan b|) (the usual small-rotation formulae; from memory), so the proper-motion
    # vector changes by at most that angle times |mu|. Factor 2 for the second-order terms and rounding.
    bound = 2.0 * ASTROPY_FRAME_BOUND_RAD * (1.0 + np.abs(np.tan(lat))) * np.hypot(pmra, pmdec) + 1e-12
    assert np.all(d_pm <= bound)
    # and it is genuinely a small angle, not a coincidence of scale: relative to |mu| at |b| < 60 deg
    low = np.abs(lat) < np.radians(60.0)
    assert np.all(d_pm[low] / np.hypot(pmra, pmdec)[low] < 1e-6)


@FAST
@given(l=lons, b=lats, pm_l=pms, pm_b=pms)
def test_pm_round_trip_property(l, b, pm_l, pm_b):
    ra, dec, pmra, pmdec = _pm_from_galactic(np.array([l]), np.array([b]), np.array([pm_l]), np.array([pm_b]))
    _, _, out_l, out_b = proper_motions_to_galactic(ra, dec, pmra, pmdec)
    scale = max(1.0, math.hypot(pm_l, pm_b))
    # Near the poles the position angle of the basis is ill-conditioned (1 / cos b); the bound allows it.
    tol = 1e-12 * scale / math.cos(b)
    assert out_l[0] == pytest.approx(pm_l, abs=tol)
    assert out_b[0] == pytest.approx(pm_b, abs=tol)


@FAST
@given(ra=lons, dec=lats, pmra=pms, pmdec=pms)
def test_pm_norm_property(ra, dec, pmra, pmdec):
    _, _, pml, pmb = proper_motions_to_galactic([ra], [dec], [pmra], [pmdec])
    assert math.hypot(pml[0], pmb[0]) == pytest.approx(math.hypot(pmra, pmdec), rel=1e-12, abs=1e-12)


def test_pm_of_a_single_star_given_as_scalars():
    # The docstring takes "array-like" positions and proper motions; in numpy's sense (and as
    # radec_to_lb in the same module does) a scalar is array-like. One star as plain floats must give the
    # same numbers as the same star in one-element arrays.
    ra, dec, pmra, pmdec = 0.7, -0.3, 4.0, -2.5
    expected = proper_motions_to_galactic(np.array([ra]), np.array([dec]), np.array([pmra]), np.array([pmdec]))
    got = proper_motions_to_galactic(ra, dec, pmra, pmdec)
    for g, e in zip(got, expected):
        assert np.ravel(g) == pytest.approx(np.ravel(e), abs=1e-14)
