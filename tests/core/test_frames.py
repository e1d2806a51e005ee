"""Unit tests of mwkin.frames.SolarFrame: immutability, construction, serialisation, checks."""

from __future__ import annotations

import dataclasses
import json
import math

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import Galactocentric

from mwkin.frames import FrameError, Preset, ReflexProperMotion, SolarFrame
from mwkin.units import UnitMismatchError


@pytest.fixture
def frame():
    return SolarFrame(R0=8.2, z_sun=25.0, v_sun=(11.0, 240.0, 7.0), roll=0.5)


def test_frame_is_immutable(frame):
    with pytest.raises(dataclasses.FrozenInstanceError):
        frame.R0 = 9.0
    assert frame.R0 == 8.2


def test_replace_changes_one_value_and_clears_the_label():
    base = SolarFrame.preset("astropy v4.0")
    assert base.label == "astropy v4.0"
    changed = base.replace(R0=8.3)
    assert changed.R0 == 8.3 and base.R0 == 8.122
    assert changed.v_sun == base.v_sun and changed.z_sun == base.z_sun
    assert changed.label == ""
    assert base.replace(R0=8.3, label="mine").label == "mine"


def test_label_is_not_part_of_equality():
    a = SolarFrame.preset("astropy v4.0")
    assert a == SolarFrame(R0=8.122, z_sun=20.8, v_sun=(12.9, 245.6, 7.78))
    assert a != a.replace(z_sun=20.0)


def test_values_are_plain_floats_after_quantity_input():
    f = SolarFrame(R0=8100 * u.pc, z_sun=0.02 * u.kpc, v_sun=[10, 230, 8] * u.km / u.s, roll=0.01 * u.rad)
    assert f.R0 == pytest.approx(8.1)
    assert f.z_sun == pytest.approx(20.0)
    assert f.v_sun == pytest.approx((10.0, 230.0, 8.0))
    assert f.roll == pytest.approx(math.degrees(0.01))
    assert all(isinstance(v, float) for v in (f.R0, f.z_sun, f.roll, *f.v_sun))


def test_to_dict_round_trip_through_json(frame):
    data = json.loads(json.dumps(frame.to_dict()))
    back = SolarFrame.from_dict(data)
    assert back == frame
    assert back.to_dict() == frame.to_dict()


def test_from_dict_rejects_unknown_keys(frame):
    data = frame.to_dict()
    data["R_0"] = 8.0
    with pytest.raises(FrameError, match="R_0"):
        SolarFrame.from_dict(data)


def test_from_lsr_adds_circular_velocity_to_v():
    f = SolarFrame.from_lsr(R0=8.178, z_sun=20.8, vc=233.4, U=11.1, V=12.24, W=7.25)
    assert f.v_sun == pytest.approx((11.1, 245.64, 7.25))
    assert f.lsr_motion(233.4) == pytest.approx((11.1, 12.24, 7.25))


def test_from_lsr_accepts_quantities():
    kms = u.km / u.s
    f = SolarFrame.from_lsr(8.2 * u.kpc, 0.02 * u.kpc, 220 * kms, 10 * kms, 12000 * u.m / u.s, 7 * kms)
    assert f.v_sun == pytest.approx((10.0, 232.0, 7.0))
    assert f.z_sun == pytest.approx(20.0)


def test_presets_carry_citations_and_build_frames():
    presets = SolarFrame.presets()
    assert {"astropy v4.0", "astropy pre-v4.0", "Schoenrich 2010 + GRAVITY 2019"} <= set(presets)
    for name, preset in presets.items():
        assert isinstance(preset, Preset)
        assert preset.citation and preset.description
        f = SolarFrame.preset(name)
        assert f.label == name
        assert 7.5 < f.R0 < 8.6 and 200 < f.v_sun[1] < 260


def test_presets_returns_a_copy():
    presets = SolarFrame.presets()
    presets.clear()
    assert SolarFrame.presets()


def test_unknown_preset_lists_the_known_names():
    with pytest.raises(KeyError, match="astropy v4.0"):
        SolarFrame.preset("v5")


def test_sun_position_is_near_minus_R0():
    f = SolarFrame.preset("astropy v4.0")
    x, y, z = f.sun_position
    # The Sun sits on the Sun-centre line at distance R0, lifted by z_sun (common practice).
    assert math.hypot(x, z) == pytest.approx(f.R0, rel=1e-12)
    assert y == pytest.approx(0.0, abs=1e-12)
    assert z == pytest.approx(f.z_sun / 1000.0, rel=1e-12)
    assert x < 0


def test_galactocentric_transform_is_a_rotation(frame):
    matrix, offset = frame.galactocentric_transform()
    np.testing.assert_allclose(matrix @ matrix.T, np.eye(3), atol=1e-14)
    assert np.linalg.det(matrix) == pytest.approx(1.0, abs=1e-14)
    assert np.linalg.norm(offset) == pytest.approx(frame.R0, rel=1e-14)


def test_to_astropy_and_back(frame):
    gc = frame.to_astropy()
    assert isinstance(gc, Galactocentric)
    assert gc.galcen_distance.to_value(u.kpc) == pytest.approx(8.2)
    assert gc.z_sun.to_value(u.pc) == pytest.approx(25.0)
    assert gc.roll.to_value(u.deg) == pytest.approx(0.5)
    back = SolarFrame.from_astropy(gc)
    assert back.R0 == pytest.approx(frame.R0, rel=1e-14)
    assert back.v_sun == pytest.approx(frame.v_sun, rel=1e-14)
    assert back.galcen_ra == pytest.approx(frame.galcen_ra, rel=1e-14)
    assert back.galcen_dec == pytest.approx(frame.galcen_dec, rel=1e-14)


def test_from_astropy_of_the_default_galactocentric_frame():
    f = SolarFrame.from_astropy(Galactocentric())
    assert f == SolarFrame.preset("astropy v4.0")


def test_reflex_proper_motion_type_and_total():
    pm = SolarFrame.preset("astropy v4.0").reflex_proper_motion()
    assert isinstance(pm, ReflexProperMotion)
    assert pm.total == pytest.approx(math.hypot(pm.mu_l_star, pm.mu_b))
    assert pm.mu_l_star < 0  # the centre drifts toward negative longitude as the Sun orbits


def test_describe_mentions_the_numbers():
    text = SolarFrame.preset("astropy v4.0").describe()
    assert "astropy v4.0" in text and "8.122" in text and "245.6" in text


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(R0=0.0), "R0 must be positive"),
        (dict(R0=-8.0), "R0 must be positive"),
        (dict(R0=float("nan")), "R0"),
        (dict(z_sun=9000.0, R0=8.0), "z_sun"),
        (dict(v_sun=(1.0, 2.0)), "three components"),
        (dict(v_sun=(1.0, float("inf"), 3.0)), "v_sun"),
        (dict(galcen_dec=95.0), "galcen_dec"),
        (dict(roll=float("nan")), "roll"),
    ],
)
def test_bad_values_raise_frame_error(kwargs, match):
    with pytest.raises(FrameError, match=match):
        SolarFrame(**kwargs)


def test_frame_error_is_a_value_error():
    assert issubclass(FrameError, ValueError)


def test_wrong_unit_names_the_argument():
    with pytest.raises(UnitMismatchError, match="R0"):
        SolarFrame(R0=8.0 * u.km / u.s)
    with pytest.raises(UnitMismatchError, match="v_sun"):
        SolarFrame(v_sun=[1, 2, 3] * u.kpc)
