"""Jupyter widgets over the mwkin core: shared solar frame and potential, and live analysis views.

Everything here binds the core (which never imports this package) to plots. Widgets given the same
:class:`FrameState` / :class:`PotentialState` update together.
"""

from .state import FrameState, PotentialState

__all__ = ["FrameState", "PotentialState"]
