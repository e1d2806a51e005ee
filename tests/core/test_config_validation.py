"""Configuration values of the core objects: types, keys, presets that cannot be changed, unit slips.

Covers SolarFrame(...) / SolarFrame.from_dict, Potential.from_dict / three_component / scaled_to and
the shared helpers in mwkin._validate. Every bad value must give a ValueError subclass naming the key,
the value and the unit; plausible-but-suspicious plain numbers give an ImplausibleValueWarning.
"""

from __future__ import annotations

import dataclasses
import math
import warnings

import astropy.units as u
import numpy as np
import pytest

from mwkin import _validate
from mwkin.frames import FrameError, SolarFrame
from mwkin.potentials import DEFAULT_DISC, Potential, PotentialError
from mwkin.units import ImplausibleValueWarning

GOOD_FRAME = SolarFrame(R0=8.2, z_sun=25.0, v_sun=(11.0, 240.0, 7.0)).to_dict()


def _frame_dict(**changes):
    data = dict(GOOD_FRAME)
    data.update(changes)
    return data


# ---------------------------------------------------------------- SolarFrame.from_dict types


def test_from_dict_refuses_a_string_v_sun_instead_of_taking_it_apart():
    # The bug: tuple("245") gave v_sun = (2, 4, 5).
    with pytest.raises(FrameError, match=r"v_sun.*three components.*km/s.*'245'"):
        SolarFrame.from_dict({"v_sun_kms": "245"})
    with pytest.raises(FrameError, match=r"v_sun.*'245'"):
        SolarFrame.from_dict(_frame_dict(v_sun_kms="245"))


@pytest.mark.parametrize(
    "key, value, unit",
    [
        ("R0_kpc", "8.2", "kpc"),
        ("R0_kpc", True, "kpc"),
        ("z_sun_pc", False, "pc"),
        ("z_sun_pc", None, "pc"),
        ("z_sun_pc", [20.8], "pc"),
        ("roll_deg", "0", "deg"),
        ("galcen_ra_deg", {"value": 266.4}, "deg"),
    ],
)
def test_from_dict_refuses_wrong_scalar_types(key, value, unit):
    with pytest.raises(FrameError) as err:
        SolarFrame.from_dict(_frame_dict(**{key: value}))
    message = str(err.value)
    assert key.rsplit("_", 1)[0] in message and unit in message and repr(value)[:10] in message


@pytest.mark.parametrize(
    "value, fragment",
    [
        ([1.0, 2.0], "got 2"),
        ([1.0, 2.0, 3.0, 4.0], "got 4"),
        ([[12.9, 245.6, 7.78]], "got 1"),
        ([[1.0], [2.0], [3.0]], "v_sun_kms[0] (vx)"),
        ([12.9, True, 7.78], "v_sun_kms[1] (vy)"),
        ([12.9, "245.6", 7.78], "v_sun_kms[1] (vy)"),
        ({"vx": 1, "vy": 2, "vz": 3}, "three components"),
        (245.6, "three components"),
    ],
)
def test_from_dict_refuses_malformed_v_sun(value, fragment):
    with pytest.raises(FrameError) as err:
        SolarFrame.from_dict(_frame_dict(v_sun_kms=value))
    assert fragment in str(err.value) and "km/s" in str(err.value)


@pytest.mark.parametrize("key", ["R0_kpc", "z_sun_pc", "v_sun_kms", "roll_deg", "galcen_ra_deg", "galcen_dec_deg"])
def test_from_dict_missing_key_is_an_error_naming_it(key):
    data = _frame_dict()
    del data[key]
    with pytest.raises(FrameError, match=f"missing required key.*{key}"):
        SolarFrame.from_dict(data)


def test_from_dict_label_is_optional_and_must_be_text():
    data = _frame_dict()
    del data["label"]
    assert SolarFrame.from_dict(data) == SolarFrame.from_dict(GOOD_FRAME)
    with pytest.raises(FrameError, match="label must be a string, got 5"):
        SolarFrame.from_dict(_frame_dict(label=5))


@pytest.mark.parametrize("data", [None, [("R0_kpc", 8.0)], "R0_kpc=8", 8.0])
def test_from_dict_needs_a_mapping(data):
    with pytest.raises(FrameError, match="solar frame must be a dict"):
        SolarFrame.from_dict(data)


def test_from_dict_accepts_numpy_numbers_and_keeps_values_exactly():
    data = _frame_dict(R0_kpc=np.float64(8.3), v_sun_kms=np.array([11.0, 245.0, 7.0]), z_sun_pc=np.int64(20))
    frame = SolarFrame.from_dict(data)
    assert frame.R0 == 8.3 and frame.z_sun == 20.0 and frame.v_sun == (11.0, 245.0, 7.0)


# ---------------------------------------------------------------- SolarFrame(...) types


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(R0="8.2"), "R0 must be a real number in kpc, got '8.2'"),
        (dict(R0=True), "R0 must be a real number in kpc, got True"),
        (dict(z_sun="20"), "z_sun must be a real number in pc"),
        (dict(v_sun="245"), "v_sun must have three components"),
        (dict(v_sun=(1.0, 2.0, None)), "v_sun[2] (vz)"),
        (dict(roll=[0.0]), "roll must be a real number in deg"),
        (dict(R0=[8.0, 8.1] * u.kpc), "R0 must be a single real number in kpc"),
    ],
)
def test_constructor_refuses_wrong_types(kwargs, fragment):
    with pytest.raises(FrameError) as err:
        SolarFrame(**kwargs)
    assert fragment in str(err.value)


@pytest.mark.parametrize(
    "name, value, unit",
    [
        ("R0", math.inf, "kpc"),
        ("R0", -math.inf, "kpc"),
        ("R0", math.nan, "kpc"),
        ("z_sun", math.inf, "pc"),
        ("z_sun", math.nan, "pc"),
    ],
)
def test_non_finite_scalars_are_errors_naming_parameter_and_unit(name, value, unit):
    with pytest.raises(FrameError, match=rf"{name} must be finite, got {value} {unit}"):
        SolarFrame(**{name: value})


def test_non_finite_v_sun_names_the_component_and_unit():
    with pytest.raises(FrameError, match=r"v_sun\[0\] \(vx\) must be finite, got nan km/s"):
        SolarFrame(v_sun=(math.nan, 240.0, 7.0))
    with pytest.raises(FrameError, match=r"vc must be finite, got inf km/s"):
        SolarFrame.from_lsr(8.2, 20.8, math.inf, 11.1, 12.24, 7.25)


# ---------------------------------------------------------------- presets cannot be changed


def test_frame_presets_cannot_be_changed_through_presets():
    before = SolarFrame.preset("astropy v4.0")
    presets = SolarFrame.presets()
    with pytest.raises(TypeError):
        presets["astropy v4.0"].params["R0"] = 1.0
    with pytest.raises(TypeError):
        presets["astropy v4.0"].params["v_sun"][1] = 0.0  # a tuple, not a list
    presets["astropy v4.0"] = None  # the returned dict is the caller's own copy
    assert SolarFrame.presets()["astropy v4.0"] is not None
    assert SolarFrame.preset("astropy v4.0") == before
    assert SolarFrame.preset("astropy v4.0").R0 == 8.122


def test_potential_presets_and_defaults_cannot_be_changed():
    presets = Potential.presets()
    presets.clear()
    assert "MWPotential2014" in Potential.presets()
    with pytest.raises(TypeError):
        DEFAULT_DISC["mass"] = 1.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        Potential.presets()["MWPotential2014"].citation = "changed"
    assert Potential.presets()["MWPotential2014"].citation == "Bovy 2015, ApJS 216, 29"


# ---------------------------------------------------------------- implausible values warn


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(z_sun=0.0208), "z_sun = 0.0208 pc"),
        (dict(z_sun=-0.5), "z_sun = -0.5 pc"),
        (dict(R0=8122.0, z_sun=20.8), "R0 = 8122 kpc"),
        (dict(R0=100.0), "R0 = 100 kpc"),
        (dict(R0=0.5, z_sun=20.8), "R0 = 0.5 kpc"),
        (dict(v_sun=(12.9, 245600.0, 7.78)), "v_sun[1] (vy) = 245600 km/s"),
        (dict(v_sun=(-1500.0, 245.6, 7.78)), "v_sun[0] (vx) = -1500 km/s"),
    ],
)
def test_implausible_plain_numbers_warn_naming_value_and_unit(kwargs, fragment):
    with pytest.warns(ImplausibleValueWarning, match=re_escape(fragment)) as record:
        frame = SolarFrame(**kwargs)
    # The value is used as given (a warning, not a silent change).
    for key, value in kwargs.items():
        assert getattr(frame, key) == pytest.approx(value)
    # The warning points at this file, not at mwkin's internals.
    assert record[0].filename == __file__


def re_escape(text):
    import re

    return re.escape(text)


def test_plausible_values_and_quantities_do_not_warn():
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImplausibleValueWarning)
        SolarFrame(R0=8.2, z_sun=0.0, v_sun=(11.0, 240.0, 7.0))  # z_sun = 0 exactly is a deliberate choice
        SolarFrame(R0=8.2, z_sun=1.0)
        SolarFrame(z_sun=0.0208 * u.kpc)  # a stated unit is no slip
        SolarFrame(R0=8122 * u.pc)
        frame = SolarFrame(z_sun=0.5 * u.pc)
        frame.replace(R0=8.3)  # an unchanged value is not re-checked as a plain number
        SolarFrame.from_dict(GOOD_FRAME)
        SolarFrame.from_lsr(8.2, 20.8, 233.0, 11.1, 12.24, 7.25)


def test_from_lsr_warns_for_an_implausible_circular_speed():
    with pytest.warns(ImplausibleValueWarning) as record:
        frame = SolarFrame.from_lsr(8.2, 20.8, 2330.0, 11.1, 12.24, 7.25)
    messages = [str(w.message) for w in record]
    assert any("vc = 2330 km/s" in m for m in messages)
    assert any("v_sun[1] (vy) = 2342.24 km/s" in m for m in messages)  # the resulting v_sun, named too
    assert frame.v_sun[1] == pytest.approx(2342.24)


def test_from_dict_warns_for_z_sun_in_kpc():
    with pytest.warns(ImplausibleValueWarning, match="z_sun = 0.0208 pc"):
        frame = SolarFrame.from_dict(_frame_dict(z_sun_pc=0.0208))
    assert frame.z_sun == 0.0208


def test_scaled_to_warns_for_an_implausible_circular_speed():
    pot = Potential.preset("MWPotential2014")
    with pytest.warns(ImplausibleValueWarning, match="vc = 2200 km/s"):
        scaled = pot.scaled_to(2200.0)
    assert scaled.vcirc(8.0).value == pytest.approx(2200.0, rel=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImplausibleValueWarning)
        pot.scaled_to(230.0)


# ---------------------------------------------------------------- Potential.from_dict

THREE = {
    "kind": "three_component",
    "name": "mine",
    "bulge": {"model": "hernquist", "mass": 1e10, "scale": 0.6},
    "disc": {"mass": 6e10, "a": 3.0, "b": 0.3},
    "halo": {"mass": 4e11, "scale": 16.0},
}


def _three(**changes):
    import copy

    data = copy.deepcopy(THREE)
    for key, value in changes.items():
        if "." in key:
            part, name = key.split(".")
            if value is _DELETE:
                del data[part][name]
            else:
                data[part][name] = value
        elif value is _DELETE:
            del data[key]
        else:
            data[key] = value
    return data


_DELETE = object()


def test_three_component_from_dict_round_trip_is_exact():
    pot = Potential.from_dict(THREE)
    assert pot.to_dict() == THREE


@pytest.mark.parametrize(
    "key, fragment",
    [
        ("disc.mass", "disc parameter 'mass' (Msun) is required"),
        ("disc.b", "disc parameter 'b' (kpc) is required"),
        ("halo.scale", "halo parameter 'scale' (kpc) is required"),
        ("bulge.model", "bulge: missing required key(s) 'model'"),
        ("disc", "missing required key(s) 'disc'"),
        ("halo", "missing required key(s) 'halo'"),
    ],
)
def test_from_dict_has_no_silent_defaults(key, fragment):
    # The bug: a missing parameter silently took MWPotential2014's value.
    with pytest.raises(PotentialError) as err:
        Potential.from_dict(_three(**{key: _DELETE}))
    assert fragment in str(err.value)


@pytest.mark.parametrize(
    "key, value, fragment",
    [
        ("disc.mass", "6e10", "disc.mass must be a real number in Msun, got '6e10'"),
        ("disc.a", True, "disc.a must be a real number in kpc, got True"),
        ("halo.scale", [16.0], "halo.scale must be a real number in kpc, got [16.0]"),
        ("bulge.scale", None, "bulge.scale must be a real number in kpc, got None"),
        ("disc", [6e10, 3.0, 0.3], "disc must be a dict"),
        ("bulge.model", 3, "bulge model must be 'power_law_cutoff' or 'hernquist', got 3"),
        ("name", 7, "name must be a string, got 7"),
        ("kind", ["preset"], "unknown potential kind ['preset']"),
        ("extra", 1, "unknown three_component key(s) ['extra']"),
    ],
)
def test_from_dict_refuses_wrong_types(key, value, fragment):
    with pytest.raises(PotentialError) as err:
        Potential.from_dict(_three(**{key: value}))
    assert fragment in str(err.value)


@pytest.mark.parametrize(
    "data, fragment",
    [
        ({}, "missing required key(s) 'kind'"),
        ({"kind": "preset"}, "missing required key(s) 'name'"),
        ({"kind": "preset", "name": 2014}, "name must be a string, got 2014"),
        (
            {"kind": "preset", "name": "MWPotential2014", "scaled_to": {"vc_kms": 230}},
            "scaled_to: missing required key(s) 'R_kpc' (kpc)",
        ),
        (
            {"kind": "preset", "name": "MWPotential2014", "scaled_to": {"vc_kms": "230", "R_kpc": 8}},
            "scaled_to.vc_kms must be a real number in km/s, got '230'",
        ),
        ({"kind": "preset", "name": "MWPotential2014", "scaled_to": [230, 8]}, "scaled_to must be a dict"),
        ("MWPotential2014", "potential must be a dict"),
    ],
)
def test_from_dict_refuses_missing_and_malformed_keys(data, fragment):
    with pytest.raises(PotentialError) as err:
        Potential.from_dict(data)
    assert fragment in str(err.value)


def test_three_component_keeps_documented_defaults_but_refuses_wrong_types():
    # The constructor documents defaults for missing parameters; that stays. Wrong types do not.
    default = Potential.three_component(disc={"mass": 6e10})
    assert default.to_dict()["disc"] == {"mass": 6e10, "a": DEFAULT_DISC["a"], "b": DEFAULT_DISC["b"]}
    with pytest.raises(PotentialError, match="disc.mass must be a real number in Msun, got '6e10'"):
        Potential.three_component(disc={"mass": "6e10"})
    with pytest.raises(PotentialError, match="disc must be a dict"):
        Potential.three_component(disc=6e10)
    with pytest.raises(PotentialError, match="name must be a string"):
        Potential.three_component(name=None)


# ---------------------------------------------------------------- the helpers themselves


def test_helpers_raise_the_callers_error_class():
    class MyError(ValueError):
        pass

    with pytest.raises(MyError, match="x must be a real number in kpc, got 'a'"):
        _validate.real_number("a", "x", "kpc", MyError)
    assert _validate.real_number(3, "x", "kpc", MyError) == 3.0
    assert _validate.real_number(2 * u.pc, "x", "kpc", MyError) == pytest.approx(0.002)
    assert _validate.real_vector([1, 2], "v", "km/s", MyError, components=("a", "b")) == (1.0, 2.0)
    with pytest.raises(MyError, match="v must have two components"):
        _validate.real_vector("12", "v", "km/s", MyError, components=("a", "b"))
    with pytest.raises(MyError, match=r"thing: missing required key\(s\) 'k' \(kpc\)"):
        _validate.check_keys({}, "thing", MyError, required={"k": "kpc"})


# ---------------------------------------------------------------------- distance choices
@pytest.mark.parametrize(
    "data, words",
    [
        ({"method": "inverse_parallax", "min_snr": "5"}, "min_snr must be a real number"),
        ({"method": "inverse_parallax", "zero_point_mas": True}, "zero_point_mas must be a real number in mas"),
        ({"method": "distance_column", "column": 3}, "column"),
        (["method"], "must be a dict"),
        ({"method": ["inverse_parallax"]}, "unknown distance method"),
        ({"method": "inverse_parallax", "cut": 5}, "unknown keys ['cut']"),
    ],
)
def test_distance_from_dict_names_the_bad_key(data, words):
    from mwkin.distances import DistanceError, distance_from_dict

    with pytest.raises(DistanceError) as info:
        distance_from_dict(data)
    assert words in str(info.value)


def test_distance_from_dict_round_trips():
    from mwkin.distances import DistanceColumn, InverseParallax, distance_from_dict

    for choice in (InverseParallax(min_snr=3.0, zero_point_mas=-0.017), DistanceColumn("d_kpc")):
        assert distance_from_dict(choice.to_dict()) == choice
