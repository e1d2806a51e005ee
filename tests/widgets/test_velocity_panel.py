"""VelocityPanel driven from Python: sample and traits in, `.result` / view data / `.status` / `.selection` out."""

from __future__ import annotations

import datetime
import html
import json

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.table import Table
from disc_mock import flat_disc_sample

import mwkin as mk
from mwkin.widgets import FrameState, PotentialState, VelocityPanel
from mwkin.widgets.views import SampleScatter

N = 1500


def astropy_sample(n=N, seed=3, plx_error=(0.02, 0.06), rv_fraction=0.6):
    """Disc-like stars within ~1 kpc of the Sun, made with astropy's Galactocentric frame (not mwkin's code)."""
    return flat_disc_sample(n, seed, plx_error=plx_error, rv_fraction=rv_fraction)


@pytest.fixture(scope="module")
def sample():
    return astropy_sample()


def panel(sample, **kwargs):
    return VelocityPanel(sample, **kwargs).wait()


def view_xy(view):
    data = view.data()
    return np.asarray(data["x"], dtype=float), np.asarray(data["y"], dtype=float)


def test_first_result_and_the_three_views(sample):
    p = panel(sample)
    assert p.status.startswith("ready")
    out = p.result
    assert len(out) == len(sample)
    has_v = np.asarray(out["has_velocity"])
    assert 0.4 * len(sample) < has_v.sum() < 0.8 * len(sample)
    # Toomre diagram: x = v_phi, y = sqrt(v_R^2 + v_z^2) (docstring convention); rows without velocity NaN
    x, y = view_xy(p.toomre)
    np.testing.assert_allclose(x[has_v], out["v_phi"].value[has_v], rtol=1e-6)
    np.testing.assert_allclose(y[has_v], np.hypot(out["v_R"].value, out["v_z"].value)[has_v], rtol=1e-6)
    assert np.isnan(x[~has_v]).all()
    x, y = view_xy(p.uv_plane)
    np.testing.assert_allclose(x[has_v], out["U"].value[has_v], rtol=1e-6, atol=1e-4)
    np.testing.assert_allclose(y[has_v], out["V"].value[has_v], rtol=1e-6, atol=1e-4)
    x, y = view_xy(p.rotation)
    np.testing.assert_allclose(x[has_v], out["R"].value[has_v], rtol=1e-6)
    # a disc sample rotates: the median v_phi is near the 230 km/s it was made with
    assert np.median(out["v_phi"].value[has_v]) == pytest.approx(230.0, abs=5.0)


def test_result_agrees_with_astropy_galactocentric(sample):
    frame_state = FrameState()
    frame_state.R0 = 8.3
    p = panel(sample, frame=frame_state)
    out = p.result
    rows = np.flatnonzero(np.asarray(out["has_velocity"]))[:50]
    s = sample[rows]
    plx = s["parallax"].to_value(u.mas)
    icrs = SkyCoord(
        ra=s["ra"],
        dec=s["dec"],
        distance=(1.0 / plx) * u.kpc,
        pm_ra_cosdec=s["pmra"],
        pm_dec=s["pmdec"],
        radial_velocity=s["radial_velocity"],
        frame="icrs",
    )
    gc = icrs.transform_to(frame_state.frame.to_astropy())
    # astropy's Galactocentric frame is the reference (DESIGN.md); v_phi = (y vx - x vy) / R, rotation-positive
    x, y = gc.x.to_value(u.kpc), gc.y.to_value(u.kpc)
    vx, vy = gc.v_x.to_value(u.km / u.s), gc.v_y.to_value(u.km / u.s)
    np.testing.assert_allclose(out["x"].value[rows], x, atol=1e-9)
    np.testing.assert_allclose(out["v_phi"].value[rows], (y * vx - x * vy) / np.hypot(x, y), atol=1e-6)


def test_frame_change_recomputes_result_and_views(sample):
    frame_state = FrameState()
    p = panel(sample, frame=frame_state)
    before = p.result
    x_before, _ = view_xy(p.rotation)
    frame_state.R0 = 8.5
    p.wait()
    assert p.status.startswith("ready")
    assert p.result is not before
    assert p.result.meta["frame"]["R0_kpc"] == 8.5
    has_v = np.asarray(p.result["has_velocity"])
    x_after, _ = view_xy(p.rotation)
    # the stars sit ~1 kpc from the Sun: moving the Sun out by 0.378 kpc moves their R by about as much
    shift = np.nanmedian(x_after[has_v] - x_before[has_v])
    assert shift == pytest.approx(0.378, abs=0.05)
    assert "R0=8.5 kpc" in p.provenance_text


def test_dropped_counts_and_reasons_are_on_screen(sample):
    p = panel(sample)
    dropped = {k: v for k, v in p.result.meta["dropped"].items() if v}
    assert dropped, "the sample lacks radial velocities for ~40 % of the stars"
    text = p.counts_label.value
    assert f"{len(sample)} stars in" in text
    assert f"{int(np.asarray(p.result['has_velocity']).sum())} with full space velocities" in text
    for reason, count in dropped.items():
        assert f"{reason.replace('_', ' ')}: {count}" in text


def test_selection_is_a_mask_over_the_input_rows(sample):
    frame_state = FrameState()
    p = panel(sample, frame=frame_state)
    has_v = np.asarray(p.result["has_velocity"])
    with_v = np.flatnonzero(has_v)[[3, 10, 200, 401]]
    without_v = np.flatnonzero(~has_v)[:2]
    p.toomre.selected_indices = np.concatenate([with_v, without_v])
    mask = p.selection
    assert mask.shape == (len(sample),) and mask.dtype == bool
    np.testing.assert_array_equal(np.flatnonzero(mask), np.sort(with_v))  # no star without velocities
    assert p.n_selected == 4
    # the other views show the same stars
    np.testing.assert_array_equal(p.uv_plane.selected_indices, np.sort(with_v))
    np.testing.assert_array_equal(p.rotation.selected_indices, np.sort(with_v))
    # the same stars stay selected when the frame changes
    frame_state.R0 = 8.3
    p.wait()
    np.testing.assert_array_equal(np.flatnonzero(p.selection), np.sort(with_v))
    # a selection made in another view replaces it
    p.rotation.selected_indices = with_v[:1]
    np.testing.assert_array_equal(np.flatnonzero(p.selection), with_v[:1])
    p.rotation.clear_selection()
    assert not p.selection.any() and p.n_selected == 0


def test_use_canvas_false_warns_and_the_one_whole_sample_view_is_used():
    # The bqplot fallback was a second implementation of the whole-sample scatter; it is gone. A
    # selection made on the canvas view (as the browser sends it: indices of every star in the box,
    # tests/browser/test_views_browser.py) reaches the panel's selection for all stars, drawn or not.
    big = astropy_sample(n=7000, seed=5, rv_fraction=0.9)
    with pytest.warns(DeprecationWarning, match="use_canvas=False is deprecated"):
        p = panel(big, use_canvas=False)
    view = p.toomre.view
    assert isinstance(view, SampleScatter)
    x, y = view_xy(p.toomre)
    expected = (x >= 200) & (x <= 240) & (y >= 0) & (y <= 30)
    view.selected_indices = np.flatnonzero(expected)
    np.testing.assert_array_equal(p.selection, expected)
    assert expected.sum() > 100


def _file_bytes(table, fmt, folder):
    """The bytes of ``table`` written by astropy in one of the formats read_catalog accepts."""
    names = {"csv": "ascii.csv", "ecsv": "ascii.ecsv", "fits": "fits", "votable": "votable", "parquet": "parquet"}
    path = folder / f"written.{fmt}"
    Table(table).write(path, format=names[fmt], overwrite=True)
    return path.read_bytes()


def _upload(p, name, content):
    p.loader.upload.value = (
        {
            "name": name,
            "type": "",
            "size": len(content),
            "content": memoryview(content),
            "last_modified": datetime.datetime(2024, 1, 1, tzinfo=datetime.timezone.utc),
        },
    )
    p.wait()


@pytest.mark.parametrize(
    "fmt,suffix", [("csv", ".csv"), ("ecsv", ".ecsv"), ("fits", ".fits"), ("votable", ".vot"), ("parquet", ".parquet")]
)
def test_uploaded_file_replaces_the_sample(sample, fmt, suffix, tmp_path):
    small = sample[:300]
    p = VelocityPanel(threaded=False)
    assert p.result is None and "no sample" in p.status
    _upload(p, f"stars{suffix}", _file_bytes(small, fmt, tmp_path))
    assert p.status.startswith("ready"), p.status
    assert len(p.result) == 300
    assert p.config["sample"]["kind"] == "upload" and p.config["sample"]["name"] == f"stars{suffix}"
    reference = mk.to_galactocentric(mk.read_catalog(small), mk.SolarFrame.preset("astropy v4.0"))
    np.testing.assert_allclose(p.result["v_phi"].value, reference["v_phi"].value, rtol=1e-6, equal_nan=True)


def test_broken_upload_shows_the_error_and_keeps_the_sample(sample, tmp_path):
    p = panel(sample, threaded=False)
    result, stars = p.result, p.sample
    _upload(p, "broken.csv", b"ra,dec,parallax\n1,2,3\n4,5\n")
    assert p.status.startswith("error"), p.status
    assert "kept the previous sample" in p.status
    assert p.result is result and p.sample is stars
    _upload(p, "stars.txt", b"whatever")
    assert "format" in p.status and p.result is result
    # a good file afterwards works
    _upload(p, "ok.ecsv", _file_bytes(sample[:50], "ecsv", tmp_path))
    assert p.status.startswith("ready") and len(p.result) == 50


def test_bad_setting_shows_the_error_and_keeps_the_result(sample):
    p = panel(sample)
    result = p.result
    x, _ = view_xy(p.toomre)
    p.distance_controls.zero_point.value = float("nan")
    p.wait()
    assert p.status.startswith("error") and "zero_point" in p.status
    assert result is not None and p.result is None  # the old result was for other settings
    assert p._views_box.layout.visibility == "hidden"
    np.testing.assert_array_equal(view_xy(p.toomre)[0], x)
    p.distance_controls.zero_point.value = 0.0
    p.wait()
    assert p.status.startswith("ready")


def test_low_parallax_snr_caveat(sample):
    p = panel(sample)
    assert p.caveat_label.value == ""  # parallax/error > 5 for nearly all of these stars
    p.distance_controls.min_snr.value = 3.0
    p.wait()
    assert "1/parallax" in p.caveat_label.value and "below 5" in p.caveat_label.value
    noisy = astropy_sample(n=600, seed=7, plx_error=(0.3, 0.6))  # most stars at parallax/error ~ 2-5
    q = panel(noisy)
    assert "% of the stars have parallax/error < 5" in html.unescape(q.caveat_label.value)


def test_linear_errors_add_sigma_columns(sample):
    p = panel(sample, errors="linear")
    assert "sigma_v_phi" in p.result.colnames
    has_v = np.asarray(p.result["has_velocity"])
    sig = p.result["sigma_v_phi"].value[has_v]
    assert np.all(np.isfinite(sig)) and np.all(sig > 0)
    p.errors_control.value = "none"
    p.wait()
    assert "sigma_v_phi" not in p.result.colnames


def test_distance_column_choice_appears_with_a_distance_column(sample):
    with_d = sample[:400].copy()
    with_d["distance"] = (1.0 / with_d["parallax"].to_value(u.mas)) * 1.1 * u.kpc
    p = panel(with_d)
    assert "distance column" in p.distance_controls.method.options
    before = p.result["R"].value.copy()
    p.distance_controls.method.value = "distance column"
    p.wait()
    assert p.result.meta["distance"]["method"] == "distance_column"
    assert not np.allclose(p.result["R"].value, before, equal_nan=True)
    assert "distance column" not in panel(sample).distance_controls.method.options


def test_config_round_trip_with_a_table_and_with_a_path(sample, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # the notebook's folder: configs may read samples under it
    frame_state = FrameState()
    frame_state.R0 = 8.2
    p = panel(sample, frame=frame_state, errors="linear", colour_by="z [kpc]")
    p.distance_controls.min_snr.value = 8.0
    p.wait()
    config = json.loads(json.dumps(p.config))
    assert config["sample"]["kind"] == "table" and "pass it again" in config["sample"]["note"]
    q = VelocityPanel(sample, threaded=False)
    q.load_config(config)
    q.wait()
    assert q.config == config
    np.testing.assert_allclose(q.result["v_phi"].value, p.result["v_phi"].value, equal_nan=True)
    # a sample read from a path comes back from the config alone
    path = tmp_path / "stars.ecsv"
    Table(sample[:200]).write(path)
    r = panel(str(path))
    saved = tmp_path / "panel.json"
    r.save_config(saved)
    s = VelocityPanel(threaded=False)
    s.load_config_file(saved)
    s.wait()
    assert s.sample_source.path == str(path) and s.status.startswith("ready")
    np.testing.assert_allclose(s.result["v_phi"].value, r.result["v_phi"].value, equal_nan=True)
    # without the table, the config says what is missing
    t = VelocityPanel(threaded=False)
    t.load_config(config)
    assert t.status.startswith("error") and "pass it again" in t.status


def test_code_snippet_reproduces_the_result(sample):
    frame_state = FrameState()
    frame_state.v_sun = (11.1, 240.0, 7.0)
    p = panel(sample, frame=frame_state)
    p.distance_controls.zero_point.value = -0.017
    p.wait()
    namespace = {"sample": sample}
    exec(p.code(), namespace)
    np.testing.assert_array_equal(namespace["out"]["v_phi"].value, p.result["v_phi"].value)
    np.testing.assert_array_equal(namespace["out"]["flag"], p.result["flag"])


def test_export_png_and_svg(sample, tmp_path):
    p = panel(sample)
    p.toomre.selected_indices = np.flatnonzero(np.asarray(p.result["has_velocity"]))[:20]
    png = p.export_figure(tmp_path / "velocities.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    svg = p.export_figure(tmp_path / "velocities.svg").read_text()
    assert svg.lstrip().startswith("<?xml") and "<svg" in svg
    assert "Toomre diagram" in svg and "U-V plane" in svg


def test_panels_sharing_a_frame_update_together(sample):
    frame_state, potential_state = FrameState(), PotentialState()
    a = panel(sample, frame=frame_state, potential=potential_state)
    b = panel(sample[:500], frame=frame_state, potential=potential_state)
    frame_state.apply_preset("Schoenrich 2010 + GRAVITY 2019")
    a.wait(), b.wait()
    assert a.result.meta["frame"]["R0_kpc"] == b.result.meta["frame"]["R0_kpc"] == pytest.approx(8.178)
    potential_state.solar_V = 15.0
    assert f"{frame_state.v_sun[1] - 15.0:.1f} km/s" in a.lsr_label.value


def test_demo_survey_counts_and_selection():
    from mwkin.demo import survey

    demo = survey(n=5000, seed=2)
    p = panel(demo)
    out = p.result
    has_v = np.asarray(out["has_velocity"])
    # stars with velocities need a radial velocity and a usable distance (parallax/error >= 5)
    snr = demo["parallax"].value / demo["parallax_error"].value
    expected = np.isfinite(demo["radial_velocity"].value) & (snr >= 5)
    np.testing.assert_array_equal(has_v, expected)
    assert f"{int(expected.sum())} with full space velocities" in p.counts_label.value
    rows = np.flatnonzero(has_v)[::7]
    p.uv_plane.selected_indices = rows
    np.testing.assert_array_equal(np.flatnonzero(p.selection), rows)
