"""OrbitExplorer: the orbit of one star in the shared frame and potential, recomputed live.

Layout (one job per module; :class:`OrbitExplorer` inherits the mixins, see the comment above it):

* :mod:`.widget`: :class:`OrbitExplorer` (construction, settings, requests, computation, results,
  code snippet) and :class:`OrbitView` (what one computation produced);
* :mod:`.star`: the star and integration-time inputs (``_StarInput``), the config's star and the
  helpers that hand a star to the core;
* :mod:`.drag`: dragging the velocity arrow and going back to the star as given (``_VelocityDrag``);
* :mod:`.drawing`: the face-on and meridional views, the read-out and the export panels (``_Drawing``).

Every name the former single module defined is importable from here.
"""

from __future__ import annotations

from .drag import (  # noqa: F401 - private names kept importable from here
    _VelocityDrag,
)
from .drawing import (  # noqa: F401 - private names kept importable from here
    _ARROW_FRACTION,
    _COLOURS,
    _FACE_PX,
    _KEY_HTML,
    _MARGIN,
    _MER_H,
    _MER_W,
    _cloud_arrays,
    _Drawing,
    _joined_track,
    _set_xy,
    _track_arrays,
    _tracks,
)
from .star import (  # noqa: F401 - private names kept importable from here
    _OBS_ERRORS,
    _OBSERVABLES,
    _PHASE_SPACE,
    _SOURCES,
    DEFAULT_PHASE_SPACE,
    DEFAULT_STAR,
    _checked_star,
    _distance_choice,
    _given_text,
    _parallax_caveat,
    _phase_space,
    _phase_space_row,
    _star_table,
    _StarInput,
)
from .widget import (  # noqa: F401 - private names kept importable from here
    _UNITS_CODE,
    CLOUD_POINTS,
    OrbitExplorer,
    OrbitView,
    _draw_stars,
    _finite_gyr,
    _integrate,
    _is_number,
)

__all__ = ["OrbitExplorer", "OrbitView", "DEFAULT_STAR"]
