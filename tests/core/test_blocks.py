"""Tests of the block-and-thread machinery behind the conversions (mwkin._blocks) and of the fast
paths it relies on: results must not depend on the block size or the number of threads, and the
catalogue reader's shortcuts must keep its behaviour.

These are internal consistency checks (common practice (no source)); the conversions themselves are
checked against outside sources in tests/reference/.
"""

from __future__ import annotations

import threading

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable, Table

from mwkin import kinematics
from mwkin._blocks import run_blocks, thread_count
from mwkin.catalog import _read_catalog, read_catalog
from mwkin.columns import CORRELATION_COLUMNS
from mwkin.distances import InverseParallax
from mwkin.frames import SolarFrame

MASYR = u.mas / u.yr
FRAME = SolarFrame(R0=8.1, z_sun=21.0, v_sun=(12.0, 245.0, 7.5))
CORRELATIONS = CORRELATION_COLUMNS


def _stars(n, seed=3):
    rng = np.random.default_rng(seed)
    plx = rng.uniform(0.2, 5.0, n)
    t = QTable(
        {
            "ra": rng.uniform(0, 360, n) * u.deg,
            "dec": np.degrees(np.arcsin(rng.uniform(-1, 1, n))) * u.deg,
            "parallax": plx * u.mas,
            "pmra": rng.normal(0, 10, n) * MASYR,
            "pmdec": rng.normal(0, 10, n) * MASYR,
            "radial_velocity": rng.normal(0, 40, n) * u.km / u.s,
            "ra_error": rng.uniform(0.01, 0.3, n) * u.mas,
            "dec_error": rng.uniform(0.01, 0.3, n) * u.mas,
            "parallax_error": 0.05 * plx * u.mas,
            "pmra_error": rng.uniform(0.02, 0.3, n) * MASYR,
            "pmdec_error": rng.uniform(0.02, 0.3, n) * MASYR,
            "radial_velocity_error": rng.uniform(0.5, 5, n) * u.km / u.s,
        }
    )
    for name in CORRELATIONS:
        t[name] = rng.uniform(-0.15, 0.15, n)
    t["radial_velocity"][[3, 17]] = np.nan  # some stars without velocities
    t["parallax"][5] = -0.1 * u.mas  # and one without a distance
    return t


# ----------------------------------------------------------------------------------- thread count
def test_thread_count_default_and_environment(monkeypatch):
    import os

    cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    monkeypatch.delenv("MWKIN_THREADS", raising=False)
    assert thread_count() == min(2, cpus)
    monkeypatch.setenv("MWKIN_THREADS", "1")
    assert thread_count() == 1
    monkeypatch.setenv("MWKIN_THREADS", "64")
    assert thread_count() == min(64, cpus)  # never more than the CPUs


@pytest.mark.parametrize("bad", ["0", "-2", "two", "1.5"])
def test_thread_count_rejects_bad_environment(monkeypatch, bad):
    monkeypatch.setenv("MWKIN_THREADS", bad)
    with pytest.raises(ValueError, match=rf"MWKIN_THREADS must be a whole number >= 1.*'{bad}'"):
        thread_count()


# ------------------------------------------------------------------------------------ run_blocks
@pytest.mark.parametrize("threads", [1, 2, 3])
def test_run_blocks_covers_every_row_once(threads):
    n, block = 1003, 64
    seen = np.zeros(n, dtype=int)
    scratches = set()
    lock = threading.Lock()

    def work(start, stop, scratch):
        scratch.setdefault("calls", 0)
        scratch["calls"] += 1
        with lock:
            seen[start:stop] += 1
            scratches.add(id(scratch))

    run_blocks(n, block, work, threads=threads)
    assert np.all(seen == 1)
    assert 1 <= len(scratches) <= threads  # one scratch object per thread that took part


def test_run_blocks_raises_the_error_of_a_block():
    def work(start, stop, scratch):
        if start == 640:
            raise ZeroDivisionError("block at 640")

    with pytest.raises(ZeroDivisionError, match="block at 640"):
        run_blocks(2000, 64, work, threads=2)


def test_run_blocks_carries_numpy_error_settings_to_the_threads():
    seen = []

    def work(start, stop, scratch):
        seen.append(np.geterr()["divide"])

    with np.errstate(divide="raise"):
        run_blocks(4000, 100, work, threads=2)
    assert set(seen) == {"raise"}


# ------------------------------------------------------------ results independent of the blocking
@pytest.mark.parametrize("errors", ["none", "linear"])
def test_results_do_not_depend_on_block_size_or_threads(monkeypatch, errors):
    t = _stars(301)
    kw = dict(errors=errors, distance=InverseParallax(min_snr=0))
    if errors == "linear":
        kw["return_covariance"] = True
    monkeypatch.setenv("MWKIN_THREADS", "1")
    reference = kinematics.to_galactocentric(t, FRAME, **kw)
    for block, threads in ((7, "2"), (64, "2"), (100, "1")):
        monkeypatch.setattr(kinematics._shared, "BLOCK", block)
        monkeypatch.setenv("MWKIN_THREADS", threads)
        out = kinematics.to_galactocentric(t, FRAME, **kw)
        assert out.colnames == reference.colnames
        for name in reference.colnames:
            a, b = np.asarray(out[name]), np.asarray(reference[name])
            if a.dtype.kind == "f":
                # Matrix products may sum in another order on other block sizes: round-off only.
                np.testing.assert_allclose(
                    a, b, rtol=1e-12, atol=1e-15 * np.nanmax(np.abs(b)), err_msg=f"{name} block={block}"
                )
            else:
                np.testing.assert_array_equal(a, b, err_msg=name)
        assert out.meta == reference.meta


def test_array_functions_on_many_blocks_match_a_single_block(monkeypatch):
    rng = np.random.default_rng(5)
    n = 500
    args = (
        rng.uniform(0, 360, n),
        rng.uniform(-90, 90, n),
        rng.uniform(0.1, 5, n),
        rng.normal(0, 5, n),
        rng.normal(0, 5, n),
        rng.normal(0, 30, n),
    )
    whole = kinematics.galactocentric_from_observables(*args, frame=FRAME)
    monkeypatch.setattr(kinematics._shared, "BLOCK", 33)
    monkeypatch.setenv("MWKIN_THREADS", "2")
    split = kinematics.galactocentric_from_observables(*args, frame=FRAME)
    for name, values in whole.items():
        np.testing.assert_allclose(split[name], values, rtol=1e-13, atol=1e-12, err_msg=name)


# ------------------------------------------------------------------- catalogue reader fast paths
def test_internal_reader_shares_memory_only_where_nothing_changes():
    t = Table(
        {"ra": [10.0, 370.0], "dec": [5.0, -6.0], "parallax": [1.0, 2.0], "pmra": [1.0, 2.0], "pmdec": [3.0, 4.0]}
    )
    t["pmdec"].unit = "arcsec/yr"  # converted: a new array
    shared = _read_catalog(t, copy=False)
    copied = read_catalog(t)
    for name in shared.colnames:
        np.testing.assert_array_equal(np.asarray(shared[name]), np.asarray(copied[name]), err_msg=name)
    assert shared.meta == copied.meta
    assert np.shares_memory(np.asarray(shared["parallax"]), np.asarray(t["parallax"]))
    assert not np.shares_memory(np.asarray(copied["parallax"]), np.asarray(t["parallax"]))
    # ra had to be wrapped and pmdec converted: those are copies, and the input is untouched.
    assert not np.shares_memory(np.asarray(shared["ra"]), np.asarray(t["ra"]))
    assert list(t["ra"]) == [10.0, 370.0] and list(t["pmdec"]) == [3.0, 4.0]
    assert shared["pmdec"][0].to_value(MASYR) == pytest.approx(3000.0)


def test_internal_reader_fills_masked_entries_without_touching_the_input():
    t = Table(
        {
            "ra": [10.0, 20.0, 30.0],
            "dec": [5.0, -6.0, 7.0],
            "parallax": [1.0, 2.0, 3.0],
            "pmra": [1.0, 2.0, 3.0],
            "pmdec": [3.0, 4.0, 5.0],
        },
        masked=True,
    )
    t["parallax"].mask = [False, True, False]
    out = _read_catalog(t, copy=False)
    assert np.isnan(out["parallax"][1].value)
    assert out.meta["nan_counts"]["parallax"] == 1
    np.testing.assert_array_equal(out["has_nan"], [False, True, False])
    assert np.asarray(t["parallax"].data)[1] == 2.0  # the masked value below is kept


def test_clean_columns_skip_row_checks_but_problems_are_still_found():
    # Out-of-range values anywhere in a column are found even though clean columns are settled by
    # their smallest and largest values alone.
    n = 70_000  # more than one scan block of the reader
    t = Table(
        {
            "ra": np.full(n, 10.0),
            "dec": np.zeros(n),
            "parallax": np.ones(n),
            "pmra": np.zeros(n),
            "pmdec": np.zeros(n),
            "parallax_error": np.full(n, 0.1),
            "ra_dec_corr": np.zeros(n),
        }
    )
    t["dec"][66_000] = 90.5
    t["parallax_error"][69_999] = -0.01
    t["ra_dec_corr"][3] = np.nan
    t["ra_dec_corr"][65_537] = 1.5
    with pytest.raises(Exception) as info:
        read_catalog(t)
    message = str(info.value)
    assert "'dec': values outside [-90, 90] deg at row 66000" in message
    assert "'parallax_error': negative uncertainties at row 69999" in message
    assert "'ra_dec_corr': correlations outside [-1, 1] at row 65537" in message
