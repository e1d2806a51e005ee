"""Property tests of integrate_orbits and orbit_parameters on malformed and extreme input.

Each example is either refused with a ValueError naming the column/key, the row(s) and the unit, or
gives a correct finite result, or NaN with a flag naming the reason; never a hang (every integration
here is short and carries a time limit) and never a silent change.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from mwkin.orbits import ADVISORY_FLAGS, FLAGS, OrbitError, TimeGridError, integrate_orbits, orbit_parameters
from mwkin.potentials import Potential

KMS = u.km / u.s
NAMES = ("x", "y", "z", "vx", "vy", "vz")
UNITS = (u.kpc,) * 3 + (KMS,) * 3
T_SHORT = np.linspace(0.0, 0.02, 5)  # 20 Myr: every example stays cheap
LIMIT_S = 5.0  # time limit per integration call (ms are needed): a missed stall costs 2 x 5 s, not forever
SETTINGS = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])


@pytest.fixture(scope="module")
def pot():
    return Potential.preset("MWPotential2014")


special = st.sampled_from([0.0, -0.0, np.nan, np.inf, -np.inf, 1e300, -1e300, 1e-300, 1e155])
position = st.one_of(st.floats(-30, 30, allow_nan=False), special)
velocity = st.one_of(st.floats(-600, 600, allow_nan=False), special)
row = st.tuples(position, position, position, velocity, velocity, velocity)
# A few rows put on the z axis (x = y = 0) or in the mid-plane at rest, the starts that used to stall.
singular_row = st.one_of(
    st.tuples(st.just(0.0), st.just(0.0), st.floats(-5, 5), velocity, velocity, velocity),
    st.tuples(st.floats(-20, -1), st.just(0.0), st.just(0.0), st.floats(-300, 300), st.just(0.0), st.just(0.0)),
)
stars = st.lists(st.one_of(row, row, singular_row), min_size=1, max_size=4).map(lambda rows: np.array(rows, float))


def _reasons(flag):
    return [r for r in str(flag).split(";") if r]


def _check_row_result(stars, flags, params, i, track_start=None):
    """One star's outcome: NaN + a known flag, or finite, physical values."""
    reasons = _reasons(flags[i])
    assert set(reasons) <= set(FLAGS), reasons
    if not np.all(np.isfinite(stars[i])):
        assert reasons == ["nonfinite_input"]
    hard = [r for r in reasons if r not in ADVISORY_FLAGS]
    values = [params[k][i] for k in ("rperi", "rapo", "zmax", "eccentricity")]
    if hard:
        assert all(np.isnan(v) for v in values), (reasons, values)
        return
    rperi, rapo, zmax, ecc = values
    assert np.all(np.isfinite(values)), (reasons, values)
    assert 0 <= rperi <= rapo and zmax >= 0 and 0 <= ecc <= 1
    r0 = math.hypot(math.hypot(stars[i, 0], stars[i, 1]), stars[i, 2])
    assert rperi <= r0 * (1 + 1e-9) + 1e-12 and rapo >= r0 * (1 - 1e-9) - 1e-12  # t = 0 is a sample
    if track_start is not None:  # the track starts where the star is: nothing changed silently
        np.testing.assert_allclose(track_start[i], stars[i], rtol=1e-9, atol=1e-9)


@settings(max_examples=40, **SETTINGS)
@given(stars=stars)
def test_integrate_orbits_on_hostile_rows(pot, stars):
    orbits = integrate_orbits(stars, pot, t=T_SHORT, timeout=LIMIT_S)
    assert len(orbits) == len(stars) and orbits.t.unit == u.Gyr
    # The limit is the fallback; every start generated here is recognised before integrating.
    assert not any("integration_timeout" in f for f in orbits.flags)
    start = np.column_stack([getattr(orbits, c)[:, 0].value for c in NAMES])
    params = {k: getattr(orbits, k).value for k in ("rperi", "rapo", "zmax", "eccentricity")}
    for i in range(len(stars)):
        _check_row_result(stars, orbits.flags, params, i, track_start=start if not _hard(orbits.flags[i]) else None)
        if _hard(orbits.flags[i]) and "unbound" not in _reasons(orbits.flags[i]):
            assert np.all(np.isnan(orbits.x[i].value))


def _hard(flag):
    return any(r not in ADVISORY_FLAGS for r in _reasons(flag))


@settings(max_examples=40, **SETTINGS)
@given(stars=stars)
def test_staeckel_parameters_on_hostile_rows(pot, stars):
    table = orbit_parameters(stars, pot)
    params = {k: table[k].value for k in ("rperi", "rapo", "zmax", "eccentricity")}
    for i in range(len(stars)):
        reasons = _reasons(table["flag"][i])
        assert set(reasons) <= set(FLAGS)
        if not _hard(table["flag"][i]):
            rperi, rapo, zmax, ecc = (params[k][i] for k in ("rperi", "rapo", "zmax", "eccentricity"))
            assert np.all(np.isfinite([rperi, rapo, zmax, ecc]))
            assert 0 <= rperi <= rapo and zmax >= 0 and 0 <= ecc <= 1
            # Lz = y vx - x vy (R v_phi in our convention), for every computed star.
            x, y, _, vx, vy, _ = stars[i]
            assert table["Lz"][i].value == pytest.approx(y * vx - x * vy, rel=1e-9, abs=1e-9)
        else:
            assert all(np.isnan(params[k][i]) for k in params)


@settings(max_examples=15, **SETTINGS)
@given(stars=stars)
def test_integrated_parameters_on_hostile_rows(pot, stars):
    table = orbit_parameters(stars, pot, method="integrate", t=T_SHORT, timeout=LIMIT_S)
    params = {k: table[k].value for k in ("rperi", "rapo", "zmax", "eccentricity")}
    for i in range(len(stars)):
        _check_row_result(stars, table["flag"], params, i)
    # A 20 Myr span never covers a whole orbit: every computed star says so.
    for i in range(len(stars)):
        if not _hard(table["flag"][i]) and np.isfinite(params["rapo"][i]):
            circular = params["rapo"][i] - params["rperi"][i] <= 1e-9 * params["rapo"][i]
            assert "short_time_grid" in _reasons(table["flag"][i]) or circular


time_value = st.one_of(st.floats(-2, 2, allow_nan=False), st.sampled_from([np.nan, np.inf, 0.0, 0.01]))


@settings(max_examples=60, **SETTINGS)
@given(t=st.lists(time_value, min_size=0, max_size=6))
def test_time_grids_are_validated(pot, t):
    star = np.array([-8.122, 0.0, 0.0208, 12.9, 245.6, 7.78])
    arr = np.asarray(t, dtype=float)
    try:
        orbits = integrate_orbits(star, pot, t=arr, timeout=LIMIT_S)
    except TimeGridError as err:
        assert "t must" in str(err)
        return
    # Accepted: starts at 0 (to 1e-12 of the span, the documented tolerance), at least two times,
    # evenly spaced with a non-zero step, kept as given.
    assert arr.size >= 2 and np.all(np.isfinite(arr)) and abs(arr[0]) <= 1e-12 * abs(arr[-1] - arr[0])
    steps = np.diff(arr)
    assert steps[0] != 0 and np.allclose(steps, steps[0], rtol=1e-6, atol=0)
    np.testing.assert_array_equal(orbits.t.to_value(u.Gyr), arr)


@pytest.mark.parametrize(
    "t, message",
    [
        ([0.0, 0.02, 0.01, 0.03], r"evenly spaced .* between indices 1 and 2"),  # unsorted
        ([0.0, 0.01, 0.01, 0.02], r"evenly spaced .* between indices 1 and 2"),  # duplicated
        ([0.0, -0.01, -0.03], r"evenly spaced .* between indices 1 and 2"),
        ([0.0, 0.0, 0.0], r"the step is zero"),
        ([], r"at least 2 times"),
    ],
)
def test_named_time_grid_errors(pot, t, message):
    for call in (
        lambda: integrate_orbits(np.zeros(6) + [-8, 0, 0, 0, 220, 0], pot, t=t),
        lambda: orbit_parameters(np.zeros(6) + [-8, 0, 0, 0, 220, 0], pot, method="integrate", t=t),
    ):
        with pytest.raises(TimeGridError, match=message):
            call()


@settings(max_examples=30, **SETTINGS)
@given(column=st.sampled_from(NAMES), row_index=st.integers(0, 2), junk=st.sampled_from(["abc", "", "1,5", None]))
def test_non_numbers_in_a_column_are_named(pot, column, row_index, junk):
    columns = {n: [-8.0, -7.5, -9.0] if n == "x" else [0.0, 0.1, -0.1] for n in NAMES}
    columns["vy"] = [230.0, 220.0, 210.0]
    columns[column] = [str(v) for v in columns[column]]
    columns[column][row_index] = junk
    unit = dict(zip(NAMES, UNITS))[column]
    if junk is None:  # numpy reads None as a missing value (NaN): that row is flagged, the others computed
        assert list(integrate_orbits(columns, pot, t=T_SHORT).flags)[row_index] == "nonfinite_input"
        flags = list(orbit_parameters(columns, pot)["flag"])
        assert flags[row_index] == "nonfinite_input" and flags.count("") == 2
        return
    for call in (lambda: integrate_orbits(columns, pot, t=T_SHORT), lambda: orbit_parameters(columns, pot)):
        with pytest.raises(OrbitError) as err:
            call()
        text = str(err.value)
        assert repr(column) in text and f"[{row_index}]" in text and unit.to_string() in text


@settings(max_examples=20, **SETTINGS)
@given(column=st.sampled_from(NAMES), unit=st.sampled_from([u.s, u.kg, u.deg, u.km / u.s, u.kpc]))
def test_wrong_units_are_named(pot, column, unit):
    expected = dict(zip(NAMES, UNITS))[column]
    values = {n: np.array([-8.1]) if n == "x" else np.array([0.0]) for n in NAMES}
    values["vy"] = np.array([230.0])
    table = QTable({n: values[n] * un for n, un in zip(NAMES, UNITS)})
    table[column] = values[column] * unit
    if unit.is_equivalent(expected):
        out = integrate_orbits(table, pot, t=T_SHORT)  # an equivalent unit is converted, not refused
        given_value = (values[column] * unit).to_value(expected)[0]
        assert getattr(out, column)[0, 0].to_value(expected) == pytest.approx(given_value)
        return
    for call in (lambda: integrate_orbits(table, pot, t=T_SHORT), lambda: orbit_parameters(table, pot)):
        with pytest.raises(ValueError, match=rf"column '{column}'.*{expected.to_string()}"):
            call()


def test_empty_inputs_are_refused(pot):
    empty = QTable({n: np.array([]) * un for n, un in zip(NAMES, UNITS)})
    for stars in (empty, np.zeros((0, 6))):
        for call in (lambda: integrate_orbits(stars, pot, t=T_SHORT), lambda: orbit_parameters(stars, pot)):  # noqa: B023 (each lambda is called within the iteration)
            with pytest.raises(OrbitError, match="no rows|shape"):
                call()
