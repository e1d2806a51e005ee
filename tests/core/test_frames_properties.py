"""Property tests: configuration and command-line input either work exactly or fail clearly.

For SolarFrame(...), SolarFrame.from_dict, Potential.from_dict, Potential.three_component and the
command line's options, every input drawn here must give either a ValueError subclass whose message
names the key or option, the value and the unit, or a result that holds exactly the values given
(never a silent change). Example counts are kept small so the file runs in seconds.
"""

from __future__ import annotations

import copy
import json
import math
import warnings

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from mwkin.frames import FrameError, SolarFrame
from mwkin.potentials import Potential, PotentialError
from mwkin.units import ImplausibleValueWarning

FAST = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])

numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64), st.integers(min_value=-(10**6), max_value=10**6)
)
junk = st.one_of(
    st.text(max_size=6),
    st.booleans(),
    st.none(),
    st.lists(numbers, max_size=4),
    st.dictionaries(st.text(max_size=3), numbers, max_size=2),
    st.lists(st.lists(numbers, min_size=1, max_size=3), min_size=1, max_size=3),
)
values = st.one_of(numbers, junk)

UNITS = {"R0": "kpc", "z_sun": "pc", "v_sun": "km/s"}


def _plain_real(x):
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _build(factory):
    """Run ``factory`` recording warnings; returns (result or error, warnings)."""
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("always")
        try:
            return factory(), [w for w in record if issubclass(w.category, ImplausibleValueWarning)]
        except ValueError as exc:
            return exc, []


def _expect_frame(result, given_values, names_in_message):
    """Either a FrameError naming one of the parameters and its unit, or the values exactly."""
    if isinstance(result, Exception):
        assert isinstance(result, FrameError), repr(result)
        message = str(result)
        named = [n for n in names_in_message if n in message]
        assert named, message
        assert any(UNITS.get(n.split("_kpc")[0].split("_pc")[0].split("_kms")[0], "") in message for n in named), (
            message
        )
        return False
    for name, value in given_values.items():
        got = getattr(result, name)
        if name == "v_sun":
            assert got == tuple(float(v) for v in value)
        else:
            assert got == float(value)
    return True


@FAST
@given(R0=values, z_sun=values, v_sun=st.one_of(st.lists(numbers, min_size=3, max_size=3), junk))
def test_solar_frame_constructor_is_exact_or_a_named_error(R0, z_sun, v_sun):
    result, warned = _build(lambda: SolarFrame(R0=R0, z_sun=z_sun, v_sun=v_sun))
    if _expect_frame(result, {"R0": R0, "z_sun": z_sun, "v_sun": v_sun}, ["R0", "z_sun", "v_sun"]):
        # Success needs real, finite numbers: never a string, a boolean or a nested list.
        assert _plain_real(R0) and _plain_real(z_sun) and all(_plain_real(v) for v in v_sun)
        implausible = (not 1.0 <= R0 < 100.0) or 0 < abs(z_sun) < 1.0 or any(abs(v) > 1000 for v in v_sun)
        assert bool(warned) == implausible
        for w in warned:  # each warning names a value and the unit it was taken in
            assert any(f"{n} = " in str(w.message) or f"{n}[" in str(w.message) for n in UNITS)
            assert any(unit in str(w.message) for unit in UNITS.values())


GOOD = SolarFrame(R0=8.2, z_sun=25.0, v_sun=(11.0, 240.0, 7.0), label="mine").to_dict()
KEYS = sorted(GOOD)


@FAST
@given(key=st.sampled_from(KEYS + ["R_0", "zsun_pc"]), action=st.sampled_from(["set", "delete"]), value=values)
def test_solar_frame_from_dict_is_exact_or_names_the_key(key, action, value):
    data = copy.deepcopy(GOOD)
    if action == "delete":
        data.pop(key, None)
    else:
        data[key] = value
    result, _ = _build(lambda: SolarFrame.from_dict(data))
    if isinstance(result, Exception):
        assert isinstance(result, FrameError), repr(result)
        # The key, or for a physical check after the types passed, its parameter (R0 for R0_kpc).
        assert key in str(result) or key.rsplit("_", 1)[0] in str(result), str(result)
        if key in ("R0_kpc", "z_sun_pc", "v_sun_kms"):
            assert UNITS[key.rsplit("_", 1)[0]] in str(result)
        return
    # Success: the frame holds exactly what the dict said (JSON round trip included).
    out = json.loads(json.dumps(result.to_dict()))
    expected = {k: v for k, v in data.items()}
    expected.setdefault("label", "")
    assert out == {
        k: (list(map(float, v)) if k == "v_sun_kms" else v if k == "label" else float(v)) for k, v in expected.items()
    }
    assert action == "set" or key in ("label", "R_0", "zsun_pc")


THREE = Potential.three_component(bulge={"model": "hernquist", "mass": 1e10, "scale": 0.6}).to_dict()
PARAM_KEYS = [(part, name) for part in ("bulge", "disc", "halo") for name in THREE[part]]


@settings(max_examples=30, deadline=None)
@given(
    target=st.sampled_from(PARAM_KEYS + [("disc", "height"), ("halo", None), ("name", None)]),
    action=st.sampled_from(["set", "delete"]),
    value=values,
)
def test_potential_from_dict_is_exact_or_names_the_key(target, action, value):
    data = copy.deepcopy(THREE)
    part, name = target
    holder, key = (data, part) if name is None else (data[part], name)
    if action == "delete":
        holder.pop(key, None)
    else:
        holder[key] = value
    result, _ = _build(lambda: Potential.from_dict(data))
    if isinstance(result, Exception):
        assert isinstance(result, PotentialError), repr(result)
        message = str(result)
        assert key in message, message
        return
    assert result.to_dict() == json.loads(json.dumps(result.to_dict()))
    # Exactly what was given: no parameter filled in, none changed.
    got = result.to_dict()
    if name is not None:
        assert got[part] == holder
    elif part == "name":  # only the label has a default
        assert got["name"] == data.get("name", "bulge + disc + halo")
    assert action == "set" or target in (("name", None), ("disc", "height"))


@settings(max_examples=30, deadline=None)
@given(
    part=st.sampled_from(["bulge", "disc", "halo"]),
    params=st.dictionaries(
        st.sampled_from(["mass", "a", "b", "scale", "alpha", "cutoff", "model"]), values, max_size=3
    ),
)
def test_three_component_is_exact_or_names_the_parameter(part, params):
    result, _ = _build(lambda: Potential.three_component(**{part: params}))
    if isinstance(result, Exception):
        assert isinstance(result, PotentialError), repr(result)
        message = str(result)
        assert part in message, message
        return
    got = result.to_dict()[part]
    for key, value in params.items():  # every value given is kept exactly
        assert got[key] == (value if key == "model" else float(value))


# ---------------------------------------------------------------- the command line


@pytest.fixture(scope="module")
def tiny_input(tmp_path_factory):
    from mwkin.cli import main

    path = tmp_path_factory.mktemp("prop") / "tiny.ecsv"
    assert main(["demo", str(path), "--n", "40", "--seed", "2"]) == 0
    return path


OPTIONS = {  # option -> (how the result shows it, unit named in errors)
    "--R0": ("R0_kpc", "kpc"),
    "--z-sun": ("z_sun_pc", "pc"),
    "--seed": (None, ""),
    "--n-samples": (None, ""),
    "--min-parallax-snr": (None, ""),
    "--parallax-zero-point": (None, "mas"),
}
option_values = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-50, 50).map(str),
    st.sampled_from(["", "x", "1e999", "-0", "8.2.1", "nan"]),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(option=st.sampled_from(sorted(OPTIONS)), value=option_values)
def test_cli_option_is_applied_exactly_or_a_one_line_error(tiny_input, capsys, option, value):
    from astropy.table import QTable

    from mwkin.cli import main

    out = tiny_input.parent / "out.ecsv"
    capsys.readouterr()
    status = main(["convert", str(tiny_input), str(out), "--overwrite", f"{option}={value}"])
    err = capsys.readouterr().err
    assert "Traceback" not in err
    if status != 0:
        assert status == 2
        lines = [line for line in err.splitlines() if "error" in line]
        assert len(lines) == 1 and lines[0].startswith("mwkin convert: error: "), err
        assert option in lines[0] or option.lstrip("-").replace("-", "_") in lines[0], err
        assert value in lines[0] or repr(value) in lines[0] or value.strip() == "", err
        unit = OPTIONS[option][1]
        assert not unit or unit in lines[0], err
        return
    # Accepted: the value must be a number that the result carries unchanged.
    number = float(value)
    assert math.isfinite(number)
    key = OPTIONS[option][0]
    if key:
        assert QTable.read(out).meta["frame"][key] == number
