"""OrbitExplorer driven from Python: traits in, `.result` / plot data / `.status` out."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from astropy.table import QTable

import mwkin as mk
from mwkin.widgets import FrameState, OrbitExplorer, PotentialState

# A thin-disc-like star about 1 kpc away, made up for these tests (parallax/error = 25).
STAR = {
    "ra": 120.0,
    "dec": -30.0,
    "parallax": 1.0,
    "pmra": -4.0,
    "pmdec": 3.0,
    "radial_velocity": 15.0,
    "parallax_error": 0.04,
    "pmra_error": 0.05,
    "pmdec_error": 0.05,
    "radial_velocity_error": 1.0,
}
N = 501


def explorer(**kwargs):
    kwargs.setdefault("star", STAR)
    kwargs.setdefault("n_points", N)
    return OrbitExplorer(threaded=True, **kwargs).wait()


def marks_x(widget):
    """x of the face-on track as sent to the GalaxyView (float32 bytes)."""
    return widget.galaxy_view.track()[0].astype(float)


def drag(widget, vx, vy, dragging=False):
    """Set the view's velocity the way the browser does (a comm message applied with set_state)."""
    widget.galaxy_view.set_state({"velocity_xy": [float(vx), float(vy)], "dragging": dragging})


def test_first_result_is_an_orbit_set_drawn_in_both_views():
    ex = explorer()
    assert isinstance(ex.result, mk.OrbitSet)
    assert ex.status.startswith("ready")
    track = ex.result.track(0)
    gx, gy = ex.galaxy_view.track()
    assert gx.dtype == np.float32 and gx.size == N  # binary float32, not a JSON list
    np.testing.assert_allclose(gx, track["x"].value, rtol=1e-6)
    np.testing.assert_allclose(gy, track["y"].value, rtol=1e-6, atol=1e-6)
    # the arrow starts at the star with its initial in-plane velocity
    start = track[0]
    assert ex.galaxy_view.star_xy == pytest.approx([start["x"].value, start["y"].value])
    assert ex.galaxy_view.velocity_xy == pytest.approx([start["vx"].value, start["vy"].value])
    np.testing.assert_allclose(ex.meridional_marks["forward"].x, track["R"].value)
    np.testing.assert_allclose(ex.meridional_marks["forward"].y, track["z"].value)
    # the readout shows the result's parameters with units
    rapo = float(ex.result.rapo[0].value)
    assert f"{rapo:.3f}" in ex.readout.value and "kpc" in ex.readout.value and "kpc km/s" in ex.readout.value


def test_changing_R0_moves_the_orbit_and_the_plot():
    frame = FrameState()
    ex = explorer(frame=frame)
    rapo, x = float(ex.result.rapo[0].value), marks_x(ex)
    frame.R0 = 8.5
    ex.wait()
    assert ex.status.startswith("ready")
    assert ex.result.frame.R0 == 8.5
    # the star is ~1 kpc from the Sun, so moving the Sun 0.4 kpc outward moves the whole orbit out
    assert float(ex.result.rapo[0].value) > rapo + 0.2
    assert not np.allclose(marks_x(ex), x)
    # the Sun marker follows the frame (astropy's Galactocentric axes: Sun near x = -R0)
    assert ex.galaxy_view.sun_xy[0] == pytest.approx(-8.5, abs=1e-3)
    assert ex.meridional_marks["sun"].x[0] == pytest.approx(8.5, abs=1e-3)


def test_changing_a_potential_parameter_recomputes():
    pot = PotentialState()
    ex = explorer(potential=pot)
    rapo = float(ex.result.rapo[0].value)
    params = {c: dict(p) for c, p in pot.parameters.items()}
    params["disc"]["mass"] *= 1.5  # a heavier disc pulls the orbit in
    with pot.hold_trait_notifications():
        pot.parameters = params
        pot.preset = ""
    ex.wait()
    assert ex.status.startswith("ready")
    assert ex.result.potential.kind == "three_component"
    assert float(ex.result.rapo[0].value) < rapo - 0.1


def test_changing_the_star_recomputes():
    ex = explorer()
    lz = float(ex.result.Lz[0].value)
    ex.observable_fields["radial_velocity"].text.value = 60.0
    ex.wait()
    assert float(ex.result.Lz[0].value) != pytest.approx(lz)
    assert ex.config["star"]["observables"]["radial_velocity"] == 60.0


def test_a_negative_parallax_is_an_error_on_screen_and_the_inputs_stay():
    frame = FrameState()
    ex = explorer(frame=frame)
    before = ex.result
    ex.observable_fields["parallax"].text.value = -0.5
    ex.wait()
    assert ex.status.startswith("error") and "parallax = -0.5 mas" in ex.status
    assert "mwkin-status-error" in ex.status_line.value  # shown on screen, in red
    assert ex.observable_fields["parallax"].value == -0.5  # the typed value stays
    assert before is not None and ex.result is None  # the orbit was for other inputs
    assert ex._plots_box.layout.visibility == "hidden"  # ... and is not shown
    assert frame.R0 == pytest.approx(8.122)
    ex.distance_input.value = "distance"  # the fix the message suggests
    ex.observable_fields["distance"].text.value = 1.0
    ex.wait()
    assert ex.status.startswith("ready")
    assert ex._plots_box.layout.visibility == "visible"
    assert ex.observable_fields["parallax"].value == -0.5


@pytest.mark.parametrize(
    "field, value, words", [("n_points", 1, "output points = 1"), ("t_forward", -1.0, "must be >= 0")]
)
def test_a_bad_time_grid_is_an_error_and_the_inputs_stay(field, value, words):
    ex = explorer()
    if field == "n_points":
        ex.n_points.value = value
        typed = lambda: ex.n_points.value  # noqa: E731
    else:
        ex.time_fields[field].text.value = value
        typed = lambda: ex.time_fields[field].value  # noqa: E731
    ex.wait()
    assert ex.status.startswith("error") and words in ex.status
    assert typed() == value


def test_the_core_rejects_a_grid_the_widget_passes_on():
    # the widget builds even grids; the core's own check is what a user of the API meets
    with pytest.raises(mk.orbits.TimeGridError, match="start at 0"):
        mk.integrate_orbits(
            np.array([-8.0, 0, 0, 0, 220, 0]), mk.Potential.preset("MWPotential2014"), t=np.linspace(1.0, 2.0, 5)
        )


def test_two_explorers_sharing_one_frame_both_update():
    frame = FrameState()
    a, b = explorer(frame=frame), explorer(frame=frame, star={**STAR, "pmra": 2.0})
    ra, rb = float(a.result.rapo[0].value), float(b.result.rapo[0].value)
    frame.R0 = 8.4
    a.wait(), b.wait()
    assert a.result.frame.R0 == b.result.frame.R0 == 8.4
    assert float(a.result.rapo[0].value) != pytest.approx(ra)
    assert float(b.result.rapo[0].value) != pytest.approx(rb)


def test_the_newest_request_wins():
    frame = FrameState()
    ex = explorer(frame=frame)
    for R0 in np.linspace(7.8, 8.6, 9):
        frame.R0 = float(R0)
    ex.wait()
    assert ex.result.frame.R0 == pytest.approx(8.6)
    assert ex.galaxy_view.sun_xy[0] == pytest.approx(-8.6, abs=1e-3)


def test_backward_integration_is_drawn_and_joins_the_forward_one():
    ex = explorer(t_backward=0.5)
    back = ex.view.backward
    assert back is not None and back.t[-1].value == pytest.approx(-0.5)
    np.testing.assert_allclose(ex.meridional_marks["backward"].x, back.track(0)["R"].value)
    # the face-on view draws the whole span as one line in time order: backward reversed, then forward
    fwd = ex.result.track(0)["x"].value
    np.testing.assert_allclose(marks_x(ex), np.concatenate([back.track(0)["x"].value[::-1], fwd[1:]]), rtol=1e-6)
    # both start at the star's present position
    assert ex.meridional_marks["backward"].x[0] == pytest.approx(ex.meridional_marks["forward"].x[0])
    params = ex.orbital_parameters()
    assert params["rapo"] == pytest.approx(max(ex.result.rapo[0].value, back.rapo[0].value))


def test_circular_orbit_in_mwpotential2014():
    # MWPotential2014 has vc(8 kpc) = 220 km/s (Bovy 2015, ApJS 216, 29), so a star at R = 8 kpc in the
    # plane moving at 220 km/s along rotation stays on a circle: e ~ 0, rperi ~ rapo ~ 8 kpc.
    ex = explorer(star={"x": -8.0, "y": 0.0, "z": 0.0, "vx": 0.0, "vy": 220.0, "vz": 0.0})
    p = ex.orbital_parameters()
    assert p["eccentricity"] < 1e-3
    assert p["rperi"] == pytest.approx(8.0, abs=0.01) and p["rapo"] == pytest.approx(8.0, abs=0.01)
    assert p["Lz"] == pytest.approx(8.0 * 220.0, rel=1e-6)  # L_z = R v_phi, prograde positive


def test_phase_space_input_does_not_depend_on_the_frame():
    frame = FrameState()
    ex = explorer(frame=frame, star={"x": -8.0, "y": 0.5, "z": 0.1, "vx": 10.0, "vy": 230.0, "vz": 5.0})
    assert ex.source.value == "phase_space"
    t0 = ex.result.track(0)[0]
    assert (t0["x"].value, t0["y"].value, t0["z"].value) == pytest.approx((-8.0, 0.5, 0.1))
    rapo = float(ex.result.rapo[0].value)
    frame.R0 = 8.4
    ex.wait()
    assert float(ex.result.rapo[0].value) == pytest.approx(rapo, rel=1e-12)
    assert ex.galaxy_view.sun_xy[0] == pytest.approx(-8.4, abs=1e-3)  # only the Sun moved


def test_a_table_row_round_trips_to_its_phase_space():
    frame = mk.SolarFrame.preset("astropy v4.0")
    phase = QTable(
        {
            "x": [-7.5, -8.6, -9.0],
            "y": [0.3, -0.4, 1.0],
            "z": [0.05, -0.2, 0.3],
            "vx": [20.0, -15.0, 5.0],
            "vy": [225.0, 240.0, 200.0],
            "vz": [3.0, -10.0, 25.0],
        }
    )
    stars = mk.from_galactocentric(phase, frame=frame)
    for name, err in (("parallax", 0.02), ("pmra", 0.03), ("pmdec", 0.03), ("radial_velocity", 0.5)):
        stars[f"{name}_error"] = np.full(len(stars), err) * stars[name].unit
    ex = explorer(frame=FrameState(frame), star=None, stars=stars, row=1)
    assert ex.source.value == "table" and ex.row_selector.max == 2
    start = ex.result.track(0)[0]
    assert start["x"].value == pytest.approx(-8.6, abs=1e-9) and start["vz"].value == pytest.approx(-10.0, abs=1e-7)
    ex.row_selector.value = 2
    ex.wait()
    assert ex.result.track(0)[0]["vy"].value == pytest.approx(200.0, abs=1e-7)
    assert ex.config["star"]["row"] == 2


def test_cloud_orbits_are_the_samples_orbit_parameters_summarises():
    ex = explorer(n_cloud=20, seed=7)
    ex.cloud_toggle.value = True
    ex.wait()
    cloud = ex.view.cloud
    assert len(cloud) == 20
    assert np.array(ex.meridional_marks["cloud"].x).shape == (20, cloud.t.size)
    # the face-on view gets the 20 tracks packed into one float32 buffer, separated by NaN
    cx = np.frombuffer(ex.galaxy_view.cloud_x, np.float32)
    assert cx.size == 20 * (cloud.t.size + 1) and np.isnan(cx).sum() == 20
    np.testing.assert_allclose(cx[: cloud.t.size], cloud.track(0)["x"].value, rtol=1e-6)
    # orbit_parameters draws from the same linear covariance with the same sampler and seed. (It is given
    # the phase space with its covariance: passing observables with n_samples > 0 fails in orbits.py,
    # which looks for cov_galactocentric among the input's column names.)
    grid = cloud.t.value
    star = QTable({k: [v] for k, v in STAR.items()})
    phase = mk.to_galactocentric(
        star, frame=ex.result.frame, distance=mk.InverseParallax(min_snr=0), errors="linear", return_covariance=True
    )
    table = mk.orbit_parameters(
        phase, ex.result.potential, frame=ex.result.frame, method="integrate", t=grid, n_samples=20, seed=7
    )
    lo, hi = np.percentile(cloud.rapo.value, [16, 84])
    assert lo == pytest.approx(table["rapo_p16"][0].value, rel=1e-9)
    assert hi == pytest.approx(table["rapo_p84"][0].value, rel=1e-9)
    assert "cloud 16–84%" in ex.readout.value
    ex.cloud_toggle.value = False
    ex.wait()
    assert ex.view.cloud is None and ex.galaxy_view.cloud_x == b""


def test_views_have_equal_aspect_and_mark_the_sun_centre_and_rotation():
    ex = explorer()
    g = ex.galaxy_view
    x0, x1, y0, y1 = g.view_range
    assert x1 - x0 == pytest.approx(y1 - y0) and x0 == pytest.approx(-x1)  # square about the centre
    track_x, track_y = g.track()
    assert np.abs(track_x).max() < x1 and np.abs(track_y).max() < y1  # the orbit fits
    mer_ratio = (ex._mx.max - ex._mx.min) / (ex._my.max - ex._my.min)
    plot_w = float(ex.meridional_figure.layout.width.rstrip("px")) - 2 * ex.meridional_figure.fig_margin["left"]
    plot_h = float(ex.meridional_figure.layout.height.rstrip("px")) - 2 * ex.meridional_figure.fig_margin["top"]
    assert mer_ratio == pytest.approx(plot_w / plot_h)
    assert "rotation" in str(ex.meridional_marks["label"].text[0])
    # The view draws the rotation arrow in the sense of the Sun's motion: x vy - y vx of the Sun, which
    # must be the sense of a prograde orbit (L_z = R v_phi > 0, DESIGN.md conventions).
    sun, v_sun = g.sun_xy, g.sun_velocity_xy
    assert sun[0] * v_sun[1] - sun[1] * v_sun[0] < 0  # clockwise seen from the north pole
    assert v_sun == pytest.approx(list(ex.result.frame.v_sun[:2]))
    assert float(ex.result.Lz[0].value) > 0
    track = ex.result.track(0)
    step = np.arctan2(track["y"].value[5], -track["x"].value[5]) - np.arctan2(track["y"].value[0], -track["x"].value[0])
    assert step > 0  # phi = atan2(y, -x) increases with rotation (DESIGN.md conventions)
    sx, sy = g.star_xy
    vx, vy = g.velocity_xy
    assert sx * vy - sy * vx < 0  # the star moves the same way as the Sun


def test_config_round_trip_gives_the_same_result(tmp_path):
    ex = explorer(t_backward=0.3)
    ex.frame_state.R0 = 8.2
    ex.observable_fields["pmdec"].text.value = 5.0
    ex.wait()
    path = tmp_path / "orbit.json"
    ex.save_config(path)
    config = json.loads(path.read_text())
    assert config["widget"] == "OrbitExplorer" and config["t_backward_gyr"] == 0.3
    assert config["star"]["observables"]["pmdec"] == 5.0
    other = OrbitExplorer(threaded=True).wait()
    other.load_config_file(path)
    other.wait()
    assert other.frame_state.R0 == 8.2
    np.testing.assert_allclose(other.result.cylindrical, ex.result.cylindrical, rtol=0, atol=1e-10)
    np.testing.assert_allclose(other.view.backward.cylindrical, ex.view.backward.cylindrical, atol=1e-10)
    with pytest.raises(ValueError, match="unknown OrbitExplorer settings"):
        other.load_config({**config, "t_forwad_gyr": 2})


def test_copy_as_code_reproduces_the_result():
    pot = PotentialState(match_frame_vc=True)
    pot.preset = ""
    ex = explorer(potential=pot, t_backward=0.2)
    snippet = ex.code()
    assert "mk.SolarFrame(" in snippet and "mk.integrate_orbits(" in snippet and "three_component" in snippet
    namespace = {}
    exec(snippet, namespace)  # noqa: S102 - the point of the test
    np.testing.assert_allclose(namespace["orbits"].cylindrical, ex.result.cylindrical, atol=1e-9)
    np.testing.assert_allclose(namespace["backward"].rapo.value, ex.view.backward.rapo.value, rtol=1e-12)
    ex.code_button.click()
    assert ex.code_area.value == snippet and ex.code_area.layout.display != "none"


def test_preset_snippet_executes_for_a_distance_input():
    star = {k: v for k, v in STAR.items() if k not in ("parallax", "parallax_error")}
    ex = explorer(star={**star, "distance": 1.0, "distance_error": 0.04})
    assert ex.distance_input.value == "distance"
    namespace = {}
    exec(ex.code(), namespace)  # noqa: S102
    assert "mk.Potential.preset('MWPotential2014')" in ex.code()
    np.testing.assert_allclose(namespace["orbits"].rapo.value, ex.result.rapo.value, rtol=1e-12)


def test_copy_as_code_reproduces_the_cloud_bands():
    ex = explorer(n_cloud=12, seed=3)
    ex.cloud_toggle.value = True
    ex.wait()
    namespace = {}
    exec(ex.code(), namespace)  # noqa: S102
    cloud = namespace["cloud"]
    for name in ("rapo", "zmax"):
        lo, hi = np.percentile(getattr(ex.view.cloud, name).value, [16, 84])
        assert cloud[f"{name}_p16"][0].value == pytest.approx(lo, rel=1e-9)
        assert cloud[f"{name}_p84"][0].value == pytest.approx(hi, rel=1e-9)


def test_export_figure_writes_png_and_svg(tmp_path):
    ex = explorer(n_cloud=5)
    ex.cloud_toggle.value = True
    ex.wait()
    png = ex.export_figure(tmp_path / "orbit.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    svg = ex.export_figure(tmp_path / "orbit.svg")
    root = ET.parse(svg).getroot()
    assert root.tag.endswith("svg")
    assert "Meridional" in svg.read_text()


def test_provenance_names_frame_and_potential():
    ex = explorer()
    assert "R0=8.122 kpc" in ex.provenance_text and "MWPotential2014" in ex.provenance_text
    assert "galpy" in ex.provenance_text


# ---- the face-on GalaxyView: dragging the velocity arrow ------------------------------------------------


def test_a_dragged_velocity_changes_the_result_and_the_track_sent_to_the_view():
    ex = explorer()
    g = ex.galaxy_view
    rapo, rperi = float(ex.result.rapo[0].value), float(ex.result.rperi[0].value)
    track_before, star_before = g.track_x, list(g.star_xy)
    vx, vy = g.velocity_xy
    drag(ex, vx - 40.0, vy + 30.0)  # faster along rotation and outward: a wider orbit
    ex.wait()
    assert ex.status.startswith("ready") and "velocity set by dragging" in ex.status
    assert float(ex.result.rapo[0].value) > rapo + 1.0
    assert float(ex.result.rperi[0].value) != pytest.approx(rperi, abs=1e-3)
    assert g.track_x != track_before  # new bytes went to the view
    assert g.star_xy == pytest.approx(star_before)  # the star stays where it was
    start = ex.result.track(0)[0]
    assert (start["vx"].value, start["vy"].value) == pytest.approx((vx - 40.0, vy + 30.0), abs=1e-9)
    # the view's track is the new result's (float32)
    np.testing.assert_allclose(g.track()[0], ex.result.track(0)["x"].value, rtol=1e-6)


def test_a_drag_turns_typed_observables_into_phase_space_and_keeps_them():
    frame = FrameState()
    ex = explorer(frame=frame)
    before = ex.result.track(0)[0]
    drag(ex, 0.0, 260.0)
    ex.wait()
    assert ex.source.value == "phase_space"
    # x, y, z and vz are the observables' conversion (astropy-checked core), vx and vy the dragged ones
    star = QTable({k: [v] for k, v in STAR.items()})
    phase = mk.to_galactocentric(star, frame=frame.frame, distance=mk.InverseParallax(min_snr=0))
    fields = {k: f.value for k, f in ex.phase_fields.items()}
    for key in ("x", "y", "z", "vz"):
        assert fields[key] == pytest.approx(float(phase[key][0].value), rel=1e-12)
        assert fields[key] == pytest.approx(float(getattr(before[key], "value", before[key])), rel=1e-9)
    assert (fields["vx"], fields["vy"]) == (0.0, 260.0)
    # nothing typed is lost: the observables fields and the config keep the star as given
    assert ex.observable_fields["pmra"].value == STAR["pmra"]
    config = ex.config
    assert config["star"]["source"] == "phase_space"
    assert config["star"]["phase_space"]["vy"] == 260.0
    original = config["star"]["original"]
    assert original["source"] == "observables" and original["observables"]["parallax"] == STAR["parallax"]
    assert original["converted_with_frame"]["R0_kpc"] == pytest.approx(8.122)
    json.dumps(config)  # still JSON-able
    assert "typed observables" in ex.drag_note.value
    assert ex.restore_button.layout.display != "none"
    # copy as code reproduces the dragged orbit and says where the star came from
    snippet = ex.code()
    assert "dragging the velocity arrow" in snippet and "'vy': [260.0]" in snippet
    namespace = {}
    exec(snippet, namespace)  # noqa: S102
    np.testing.assert_allclose(namespace["orbits"].cylindrical, ex.result.cylindrical, atol=1e-9)


def test_back_to_the_star_as_given_restores_the_first_result():
    ex = explorer()
    first = ex.result
    drag(ex, 30.0, 200.0)
    ex.wait()
    assert ex.result.rapo[0] != first.rapo[0]
    ex.restore_button.click()
    ex.wait()
    assert ex.source.value == "observables"
    np.testing.assert_allclose(ex.result.cylindrical, first.cylindrical, rtol=0, atol=1e-12)
    assert "original" not in ex.config["star"] and ex.drag_note.value == ""
    assert ex.restore_button.layout.display == "none"
    assert "dragging" not in ex.status
    assert ex.galaxy_view.velocity_xy == pytest.approx([first.track(0)[0][k].value for k in ("vx", "vy")])
    with pytest.raises(ValueError, match="nothing to restore"):
        ex.restore_star()


def test_a_table_row_is_kept_when_its_velocity_is_dragged():
    frame = mk.SolarFrame.preset("astropy v4.0")
    phase = QTable(
        {
            "x": [-7.5, -8.6],
            "y": [0.3, -0.4],
            "z": [0.05, -0.2],
            "vx": [20.0, -15.0],
            "vy": [225.0, 240.0],
            "vz": [3.0, -10.0],
        }
    )
    stars = mk.from_galactocentric(phase, frame=frame)
    ex = explorer(frame=FrameState(frame), star=None, stars=stars, row=1)
    drag(ex, -15.0, 200.0)
    ex.wait()
    assert ex.config["star"]["original"]["row"] == 1
    assert ex.restore_button.description == "back to the table row 1"
    # the conversion recovers the row's own phase space (round trip through the observables)
    assert ex.phase_fields["x"].value == pytest.approx(-8.6, abs=1e-9)
    assert ex.phase_fields["vz"].value == pytest.approx(-10.0, abs=1e-7)
    assert ex.result.track(0)[0]["vy"].value == pytest.approx(200.0, abs=1e-9)
    ex.restore_star()
    ex.wait()
    assert ex.source.value == "table" and ex.row_selector.value == 1
    assert ex.result.track(0)[0]["vy"].value == pytest.approx(240.0, abs=1e-7)


def test_dragging_a_phase_space_star_edits_its_velocity_fields():
    # A star on the circular orbit of MWPotential2014 at R = 8 kpc (vc = 220 km/s, Bovy 2015, ApJS 216,
    # 29). Dragging v_y up to 250 km/s with v_R = 0 puts the star at the pericentre of an eccentric orbit:
    # r_peri stays 8 kpc, r_apo grows (common practice (no source): v_R = 0 is a turning point).
    ex = explorer(star={"x": -8.0, "y": 0.0, "z": 0.0, "vx": 0.0, "vy": 220.0, "vz": 0.0})
    assert ex.orbital_parameters()["rapo"] == pytest.approx(8.0, abs=0.01)
    drag(ex, 0.0, 250.0)
    ex.wait()
    p = ex.orbital_parameters()
    assert ex.phase_fields["vy"].value == 250.0 and ex.phase_fields["vx"].value == 0.0
    assert p["rperi"] == pytest.approx(8.0, abs=0.01) and p["rapo"] > 9.0
    assert p["Lz"] == pytest.approx(8.0 * 250.0, rel=1e-6)
    assert "original" not in ex.config["star"]  # typed phase space: nothing was converted
    assert "dragging" not in ex.status


def test_frame_changes_still_update_after_a_drag():
    frame = FrameState()
    ex = explorer(frame=frame)
    drag(ex, 5.0, 250.0)
    ex.wait()
    rapo, star_xy = float(ex.result.rapo[0].value), list(ex.galaxy_view.star_xy)
    frame.R0 = 8.4
    ex.wait()
    assert ex.status.startswith("ready") and ex.result.frame.R0 == 8.4
    assert ex.galaxy_view.sun_xy[0] == pytest.approx(-8.4, abs=1e-3)  # the Sun moved
    assert ex.galaxy_view.star_xy == pytest.approx(star_xy)  # the phase-space star did not
    assert float(ex.result.rapo[0].value) == pytest.approx(rapo, rel=1e-12)
    assert ex.galaxy_view.velocity_xy == [5.0, 250.0]


def test_during_a_drag_the_newest_value_wins_and_the_view_stays_put():
    ex = explorer()
    g = ex.galaxy_view
    g.view_range = [-20.0, 5.0, -10.0, 15.0]  # the user panned and zoomed
    vx, vy = g.velocity_xy
    for i in range(1, 16):  # what the browser sends, one value per frame
        drag(ex, vx - 3.0 * i, vy + 2.0 * i, dragging=True)
    ex.wait()
    assert g.view_range == [-20.0, 5.0, -10.0, 15.0]  # nothing moved under the pointer
    start = ex.result.track(0)[0]
    assert (start["vx"].value, start["vy"].value) == pytest.approx((vx - 45.0, vy + 30.0), abs=1e-9)
    drag(ex, vx - 60.0, vy + 40.0, dragging=False)  # release
    ex.wait()
    start = ex.result.track(0)[0]
    assert (start["vx"].value, start["vy"].value) == pytest.approx((vx - 60.0, vy + 40.0), abs=1e-9)
    # after the release the view widens only because the orbit no longer fits (rapo > 15 kpc here)
    track_x, track_y = g.track()
    x0, x1, y0, y1 = g.view_range
    assert x0 <= track_x.min() and track_x.max() <= x1 and y0 <= track_y.min() and track_y.max() <= y1


def test_a_late_result_for_an_older_velocity_does_not_move_the_arrow_back():
    ex = explorer(star={"x": -8.0, "y": 0.5, "z": 0.1, "vx": 10.0, "vy": 230.0, "vz": 5.0})
    old_view, old_request = ex.view, ex._last_request
    drag(ex, 40.0, 210.0)
    ex.wait()
    generation = ex._runner.generation
    ex._show(old_view, old_request)  # as if the worker delivered it late
    assert ex.galaxy_view.velocity_xy == [40.0, 210.0]
    assert ex._runner.generation == generation  # and it was not taken for a new drag
    assert ex.phase_fields["vx"].value == 40.0


def test_a_drag_on_a_star_that_cannot_be_converted_is_an_error():
    ex = explorer()
    ex.observable_fields["parallax"].text.value = -0.5
    ex.wait()
    drag(ex, 0.0, 250.0)
    ex.wait()
    assert ex.status.startswith("error") and "dragged velocity cannot be used" in ex.status
    assert "parallax = -0.5 mas" in ex.status
    assert ex.source.value == "observables"


def test_config_after_a_drag_round_trips_with_its_original(tmp_path):
    ex = explorer(t_backward=0.2)
    drag(ex, -20.0, 255.0)
    ex.wait()
    path = tmp_path / "dragged.json"
    ex.save_config(path)
    other = OrbitExplorer(threaded=True).wait()
    other.load_config_file(path)
    other.wait()
    np.testing.assert_allclose(other.result.cylindrical, ex.result.cylindrical, atol=1e-10)
    assert other.config["star"]["original"] == ex.config["star"]["original"]
    other.restore_star()
    other.wait()
    assert other.source.value == "observables"
    assert other.observable_fields["pmdec"].value == STAR["pmdec"]


def test_export_after_a_drag_draws_the_velocity(tmp_path):
    ex = explorer()
    drag(ex, 0.0, 260.0)
    ex.wait()
    panel = ex._figure_panels()[0]
    scale = ex.galaxy_view.arrow_scale
    arrow = next(layer for layer in panel.layers if layer.get("color") == "#d6275a")
    sx, sy = ex.galaxy_view.star_xy
    assert arrow["x"] == pytest.approx([sx, sx]) and arrow["y"] == pytest.approx([sy, sy + 260.0 / scale])
    assert ex.export_figure(tmp_path / "dragged.png").stat().st_size > 1000


def test_a_slider_snapping_echo_does_not_edit_the_star():
    # The one slider-echo rule of NumberField: the browser snaps a shown value to the slider's step and
    # sends it back; that is not an edit (here vz = -10.83 snapped to the 0.5 grid).
    ex = explorer(star={"x": -8.0, "y": 0.5, "z": 0.1, "vx": 10.0, "vy": 230.0, "vz": -10.83})
    field, before = ex.phase_fields["vz"], ex.result
    field.slider.value = -11.0
    ex.wait()
    assert field.value == -10.83 and ex.config["star"]["phase_space"]["vz"] == -10.83
    assert ex.result is before  # nothing was recomputed
    field.slider.value = -11.5  # a real move: a whole step further
    ex.wait()
    assert field.value == -11.5 and ex.result.track(0)[0]["vz"].value == pytest.approx(-11.5)


def test_the_export_is_drawn_from_the_live_views():
    # One description: the exported panels copy the face-on view (its palette, arc and region) and the
    # meridional figure's marks (data, colours, dashes), never a second drawing of their own.
    from mwkin.widgets.views import rotation_arc

    ex = explorer(t_backward=0.3)
    face_on, meridional = ex._figure_panels()
    g = ex.galaxy_view
    arc = next(layer for layer in face_on.layers if layer["kind"] == "line" and layer["color"] == g.colors["rotation"])
    np.testing.assert_allclose(arc["x"], rotation_arc(g.sun_xy, g.sun_velocity_xy)[0], rtol=1e-6)
    assert (face_on.x_range, face_on.y_range) == (tuple(g.view_range[:2]), tuple(g.view_range[2:]))
    marks = ex.meridional_marks
    lines = {layer["label"]: layer for layer in meridional.layers if layer["kind"] == "line"}
    assert lines["backward"]["color"] == marks["backward"].colors[0] and lines["backward"]["dashed"]
    np.testing.assert_array_equal(lines["forward"]["x"], marks["forward"].x)
    assert meridional.x_range == (ex._mx.min, ex._mx.max) and meridional.y_range == (ex._my.min, ex._my.max)
    # the face-on canvas, the meridional figure and the key under them share one palette
    assert g.colors["track"] == marks["forward"].colors[0] and g.colors["sun"] == marks["sun"].colors[0]
    assert g.colors["track"] in ex.key.value and g.colors["rotation"] in ex.key.value
