"""OrbitExplorer: dragging the star's velocity arrow in the face-on view.

:class:`_VelocityDrag` is a mixin of :class:`~mwkin.widgets.orbit_explorer.widget.OrbitExplorer`. A drag
sets the star's initial in-plane Galactocentric velocity (vx, vy); a star given as observables or as a
table row is first converted to phase space with the frame of that moment, and the star as given is
kept (``config["star"]["original"]``) so that :meth:`restore_star` can bring it back.
"""

from __future__ import annotations

import html

from ...columns import PHASE_SPACE_COLUMNS
from .star import _given_text, _phase_space, _phase_space_row


class _VelocityDrag:
    """Mixin of OrbitExplorer: the velocity arrow's drag, the conversion it needs and its undo.

    The ``_original`` trait lives on OrbitExplorer (traitlets binds traits and observers only in HasTraits
    classes, not in a plain mixin); its observer there calls :meth:`_show_original`.
    """

    def _velocity_dragged(self, vx, vy):
        """``galaxy_view.velocity_xy`` changed: a drag in the browser, or a value set from Python."""
        if self._quiet:
            return  # the view being told the current star's velocity, not an edit
        vx, vy = float(vx), float(vy)
        fields = self.phase_fields
        if self.source.value == "phase_space" and (vx, vy) == (float(fields["vx"].value), float(fields["vy"].value)):
            return
        if self.source.value != "phase_space":
            try:
                self._convert_to_phase_space()
            except ValueError as exc:
                self._fail(ValueError(f"the dragged velocity cannot be used: {exc}"), None)
                return
        fields["vx"].show(vx)
        fields["vy"].show(vy)
        self._refresh(keep_view=True)  # the view must not move under the pointer

    def _convert_to_phase_space(self):
        """Turn the star (observables or table row) into typed phase space with the current frame.

        The star as given is kept in ``self._original`` (``config["star"]["original"]``) together with
        the frame used for the conversion. Raises ValueError if the star cannot be converted.
        """
        frame = self.frame_state.frame
        phase, _ = _phase_space(self._star_request(), frame)
        values = dict(zip(PHASE_SPACE_COLUMNS, _phase_space_row(phase)))
        original = {**self._star_config(), "converted_with_frame": frame.to_dict()}
        with self._quiet:
            for key, value in values.items():
                self.phase_fields[key].show(value)
            self.source.value = "phase_space"
        self._original = original

    def restore_star(self):
        """Use the star as it was given before the first drag of the velocity arrow, and recompute.

        Raises
        ------
        ValueError
            If the star was not converted by a drag (there is nothing to go back to).
        """
        if self._original is None:
            raise ValueError("nothing to restore: the star was not converted by dragging its velocity arrow")
        original = self._original
        with self._quiet:
            self._apply_star_config(original)
        self._original = None
        self.refresh()

    def _show_original(self, change=None):
        original = self._original
        if original is None:
            self.drag_note.value = ""
            self.restore_button.layout.display = "none"
            return
        given = _given_text(original)
        R0 = original.get("converted_with_frame", {}).get("R0_kpc")
        self.drag_note.value = (
            "<small class='mwkin-note'>The in-plane velocity was set by dragging the arrow, so the star is "
            f"now Galactocentric phase space, converted from the {html.escape(given)} with the frame of "
            f"that moment (R0 = {R0} kpc). A change of the frame now moves the Sun, not the star; the "
            "orbit cloud is off (phase space has no uncertainties). The star as given is kept "
            "(config['star']['original']).</small>"
        )
        self.restore_button.description = f"back to the {given}"
        self.restore_button.layout.display = None

    def _drag_ended(self, change):
        # the last value of a drag may equal one already computed: widen the view now if needed
        if not change["new"] and self._drawn is not None and self._runner.idle:
            self._fit_view(self._drawn["bounds"], self._drawn["extent"], only_if_needed=True)
