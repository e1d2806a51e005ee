"""Property tests of the widgets' config entry points: malformed configs are named errors that change nothing.

For any JSON-like value handed to ``load_config`` (of an analysis widget, ``FrameState`` or
``PotentialState``), the outcome is either a clean application (the widget's config afterwards is a
valid config, and applying it again changes nothing) or a ``ValueError`` whose message names what is
wrong, with the widget and the shared states exactly as before. Never another exception type, never a
half-applied config.
"""

from __future__ import annotations

import copy

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import mwkin as mk
from mwkin.widgets import FrameState, OortFitter, OrbitExplorer, PotentialState, VelocityPanel

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True)

scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**12), 10**12),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=8),
)
json_like = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=6), inner, max_size=3)),
    max_leaves=8,
)


def mutate(config, data):
    """Replace one value somewhere in ``config`` (a dict tree) by an arbitrary JSON-like value."""
    config = copy.deepcopy(config)
    node = config
    while True:
        keys = sorted(node)
        if not keys:
            return config
        key = data.draw(st.sampled_from(keys))
        if isinstance(node[key], dict) and node[key] and data.draw(st.booleans()):
            node = node[key]
            continue
        node[key] = data.draw(json_like)
        return config


@pytest.fixture(scope="module")
def shared():
    survey = mk.demo.survey(n=800, seed=5)
    frame, pot = FrameState(), PotentialState()
    widgets_ = {
        "OortFitter": OortFitter(survey, frame=frame, potential=pot, threaded=False),
        "VelocityPanel": VelocityPanel(survey, frame=frame, potential=pot, threaded=False),
        "OrbitExplorer": OrbitExplorer(frame=frame, potential=pot, threaded=False, n_points=201),
    }
    return frame, pot, widgets_


def check_all_or_nothing(widget, frame, pot, config):
    before = (copy.deepcopy(widget.config), frame.config, pot.config)
    try:
        widget.load_config(config)
    except ValueError as exc:
        assert str(exc)  # a message, never an empty error
        assert (widget.config, frame.config, pot.config) == before  # nothing changed anywhere
        assert "config not applied" in widget.status
        return False
    after = widget.config
    widget.load_config(copy.deepcopy(after))  # a config it accepted round-trips
    assert widget.config == after
    return True


@pytest.mark.parametrize("name", ["OortFitter", "VelocityPanel", "OrbitExplorer"])
@SETTINGS
@given(data=st.data())
def test_mutated_widget_configs_apply_cleanly_or_change_nothing(shared, name, data):
    frame, pot, widgets_ = shared
    widget = widgets_[name]
    base = widget.config
    config = mutate(base, data)
    check_all_or_nothing(widget, frame, pot, config)
    widget.load_config(base)  # back to the start for the next example


@SETTINGS
@given(config=json_like)
def test_arbitrary_values_as_a_widget_config(shared, config):
    frame, pot, widgets_ = shared
    check_all_or_nothing(widgets_["OortFitter"], frame, pot, config)


@SETTINGS
@given(data=st.data())
def test_frame_and_potential_state_configs(data):
    frame, pot = FrameState(), PotentialState()
    for state in (frame, pot):
        before = state.config
        config = mutate(before, data) if data.draw(st.booleans()) else data.draw(json_like)
        try:
            state.load_config(config)
        except ValueError as exc:
            assert str(exc) and state.config == before
        else:
            assert state.config == state.config  # applied: a config that reads back
