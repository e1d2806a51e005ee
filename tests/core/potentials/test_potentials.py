"""Unit tests of mwkin.potentials: construction, validation, serialisation and derived quantities."""

from __future__ import annotations

import json
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import G

from mwkin.frames import SolarFrame
from mwkin.potentials import (
    DEFAULT_BULGE,
    NotSerialisableError,
    Potential,
    PotentialError,
    UnknownPotentialError,
)
from mwkin.units import UnitMismatchError

G_KPC_KMS2_PER_MSUN = G.to_value(u.kpc * (u.km / u.s) ** 2 / u.Msun)


@pytest.fixture(scope="module")
def mw14():
    return Potential.preset("MWPotential2014")


def test_importing_the_core_pulls_in_no_widget_library():
    # common practice (no source): the core must run without the widget stack. A fresh interpreter,
    # because other test files in the same session may import widgets.
    code = (
        "import sys, mwkin.potentials, mwkin.orbits; "
        "print(sorted({'ipywidgets', 'bqplot', 'anywidget', 'traitlets'} & set(sys.modules)))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_presets_list_names_with_citations():
    presets = Potential.presets()
    assert list(presets) == ["MWPotential2014", "McMillan17", "Cautun20", "Irrgang13I", "DehnenBinney98I"]
    assert presets["MWPotential2014"].citation == "Bovy 2015, ApJS 216, 29"
    assert all(p.citation and p.description for p in presets.values())


def test_unknown_preset_names_the_known_ones():
    with pytest.raises(UnknownPotentialError, match="MWPotential2O14.*known: MWPotential2014, McMillan17") as err:
        Potential.preset("MWPotential2O14")
    assert isinstance(err.value, ValueError) and isinstance(err.value, KeyError)


def test_presets_are_built_once_and_shared():
    a = Potential.preset("Irrgang13I")
    b = Potential.preset("Irrgang13I")
    assert a._model is b._model
    assert a.component_names == ("bulge", "disc", "halo")


def test_three_component_defaults_are_mwpotential2014(mw14):
    # Bovy 2015, ApJS 216, 29 (galpy's MWPotential2014 as the reference implementation).
    default = Potential.three_component()
    R = np.array([0.3, 1.0, 4.0, 8.0, 15.0, 40.0])
    np.testing.assert_allclose(default.vcirc(R).value, mw14.vcirc(R).value, rtol=1e-9)
    # The defaults carry 10 significant digits; near 40 kpc the potential is a difference of large terms.
    np.testing.assert_allclose(default.potential(R, 0.5).value, mw14.potential(R, 0.5).value, rtol=0, atol=1e-3)
    assert default.vcirc(8.0).to_value(u.km / u.s) == pytest.approx(220.0, rel=1e-9)


def test_three_component_hernquist_bulge_has_the_analytic_rotation_curve():
    # Hernquist 1990, ApJ 356, 359: vc^2 = G M r / (r + a)^2 (from memory).
    mass, a = 1.2e10, 0.7
    pot = Potential.three_component(bulge={"model": "hernquist", "mass": mass, "scale": a})
    R = np.array([0.2, 1.0, 5.0, 30.0])
    vc = pot.rotation_curve(R)["vc_bulge"].to_value(u.km / u.s)
    np.testing.assert_allclose(vc**2, G_KPC_KMS2_PER_MSUN * mass * R / (R + a) ** 2, rtol=1e-10)


def test_three_component_masses_have_the_stated_meaning():
    # Miyamoto & Nagai 1975, PASJ 27, 533 (mid-plane vc^2 = G M R^2 / (R^2 + (a + b)^2)^(3/2));
    # Navarro, Frenk & White 1997, ApJ 490, 493 (M(r) = M_s [ln(1 + x) - x / (1 + x)]) - both from memory.
    disc = {"mass": 5e10, "a": 2.5, "b": 0.3}
    halo = {"mass": 8e11, "scale": 20.0}
    pot = Potential.three_component(disc=disc, halo=halo)
    R = np.array([1.0, 8.0, 50.0])
    curve = pot.rotation_curve(R)
    vc_disc2 = G_KPC_KMS2_PER_MSUN * disc["mass"] * R**2 / (R**2 + (disc["a"] + disc["b"]) ** 2) ** 1.5
    x = R / halo["scale"]
    vc_halo2 = G_KPC_KMS2_PER_MSUN * halo["mass"] * (np.log1p(x) - x / (1 + x)) / R
    np.testing.assert_allclose(curve["vc_disc"].value ** 2, vc_disc2, rtol=1e-10)
    np.testing.assert_allclose(curve["vc_halo"].value ** 2, vc_halo2, rtol=1e-10)
    # The power-law bulge's mass is its total mass: far outside the cut-off it acts as a point mass.
    far = pot.rotation_curve([60.0])["vc_bulge"].value[0]
    assert far**2 == pytest.approx(G_KPC_KMS2_PER_MSUN * DEFAULT_BULGE["mass"] / 60.0, rel=1e-8)


def test_three_component_accepts_quantities():
    a = Potential.three_component(disc={"mass": 6e10 * u.Msun, "a": 3000 * u.pc, "b": 0.28 * u.kpc})
    b = Potential.three_component(disc={"mass": 6e10, "a": 3.0, "b": 0.28})
    assert a.vcirc(8.0).value == pytest.approx(b.vcirc(8.0).value, rel=1e-12)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"disc": {"mass": -1.0}}, r"disc.mass must be a finite number > 0.0 Msun, got -1.0"),
        ({"halo": {"scale": np.nan}}, r"halo.scale must be a finite number > 0.0 kpc"),
        ({"disc": {"mass": 1e10, "height": 0.3}}, r"unknown disc parameter\(s\) \['height'\]"),
        ({"bulge": {"model": "plummer"}}, r"bulge model must be 'power_law_cutoff' or 'hernquist'"),
        ({"bulge": {"model": "hernquist", "mass": 1e10}}, r"bulge parameter 'scale' \(kpc\) is required"),
        ({"bulge": {"alpha": 3.5}}, r"bulge.alpha must be < 3"),
    ],
)
def test_three_component_rejects_bad_parameters(kwargs, message):
    with pytest.raises(PotentialError, match=message):
        Potential.three_component(**kwargs)


def test_three_component_rejects_wrong_units():
    with pytest.raises(UnitMismatchError, match="disc.a"):
        Potential.three_component(disc={"a": 3 * u.km / u.s})


def test_scaled_to_sets_vc_and_scales_the_whole_curve(mw14):
    scaled = mw14.scaled_to(240 * u.km / u.s, R=8.2 * u.kpc)
    assert scaled.vcirc(8.2).to_value(u.km / u.s) == pytest.approx(240.0, rel=1e-12)
    R = np.array([1.0, 5.0, 20.0])
    ratio = scaled.vcirc(R) / mw14.vcirc(R)
    np.testing.assert_allclose(ratio.value, 240.0 / mw14.vcirc(8.2).value, rtol=1e-12)
    # Rescaling a rescaled model starts from the original again.
    again = scaled.scaled_to(200.0, 8.0)
    assert again.vcirc(8.0).value == pytest.approx(200.0, rel=1e-12)
    with pytest.raises(PotentialError, match="positive vc"):
        mw14.scaled_to(-5.0)


def test_to_dict_round_trip_through_json(mw14):
    custom = Potential.three_component(bulge={"model": "hernquist", "mass": 9e9, "scale": 0.5}).scaled_to(230, 8.1)
    for pot in (mw14, custom, mw14.scaled_to(250, 8.3)):
        data = json.loads(json.dumps(pot.to_dict()))
        back = Potential.from_dict(data)
        R = np.array([2.0, 8.0, 25.0])
        np.testing.assert_allclose(back.vcirc(R).value, pot.vcirc(R).value, rtol=1e-12)
        assert back.describe() == pot.describe()
    with pytest.raises(PotentialError, match="unknown potential kind 'bar'"):
        Potential.from_dict({"kind": "bar"})


def test_from_galpy_wraps_and_is_not_serialisable(mw14):
    from galpy.potential import MWPotential2014

    wrapped = Potential.from_galpy(MWPotential2014)
    assert wrapped.units == {"ro_kpc": 8.0, "vo_kms": 220.0}
    assert wrapped.component_names == ("PowerSphericalPotentialwCutoff", "MiyamotoNagaiPotential", "NFWPotential")
    np.testing.assert_allclose(wrapped.vcirc([3.0, 9.0]).value, mw14.vcirc([3.0, 9.0]).value, rtol=1e-13)
    assert not wrapped.is_serialisable
    with pytest.raises(NotSerialisableError, match="built from a galpy object"):
        wrapped.to_dict()
    with pytest.raises(PotentialError, match="expected a 3D galpy potential"):
        Potential.from_galpy("MWPotential2014")


def test_from_galpy_refuses_units_that_contradict_the_potential():
    from galpy.potential import MiyamotoNagaiPotential

    built = MiyamotoNagaiPotential(amp=1.0, a=0.5, b=0.05, ro=8.3, vo=230.0)
    with pytest.raises(PotentialError, match=r"ro=8.0 kpc contradicts the ro=8.3 kpc"):
        Potential.from_galpy(built, ro=8.0)
    assert Potential.from_galpy(built).units == {"ro_kpc": 8.3, "vo_kms": 230.0}


def test_rotation_curve_components_add_in_quadrature(mw14):
    curve = mw14.rotation_curve(np.linspace(0.5, 30, 7) * u.kpc)
    assert curve.colnames == ["R", "vc", "vc_bulge", "vc_disc", "vc_halo"]
    total2 = sum(curve[c].value ** 2 for c in ("vc_bulge", "vc_disc", "vc_halo"))
    np.testing.assert_allclose(total2, curve["vc"].value ** 2, rtol=1e-12)
    assert curve["vc"].unit == u.km / u.s


def test_derived_quantities_reject_bad_radii(mw14):
    with pytest.raises(PotentialError, match=r"R must be positive and finite \(kpc\), got \[-1.0\]"):
        mw14.vcirc([-1.0, 8.0])
    with pytest.raises(UnitMismatchError, match=r"^R: got a value in km / s, expected a unit convertible to kpc"):
        mw14.oort_constants(8 * u.km / u.s)


def test_vertical_frequency_matches_a_finite_difference(mw14):
    # common practice (no source): nu^2 = d^2 Phi / dz^2 at z = 0, by central differences.
    R, h = np.array([4.0, 8.0, 12.0]), 1e-3
    d2 = (mw14.potential(R, h).value - 2 * mw14.potential(R, 0.0).value + mw14.potential(R, -h).value) / h**2
    np.testing.assert_allclose(mw14.vertical_frequency(R).value ** 2, d2, rtol=1e-5)


def test_escape_speed_of_a_point_mass():
    # Kepler: v_esc = sqrt(2 G M / r) (from memory; any mechanics text).
    from galpy.potential import KeplerPotential

    pot = Potential.from_galpy(KeplerPotential(amp=1.0), ro=8.0, vo=220.0)
    gm = 220.0**2 * 8.0  # G M in kpc (km/s)^2 for amp = 1 natural unit
    r = np.array([2.0, 8.0, 20.0])
    np.testing.assert_allclose(pot.escape_speed(r).value, np.sqrt(2 * gm / r), rtol=1e-12)
    np.testing.assert_allclose(pot.escape_speed(r, r_max=40.0).value, np.sqrt(2 * gm * (1 / r - 1 / 40.0)), rtol=1e-12)


def test_escape_speed_is_measured_against_the_potential_at_infinity(mw14):
    v = mw14.escape_speed(8.0).to_value(u.km / u.s)
    phi = mw14.potential(8.0).to_value(u.km**2 / u.s**2)
    assert v == pytest.approx(np.sqrt(2 * (mw14.potential_at_infinity().value - phi)), rel=1e-12)
    assert mw14.escape_speed(8.0, r_max=200.0).value < v
    assert "Phi(infinity) = 65094.1 km^2/s^2" in mw14.describe_zero_point()


def test_circular_velocity_at_sun_uses_the_in_plane_radius(mw14):
    frame = SolarFrame(R0=8.0, z_sun=500.0, v_sun=(11.1, 232.0, 7.3))
    R_in = np.sqrt(8.0**2 - 0.5**2)
    assert mw14.circular_velocity_at_sun(frame).value == pytest.approx(mw14.vcirc(R_in).value, rel=1e-14)
    rec = mw14.reconcile(frame)
    assert rec["R_sun_inplane_kpc"] == pytest.approx(R_in)
    assert rec["v_phi_sun_minus_vc_kms"] == pytest.approx(232.0 - rec["vc_at_sun_kms"])


def test_describe_names_model_citation_and_units(mw14):
    text = mw14.scaled_to(230, 8.0).describe()
    assert "MWPotential2014 (Bovy 2015, ApJS 216, 29)" in text
    assert "scaled to vc(8 kpc) = 230 km/s" in text
    assert "ro=8 kpc" in text


def test_oort_constants_old_keyword_still_works_with_a_deprecation_warning(mw14):
    # R0 is the Sun-centre distance elsewhere in mwkin; the argument here is the in-plane radius R.
    with pytest.warns(DeprecationWarning, match=r"oort_constants\(R=\.\.\.\)"):
        old = mw14.oort_constants(R0=8.0)
    new = mw14.oort_constants(R=8.0)
    assert old.A == new.A and old.B == new.B
    assert mw14.oort_constants(8.0).A == new.A
