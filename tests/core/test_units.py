"""Unit tests of mwkin.units: to_value, UnitMismatchError, the KMS / MASYR shorthands, ImplausibleValueWarning."""

from __future__ import annotations

import math
import warnings

import astropy.units as u
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import mwkin.units as units_module
from mwkin.units import KMS, MASYR, ImplausibleValueWarning, UnitMismatchError, to_value

FAST = settings(max_examples=80, deadline=None)

finite = st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300)


def test_public_names_exist():
    for name in units_module.__all__:
        assert hasattr(units_module, name), name


# ---------------------------------------------------------------------------------------------------------
# to_value
# ---------------------------------------------------------------------------------------------------------


def test_quantity_is_converted():
    # 1 kpc = 1000 pc (definition of the prefix)
    assert to_value(1500.0 * u.pc, u.kpc, "R0") == pytest.approx(1.5, rel=1e-15)
    assert to_value(2.0 * u.kpc, "pc", "z_sun") == pytest.approx(2000.0, rel=1e-15)
    # 1 km/s = 1000 m/s
    assert to_value(12000.0 * u.m / u.s, KMS, "U") == pytest.approx(12.0, rel=1e-15)
    # 1 deg = pi / 180 rad
    assert to_value(180.0 * u.deg, u.rad, "ra") == pytest.approx(math.pi, rel=1e-15)
    # 1 arcsec = 1000 mas
    assert to_value(0.25 * u.arcsec, u.mas, "parallax") == pytest.approx(250.0, rel=1e-15)


def test_plain_numbers_are_taken_in_the_default_unit():
    assert to_value(8.2, u.kpc, "R0") == 8.2
    assert to_value(8, "kpc", "R0") == 8.0
    assert to_value(np.float32(0.5), "mas", "parallax") == pytest.approx(0.5)
    # not converted from anything, whatever the unit: the number is the value in that unit
    assert to_value(1500.0, u.kpc, "R0") == 1500.0


def test_scalar_input_gives_a_python_float():
    for value in (3, 3.0, np.float32(3.0), np.int64(3), np.array(3.0), 3.0 * u.kpc, 3000 * u.pc):
        out = to_value(value, u.kpc, "R0")
        assert type(out) is float, value
        assert out == pytest.approx(3.0)


def test_array_input_gives_a_float64_array():
    out = to_value([1, 2, 3], u.kpc, "distance")
    assert isinstance(out, np.ndarray) and out.dtype == np.float64
    np.testing.assert_array_equal(out, [1.0, 2.0, 3.0])
    out = to_value(np.array([100, 250], dtype=np.int32) * u.pc, u.kpc, "distance")
    assert isinstance(out, np.ndarray) and out.dtype == np.float64
    np.testing.assert_allclose(out, [0.1, 0.25], rtol=1e-15)
    out = to_value(np.ones((2, 3)) * u.km / u.s, "m/s", "v")
    assert out.shape == (2, 3)
    np.testing.assert_array_equal(out, 1000.0)


def test_unit_may_be_a_string_or_a_unit():
    q = 5.0 * u.mas / u.yr
    assert to_value(q, "mas/yr", "pmra") == to_value(q, MASYR, "pmra") == 5.0
    assert to_value(q, "arcsec/yr", "pmra") == pytest.approx(0.005, rel=1e-15)


def test_dimensionless_values():
    assert to_value(5.0, u.dimensionless_unscaled, "min_snr") == 5.0
    assert to_value(5.0 * u.dimensionless_unscaled, "", "min_snr") == 5.0
    assert to_value(250.0 * u.percent, u.dimensionless_unscaled, "min_snr") == pytest.approx(2.5)


def test_nan_and_inf_pass_through():
    # to_value converts; it does not judge (finiteness is the caller's check)
    assert math.isnan(to_value(float("nan"), "kpc", "R0"))
    assert to_value(float("inf") * u.pc, "kpc", "R0") == math.inf


@pytest.mark.parametrize(
    "value, unit, name",
    [
        (3.0 * u.km / u.s, u.kpc, "R0"),
        (1.0 * u.mas, u.kpc, "distance"),  # a parallax is not a distance without an equivalency
        (2.0 * u.mas / u.yr, KMS, "v_sun"),  # a proper motion is not a velocity without a distance
        (1.0 * u.kpc, u.dimensionless_unscaled, "min_snr"),
        (1.0 * u.Hz, u.m, "wavelength"),  # convertible only with the spectral equivalency
    ],
)
def test_incompatible_unit_raises_unit_mismatch_naming_the_quantity_and_both_units(value, unit, name):
    with pytest.raises(UnitMismatchError) as info:
        to_value(value, unit, name)
    message = str(info.value)
    assert name in message
    assert str(value.unit) in message
    assert str(u.Unit(unit)) in message
    # raised from None: no astropy traceback chained under it
    assert info.value.__cause__ is None and info.value.__suppress_context__


def test_unit_mismatch_error_is_a_value_error():
    assert issubclass(UnitMismatchError, ValueError)
    with pytest.raises(ValueError):
        to_value(1.0 * u.s, "kpc", "R0")


def test_a_list_of_quantities_is_not_read_as_plain_numbers():
    # [1 pc, 2 pc] is not a plain number in kpc: it must not come back as [1.0, 2.0] (a factor 1000 slip).
    try:
        out = to_value([1.0 * u.pc, 2.0 * u.pc], u.kpc, "distance")
    except (TypeError, ValueError):
        return
    np.testing.assert_allclose(out, [0.001, 0.002], rtol=1e-15)


@FAST
@given(x=finite)
def test_plain_float_is_returned_unchanged_property(x):
    assert to_value(x, u.kpc, "R0") == x


@FAST
@given(x=st.floats(allow_nan=False, allow_infinity=False, min_value=-1e290, max_value=1e290))
def test_pc_to_kpc_property(x):
    assert to_value(x * u.pc, u.kpc, "d") == pytest.approx(x / 1000.0, rel=1e-15, abs=1e-300)
    back = to_value(to_value(x * u.kpc, u.pc, "d") * u.pc, u.kpc, "d")
    assert back == pytest.approx(x, rel=1e-15, abs=1e-300)


# ---------------------------------------------------------------------------------------------------------
# KMS and MASYR
# ---------------------------------------------------------------------------------------------------------


def test_kms_and_masyr_are_the_expected_units():
    assert KMS == u.km / u.s
    assert MASYR == u.mas / u.yr
    assert (1.0 * KMS).to_value(u.m / u.s) == pytest.approx(1000.0, rel=1e-15)
    # 1 yr in astropy is the Julian year, 365.25 d (astropy documentation; from memory)
    assert (1.0 * MASYR).to_value(u.mas / u.day) == pytest.approx(1.0 / 365.25, rel=1e-15)


def test_mas_per_year_at_one_kpc_is_k_km_per_s():
    # mu [mas/yr] x d [kpc] x 4.740470463533 = v [km/s]: one au per Julian year (IAU 2012 Resolution B2
    # au = 149597870.700 km; Julian year 31557600 s), computed by hand.
    v = (1.0 * MASYR * u.kpc).to_value(KMS, equivalencies=u.dimensionless_angles())
    assert v == pytest.approx(149597870.700 / 31557600.0, rel=1e-13)
    assert v == pytest.approx(4.740470463533, rel=1e-12)


# ---------------------------------------------------------------------------------------------------------
# ImplausibleValueWarning
# ---------------------------------------------------------------------------------------------------------


def test_implausible_value_warning_is_a_user_warning_that_can_be_filtered():
    assert issubclass(ImplausibleValueWarning, UserWarning)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImplausibleValueWarning)
        with pytest.raises(ImplausibleValueWarning):
            warnings.warn("R0 = 8122 kpc", ImplausibleValueWarning, stacklevel=1)
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("ignore", ImplausibleValueWarning)
        warnings.warn("R0 = 8122 kpc", ImplausibleValueWarning, stacklevel=1)
    assert record == []


def test_unit_slip_in_a_public_constructor_gives_the_warning_and_keeps_the_value():
    # The class docstring's own example: R0=8122 typed in pc where kpc is documented.
    from mwkin.frames import SolarFrame

    with pytest.warns(ImplausibleValueWarning, match="R0") as record:
        frame = SolarFrame(R0=8122.0)
    assert any("kpc" in str(w.message) for w in record)
    assert frame.R0 == 8122.0  # used as given, never silently changed
    # The same value stated as a Quantity is plausible and quiet.
    with warnings.catch_warnings():
        warnings.simplefilter("error", ImplausibleValueWarning)
        assert SolarFrame(R0=8122.0 * u.pc).R0 == pytest.approx(8.122)
