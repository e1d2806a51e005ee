"""OortFitter driven from Python: traits in, `.result` (an OortFit) / plot data / `.status` out."""

from __future__ import annotations

import datetime
import html
import json

import numpy as np
import pytest
from disc_mock import flat_disc_sample

from mwkin.oort import OortFit, predicted_observables
from mwkin.widgets import FrameState, OortFitter, PotentialState
from mwkin.widgets.oort_fitter import parse_bins

V_FLAT = 230.0  # km/s, the mock's flat rotation curve
R0 = 8.122  # kpc, the astropy v4.0 frame the mock is made in


def flat_rotation_sample(n=12000, seed=11, rv_fraction=0.5, r_max=1.0):
    """Stars within r_max kpc of the Sun on a flat rotation curve, made with astropy's Galactocentric frame."""
    return flat_disc_sample(
        n,
        seed,
        v_flat=V_FLAT,
        r_max=r_max,
        z_scale=0.1,
        plx_error=(0.02, 0.05),
        pm_error=(0.02, 0.06),
        rv_fraction=rv_fraction,
    )


@pytest.fixture(scope="module")
def sample():
    return flat_rotation_sample()


def fitter(sample, **kwargs):
    return OortFitter(sample, **kwargs).wait()


def y_of(view):
    return np.asarray(view.data()["y"], dtype=float)


def test_first_fit_recovers_the_flat_rotation_curve(sample):
    w = fitter(sample)
    fit = w.result
    assert isinstance(fit, OortFit)
    assert w.status.startswith("ready") and f"from {fit.n_used} stars" in w.status
    # Flat rotation curve: dV/dR = 0, so A = -B = V0 / (2 R0) (Oort 1927; Binney & Tremaine 2008, Sect. 3.2.3)
    expected = V_FLAT / (2 * R0)
    assert fit.A == pytest.approx(expected, abs=3 * fit.errors["A"] + 0.5)
    assert fit.B == pytest.approx(-expected, abs=3 * fit.errors["B"] + 0.5)
    # the Sun's motion relative to the mean flow: v_sun - (0, 230, 0) for the astropy v4.0 frame
    for got, error, want in zip(fit.solar_motion, (fit.errors[k] for k in "UVW"), (12.9, 245.6 - V_FLAT, 7.78)):
        assert got == pytest.approx(want, abs=4 * error + 1.0)
    assert w.result.bins is not None and len(w.result.bins) == len(parse_bins(w.bins_text.value))


def test_views_show_the_fitted_stars_and_the_model(sample):
    w = fitter(sample)
    fit, res = w.result, w.result.residuals
    used = np.asarray(res["used"])
    mu = y_of(w.mu_view)
    assert np.isfinite(mu).sum() == fit.n_used == used.sum()
    assert np.isnan(mu[~used]).all()
    # the per-star model (data minus the fit's residual, from the solver) is the first-order formula of
    # REFERENCES.md (mwkin.oort.predicted_observables) evaluated at each star's l, b, d
    geometry, arrays = w._geometry, w._fit_arrays
    mu_model, _, vr_model = predicted_observables(
        geometry.l_deg[used], geometry.b_deg[used], arrays["distance"][used], fit
    )
    mu_data = arrays["mu_l_star"]  # float64 (the view holds float32)
    np.testing.assert_allclose(mu[used], mu_data[used], rtol=1e-6)
    np.testing.assert_allclose(mu_model, mu_data[used] - res["delta_mu_l_star"].value[used], atol=1e-9)
    has_rv = used & np.isfinite(res["delta_v_r"].value)
    _, _, vr_model = predicted_observables(
        geometry.l_deg[has_rv], geometry.b_deg[has_rv], arrays["distance"][has_rv], fit
    )
    np.testing.assert_allclose(vr_model, arrays["v_r"][has_rv] - res["delta_v_r"].value[has_rv], atol=1e-9)
    np.testing.assert_allclose(y_of(w.vr_view)[has_rv], arrays["v_r"][has_rv], rtol=1e-6)
    # the curve is the model at b = 0 and the median distance
    d_med = float(np.median(arrays["distance"][used]))
    curve, _, _ = predicted_observables(np.asarray(w.mu_model.x), 0.0, d_med, fit)
    np.testing.assert_allclose(np.asarray(w.mu_model.y), curve)
    assert f"d = {d_med:.2f} kpc" in w.mu_model.labels[0]
    # binned medians: one per filled 15-deg bin, each the median of the stars in it
    x_med, y_med = np.asarray(w.mu_medians.x), np.asarray(w.mu_medians.y)
    assert len(x_med) == 24
    in_first = used & (geometry.l_deg < 15.0)
    assert y_med[0] == pytest.approx(np.median(geometry.mu_l_star[in_first]))
    assert w.vr_box.layout.display != "none"


def test_first_order_model_is_a_deprecated_name_for_the_core_model(sample):
    from mwkin.widgets.oort_fitter import first_order_model

    fit = fitter(sample, threaded=False).result
    l, b, d = np.array([10.0, 100.0, 250.0]), np.array([0.0, 20.0, -40.0]), np.array([0.2, 0.5, 1.0])
    with pytest.warns(DeprecationWarning, match="predicted_observables"):
        mu, v_r = first_order_model(l, fit, d, b)
    mu_core, _, v_r_core = predicted_observables(l, b, d, fit)
    np.testing.assert_array_equal(mu, mu_core)
    np.testing.assert_array_equal(v_r, v_r_core)


def test_distance_range_change_refits_and_redraws(sample):
    w = fitter(sample)
    fit, mu, medians = w.result, y_of(w.mu_view), np.asarray(w.mu_medians.y).copy()
    bins = w.result.bins
    w.distance_range.value = (0.1, 0.9)
    w.wait()
    assert w.status.startswith("ready")
    assert w.result is not fit and w.result.distance_range == (0.1, 0.9)
    assert w.result.n_used > fit.n_used
    assert not np.array_equal(np.isfinite(y_of(w.mu_view)), np.isfinite(mu))
    assert not np.allclose(np.asarray(w.mu_medians.y), medians)
    # the distance bins do not depend on the fitted range: they are reused, not refitted
    assert w.result.bins is bins and len(w._bins_cache) == 1


def test_use_changes_the_data_fitted(sample):
    w = fitter(sample, threaded=False)
    w.use.value = "proper_motions"
    w.wait()
    assert w.result.use == "proper_motions"
    assert w.vr_box.layout.display == "none"  # no v_r plot without radial velocities in the fit
    # radial velocities alone carry no information on B: v_r = d (K + A sin 2l + C cos 2l) cos^2 b - ...
    # (REFERENCES.md, first-order observables)
    w.use.value = "radial_velocities"
    w.wait()
    assert w.result.use == "radial_velocities" and not w.result.constrained["B"]
    row_B = [r for r in w.table_html.value.split("<tr>") if r.startswith('<td style="padding:1px 8px">B<')][0]
    assert "not constrained" in row_B
    assert w.vr_box.layout.display != "none"


def test_frame_change_moves_V0_and_the_potential_values(sample):
    frame_state = FrameState()
    w = fitter(sample, frame=frame_state)
    before = w.result
    frame_state.R0 = 8.4
    w.wait()
    fit = w.result
    assert fit is not before and fit.frame.R0 == 8.4
    assert fit.V0 == pytest.approx(8.4 * (fit.A - fit.B))
    assert fit.potential_oort["R_kpc"] == pytest.approx(np.sqrt(8.4**2 - 0.0208**2))
    assert fit.potential_oort["A"] != pytest.approx(before.potential_oort["A"])


def test_potential_values_for_MWPotential2014(sample):
    frame_state = FrameState()
    frame_state.z_sun = 0.0
    frame_state.R0 = 8.0
    w = fitter(sample, frame=frame_state, potential=PotentialState())
    pot = w.result.potential_oort
    # Bovy 2015, ApJS 216, 29 (MWPotential2014 at R0 = 8 kpc, vc = 220 km/s): A = 15.14, B = -12.36 km/s/kpc
    # (REFERENCES.md: dvc/dR = -2.7751 km/s/kpc gives A = 15.1376, B = -12.3624)
    assert pot["A"] == pytest.approx(15.1376, abs=0.01)
    assert pot["B"] == pytest.approx(-12.3624, abs=0.01)
    text = html.unescape(w.table_html.value)
    assert "15.14" in text and "-12.36" in text and "MWPotential2014" in text
    # the same values drawn as lines in the distance-bin plot
    np.testing.assert_allclose(np.asarray(w.pot_A.y), 15.1376, atol=0.01)


def test_potential_change_updates_the_values_alongside(sample):
    potential_state = PotentialState()
    w = fitter(sample, potential=potential_state)
    A = w.result.potential_oort["A"]
    potential_state.preset = "McMillan17"
    w.wait()
    assert w.status.startswith("ready")
    assert w.result.potential_oort["A"] != pytest.approx(A, abs=0.05)
    assert "McMillan17" in w.result.potential_description


def test_a_range_without_stars_shows_the_error_and_hides_the_old_fit(sample):
    w = fitter(sample)
    fit, mu = w.result, y_of(w.mu_view)
    assert fit is not None
    w.distance_range.value = (2.5, 3.0)
    w.wait()
    assert w.status.startswith("error") and "no star is left" in w.status
    # The fit on screen was made for other inputs: no longer offered as the result, and hidden.
    assert w.result is None
    assert all(view.layout.visibility == "hidden" for view in w._result_views())
    np.testing.assert_array_equal(y_of(w.mu_view), mu)
    assert w.distance_range.value == (2.5, 3.0)  # the input stays as set
    w.distance_range.value = (0.0, 0.4)
    w.wait()
    assert w.status.startswith("ready") and w.result.distance_range == (0.0, 0.4)
    assert all(view.layout.visibility == "visible" for view in w._result_views())


def test_bad_bins_and_broken_upload_show_errors(sample):
    w = fitter(sample, threaded=False)
    fit = w.result
    w.bins_text.value = "0, 0.5, 0.2"
    assert w.status.startswith("error") and "increasing" in w.status
    assert w.result is None and fit is not None  # the fit was for other settings: no longer offered
    assert all(view.layout.visibility == "hidden" for view in w._result_views())
    w.bins_text.value = "0, 0.25, 0.5"
    assert w.status.startswith("ready") and len(w.result.bins) == 2
    fit = w.result
    w.loader.upload.value = (
        {
            "name": "bad.fits",
            "type": "",
            "size": 9,
            "content": memoryview(b"not fits!"),
            "last_modified": datetime.datetime(2024, 1, 1, tzinfo=datetime.timezone.utc),
        },
    )
    assert w.status.startswith("error") and "kept the previous sample" in w.status
    assert w.result is fit and len(w.sample) == len(sample)


def test_quality_cuts_leave_stars_out_with_the_reason(sample):
    w = fitter(sample, threaded=False)
    n_all = w.result.n_used
    w.max_abs_b.value = 20.0
    b = w._geometry.b_deg
    assert w.result.n_dropped.get("quality", 0) == int(np.count_nonzero(np.abs(b) > 20.0))
    assert w.result.n_used < n_all
    assert "quality: " in w.counts_label.value
    w.max_abs_b.value = 90.0
    w.max_pm_error.value = 0.04
    pm_err = np.fmax(sample["pmra_error"].value, sample["pmdec_error"].value)
    assert w.result.n_dropped["quality"] == int(np.count_nonzero(pm_err > 0.04))
    # a cut the sample cannot support is an error, not a silent no-op
    bare = sample[:3000].copy()
    bare.remove_columns(["pmra_error", "pmdec_error"])
    v = fitter(bare, threaded=False)
    fit = v.result
    v.max_pm_error.value = 0.04
    assert v.status.startswith("error") and "no pmra_error" in v.status and v.result is None and fit is not None


def test_residual_view_follows_the_choice(sample):
    w = fitter(sample)
    res = w.result.residuals
    used = np.asarray(res["used"])
    data = w.residual_view.data()
    np.testing.assert_allclose(np.asarray(data["y"], float)[used], res["z_mu_l_star"][used], rtol=1e-6)
    np.testing.assert_allclose(np.asarray(data["x"], float)[used], w._geometry.l_deg[used], rtol=1e-6)
    w.residual.value = "v_r"
    w.residual_against.value = "distance"
    data = w.residual_view.data()
    np.testing.assert_allclose(np.asarray(data["x"], float)[used], w._fit_arrays["distance"][used], rtol=1e-6)
    z = np.asarray(data["y"], float)
    np.testing.assert_allclose(z[used], np.asarray(res["z_v_r"])[used], rtol=1e-6, equal_nan=True)
    # normalised residuals of a correct model scatter with unit width (intrinsic dispersion fitted)
    assert np.nanstd(z) == pytest.approx(1.0, abs=0.1)


def test_bootstrap_intervals_in_the_table(sample):
    w = fitter(sample, threaded=False)
    w.bootstrap.value = 50
    assert w.result.bootstrap["n"] == 50
    assert "bootstrap 68%" in w.table_html.value
    lo, hi = w.result.bootstrap["intervals"]["A"][:2]
    assert lo < w.result.A < hi


def test_config_round_trip(sample):
    frame_state = FrameState()
    frame_state.R0 = 8.25
    w = fitter(sample, frame=frame_state, threaded=False)
    w.distance_range.value = (0.05, 0.7)
    w.max_abs_b.value = 45.0
    w.max_pm_error.value = 0.05
    w.use.value = "proper_motions"
    w.robust.value = True
    w.bins_text.value = "0, 0.3, 0.7"
    w.distance_controls.min_snr.value = 10.0
    config = json.loads(json.dumps(w.config))
    assert config["widget"] == "OortFitter" and config["sample"]["kind"] == "table"
    other = OortFitter(sample, threaded=False)
    other.load_config(config)
    other.wait()
    assert other.config == config
    assert other.result.A == w.result.A and other.result.n_used == w.result.n_used
    assert other.result.robust and other.result.frame.R0 == 8.25
    with pytest.raises(ValueError, match="unknown OortFitter settings \\['colour'\\]"):
        other.load_config({**config, "colour": "red"})


def test_code_snippet_reproduces_the_fit(sample):
    frame_state = FrameState()
    frame_state.R0 = 8.2
    w = fitter(sample, frame=frame_state, threaded=False)
    w.max_abs_b.value = 60.0
    w.max_pm_error.value = 0.05
    w.bootstrap.value = 20
    w.bins_text.value = "0, 0.2, 0.5"
    namespace = {"sample": sample}
    exec(w.code(), namespace)
    fit = namespace["fit"]
    assert fit.n_used == w.result.n_used and fit.n_dropped == w.result.n_dropped
    assert fit.A == pytest.approx(w.result.A, rel=1e-12) and fit.B == pytest.approx(w.result.B, rel=1e-12)
    assert fit.bootstrap["intervals"]["A"] == pytest.approx(w.result.bootstrap["intervals"]["A"], rel=1e-12)
    # the widget fits its bins on the rows that can fall in them; the numbers are the same
    np.testing.assert_allclose(np.asarray(fit.bins["A"]), np.asarray(w.result.bins["A"]), rtol=1e-9)
    assert fit.potential_oort == pytest.approx(w.result.potential_oort)


def test_export_png_and_svg(sample, tmp_path):
    w = fitter(sample)
    assert w.export_figure(tmp_path / "oort.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    svg = w.export_figure(tmp_path / "oort.svg").read_text()
    assert svg.lstrip().startswith("<?xml") and "<svg" in svg
    for title in ("mu_l* against l", "v_r against l", "normalised residuals", "A and B in distance bins"):
        assert title in svg


def test_first_order_note_and_provenance_on_screen(sample):
    w = fitter(sample)
    assert "first-order" in w.bins_note.value and "stopped holding" in w.bins_note.value
    assert "first-order model" in w.notes_html.value
    prov = w.provenance_text
    assert "frame: astropy v4.0" in prov and "MWPotential2014" in prov and "1/(parallax)" in prov
    assert "astropy" in prov and "numpy" in prov


def test_rapid_slider_moves_end_on_the_last_value(sample):
    w = fitter(sample)
    for hi in np.linspace(0.3, 0.9, 12):
        w.distance_range.value = (0.0, float(hi))  # faster than the fits: requests are coalesced
    w.wait()
    assert w.status.startswith("ready")
    assert w.result.distance_range == (0.0, 0.9)
    used = np.isfinite(y_of(w.mu_view))
    assert used.sum() == w.result.n_used


def test_demo_survey_truth_is_recovered():
    from mwkin.demo import survey

    demo = survey(n=20000, seed=1)
    truth = demo.meta["truth"]
    w = fitter(demo, distance_range=(0.0, 1.0))
    fit = w.result
    assert w.status.startswith("ready")
    # the survey's own model (meta["truth"]): A, B from its power-law rotation curve, C = K = 0
    for name, key in (("A", "A_kms_kpc"), ("B", "B_kms_kpc"), ("C", "C_kms_kpc"), ("K", "K_kms_kpc")):
        assert fit.values[name] == pytest.approx(truth[key], abs=3.5 * fit.errors[name] + 0.5), name
    for axis in "UVW":
        assert fit.values[axis] == pytest.approx(truth["solar_motion_kms"][axis], abs=3.5 * fit.errors[axis] + 1.0)
    # about 30 % of the survey has radial velocities: the v_r panel is shown and fed
    assert w.vr_box.layout.display != "none"
    assert np.isfinite(y_of(w.vr_view)).sum() > 0.2 * fit.n_used


def test_the_export_is_drawn_from_the_live_views(sample):
    # One description: each exported panel copies a live view (its title, data, colours and labels).
    w = fitter(sample)
    panels = {panel.title: panel for panel in w._figure_panels()}
    assert list(panels) == [
        "mu_l* against l: fitted stars",
        "mu_l*: binned medians and the model",
        "v_r against l: fitted stars",
        "v_r: binned medians and the model",
        "normalised residuals of mu_l* against l",
        "A and B in distance bins",
    ]
    stars = panels["mu_l* against l: fitted stars"].layers[0]
    np.testing.assert_array_equal(stars["y"], w.mu_view.data()["y"])
    assert stars["c_label"] == "distance [kpc]"
    model = next(
        layer
        for layer in panels["mu_l*: binned medians and the model"].layers
        if layer.get("label", "").startswith("model, b = 0")
    )
    np.testing.assert_array_equal(model["y"], w.mu_model.y)
    assert model["color"] == w.mu_model.colors[0]
    band = next(layer for layer in panels["mu_l*: binned medians and the model"].layers if layer["kind"] == "band")
    np.testing.assert_array_equal(band["y_low"], np.asarray(w.mu_band.y)[0])
