"""FrameState and PotentialState: the shared sources of truth, their conversions and configs."""

from __future__ import annotations

import json

import pytest
import traitlets

import mwkin as mk
from mwkin.widgets import FrameState, PotentialState


def test_frame_state_defaults_to_the_astropy_v4_preset():
    state = FrameState()
    # astropy "v4.0" Galactocentric defaults: R0 = 8.122 kpc, v_sun = (12.9, 245.6, 7.78) km/s,
    # z_sun = 20.8 pc (astropy source, coordinates/builtin_frames/galactocentric.py; REFERENCES.md [lib]).
    assert state.R0 == pytest.approx(8.122)
    assert state.z_sun == pytest.approx(20.8)
    assert state.v_sun == pytest.approx((12.9, 245.6, 7.78))
    assert state.preset == "astropy v4.0"
    assert state.frame == mk.SolarFrame.preset("astropy v4.0")


def test_editing_a_value_clears_the_preset_and_preset_restores_it():
    state = FrameState()
    state.R0 = 8.3
    assert state.preset == ""
    assert state.frame.R0 == 8.3
    state.apply_preset("astropy pre-v4.0")
    assert state.preset == "astropy pre-v4.0"
    assert state.frame == mk.SolarFrame.preset("astropy pre-v4.0")


def test_frame_state_refuses_unphysical_values_and_keeps_the_old_one():
    state = FrameState()
    with pytest.raises(traitlets.TraitError, match="R0 must be a finite distance > 0 kpc"):
        state.R0 = -1.0
    assert state.R0 == pytest.approx(8.122)
    for bad in (float("inf"), float("nan")):
        with pytest.raises(traitlets.TraitError, match="R0 must be a finite distance > 0 kpc"):
            state.R0 = bad
        assert state.R0 == pytest.approx(8.122)
    with pytest.raises(traitlets.TraitError, match="v_sun must be finite, got vy = inf km/s"):
        state.v_sun = (12.9, float("inf"), 7.78)
    with pytest.raises(traitlets.TraitError, match="z_sun must be a finite height"):
        state.z_sun = float("nan")
    with pytest.raises(traitlets.TraitError, match="z_sun"):
        state.z_sun = 1e5
    assert state.z_sun == pytest.approx(20.8)


def test_set_frame_sends_one_batch_of_notifications():
    state = FrameState()
    seen = []
    state.observe(lambda change: seen.append(change["name"]), ["R0", "z_sun", "v_sun", "preset"])
    state.set_frame(mk.SolarFrame.preset("astropy pre-v4.0"))
    # each trait notifies once, after all of them were set (so an observer sees a consistent frame)
    assert sorted(seen) == sorted(set(seen))
    assert state.preset == "astropy pre-v4.0"


def test_frame_config_round_trip_through_json():
    state = FrameState()
    state.R0, state.v_sun = 8.2, (11.0, 250.0, 7.0)
    text = json.dumps(state.config)
    other = FrameState()
    other.load_config(json.loads(text))
    assert other.frame == state.frame


def test_potential_state_builds_the_preset_and_parameters():
    state = PotentialState()
    pot = state.potential
    # MWPotential2014: vc(8 kpc) = 220 km/s (Bovy 2015, ApJS 216, 29, Table 1)
    assert pot.vcirc(8.0).to_value("km/s") == pytest.approx(220.0, rel=1e-3)
    state.preset = ""
    three = state.potential
    assert three.to_dict()["kind"] == "three_component"


def test_potential_state_matches_the_frame_circular_velocity():
    state = PotentialState(match_frame_vc=True)
    frame = mk.SolarFrame.preset("astropy v4.0")
    pot = state.potential_for(frame)
    R_sun = (frame.R0**2 - (frame.z_sun / 1000.0) ** 2) ** 0.5
    assert pot.vcirc(R_sun).to_value("km/s") == pytest.approx(frame.v_sun[1] - state.solar_V, rel=1e-6)


def test_potential_config_round_trip_and_unknown_keys():
    state = PotentialState()
    state.preset = ""
    params = json.loads(json.dumps(state.parameters))
    state.match_frame_vc = True
    other = PotentialState()
    other.load_config(json.loads(json.dumps(state.config)))
    assert other.preset == "" and other.match_frame_vc and other.parameters == params
    with pytest.raises(ValueError, match="unknown potential-state keys"):
        other.load_config({"presett": "x"})


def test_set_potential_takes_a_three_component_model():
    state = PotentialState()
    pot = mk.Potential.three_component(**state.parameters)
    state.set_potential(pot)
    assert state.preset == ""
    assert state.potential.to_dict() == pot.to_dict()


def test_potential_from_config_is_the_state_potential():
    from mwkin.widgets.state import potential_from_config

    state = PotentialState(match_frame_vc=True)
    frame = mk.SolarFrame.preset("astropy pre-v4.0")
    a = potential_from_config(state.config, frame)
    b = state.potential_for(frame)
    assert a.to_dict() == b.to_dict()
    assert "scaled_to" in a.to_dict()


def test_set_potential_refuses_a_scaled_model():
    state = PotentialState()
    scaled = mk.Potential.preset("MWPotential2014").scaled_to(230.0, 8.0)
    with pytest.raises(ValueError, match="match_frame_vc"):
        state.set_potential(scaled)
    assert state.preset == "MWPotential2014"
