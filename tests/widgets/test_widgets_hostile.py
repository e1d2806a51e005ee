"""Widgets under hostile but realistic use: stale results, half-applied configs, bad samples and configs.

Each test reproduces a failure found by trying the widgets as a careless or hostile user would: a stale
result landing on top of an error, a config applied halfway, an invalid sample raising into the cell, a
config reading an arbitrary file. The rule they check: every error is in the status line, and no
widget shows (or offers as ``.result``) a result computed from inputs other than the current ones.
"""

from __future__ import annotations

import copy
import json
import threading
import warnings

import pytest
import traitlets
from astropy.table import Table

import mwkin as mk
from mwkin.widgets import FrameState, OortFitter, OrbitExplorer, PotentialState, VelocityPanel
from mwkin.widgets._live import LiveRunner
from mwkin.widgets._sample import SampleWarning, allow_sample_folder
from mwkin.widgets.state import ConfigError


@pytest.fixture(scope="module")
def survey():
    return mk.demo.survey(n=3000, seed=3)


def hidden(widget):
    return all(view.layout.visibility == "hidden" for view in widget._result_views())


def visible(widget):
    return all(view.layout.visibility == "visible" for view in widget._result_views())


def hold_next_computation(widget):
    """Make the widget's next computation wait until the returned event is set (a slow computation)."""
    gate, started = threading.Event(), threading.Event()
    compute = widget._runner._compute

    def slow(request):
        started.set()
        assert gate.wait(30), "test gate never opened"
        widget._runner._compute = compute
        return compute(request)

    widget._runner._compute = slow
    return gate, started


# ---------------------------------------------------------------------- the live runner
def test_superseding_drops_a_result_still_in_flight():
    delivered, errors = [], []
    gate = threading.Event()

    def compute(request):
        gate.wait(10)
        return request * 10

    runner = LiveRunner(compute, lambda r, q, s: delivered.append(r), lambda e, q: errors.append(e))
    runner.submit(1)
    runner.supersede()  # the next inputs failed validation: request 1 is stale now
    gate.set()
    assert runner.wait(10)
    assert delivered == [] and errors == []
    runner.submit(2)  # and the runner still works afterwards
    assert runner.wait(10) and delivered == [20]


def test_superseding_drops_a_queued_request():
    delivered = []
    gate = threading.Event()
    runner = LiveRunner(lambda q: (gate.wait(10), q)[1], lambda r, q, s: delivered.append(r), lambda e, q: None)
    runner.submit("running")
    runner.submit("queued")
    runner.supersede()
    gate.set()
    assert runner.wait(10) and runner.idle
    assert delivered == []


# ---------------------------------------------------------------------- stale results never win
def _bad_potential(widget, pot):
    bad = copy.deepcopy(pot.parameters)
    bad["bulge"]["mass"] = -1e10
    pot.parameters = bad  # a preset is still chosen: a valid request is queued
    pot.preset = ""  # now the bad parameters count: the request fails
    return "bulge.mass"


def _bad_zero_point(widget, pot):
    widget.distance_controls.zero_point.value = float("nan")
    return "zero_point"


@pytest.mark.parametrize("make, spoil", [(OortFitter, _bad_potential), (VelocityPanel, _bad_zero_point)])
def test_a_stale_result_never_overwrites_the_error_of_newer_inputs(survey, make, spoil):
    frame, pot = FrameState(), PotentialState()
    w = make(survey, frame=frame, potential=pot).wait()
    assert w.status.startswith("ready")
    gate, started = hold_next_computation(w)
    frame.R0 = 8.5  # valid: a computation starts and is held
    assert started.wait(10)
    with pytest.raises(traitlets.TraitError, match="R0 must be a finite distance"):
        frame.R0 = float("inf")  # refused by the state: nothing changes
    assert frame.R0 == 8.5
    words = spoil(w, pot)
    gate.set()
    w.wait()
    assert w.status.startswith("error") and words in w.status
    assert w.result is None and hidden(w)


def test_orbit_explorer_error_is_not_overwritten_by_an_older_orbit():
    frame, pot = FrameState(), PotentialState()
    ex = OrbitExplorer(frame=frame, potential=pot).wait()
    gate, started = hold_next_computation(ex)
    frame.R0 = 8.3
    assert started.wait(10)
    ex.observable_fields["parallax"].text.value = -0.5  # the current inputs are invalid
    gate.set()
    ex.wait()
    assert ex.status.startswith("error") and "parallax = -0.5 mas" in ex.status
    assert ex.result is None and hidden(ex)


def test_an_invalid_potential_is_an_error_in_every_analysis_widget(survey):
    """A negative bulge mass set in the shared state: error on screen, no result from the old model."""
    pot = PotentialState()
    pot.preset = ""
    widgets_ = [
        OortFitter(survey, potential=pot).wait(),
        VelocityPanel(survey, potential=pot).wait(),
        OrbitExplorer(potential=pot).wait(),
    ]
    assert all(w.status.startswith("ready") for w in widgets_)
    bad = copy.deepcopy(pot.parameters)
    bad["bulge"]["mass"] = -1e10
    pot.parameters = bad
    for w in widgets_:
        w.wait()
    oort, panel, orbit = widgets_
    for w in (oort, orbit):  # these use the potential
        assert w.status.startswith("error") and "bulge.mass" in w.status and "Msun" in w.status
        assert w.result is None and hidden(w)
    # A widget built while the state is invalid says so from the start.
    fresh = OortFitter(survey, potential=pot).wait()
    assert fresh.status.startswith("error") and fresh.result is None
    pot.parameters = copy.deepcopy(PotentialState().parameters)
    for w in (oort, orbit, fresh):
        w.wait()
        assert w.status.startswith("ready") and w.result is not None and visible(w)


# ---------------------------------------------------------------------- configs: all or nothing
def test_a_config_that_fails_half_way_changes_nothing(survey, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    frame = FrameState()
    w = OortFitter(survey, frame=frame, threaded=False)
    before_config, before_fit = w.config, w.result
    config = copy.deepcopy(before_config)
    config["frame"]["R0_kpc"] = 9.5
    config["bootstrap"] = 20
    config["sample"] = {"kind": "path", "path": str(tmp_path / "missing.ecsv")}
    with pytest.raises(ConfigError, match="missing.ecsv"):
        w.load_config(config)
    assert frame.R0 == pytest.approx(8.122)  # the shared frame never saw 9.5
    assert w.config == before_config and w.result is before_fit
    assert w.status.startswith("error: config not applied (nothing changed)")
    assert w.bootstrap.value == 0


@pytest.mark.parametrize("make", [OortFitter, VelocityPanel, OrbitExplorer])
@pytest.mark.parametrize(
    "config, words",
    [
        ([1, 2], "must be a dict"),
        ("{}", "must be a dict"),
        ({"frame": "8.1"}, "config['frame'] must be a dict"),
        ({"potential": {"preset": 3}}, "preset must be a str"),
        ({"potential": {"preset": "NoSuchModel"}}, "unknown preset 'NoSuchModel'"),
        ({"potential": {"solar_V": True}}, "solar_V must be a finite number"),
        ({"potential": {"preset": "", "parameters": {"bulge": {"mass": "big"}}}}, "bulge"),
        ({"no_such_setting": 1}, "no_such_setting"),
    ],
)
def test_bad_configs_are_named_errors(survey, make, config, words):
    frame = FrameState()
    w = make(threaded=False, frame=frame) if make is OrbitExplorer else make(survey, threaded=False, frame=frame)
    before = w.config
    with pytest.raises(ConfigError) as info:
        w.load_config(config)
    assert words in str(info.value)
    assert w.config == before and "config not applied" in w.status


@pytest.mark.parametrize(
    "key, value, words",
    [
        ("bootstrap", 10**9, "bootstrap N = 1000000000"),
        ("bootstrap", -3, "bootstrap N = -3"),
        ("bootstrap", "200", "must be int"),
        ("robust", "yes", "must be bool"),
        ("max_pm_error", -1.0, "max pm error = -1.0 mas/yr"),
        ("distance_range", [0.5, 0.1], "0 <= min < max"),
        ("distance_range", "0-1", "distance_range"),
    ],
)
def test_oort_settings_out_of_range_are_refused_not_clamped(survey, key, value, words):
    w = OortFitter(survey, threaded=False)
    before = w.config
    with pytest.raises(ConfigError) as info:
        w.load_config({key: value})
    assert words in str(info.value)
    assert w.config == before


def test_bootstrap_typed_out_of_range_is_an_error_not_a_clamp(survey):
    w = OortFitter(survey, threaded=False)
    w.bootstrap.value = 10**9
    assert w.bootstrap.value == 10**9  # what was typed stays
    assert w.status.startswith("error") and "bootstrap N = 1000000000" in w.status
    assert w.result is None
    w.bootstrap.value = 50
    assert w.status.startswith("ready") and w.result.bootstrap is not None


def test_unknown_sample_kind_in_a_config_is_refused(survey):
    w = VelocityPanel(survey, threaded=False)
    with pytest.raises(ConfigError, match="kind.*'cloud'"):
        w.load_config({"sample": {"kind": "cloud", "path": ""}})
    with pytest.raises(ConfigError, match="unknown keys \\['url'\\]"):
        w.load_config({"sample": {"kind": "path", "url": "x"}})


def test_a_frame_config_with_a_string_vector_is_refused():
    w = OrbitExplorer(threaded=False)
    config = w.config
    config["frame"] = dict(config["frame"], v_sun_kms="245")
    with pytest.raises(ValueError, match="v_sun"):
        w.load_config(config)
    assert w.frame_state.v_sun == pytest.approx((12.9, 245.6, 7.78))


# ---------------------------------------------------------------------- configs and files
def test_a_config_may_not_read_files_outside_the_notebook_folder(survey, tmp_path, monkeypatch):
    notebook_folder = tmp_path / "notebook"
    notebook_folder.mkdir()
    outside = tmp_path / "elsewhere" / "stars.ecsv"
    outside.parent.mkdir()
    Table(survey[:50]).write(outside)
    monkeypatch.chdir(notebook_folder)
    w = VelocityPanel(threaded=False)
    config = {"sample": {"kind": "path", "path": str(outside)}}
    with pytest.raises(ConfigError, match="outside the folders a config may read from"):
        w.load_config(config)
    assert w.sample is None
    for sneaky in ("../elsewhere/stars.ecsv", str(notebook_folder / ".." / "elsewhere" / "stars.ecsv")):
        with pytest.raises(ConfigError, match="outside the folders"):
            w.load_config({"sample": {"kind": "path", "path": sneaky}})
    # trusted explicitly, the same file is read
    monkeypatch.setattr("mwkin.widgets._sample._EXTRA_SAMPLE_FOLDERS", [])
    allow_sample_folder(outside.parent)
    w.load_config(config)
    assert w.sample_source.path == str(outside) and len(w.sample) == 50
    # inside the notebook folder, a relative path works
    Table(survey[:40]).write(notebook_folder / "local.ecsv")
    w.load_config({"sample": {"kind": "path", "path": "local.ecsv"}})
    assert len(w.sample) == 40


def test_a_config_error_never_echoes_the_file_content(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "secret.csv").write_text("ssh_private_key,hunter2\nAAAA,BBBB\n")
    w = VelocityPanel(threaded=False)
    with pytest.raises(ConfigError) as info:
        w.load_config({"sample": {"kind": "path", "path": "secret.csv"}})
    text = str(info.value) + w.status
    assert "could not be read as a star table" in text
    for secret in ("ssh_private_key", "hunter2", "AAAA"):
        assert secret not in text


# ---------------------------------------------------------------------- invalid samples
@pytest.mark.parametrize("make", [OortFitter, VelocityPanel])
def test_an_invalid_sample_is_shown_in_the_status_line_with_a_warning(survey, make):
    bad = Table(survey[:20])
    bad["dec"][3] = 100.0
    with pytest.warns(SampleWarning, match="dec"):
        w = make(bad, threaded=False)
    assert w.status.startswith("error") and "dec" in w.status and "row" in w.status and "deg" in w.status
    assert "(no sample)" in w.status
    w.sample = survey
    assert w.status.startswith("ready")
    with pytest.warns(SampleWarning, match="kept the previous sample"):
        w.sample = bad
    assert "kept the previous sample" in w.status and len(w.sample) == len(survey)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a good sample raises no warning
        w.sample = survey


def test_save_and_load_round_trip_still_exact(survey, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = tmp_path / "stars.ecsv"
    Table(survey[:300]).write(path)
    w = OortFitter(str(path), threaded=False)
    w.bootstrap.value = 30
    w.save_config(tmp_path / "fit.json")
    v = OortFitter(threaded=False)
    v.load_config_file(tmp_path / "fit.json")
    assert v.config == w.config == json.loads((tmp_path / "fit.json").read_text())
    assert v.result.A == w.result.A


def test_orbit_explorer_given_a_bad_table_says_so_and_keeps_its_star(survey):
    bad = Table(survey[:5])
    bad["pmra"] = ["fast"] * 5
    with pytest.warns(SampleWarning, match="pmra"):
        ex = OrbitExplorer(stars=bad, threaded=False)
    assert ex.source.value == "observables" and ex.status.startswith("error") and "pmra" in ex.status
    ex.refresh()
    assert ex.status.startswith("ready")
    with pytest.warns(SampleWarning, match="row = 9"):
        assert ex.set_stars(survey[:5], row=9) is False
    assert ex.set_stars(survey[:5], row=2) is True and ex.source.value == "table"


def test_orbit_explorer_on_the_galactic_axis_says_so_and_keeps_working():
    """A star typed at R = 0 used to hang the integrator: now an error on screen, and later stars compute."""
    ex = OrbitExplorer(star={"x": 0.0, "y": 0.0, "z": 0.5, "vx": 0.0, "vy": 0.0, "vz": 0.0}, threaded=True)
    ex.wait(120)
    assert ex.status.startswith("error") and "on_z_axis" in ex.status
    assert ex.result is None and hidden(ex)
    ex.phase_fields["x"].text.value = -8.0
    ex.phase_fields["vy"].text.value = 220.0
    ex.wait(120)
    assert ex.status.startswith("ready") and ex.result is not None and visible(ex)


def test_orbit_explorer_with_a_coarse_grid_draws_and_cautions():
    ex = OrbitExplorer(n_points=11, t_forward=1.0, threaded=False)
    assert ex.status.startswith("ready") and "caution: coarse_time_grid" in ex.status
    assert ex.result is not None
