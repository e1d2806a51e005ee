"""Controls that edit the shared states: :class:`FrameControls` and :class:`PotentialControls`.

A control writes to its state object and redraws itself when the state changes, whoever changed it.
It keeps no second copy of the state: the solar velocity shown as (U, V, W) + vc is converted to and
from the state's Cartesian ``v_sun`` with the core's :meth:`SolarFrame.from_lsr` / :meth:`lsr_motion`.
A value the state refuses stays in its text box, marked, with the reason in the control's status line.

Layout: :mod:`.fields` (:class:`NumberField`, the text box + slider every control is built from),
:mod:`.frame` (:class:`FrameControls`), :mod:`.potential` (:class:`PotentialControls` and its rotation
curve). Every name the former single module defined or re-exported is importable from here.
"""

from __future__ import annotations

# SGR_A_STAR_PROPER_MOTION and reflex_comparison are mwkin.frames' own (re-exported here as before).
from ...frames import SGR_A_STAR_PROPER_MOTION, reflex_comparison
from .fields import _LABEL_STYLE, NumberField  # noqa: F401 - kept importable from here
from .frame import _CUSTOM, DEFAULT_SOLAR_V, FrameControls  # noqa: F401 - kept importable from here
from .potential import (  # noqa: F401 - private names kept importable from here
    _COMPONENT_COLOURS,
    _EXTRA_COLOURS,
    _LEGACY_RESULT_KEYS,
    _MASS_UNIT,
    _REFERENCE_R_KPC,
    _SLIDERS,
    _THREE_COMPONENT,
    INLINE_LIMIT_S,
    PotentialControls,
    _curve_labels,
    _model_key,
    _RotationCurve,
    _slider_spec,
)

__all__ = ["FrameControls", "PotentialControls", "SGR_A_STAR_PROPER_MOTION", "reflex_comparison"]
