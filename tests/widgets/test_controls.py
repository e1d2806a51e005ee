"""FrameControls and PotentialControls driven from Python: they write the state and follow it."""

from __future__ import annotations

import re

import numpy as np
import pytest

import mwkin as mk
from mwkin.coords import K_KMS_PER_MASYR_KPC
from mwkin.widgets import FrameControls, FrameState


# --------------------------------------------------------------------------- FrameControls
def test_every_frame_control_has_a_css_class_and_a_unit():
    controls = FrameControls(FrameState())
    for key, unit in [("R0", "kpc"), ("z_sun", "pc"), ("vc", "km/s"), ("U", "km/s"), ("vx", "km/s")]:
        field = controls.fields[key]
        assert f"[{unit}]" in field.text.description
        assert any(c.startswith("mwkin-") and c != "mwkin-field" for c in field._dom_classes)
    assert "mwkin-R0" in controls.fields["R0"]._dom_classes
    assert "mwkin-zsun" in controls.fields["z_sun"]._dom_classes


def test_typing_R0_writes_the_state_and_marks_the_frame_custom():
    state = FrameState()
    controls = FrameControls(state)
    controls.fields["R0"].text.value = 8.3
    assert state.R0 == 8.3
    assert state.preset == ""
    assert controls.preset_dropdown.value == "custom"
    assert "custom" in controls.preset_dropdown.options
    assert controls.fields["R0"].slider.value == pytest.approx(8.3)


def test_the_slider_writes_the_state_and_the_text_box():
    state = FrameState()
    controls = FrameControls(state)
    controls.fields["z_sun"].slider.value = 25.0
    assert state.z_sun == pytest.approx(25.0)
    assert controls.fields["z_sun"].text.value == pytest.approx(25.0)


def test_a_slider_snapping_echo_from_the_browser_is_not_an_edit():
    # The front end snaps values to the step grid and sends them back (seen in JupyterLab:
    # 12.9 -> 12.899999999999999); that must leave the preset and the potential untouched.
    from mwkin.widgets import PotentialControls, PotentialState

    state = FrameState()
    controls = FrameControls(state)
    field = controls.fields["z_sun"]
    field.slider.value = field.text.value - 1e-12
    assert state.preset == "astropy v4.0"
    assert state.z_sun == 20.8
    pot_state = PotentialState()
    pot_controls = PotentialControls(pot_state)
    for pfield, _factor in pot_controls.sliders.values():
        pfield.slider.value = round(pfield.text.value, 2)
    assert pot_state.preset == "MWPotential2014"
    field.slider.value = field.text.value + field.slider.step
    assert state.preset == "" and state.z_sun > 20.8


def test_state_changes_from_elsewhere_show_in_the_controls():
    state = FrameState()
    controls = FrameControls(state)
    state.set_frame(mk.SolarFrame.preset("astropy pre-v4.0"))
    assert controls.fields["R0"].value == pytest.approx(8.3)
    assert controls.fields["vy"].value == pytest.approx(232.24)
    assert controls.preset_dropdown.value == "astropy pre-v4.0"
    assert "custom" not in controls.preset_dropdown.options
    # the citation of the chosen preset is shown under the chooser
    assert "Gillessen" in controls.citation.value


def test_uvw_plus_vc_converts_to_and_from_the_cartesian_v_sun():
    state = FrameState()
    controls = FrameControls(state, solar_V=12.24)
    # v_sun = (U, vc + V, W) (SolarFrame.from_lsr)
    assert controls.fields["vc"].value == pytest.approx(245.6 - 12.24)
    assert controls.fields["U"].value == pytest.approx(12.9)
    assert controls.fields["W"].value == pytest.approx(7.78)
    controls.fields["vc"].text.value = 230.0
    assert state.v_sun == pytest.approx((12.9, 242.24, 7.78))
    controls.fields["V"].text.value = 5.0  # vc kept, the split changes
    assert state.v_sun[1] == pytest.approx(235.0)
    controls.fields["U"].text.value = 11.1
    assert state.v_sun[0] == pytest.approx(11.1)
    assert controls.fields["vx"].value == pytest.approx(11.1)
    # the state holds only v_sun: no U/V/W/vc traits were added to it
    assert not {"U", "V", "W", "vc"} & set(state.trait_names())


def test_representation_toggle_switches_the_visible_velocity_fields():
    controls = FrameControls(FrameState())
    assert controls.cartesian_box.layout.display == "none"
    controls.representation.value = "cartesian"
    assert controls.lsr_box.layout.display == "none"
    assert controls.cartesian_box.layout.display != "none"
    controls.fields["vy"].text.value = 250.0
    assert controls.state.v_sun[1] == 250.0


def test_a_refused_value_stays_typed_and_the_error_is_shown():
    state = FrameState()
    controls = FrameControls(state)
    controls.fields["R0"].text.value = -2.0
    assert state.R0 == pytest.approx(8.122)  # the state kept its value
    assert controls.fields["R0"].value == -2.0  # the typed value is not lost
    assert "mwkin-invalid" in controls.fields["R0"]._dom_classes
    assert controls.status.startswith("error") and "R0 must be positive" in controls.status
    controls.fields["z_sun"].text.value = 1e6
    assert "z_sun" in controls.status and state.z_sun == pytest.approx(20.8)
    controls.fields["R0"].text.value = 8.0
    controls.fields["z_sun"].text.value = 25.0
    assert controls.status == "ready"
    assert "mwkin-invalid" not in controls.fields["R0"]._dom_classes


def test_reset_returns_to_the_last_preset_chosen():
    state = FrameState()
    controls = FrameControls(state)
    controls.preset_dropdown.value = "astropy pre-v4.0"
    controls.fields["R0"].text.value = 9.0
    controls.fields["z_sun"].text.value = -1e6  # refused, still typed
    controls.reset()
    assert state.frame == mk.SolarFrame.preset("astropy pre-v4.0")
    assert controls.fields["z_sun"].value == pytest.approx(27.0)
    assert controls.status == "ready"


def test_reflex_line_for_the_v4_preset_agrees_with_the_sgr_a_star_motion():
    controls = FrameControls(FrameState())
    reflex = controls.reflex
    # Reid & Brunthaler 2004, ApJ 616, 872: 6.379 +/- 0.024 mas/yr along the Galactic plane;
    # the v4.0 preset was built to match it (245.6 / (k * 8.122) = 6.3789, REFERENCES.md).
    assert -reflex["mu_l"] == pytest.approx(6.379, abs=0.024)
    assert -reflex["mu_l"] == pytest.approx(245.6 / (K_KMS_PER_MASYR_KPC * 8.122), abs=2e-3)
    # difference from Reid & Brunthaler 2020 (mu_l = -6.411 +/- 0.008) in sigma, as shown
    assert reflex["sigma_l"] == pytest.approx((reflex["mu_l"] + 6.411) / 0.008)
    numbers = re.findall(r"[-+]?\d+\.\d+", controls.reflex_text)
    assert f"{reflex['mu_l']:.3f}" in numbers and "-6.411" in numbers
    assert f"{reflex['sigma_l']:+.1f}σ" in controls.reflex_text


def test_reflex_line_follows_the_frame():
    state = FrameState()
    controls = FrameControls(state)
    before = controls.reflex_text
    state.R0 = 8.178
    state.v_sun = (11.1, 6.411 * K_KMS_PER_MASYR_KPC * 8.178, 7.25)
    assert controls.reflex_text != before
    # an azimuthal velocity of k R0 |mu_l| reproduces the measured mu_l to the tilt's second order
    # (Reid & Brunthaler 2020 value; the frame tilt from z_sun changes mu_l by < 1e-3 mas/yr)
    assert abs(controls.reflex["sigma_l"]) < 0.2


# --------------------------------------------------------------------------- PotentialControls
from astropy.table import QTable  # noqa: E402

from mwkin.widgets import PotentialControls, PotentialState  # noqa: E402


def vc_at_sun(controls):
    """The model's circular velocity at the frame's in-plane R0 (km/s), from the result's OortConstants."""
    return controls.result.meta["oort"].vc.to_value("km/s")


def controls_at_8kpc():
    """Potential controls with a frame at R0 = 8 kpc in the plane (z_sun = 0)."""
    frame = FrameState()
    frame.z_sun = 0.0
    frame.R0 = 8.0
    pot = PotentialState()
    return PotentialControls(pot, frame, threaded=True).wait(), pot, frame


def test_mwpotential2014_shows_220_kms_at_8_kpc():
    controls, pot, frame = controls_at_8kpc()
    # MWPotential2014: vc(8 kpc) = 220 km/s (Bovy 2015, ApJS 216, 29)
    assert vc_at_sun(controls) == pytest.approx(220.0, abs=0.05)
    assert "220.0 km/s" in controls.readout.value
    assert "Bovy 2015" in controls.citation.value
    assert controls.status.startswith("ready")


def test_the_result_is_the_cores_rotation_curve_with_the_frame_comparison():
    controls, pot, frame = controls_at_8kpc()
    result = controls.result
    model = mk.Potential.preset("MWPotential2014")
    expected = model.rotation_curve(np.asarray(controls.curve_mark.x, dtype=float))
    assert isinstance(result, QTable) and result.colnames == expected.colnames
    for name in expected.colnames:
        np.testing.assert_allclose(result[name].value, expected[name].value, rtol=1e-12)
    oort = result.meta["oort"]  # mwkin's OortConstants at the in-plane R0
    assert oort.R.to_value("kpc") == pytest.approx(frame.frame.inplane_radius)
    assert oort.A.to_value("km/(s kpc)") == pytest.approx(model.oort_constants(8.0).A.value, rel=1e-12)
    assert result.meta["vc_frame_kms"] == pytest.approx(245.6 - 12.24)
    assert result.meta["frame"] == frame.frame and result.meta["potential_model"].name == "MWPotential2014"
    # the keys of the dictionary .result used to be still answer, with a DeprecationWarning
    with pytest.warns(DeprecationWarning, match="result\\['vc_pot'\\] is deprecated"):
        assert result["vc_pot"] == vc_at_sun(controls)
    with pytest.warns(DeprecationWarning):
        assert result["vc_frame"] == result.meta["vc_frame_kms"]
    with pytest.warns(DeprecationWarning):
        assert result["R_sun"] == pytest.approx(8.0)
    with pytest.warns(DeprecationWarning):
        curves = result["curves"]
    assert list(curves) == ["total", "bulge", "disc", "halo"]
    np.testing.assert_array_equal(curves["total"], result["vc"].value)
    with pytest.warns(DeprecationWarning), pytest.raises(KeyError):
        result["vc_8"]  # there is a frame: the value is vc_pot
    alone = PotentialControls(PotentialState(), threaded=False)
    with pytest.warns(DeprecationWarning):
        assert alone.result["vc_8"] == pytest.approx(220.0, abs=0.05)  # Bovy 2015: 220 km/s at 8 kpc
    assert "v_c(8 kpc) = <b>220.0 km/s</b>" in alone.readout.value


def test_an_invalid_model_in_the_state_hides_the_curve_and_the_result():
    controls, pot, _ = controls_at_8kpc()
    bad = {c: dict(p) for c, p in pot.parameters.items()}
    bad["bulge"]["mass"] = -1e10
    with pot.hold_trait_notifications():
        pot.parameters = bad
        pot.preset = ""
    controls.wait()
    assert controls.status.startswith("error") and "bulge.mass" in controls.status
    assert controls.result is None and controls.figure.layout.visibility == "hidden"
    pot.preset = "MWPotential2014"
    controls.wait()
    assert controls.status.startswith("ready") and vc_at_sun(controls) == pytest.approx(220.0, abs=0.05)
    assert controls.figure.layout.visibility == "visible"


def test_rotation_curve_has_total_and_components_that_add_in_quadrature():
    controls, _, _ = controls_at_8kpc()
    mark = controls.curve_mark
    assert list(mark.labels) == ["total", "bulge", "disc", "halo"]
    y = np.asarray(mark.y, dtype=float)
    assert y.shape == (4, np.asarray(mark.x).size)
    # vc^2 = sum of the components' vc^2 (forces add; common practice, no source)
    np.testing.assert_allclose(y[0] ** 2, (y[1:] ** 2).sum(axis=0), rtol=1e-10)
    # against galpy directly: MWPotential2014 at R = 8 kpc is 220 km/s in galpy's units (ro=8, vo=220)
    from galpy.potential import MWPotential2014, vcirc

    R = np.asarray(mark.x, dtype=float)
    i = np.argmin(np.abs(R - 12.0))
    assert y[0, i] == pytest.approx(220.0 * vcirc(MWPotential2014, R[i] / 8.0), rel=1e-9)


def test_frame_vc_is_marked_at_R0_and_follows_the_frame():
    controls, pot, frame = controls_at_8kpc()
    assert controls.frame_mark.x[0] == pytest.approx(8.0)
    assert controls.frame_mark.y[0] == pytest.approx(245.6 - 12.24)
    curve = np.asarray(controls.curve_mark.y, dtype=float).copy()
    frame.v_sun = (12.9, 250.0, 7.78)
    controls.wait()
    assert controls.frame_mark.y[0] == pytest.approx(250.0 - 12.24)
    # without matching, the frame does not change the model's curve (it is reused, not recomputed)
    np.testing.assert_array_equal(np.asarray(controls.curve_mark.y, dtype=float), curve)
    pot.solar_V = 10.0
    controls.wait()
    assert controls.frame_mark.y[0] == pytest.approx(240.0)
    assert controls.solar_V_field.value == pytest.approx(10.0)


def test_a_slider_switches_to_the_three_component_model_and_redraws():
    controls, pot, _ = controls_at_8kpc()
    before = np.asarray(controls.curve_mark.y, dtype=float).copy()
    field, factor = controls.sliders[("disc", "mass")]
    assert factor == 1e10 and "[1e10 Msun]" in field.text.description
    assert "[kpc]" in controls.sliders[("disc", "a")][0].text.description
    field.slider.value = 9.0
    controls.wait()
    assert pot.preset == "" and pot.parameters["disc"]["mass"] == pytest.approx(9.0e10)
    assert controls.preset_dropdown.value == ""
    after = np.asarray(controls.curve_mark.y, dtype=float)
    assert not np.allclose(before, after)
    assert vc_at_sun(controls) > 225.0  # a heavier disc, a faster rotation
    assert controls.parameter_box.layout.display != "none"


def test_a_refused_parameter_stays_typed_with_the_error_shown():
    controls, pot, _ = controls_at_8kpc()
    pot.preset = ""
    controls.wait()
    field, _ = controls.sliders[("halo", "scale")]
    field.text.value = -4.0
    assert field.value == -4.0
    assert pot.parameters["halo"]["scale"] == pytest.approx(16.0)
    assert controls.status.startswith("error") and "halo.scale" in controls.status
    assert "mwkin-invalid" in field._dom_classes


def test_matching_the_frame_rescales_vc_at_the_sun():
    controls, pot, frame = controls_at_8kpc()
    controls.match_checkbox.value = True
    controls.wait()
    assert pot.match_frame_vc
    assert vc_at_sun(controls) == pytest.approx(245.6 - 12.24, rel=1e-9)
    assert "+0.0 km/s" in controls.readout.value
    curve = np.asarray(controls.curve_mark.y, dtype=float).copy()
    frame.R0 = 8.3
    controls.wait()
    assert vc_at_sun(controls) == pytest.approx(245.6 - 12.24, rel=1e-9)
    assert not np.allclose(np.asarray(controls.curve_mark.y, dtype=float), curve)  # rescaled model


def test_choosing_a_preset_shows_busy_then_the_citation():
    pot = PotentialState()
    controls = PotentialControls(pot, FrameState(), threaded=True).wait()
    controls.preset_dropdown.value = "Irrgang13I"
    # the first build of a model goes to the worker thread and says so at once
    assert "building Irrgang13I" in controls.status or controls.status.startswith("ready")
    controls.wait()
    assert pot.preset == "Irrgang13I"
    assert "Irrgang et al. 2013" in controls.citation.value
    assert controls.status.startswith("ready")
    assert controls.parameter_box.layout.display == "none"


def test_the_newest_potential_request_wins():
    controls, pot, frame = controls_at_8kpc()
    pot.preset = ""
    for mass in np.linspace(5.0, 9.0, 8):
        controls.sliders[("disc", "mass")][0].slider.value = float(mass)
    controls.wait()
    from mwkin.potentials import Potential

    expected = float(Potential.three_component(**pot.parameters).vcirc(8.0).value)
    assert vc_at_sun(controls) == pytest.approx(expected, rel=1e-12)
    assert pot.parameters["disc"]["mass"] == pytest.approx(9.0e10)


def test_a_stale_slider_echo_does_not_undo_a_value_set_from_code_but_a_drag_back_is_taken():
    # common practice (no source): the ordering of widget messages. A slider still showing an older
    # value sends it back (snapped) after the program showed a new one: not a user's move.
    from mwkin.widgets.controls.fields import NumberField

    got = []
    field = NumberField("W [km/s]", 7.78, "test-field", got.append, slider=(-50.0, 50.0, 0.1))
    field.show(7.25)  # from the program (a preset)
    field.slider.value = 7.8  # the browser's stale echo of 7.78, snapped to the step
    assert got == [] and field.value == 7.25 and field.slider.value == 7.25
    # a user's drag: forward, then back over the same positions, is taken every time
    for value in (7.5, 7.9, 8.3, 7.9, 7.5):
        field.slider.value = value
        field.show(value)  # the state echoes the accepted value back to the field, as FrameControls does
    assert got == [7.5, 7.9, 8.3, 7.9, 7.5]
