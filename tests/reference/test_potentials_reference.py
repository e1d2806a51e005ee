"""Potentials against published values and independent formulas (sources beside each check)."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import G
from scipy.special import gamma

from mwkin.potentials import Potential

G_KPC_KMS2_PER_MSUN = G.to_value(u.kpc * (u.km / u.s) ** 2 / u.Msun)


@pytest.fixture(scope="module")
def mw14():
    return Potential.preset("MWPotential2014")


def test_mwpotential2014_circular_velocity_at_8_kpc(mw14):
    # Bovy 2015, ApJS 216, 29, Table 1: vc(R0 = 8 kpc) = 220 km/s [REFERENCES.md: lib].
    assert mw14.vcirc(8.0).to_value(u.km / u.s) == pytest.approx(220.0, abs=1e-9)


def test_mwpotential2014_radial_force_fractions_at_8_kpc(mw14):
    # Bovy 2015, ApJS 216, 29, Table 1: bulge / disc / halo radial-force fractions 0.05 / 0.60 / 0.35 at R0.
    curve = mw14.rotation_curve([8.0])
    fractions = [curve[c].value[0] ** 2 / curve["vc"].value[0] ** 2 for c in ("vc_bulge", "vc_disc", "vc_halo")]
    np.testing.assert_allclose(fractions, [0.05, 0.60, 0.35], atol=1e-12)


def test_mwpotential2014_oort_constants(mw14):
    # REFERENCES.md "Potentials and orbits" [lib]: dvc/dR = -2.7751, A = 15.1376, B = -12.3624,
    # Omega = 27.5, kappa = 36.876 km/s/kpc, from the rotation curve of Bovy 2015's model.
    oort = mw14.oort_constants(8.0)
    assert oort.dvc_dR.to_value(u.km / u.s / u.kpc) == pytest.approx(-2.7751, abs=1e-4)
    assert oort.A.to_value(u.km / u.s / u.kpc) == pytest.approx(15.1376, abs=1e-4)
    assert oort.B.to_value(u.km / u.s / u.kpc) == pytest.approx(-12.3624, abs=1e-4)
    assert oort.Omega.to_value(u.km / u.s / u.kpc) == pytest.approx(27.5, abs=1e-9)
    assert oort.kappa.to_value(u.km / u.s / u.kpc) == pytest.approx(36.876, abs=1e-3)


def test_oort_constants_re_derived_numerically(mw14):
    # Binney & Tremaine 2008, Sect. 3.2.3 (definitions A = (vc/R - dvc/dR)/2, B = -(vc/R + dvc/dR)/2,
    # kappa^2 = -4 B (A - B)); the derivative by a central difference of our own vcirc (common practice).
    R = np.array([5.0, 8.0, 11.0])
    h = 1e-4
    vc = mw14.vcirc(R).value
    dvc = (mw14.vcirc(R + h).value - mw14.vcirc(R - h).value) / (2 * h)
    A = 0.5 * (vc / R - dvc)
    B = -0.5 * (vc / R + dvc)
    oort = mw14.oort_constants(R)
    np.testing.assert_allclose(oort.A.value, A, rtol=1e-7)
    np.testing.assert_allclose(oort.B.value, B, rtol=1e-7)
    np.testing.assert_allclose(oort.kappa.value, np.sqrt(-4 * B * (A - B)), rtol=1e-7)
    np.testing.assert_allclose((oort.A - oort.B).value, oort.Omega.value, rtol=1e-12)


def test_mwpotential2014_potential_at_infinity_is_the_bulge_offset(mw14):
    # galpy's PowerSphericalPotentialwCutoff (Bovy 2015) [lib]: Phi -> 2 pi amp rc^(2 - alpha) Gamma(1 - alpha/2)
    # as r -> inf (the other two components tend to 0). Re-derived here from the bulge's total mass.
    p = {"mass": 4.501365375e9, "alpha": 1.8, "cutoff": 1.9}
    # Total mass M = 2 pi rho_amp rc^(3 - alpha) Gamma(3/2 - alpha/2) with r1 = 8 kpc folded into rho_amp.
    rho_amp_G = (
        G_KPC_KMS2_PER_MSUN * p["mass"] / (2 * math.pi * p["cutoff"] ** (3 - p["alpha"]) * gamma(1.5 - p["alpha"] / 2))
    )
    expected = 2 * math.pi * rho_amp_G * p["cutoff"] ** (2 - p["alpha"]) * gamma(1 - p["alpha"] / 2)
    assert mw14.potential_at_infinity().to_value(u.km**2 / u.s**2) == pytest.approx(expected, rel=1e-8)


def test_hernquist_miyamoto_nagai_nfw_potential_values():
    # Hernquist 1990, ApJ 356, 359: Phi = -G M / (r + a); Miyamoto & Nagai 1975, PASJ 27, 533:
    # Phi = -G M / sqrt(R^2 + (a + sqrt(z^2 + b^2))^2); NFW (Navarro, Frenk & White 1997, ApJ 490, 493):
    # Phi = -G M_s ln(1 + r/a) / r. All zero at infinity (formulas from memory).
    bulge = {"model": "hernquist", "mass": 1e10, "scale": 0.6}
    disc = {"mass": 6e10, "a": 3.2, "b": 0.3}
    halo = {"mass": 5e11, "scale": 18.0}
    pot = Potential.three_component(bulge=bulge, disc=disc, halo=halo)
    R = np.array([0.5, 3.0, 8.0, 8.0, 30.0])
    z = np.array([0.0, 0.2, 0.0, 1.5, 5.0])
    r = np.hypot(R, z)
    expected = -G_KPC_KMS2_PER_MSUN * (
        bulge["mass"] / (r + bulge["scale"])
        + disc["mass"] / np.sqrt(R**2 + (disc["a"] + np.sqrt(z**2 + disc["b"] ** 2)) ** 2)
        + halo["mass"] * np.log1p(r / halo["scale"]) / r
    )
    np.testing.assert_allclose(pot.potential(R, z).to_value(u.km**2 / u.s**2), expected, rtol=1e-10)
    assert pot.potential_at_infinity().value == pytest.approx(0.0, abs=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize(
    "name, R0, vc0, rtol",
    [
        # Irrgang et al. 2013, A&A 549, A137, model I: R0 = 8.4 kpc, vc = 242 km/s [galpy's definition, lib].
        ("Irrgang13I", 8.4, 242.0, 1e-3),
        # McMillan 2017, MNRAS 465, 76: R0 = 8.21 kpc, v0 = 233.1 km/s [pub; galpy's definition, lib].
        ("McMillan17", 8.21, 233.1, 1e-3),
        # Dehnen & Binney 1998, MNRAS 294, 429, model 1: R0 = 8 kpc, v0 = 222 km/s [galpy's definition, lib].
        ("DehnenBinney98I", 8.0, 222.0, 1e-3),
        # Cautun et al. 2020, MNRAS 494, 4291: vc = 229 km/s at R0 = 8.122 kpc [galpy's definition, lib;
        # galpy's realisation of the model gives 230.1, hence the looser tolerance].
        ("Cautun20", 8.122, 229.0, 6e-3),
    ],
)
def test_published_models_circular_velocity_at_their_solar_radius(name, R0, vc0, rtol):
    pot = Potential.preset(name)
    assert pot.vcirc(R0).to_value(u.km / u.s) == pytest.approx(vc0, rel=rtol)
    assert pot.units["ro_kpc"] == pytest.approx(R0)
    # Their energies are defined: the potential at infinity is finite for every preset.
    assert np.isfinite(pot.potential_at_infinity().value)
    # One labelled curve per component, adding up in quadrature (common practice, no source).
    curve = pot.rotation_curve([R0])
    parts = [c for c in curve.colnames if c not in ("R", "vc")]
    assert len(parts) == len(pot.component_names) == len(pot._model.components)
    assert sum(curve[c].value[0] ** 2 for c in parts) == pytest.approx(curve["vc"].value[0] ** 2, rel=1e-10)
