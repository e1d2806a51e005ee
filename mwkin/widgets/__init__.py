"""Jupyter widgets over the mwkin core: shared solar frame and potential, and live analysis views.

Everything here binds the core (which never imports this package) to plots. Widgets given the same
:class:`FrameState` / :class:`PotentialState` update together.
"""

try:  # the widget libraries come with the 'widgets' extra; the core works without them
    import anywidget as _anywidget  # noqa: F401
    import bqplot as _bqplot  # noqa: F401
    import ipywidgets as _ipywidgets  # noqa: F401
    import traitlets as _traitlets  # noqa: F401
except ImportError as _missing:
    raise ImportError(
        f"mwkin.widgets needs the 'widgets' extra ({_missing.name} is not installed): pip install 'mwkin[widgets]'"
    ) from None

from ._sample import SampleWarning, allow_sample_folder, allowed_sample_folders
from .controls import FrameControls, PotentialControls
from .oort_fitter import OortFitter
from .orbit_explorer import OrbitExplorer
from .state import ConfigError, FrameState, PotentialState
from .velocity_panel import VelocityPanel

__all__ = [
    "FrameState",
    "PotentialState",
    "FrameControls",
    "PotentialControls",
    "OrbitExplorer",
    "VelocityPanel",
    "OortFitter",
    "ConfigError",
    "SampleWarning",
    "allow_sample_folder",
    "allowed_sample_folders",
]
