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
STAR = {"ra": 120.0, "dec": -30.0, "parallax": 1.0, "pmra": -4.0, "pmdec": 3.0, "radial_velocity": 15.0,
        "parallax_error": 0.04, "pmra_error": 0.05, "pmdec_error": 0.05, "radial_velocity_error": 1.0}
N = 501


def explorer(**kwargs):
    kwargs.setdefault("star", STAR)
    kwargs.setdefault("n_points", N)
    return OrbitExplorer(threaded=True, **kwargs).wait()


def marks_x(widget):
    return np.array(widget.face_on_marks["forward"].x, dtype=float)


def test_first_result_is_an_orbit_set_drawn_in_both_views():
    ex = explorer()
    assert isinstance(ex.result, mk.OrbitSet)
    assert ex.status.startswith("ready")
    track = ex.result.track(0)
    np.testing.assert_allclose(marks_x(ex), track["x"].value)
    np.testing.assert_allclose(ex.face_on_marks["forward"].y, track["y"].value)
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
    assert ex.face_on_marks["sun"].x[0] == pytest.approx(-8.5, abs=1e-3)


def test_changing_a_potential_parameter_recomputes():
    pot = PotentialState()
    ex = explorer(potential=pot)
    rapo = float(ex.result.rapo[0].value)
    params = {c: dict(p) for c, p in pot.parameters.items()}
    params["disc"]["mass"] *= 1.5                     # a heavier disc pulls the orbit in
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
    assert "mwkin-status-error" in ex.status_line.value          # shown on screen, in red
    assert ex.observable_fields["parallax"].value == -0.5         # the typed value stays
    assert ex.result is before                                    # the last good result is kept
    assert frame.R0 == pytest.approx(8.122)
    ex.distance_input.value = "distance"                         # the fix the message suggests
    ex.observable_fields["distance"].text.value = 1.0
    ex.wait()
    assert ex.status.startswith("ready")
    assert ex.observable_fields["parallax"].value == -0.5


@pytest.mark.parametrize("field, value, words", [("n_points", 1, "output points = 1"),
                                                 ("t_forward", -1.0, "must be >= 0")])
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
        mk.integrate_orbits(np.array([-8.0, 0, 0, 0, 220, 0]), mk.Potential.preset("MWPotential2014"),
                            t=np.linspace(1.0, 2.0, 5))


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
    assert ex.face_on_marks["sun"].x[0] == pytest.approx(-8.6, abs=1e-3)


def test_backward_integration_is_drawn_and_joins_the_forward_one():
    ex = explorer(t_backward=0.5)
    back = ex.view.backward
    assert back is not None and back.t[-1].value == pytest.approx(-0.5)
    np.testing.assert_allclose(ex.face_on_marks["backward"].x, back.track(0)["x"].value)
    # both start at the star's present position
    assert ex.face_on_marks["backward"].x[0] == pytest.approx(marks_x(ex)[0])
    params = ex.orbital_parameters()
    assert params["rapo"] == pytest.approx(max(ex.result.rapo[0].value, back.rapo[0].value))


def test_circular_orbit_in_mwpotential2014():
    # MWPotential2014 has vc(8 kpc) = 220 km/s (Bovy 2015, ApJS 216, 29), so a star at R = 8 kpc in the
    # plane moving at 220 km/s along rotation stays on a circle: e ~ 0, rperi ~ rapo ~ 8 kpc.
    ex = explorer(star={"x": -8.0, "y": 0.0, "z": 0.0, "vx": 0.0, "vy": 220.0, "vz": 0.0})
    p = ex.orbital_parameters()
    assert p["eccentricity"] < 1e-3
    assert p["rperi"] == pytest.approx(8.0, abs=0.01) and p["rapo"] == pytest.approx(8.0, abs=0.01)
    assert p["Lz"] == pytest.approx(8.0 * 220.0, rel=1e-6)          # L_z = R v_phi, prograde positive


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
    assert ex.face_on_marks["sun"].x[0] == pytest.approx(-8.4, abs=1e-3)   # only the Sun moved


def test_a_table_row_round_trips_to_its_phase_space():
    frame = mk.SolarFrame.preset("astropy v4.0")
    phase = QTable({"x": [-7.5, -8.6, -9.0], "y": [0.3, -0.4, 1.0], "z": [0.05, -0.2, 0.3],
                    "vx": [20.0, -15.0, 5.0], "vy": [225.0, 240.0, 200.0], "vz": [3.0, -10.0, 25.0]})
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
    assert np.array(ex.face_on_marks["cloud"].x).shape == (20, cloud.t.size)
    # orbit_parameters draws from the same linear covariance with the same sampler and seed. (It is given
    # the phase space with its covariance: passing observables with n_samples > 0 fails in orbits.py,
    # which looks for cov_galactocentric among the input's column names.)
    grid = cloud.t.value
    star = QTable({k: [v] for k, v in STAR.items()})
    phase = mk.to_galactocentric(star, frame=ex.result.frame, distance=mk.InverseParallax(min_snr=0),
                                 errors="linear", return_covariance=True)
    table = mk.orbit_parameters(phase, ex.result.potential, frame=ex.result.frame, method="integrate", t=grid,
                                n_samples=20, seed=7)
    lo, hi = np.percentile(cloud.rapo.value, [16, 84])
    assert lo == pytest.approx(table["rapo_p16"][0].value, rel=1e-9)
    assert hi == pytest.approx(table["rapo_p84"][0].value, rel=1e-9)
    assert "cloud 16–84%" in ex.readout.value
    ex.cloud_toggle.value = False
    ex.wait()
    assert ex.view.cloud is None and not np.isfinite(np.array(ex.face_on_marks["cloud"].x, dtype=float)).any()


def test_views_have_equal_aspect_and_mark_the_sun_centre_and_rotation():
    ex = explorer()
    fx, fy = ex._fx, ex._fy
    assert fx.max - fx.min == pytest.approx(fy.max - fy.min)
    mer_ratio = (ex._mx.max - ex._mx.min) / (ex._my.max - ex._my.min)
    plot_w = float(ex.meridional_figure.layout.width.rstrip("px")) - 2 * ex.meridional_figure.fig_margin["left"]
    plot_h = float(ex.meridional_figure.layout.height.rstrip("px")) - 2 * ex.meridional_figure.fig_margin["top"]
    assert mer_ratio == pytest.approx(plot_w / plot_h)
    assert list(ex.face_on_marks["centre"].x) == [0.0]
    assert "rotation" in str(ex.face_on_marks["label"].text[0])
    # the rotation arrow points the way a prograde orbit (L_z > 0) moves: from the Sun's side toward +y
    arc = ex.face_on_arrays["rotation"]
    assert arc["direction"][1] > 0 or arc["tip"][1] > 0
    assert float(ex.result.Lz[0].value) > 0
    track = ex.result.track(0)
    step = np.arctan2(track["y"].value[5], -track["x"].value[5]) - np.arctan2(track["y"].value[0], -track["x"].value[0])
    assert step > 0   # phi = atan2(y, -x) increases with rotation (DESIGN.md conventions)


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
    exec(snippet, namespace)   # noqa: S102 - the point of the test
    np.testing.assert_allclose(namespace["orbits"].cylindrical, ex.result.cylindrical, atol=1e-9)
    np.testing.assert_allclose(namespace["backward"].rapo.value, ex.view.backward.rapo.value, rtol=1e-12)
    ex.code_button.click()
    assert ex.code_area.value == snippet and ex.code_area.layout.display != "none"


def test_preset_snippet_executes_for_a_distance_input():
    star = {k: v for k, v in STAR.items() if k not in ("parallax", "parallax_error")}
    ex = explorer(star={**star, "distance": 1.0, "distance_error": 0.04})
    assert ex.distance_input.value == "distance"
    namespace = {}
    exec(ex.code(), namespace)   # noqa: S102
    assert "mk.Potential.preset('MWPotential2014')" in ex.code()
    np.testing.assert_allclose(namespace["orbits"].rapo.value, ex.result.rapo.value, rtol=1e-12)


def test_copy_as_code_reproduces_the_cloud_bands():
    ex = explorer(n_cloud=12, seed=3)
    ex.cloud_toggle.value = True
    ex.wait()
    namespace = {}
    exec(ex.code(), namespace)   # noqa: S102
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
