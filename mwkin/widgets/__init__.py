"""Jupyter widgets over the mwkin core: shared solar frame and potential, and live analysis views.

Everything here binds the core (which never imports this package) to plots. Widgets given the same
:class:`FrameState` / :class:`PotentialState` update together.
"""

from .controls import FrameControls, PotentialControls
from .oort_fitter import OortFitter
from .orbit_explorer import OrbitExplorer
from ._sample import SampleWarning, allow_sample_folder, allowed_sample_folders
from .state import ConfigError, FrameState, PotentialState
from .velocity_panel import VelocityPanel

__all__ = ["FrameState", "PotentialState", "FrameControls", "PotentialControls", "OrbitExplorer",
           "VelocityPanel", "OortFitter", "ConfigError", "SampleWarning", "allow_sample_folder",
           "allowed_sample_folders"]
