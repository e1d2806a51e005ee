"""Unit tests of mwkin.distances: InverseParallax, DistanceColumn, DistanceResult, distance_from_dict.

Outside facts used: 1 / (parallax in mas) is the distance in kpc (definition of the parsec); the Gaia
parallax zero point is subtracted, corrected = parallax - Z (Lindegren et al. 2021, A&A 649, A4; from
memory, and so says the description of the gaiadr3-zeropoint package that implements that paper: "the
zero-point returned by the code should be subtracted from the parallax"), with Z about -17 micro-arcsec on
average; the distance error of 1/parallax by first-order
propagation is sigma_plx / plx^2 (common practice). Numbers in tables are chosen exactly representable in
binary so that the signal-to-noise boundary (parallax / error == min_snr is kept) is tested exactly.
"""

from __future__ import annotations

import dataclasses
import json
import math
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.table import MaskedColumn, QTable, Table
from hypothesis import given, settings
from hypothesis import strategies as st

from mwkin.distances import (
    REASONS,
    SUSPICIOUS_MEDIAN_KPC,
    DistanceColumn,
    DistanceError,
    DistanceResult,
    DistanceUnitWarning,
    InverseParallax,
    distance_from_dict,
    warn_if_distances_look_like_pc,
)
from mwkin.units import UnitMismatchError

FAST = settings(max_examples=60, deadline=None)

CODE = {name: i for i, name in enumerate(InverseParallax.reasons, start=1)}


def _plx_table(parallax, parallax_error=None, **extra):
    cols = {"parallax": np.asarray(parallax, dtype=float)}
    if parallax_error is not None:
        cols["parallax_error"] = np.asarray(parallax_error, dtype=float)
    cols.update(extra)
    return Table(cols)


@pytest.fixture
def quiet():
    """Turn DistanceUnitWarning into an error for the test's duration."""
    with warnings.catch_warnings():
        warnings.simplefilter("error", DistanceUnitWarning)
        yield


# ---------------------------------------------------------------------------------------------------------
# InverseParallax: distances
# ---------------------------------------------------------------------------------------------------------


def test_inverse_parallax_in_mas_gives_kpc():
    # d [kpc] = 1 / parallax [mas]: 1 arcsec -> 1 pc, so 1 mas -> 1 kpc (definition of the parsec).
    t = _plx_table([1.0, 2.0, 0.5, 0.125], [0.01, 0.01, 0.01, 0.01])
    res = InverseParallax().resolve(t)
    assert isinstance(res, DistanceResult)
    np.testing.assert_allclose(res.distance_kpc, [1.0, 0.5, 2.0, 8.0], rtol=1e-15)
    assert res.usable.all() and res.n_usable == 4
    assert res.parameter == "parallax"


def test_parallax_quantity_in_other_units_is_converted():
    t = QTable({"parallax": [0.002, 0.0005] * u.arcsec, "parallax_error": [10.0, 10.0] * u.uas})
    res = InverseParallax().resolve(t)
    np.testing.assert_allclose(res.distance_kpc, [0.5, 2.0], rtol=1e-15)
    np.testing.assert_allclose(res.parameter_value, [2.0, 0.5], rtol=1e-15)  # mas
    np.testing.assert_allclose(res.parameter_error, [0.01, 0.01], rtol=1e-15)  # mas


def test_plain_table_column_with_a_unit_is_converted():
    t = Table({"parallax": [2000.0], "parallax_error": [100.0]}, units={"parallax": "uas", "parallax_error": "uas"})
    res = InverseParallax().resolve(t)
    assert res.distance_kpc[0] == pytest.approx(0.5, rel=1e-15)
    assert res.distance_error_kpc[0] == pytest.approx(0.1 / 2.0**2, rel=1e-14)


def test_parallax_in_a_wrong_unit_is_refused_naming_the_column():
    t = QTable({"parallax": [1.0] * u.km / u.s, "parallax_error": [0.1] * u.mas})
    with pytest.raises(UnitMismatchError, match="parallax"):
        InverseParallax().resolve(t)


def test_non_numeric_parallax_is_refused_naming_the_column():
    t = Table({"parallax": ["a", "b"], "parallax_error": [0.1, 0.1]})
    with pytest.raises(DistanceError, match="parallax"):
        InverseParallax().resolve(t)


def test_distance_error_is_first_order_propagation():
    # sigma_d = sigma_plx / plx^2 (first-order propagation of d = 1/plx; common practice)
    plx = np.array([2.0, 1.0, 0.5, 4.0])
    err = np.array([0.1, 0.05, 0.02, 0.4])
    res = InverseParallax().resolve(_plx_table(plx, err))
    np.testing.assert_allclose(res.distance_error_kpc, err / plx**2, rtol=1e-14)
    # and it is the derivative of 1/plx times sigma (central difference), not some other formula
    h = 1e-6
    deriv = (1.0 / (plx - h) - 1.0 / (plx + h)) / (2 * h)
    np.testing.assert_allclose(res.distance_error_kpc, deriv * err, rtol=1e-8)


def test_no_error_column_and_no_cut_gives_no_distance_error():
    res = InverseParallax(min_snr=0).resolve(_plx_table([1.0, 4.0]))
    np.testing.assert_allclose(res.distance_kpc, [1.0, 0.25], rtol=1e-15)
    assert res.distance_error_kpc is None
    np.testing.assert_array_equal(res.parameter_error, [0.0, 0.0])


def test_cut_without_an_error_column_is_refused_with_the_way_out():
    with pytest.raises(DistanceError) as info:
        InverseParallax(min_snr=5).resolve(_plx_table([1.0]))
    message = str(info.value)
    assert "parallax_error" in message and "min_snr=0" in message


def test_missing_parallax_column_is_refused_and_points_at_distance_column():
    with pytest.raises(DistanceError, match="parallax") as info:
        InverseParallax().resolve(Table({"ra": [1.0]}))
    assert "DistanceColumn" not in str(info.value)
    with pytest.raises(DistanceError, match="DistanceColumn"):
        InverseParallax().resolve(Table({"distance": [1.0]}))


def test_resolve_leaves_the_table_unchanged():
    t = Table(
        {
            "parallax": MaskedColumn([1.0, -2.0, np.nan, 0.5], mask=[False, False, False, True]),
            "parallax_error": [0.1, 0.1, 0.1, 0.1],
        }
    )
    before = t.copy()
    InverseParallax(zero_point_mas=-0.017).resolve(t)
    InverseParallax().resolve(t)
    assert t.colnames == before.colnames
    np.testing.assert_array_equal(t["parallax"].mask, before["parallax"].mask)
    np.testing.assert_array_equal(t["parallax"].data.data, before["parallax"].data.data)


def test_empty_table():
    res = InverseParallax().resolve(_plx_table([], []))
    assert res.distance_kpc.shape == (0,) and res.n_usable == 0
    assert res.counts == dict.fromkeys(InverseParallax.reasons, 0)
    assert res.reason.shape == (0,)


# ---------------------------------------------------------------------------------------------------------
# InverseParallax: the zero point
# ---------------------------------------------------------------------------------------------------------


def test_zero_point_is_subtracted_gaia_convention():
    # Lindegren et al. 2021, A&A 649, A4: corrected parallax = parallax - Z (see the file docstring). The module documents
    # the same: corrected = parallax - zero_point_mas. Gaia parallaxes are too small on average (Z < 0,
    # about -0.017 mas; Lindegren et al. 2021, A&A 649, A2, quasar median; from memory), so the
    # correction makes them larger and the distances shorter.
    plx = np.array([0.983, 0.483, 1.983])
    res = InverseParallax(min_snr=0, zero_point_mas=-0.017).resolve(_plx_table(plx, [0.001, 0.001, 0.001]))
    np.testing.assert_allclose(res.parameter_value, plx + 0.017, rtol=1e-14)
    np.testing.assert_allclose(res.distance_kpc, 1.0 / (plx + 0.017), rtol=1e-14)
    assert np.all(res.distance_kpc < 1.0 / plx)
    np.testing.assert_allclose(res.distance_kpc[:2], [1.0, 2.0], rtol=1e-12)


def test_positive_zero_point_makes_parallaxes_smaller():
    res = InverseParallax(min_snr=0, zero_point_mas=0.5).resolve(_plx_table([1.5, 2.5]))
    np.testing.assert_allclose(res.distance_kpc, [1.0, 0.5], rtol=1e-15)


def test_zero_point_as_a_quantity():
    choice = InverseParallax(zero_point_mas=-17 * u.uas)
    assert choice.zero_point_mas == pytest.approx(-0.017, rel=1e-14)
    with pytest.raises(UnitMismatchError, match="zero_point_mas"):
        InverseParallax(zero_point_mas=1 * u.km)


def test_error_propagation_uses_the_corrected_parallax():
    # sigma_d = sigma_plx / (plx - Z)^2 (common practice): the derivative is taken at the parallax used
    res = InverseParallax(min_snr=0, zero_point_mas=0.5).resolve(_plx_table([1.5], [0.1]))
    assert res.distance_error_kpc[0] == pytest.approx(0.1 / 1.0**2, rel=1e-14)
    assert res.parameter_error[0] == 0.1


def test_signal_to_noise_uses_the_corrected_parallax():
    # Documented: the cut is on (parallax - zero_point_mas) / parallax_error.
    # 0.75 - (-0.25) = 1.0 -> S/N exactly 4 with error 0.25: kept at min_snr=4 (S/N >= min_snr), while the
    # raw parallax (S/N 3) would be cut.
    t = _plx_table([0.75], [0.25])
    assert InverseParallax(min_snr=4, zero_point_mas=-0.25).resolve(t).usable[0]
    assert not InverseParallax(min_snr=4).resolve(t).usable[0]
    # and the other sign: 1.25 - 0.25 = 1.0 (S/N 4, kept), raw S/N 5 would also pass min_snr=4.5, corrected not
    t = _plx_table([1.25], [0.25])
    assert not InverseParallax(min_snr=4.5, zero_point_mas=0.25).resolve(t).usable[0]
    assert InverseParallax(min_snr=4.5).resolve(t).usable[0]


def test_zero_point_bringing_parallax_to_zero_is_nonpositive():
    # 0.25 - 0.25 = 0 exactly
    res = InverseParallax(min_snr=0, zero_point_mas=0.25).resolve(_plx_table([0.25, 0.5]))
    assert res.reason.tolist() == ["nonpositive_parallax", ""]
    assert math.isnan(res.distance_kpc[0]) and res.distance_kpc[1] == 4.0


# ---------------------------------------------------------------------------------------------------------
# InverseParallax: unusable rows and their reasons
# ---------------------------------------------------------------------------------------------------------


def test_signal_to_noise_cut_drops_and_flags_rows():
    # S/N: 10, 4 (cut), exactly 5 (kept: >= min_snr), 4.999.. (cut)
    plx = [1.0, 1.0, 1.25, 1.25]
    err = [0.1, 0.25, 0.25, 0.25000001]
    res = InverseParallax(min_snr=5).resolve(_plx_table(plx, err))
    np.testing.assert_array_equal(res.usable, [True, False, True, False])
    assert res.reason.tolist() == ["", "parallax_below_cut", "", "parallax_below_cut"]
    np.testing.assert_array_equal(res.reason_code, [0, CODE["parallax_below_cut"]] * 2)
    assert res.reason_code.dtype == np.uint8
    assert res.counts == {"no_parallax": 0, "nonpositive_parallax": 0, "no_parallax_error": 0, "parallax_below_cut": 2}
    assert res.n_usable == 2
    # dropped rows have NaN distance and error; kept ones their values
    assert np.isnan(res.distance_kpc[[1, 3]]).all() and np.isnan(res.distance_error_kpc[[1, 3]]).all()
    np.testing.assert_allclose(res.distance_kpc[[0, 2]], [1.0, 0.8], rtol=1e-15)
    # the parameter itself is kept for every row (for error propagation)
    np.testing.assert_allclose(res.parameter_value, plx, rtol=0)


def test_min_snr_zero_switches_the_cut_off():
    res = InverseParallax(min_snr=0).resolve(_plx_table([1.0, 0.01], [10.0, 10.0]))
    assert res.usable.all()
    np.testing.assert_allclose(res.distance_kpc, [1.0, 100.0], rtol=1e-15)


def test_every_reason_code_and_its_precedence():
    rows = [
        # (parallax, error, expected reason)
        (2.0, 0.1, ""),
        (np.nan, 0.1, "no_parallax"),
        (np.nan, np.nan, "no_parallax"),  # first check wins
        (0.0, 0.1, "nonpositive_parallax"),
        (-0.0, 0.1, "nonpositive_parallax"),
        (-1.0, 0.1, "nonpositive_parallax"),
        (-1.0, np.nan, "nonpositive_parallax"),  # before no_parallax_error
        (-1.0, 10.0, "nonpositive_parallax"),  # before parallax_below_cut
        (1.0, np.nan, "no_parallax_error"),
        (1.0, 1.0, "parallax_below_cut"),
    ]
    plx, err, expected = zip(*rows)
    res = InverseParallax(min_snr=5).resolve(_plx_table(plx, err))
    assert res.reason.tolist() == list(expected)
    assert res.reason_names == ("no_parallax", "nonpositive_parallax", "no_parallax_error", "parallax_below_cut")
    # codes are 1 + the index in reason_names
    for code, reason in zip(res.reason_code, expected):
        assert code == (0 if reason == "" else 1 + res.reason_names.index(reason))
    assert res.counts == {"no_parallax": 2, "nonpositive_parallax": 5, "no_parallax_error": 1, "parallax_below_cut": 1}
    assert sum(res.counts.values()) == len(rows) - res.n_usable
    assert np.isnan(res.distance_kpc[~res.usable]).all()
    assert np.isfinite(res.distance_kpc[res.usable]).all()
    assert set(res.reason_names) <= set(REASONS)


def test_nan_error_without_a_cut_is_usable():
    # no_parallax_error applies "while a cut is asked for" only
    res = InverseParallax(min_snr=0).resolve(_plx_table([2.0, -1.0], [np.nan, 0.1]))
    assert res.reason.tolist() == ["", "nonpositive_parallax"]
    assert res.distance_kpc[0] == 0.5


def test_masked_values_are_unusable_with_the_right_reason():
    t = Table(
        {
            "parallax": MaskedColumn([1.0, 2.0, 0.5, 4.0], mask=[False, True, False, False]),
            "parallax_error": MaskedColumn([0.1, 0.1, 0.1, 0.1], mask=[False, False, True, False]),
        }
    )
    res = InverseParallax(min_snr=5).resolve(t)
    assert res.reason.tolist() == ["", "no_parallax", "no_parallax_error", ""]
    assert res.distance_kpc[0] == 1.0 and res.distance_kpc[3] == 0.25


def test_masked_quantity_column():
    from astropy.utils.masked import Masked

    t = QTable({"parallax": Masked([1.0, 2.0] * u.mas, mask=[True, False]), "parallax_error": [0.1, 0.1] * u.mas})
    res = InverseParallax().resolve(t)
    assert res.reason.tolist() == ["no_parallax", ""]
    assert res.distance_kpc[1] == 0.5


def test_distance_column_of_the_table_is_reported_as_ignored():
    t = _plx_table([1.0], [0.1], distance=[3.0])
    res = InverseParallax().resolve(t)
    assert res.ignored_columns == ("distance",)
    assert len(res.notes) == 1 and "'distance'" in res.notes[0]
    assert InverseParallax().resolve(_plx_table([1.0], [0.1])).ignored_columns == ()


@FAST
@given(
    data=st.lists(
        st.tuples(
            st.integers(min_value=-5000, max_value=5000).map(lambda k: k / 1000.0),
            st.floats(min_value=1e-3, max_value=2.0),
        ),
        min_size=1,
        max_size=30,
    ),
    min_snr=st.sampled_from([0.0, 3.0, 5.0, 10.0]),
    zero_point=st.sampled_from([0.0, -0.017, 0.03]),
)
def test_usable_rows_follow_the_documented_rule_property(data, min_snr, zero_point):
    plx, err = (np.array(c) for c in zip(*data))
    res = InverseParallax(min_snr=min_snr, zero_point_mas=zero_point).resolve(_plx_table(plx, err))
    corrected = plx - zero_point
    expected = (corrected > 0) & (corrected >= min_snr * err)
    np.testing.assert_array_equal(res.usable, expected)
    np.testing.assert_allclose(res.distance_kpc[expected], 1.0 / corrected[expected], rtol=1e-14)
    np.testing.assert_allclose(res.distance_error_kpc[expected], err[expected] / corrected[expected] ** 2, rtol=1e-13)
    assert sum(res.counts.values()) == int((~expected).sum())


# ---------------------------------------------------------------------------------------------------------
# InverseParallax: settings and serialisation
# ---------------------------------------------------------------------------------------------------------


def test_defaults_and_plain_float_settings():
    choice = InverseParallax()
    assert choice.min_snr == 5.0 and choice.zero_point_mas == 0.0
    choice = InverseParallax(min_snr=10, zero_point_mas=-0.017)
    assert type(choice.min_snr) is float and type(choice.zero_point_mas) is float


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"min_snr": -1.0}, "min_snr"),
        ({"min_snr": math.inf}, "min_snr"),
        ({"min_snr": math.nan}, "min_snr"),
        ({"min_snr": [5.0, 6.0]}, "min_snr"),
        ({"zero_point_mas": math.inf}, "zero_point_mas"),
        ({"zero_point_mas": math.nan}, "zero_point_mas"),
    ],
)
def test_impossible_settings_are_refused_naming_the_setting(kwargs, name):
    with pytest.raises(DistanceError, match=name):
        InverseParallax(**kwargs)


@pytest.mark.parametrize(
    "name, value",
    [
        ("min_snr", "5"),
        ("min_snr", "abc"),
        ("min_snr", True),
        ("zero_point_mas", "-0.017"),
    ],
)
def test_constructor_refuses_wrong_types_like_from_dict_does(name, value):
    # from_dict refuses strings and booleans for these keys, naming the key ("True is not a number, "5" is
    # not one either: named, not converted"), and DEVELOPERS.md asks that bad input raise a ValueError
    # subclass naming the argument and the unit. The constructor, the other public door to the same
    # settings, must not turn "5" into 5.0 or True into 1.0, nor fail with numpy's bare message.
    with pytest.raises(DistanceError, match=name):
        InverseParallax.from_dict({"method": "inverse_parallax", name: value})
    with pytest.raises(DistanceError, match=name):
        InverseParallax(**{name: value})


def test_choices_are_immutable_and_compare_by_value():
    a = InverseParallax(min_snr=10)
    with pytest.raises(dataclasses.FrozenInstanceError):
        a.min_snr = 3.0
    assert a == InverseParallax(min_snr=10.0)
    assert hash(a) == hash(InverseParallax(min_snr=10.0))
    assert a != InverseParallax(min_snr=10, zero_point_mas=0.01)
    assert DistanceColumn("d") == DistanceColumn("d") != DistanceColumn("e")


def test_to_dict_matches_the_docstring_example():
    assert InverseParallax(min_snr=10, zero_point_mas=-0.017).to_dict() == {
        "method": "inverse_parallax",
        "min_snr": 10.0,
        "zero_point_mas": -0.017,
    }


@pytest.mark.parametrize(
    "choice",
    [
        InverseParallax(),
        InverseParallax(min_snr=0),
        InverseParallax(min_snr=10, zero_point_mas=-0.017),
        DistanceColumn(),
        DistanceColumn("distance_bayes"),
    ],
)
def test_round_trip_through_json(choice):
    data = json.loads(json.dumps(choice.to_dict()))
    back = distance_from_dict(data)
    assert back == choice and type(back) is type(choice)
    assert type(choice).from_dict(data) == choice
    assert back.to_dict() == choice.to_dict()


@FAST
@given(min_snr=st.floats(min_value=0.0, max_value=1e6), zero_point=st.floats(min_value=-10.0, max_value=10.0))
def test_round_trip_property(min_snr, zero_point):
    choice = InverseParallax(min_snr=min_snr, zero_point_mas=zero_point)
    assert distance_from_dict(json.loads(json.dumps(choice.to_dict()))) == choice


def test_from_dict_defaults():
    assert distance_from_dict({"method": "inverse_parallax"}) == InverseParallax()
    assert distance_from_dict({"method": "distance_column"}) == DistanceColumn()
    assert InverseParallax.from_dict({}) == InverseParallax()  # method implied by the class


def test_from_dict_accepts_a_zero_point_quantity():
    choice = distance_from_dict({"method": "inverse_parallax", "zero_point_mas": -17 * u.uas})
    assert choice.zero_point_mas == pytest.approx(-0.017, rel=1e-14)


@pytest.mark.parametrize(
    "data, named",
    [
        ({"method": "inverse_parallax", "min_snr": "5"}, "min_snr"),
        ({"method": "inverse_parallax", "min_snr": True}, "min_snr"),
        ({"method": "inverse_parallax", "min_snr": None}, "min_snr"),
        ({"method": "inverse_parallax", "min_snr": [5]}, "min_snr"),
        ({"method": "inverse_parallax", "min_snr": math.nan}, "min_snr"),
        ({"method": "inverse_parallax", "min_snr": -2.0}, "min_snr"),
        ({"method": "inverse_parallax", "zero_point_mas": "0.017"}, "zero_point_mas"),
        ({"method": "inverse_parallax", "zero_point_mas": math.inf}, "zero_point_mas"),
        ({"method": "distance_column", "column": 5}, "column"),
        ({"method": "distance_column", "column": ["d"]}, "column"),
        ({"method": "distance_column", "column": ""}, "column"),
    ],
)
def test_from_dict_refuses_wrong_values_naming_the_key(data, named):
    with pytest.raises(DistanceError, match=named):
        distance_from_dict(data)


@pytest.mark.parametrize(
    "data, named",
    [
        ({"method": "inverse_parallax", "min_snrr": 5}, "min_snrr"),
        ({"method": "inverse_parallax", "column": "distance"}, "column"),
        ({"method": "distance_column", "min_snr": 5}, "min_snr"),
        ({"method": "distance_column", "colum": "d"}, "colum"),
    ],
)
def test_from_dict_refuses_unknown_keys_naming_them(data, named):
    with pytest.raises(DistanceError, match=named):
        distance_from_dict(data)


@pytest.mark.parametrize(
    "data",
    [
        {},
        {"method": "bailer_jones"},
        {"method": None},
        {"method": ["inverse_parallax"]},  # unhashable
        {"min_snr": 5},
    ],
)
def test_from_dict_refuses_unknown_or_missing_method_listing_the_known_ones(data):
    with pytest.raises(DistanceError) as info:
        distance_from_dict(data)
    assert "inverse_parallax" in str(info.value) and "distance_column" in str(info.value)


@pytest.mark.parametrize("data", [None, "inverse_parallax", ["method", "inverse_parallax"], 5, {1: "inverse_parallax"}])
def test_from_dict_refuses_non_mappings_and_non_string_keys(data):
    with pytest.raises(DistanceError):
        distance_from_dict(data)


def test_class_from_dict_refuses_the_other_method():
    with pytest.raises(DistanceError, match="distance_column"):
        InverseParallax.from_dict({"method": "distance_column"})
    with pytest.raises(DistanceError, match="inverse_parallax"):
        DistanceColumn.from_dict({"method": "inverse_parallax"})


def test_describe_states_the_choice_and_the_bias_caveat():
    text = InverseParallax(min_snr=10, zero_point_mas=-0.017).describe()
    assert "-0.017" in text and "10" in text and "Bailer-Jones" in text
    assert "no signal-to-noise cut" in InverseParallax(min_snr=0).describe()
    assert "'d_phot'" in DistanceColumn("d_phot").describe()


# ---------------------------------------------------------------------------------------------------------
# DistanceColumn
# ---------------------------------------------------------------------------------------------------------


def test_distance_column_plain_numbers_are_kpc(quiet):
    t = Table({"distance": [0.5, 2.0, 8.0], "distance_error": [0.05, 0.1, 1.0]})
    res = DistanceColumn().resolve(t)
    np.testing.assert_array_equal(res.distance_kpc, [0.5, 2.0, 8.0])
    np.testing.assert_array_equal(res.distance_error_kpc, [0.05, 0.1, 1.0])
    assert res.parameter == "distance"
    np.testing.assert_array_equal(res.parameter_value, [0.5, 2.0, 8.0])
    np.testing.assert_array_equal(res.parameter_error, [0.05, 0.1, 1.0])
    assert res.reason_names == ("no_distance",) and res.counts == {"no_distance": 0}


def test_distance_column_in_pc_is_converted_to_kpc(quiet):
    # 1 kpc = 1000 pc
    t = Table(
        {"distance": [100.0, 2500.0], "distance_error": [10.0, 250.0]}, units={"distance": "pc", "distance_error": "pc"}
    )
    res = DistanceColumn().resolve(t)
    np.testing.assert_allclose(res.distance_kpc, [0.1, 2.5], rtol=1e-15)
    np.testing.assert_allclose(res.distance_error_kpc, [0.01, 0.25], rtol=1e-15)
    q = QTable({"distance": [100.0, 2500.0] * u.pc})
    np.testing.assert_allclose(DistanceColumn().resolve(q).distance_kpc, [0.1, 2.5], rtol=1e-15)


def test_distance_column_with_a_non_length_unit_is_refused():
    q = QTable({"distance": [1.0] * u.mas})
    with pytest.raises(UnitMismatchError, match="distance"):
        DistanceColumn().resolve(q)


def test_distance_column_with_another_name_and_its_error(quiet):
    t = Table({"d_phot": [1.0, 2.0], "d_phot_error": [0.1, 0.3], "distance_error": [9.0, 9.0]})
    res = DistanceColumn("d_phot").resolve(t)
    np.testing.assert_array_equal(res.distance_kpc, [1.0, 2.0])
    np.testing.assert_array_equal(res.distance_error_kpc, [0.1, 0.3])


def test_distance_column_without_error_column(quiet):
    res = DistanceColumn().resolve(Table({"distance": [1.0, 2.0]}))
    assert res.distance_error_kpc is None
    np.testing.assert_array_equal(res.parameter_error, [0.0, 0.0])


def test_distance_column_missing_is_refused_naming_it_and_the_columns_found():
    with pytest.raises(DistanceError) as info:
        DistanceColumn("d_phot").resolve(Table({"parallax": [1.0], "distance": [1.0]}))
    message = str(info.value)
    assert "'d_phot'" in message and "parallax" in message and "distance" in message


def test_distance_column_unusable_rows(quiet):
    t = Table(
        {
            "distance": MaskedColumn(
                [1.0, 0.0, -2.0, np.nan, 3.0, 4.0], mask=[False, False, False, False, True, False]
            ),
            "distance_error": [0.1, 0.1, 0.1, 0.1, 0.1, 0.2],
        }
    )
    res = DistanceColumn().resolve(t)
    assert res.reason.tolist() == ["", "no_distance", "no_distance", "no_distance", "no_distance", ""]
    np.testing.assert_array_equal(res.reason_code, [0, 1, 1, 1, 1, 0])
    assert res.counts == {"no_distance": 4} and res.n_usable == 2
    assert np.isnan(res.distance_kpc[1:5]).all() and np.isnan(res.distance_error_kpc[1:5]).all()
    assert res.distance_kpc[5] == 4.0 and res.distance_error_kpc[5] == 0.2
    # the input table is not touched
    assert t["distance"][1] == 0.0 and t["distance"][2] == -2.0


def test_distance_column_reports_the_parallax_column_as_ignored(quiet):
    res = DistanceColumn().resolve(Table({"distance": [1.0], "parallax": [2.0]}))
    assert res.ignored_columns == ("parallax",)
    assert "'parallax'" in res.notes[0]


@pytest.mark.parametrize("column", ["", 5, None, ("distance",)])
def test_distance_column_name_must_be_a_non_empty_string(column):
    with pytest.raises(DistanceError, match="column"):
        DistanceColumn(column)


# ---------------------------------------------------------------------------------------------------------
# The unit-slip warning
# ---------------------------------------------------------------------------------------------------------


def test_threshold_is_50_kpc():
    # Documented: beyond 50 kpc (the outer stellar halo) a Galactic sample is rare.
    assert SUSPICIOUS_MEDIAN_KPC == 50.0
    assert issubclass(DistanceUnitWarning, UserWarning)
    assert issubclass(DistanceError, ValueError)


def test_plain_distances_that_look_like_pc_warn_and_are_used_as_given():
    t = Table({"distance": [120.0, 250.0, 800.0]})
    with pytest.warns(DistanceUnitWarning) as record:
        res = DistanceColumn().resolve(t)
    assert len(record) == 1
    message = str(record[0].message)
    assert "DistanceColumn('distance')" in message and "pc" in message and "250" in message
    # the warning points at the caller's line (this file), not at mwkin
    assert record[0].filename == __file__
    # never silently changed
    np.testing.assert_array_equal(res.distance_kpc, [120.0, 250.0, 800.0])


def test_distances_with_a_stated_unit_do_not_warn(quiet):
    # 100-800 pc stated as pc: 0.1-0.8 kpc, nothing suspicious
    t = Table({"distance": [120.0, 250.0, 800.0]}, units={"distance": "pc"})
    DistanceColumn().resolve(t)
    # far distances stated in kpc are meant: no warning either
    DistanceColumn().resolve(QTable({"distance": [80.0, 90.0, 100.0] * u.kpc}))


def test_warning_threshold_is_strict_and_on_the_median():
    with warnings.catch_warnings():
        warnings.simplefilter("error", DistanceUnitWarning)
        DistanceColumn().resolve(Table({"distance": [10.0, 50.0, 1000.0]}))  # median exactly 50: quiet
        DistanceColumn().resolve(Table({"distance": [1.0, 2.0, 1.0e5]}))  # one far star: quiet
    with pytest.warns(DistanceUnitWarning):
        DistanceColumn().resolve(Table({"distance": [10.0, 50.001, 60.0]}))


def test_warning_median_leaves_out_nan_and_nonpositive_values():
    with warnings.catch_warnings():
        warnings.simplefilter("error", DistanceUnitWarning)
        # positives 1, 2, 3 -> median 2 kpc (the -1000s and NaN are not distances)
        DistanceColumn().resolve(Table({"distance": [-1000.0, -1000.0, -1000.0, np.nan, 1.0, 2.0, 3.0]}))
        # nothing positive at all: nothing to judge
        DistanceColumn().resolve(Table({"distance": [np.nan, -5.0, 0.0]}))
    with pytest.warns(DistanceUnitWarning, match="300"):
        DistanceColumn().resolve(Table({"distance": [np.nan, np.nan, np.nan, 0.0, 300.0]}))


def test_warn_if_distances_look_like_pc_names_label_assumed_unit_and_fix():
    with pytest.warns(DistanceUnitWarning) as record:
        warn_if_distances_look_like_pc(np.array([400.0, 600.0]), "my_label", "kpc (assumed here)", "say pc please")
    message = str(record[0].message)
    assert "my_label" in message and "kpc (assumed here)" in message and "say pc please" in message
    assert "500" in message  # the median
    with warnings.catch_warnings():
        warnings.simplefilter("error", DistanceUnitWarning)
        warn_if_distances_look_like_pc(np.array([]), "x", "kpc", "fix")
        warn_if_distances_look_like_pc(np.array([np.nan]), "x", "kpc", "fix")
        warn_if_distances_look_like_pc(np.array([8.0, 20.0]), "x", "kpc", "fix")


# ---------------------------------------------------------------------------------------------------------
# DistanceResult
# ---------------------------------------------------------------------------------------------------------


def test_reasons_table_documents_every_code():
    assert set(InverseParallax.reasons) | set(DistanceColumn.reasons) == set(REASONS)
    assert all(isinstance(text, str) and text for text in REASONS.values())


def test_result_reason_and_n_usable_from_codes():
    res = DistanceResult(
        distance_kpc=np.array([1.0, np.nan, np.nan]),
        distance_error_kpc=None,
        usable=np.array([True, False, False]),
        reason_code=np.array([0, 2, 1], dtype=np.uint8),
        reason_names=("no_parallax", "nonpositive_parallax"),
        counts={"no_parallax": 1, "nonpositive_parallax": 1},
    )
    assert res.reason.tolist() == ["", "nonpositive_parallax", "no_parallax"]
    assert res.n_usable == 1 and type(res.n_usable) is int
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.parameter = "distance"
