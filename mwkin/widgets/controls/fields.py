"""NumberField: a labelled number (a free text box and, optionally, a slider) for the controls.

The field keeps whatever was typed, calls back with every value the user enters and shows values pushed
from the program without calling back; :class:`~mwkin.widgets.controls.FrameControls`,
:class:`~mwkin.widgets.controls.PotentialControls` and the OrbitExplorer's inputs are built from it.
"""

from __future__ import annotations

import time

import ipywidgets as widgets

from .._base import Quiet

_LABEL_STYLE = {"description_width": "9em"}

#: How long (s) a value shown from the program can still come back from a browser slider as a stale
#: echo (see :meth:`NumberField._is_echo`).
ECHO_WINDOW_S = 2.0


class NumberField(widgets.HBox):
    """A labelled number: a free text box (it keeps whatever was typed) and, optionally, a slider.

    ``on_value(value)`` is called with every value the user enters (typed or dragged); values pushed
    from the program with :meth:`show` do not call it.

    Parameters
    ----------
    label : str
        Description including the unit, e.g. ``"R0 [kpc]"``.
    value : float
    css : str
        CSS class given to the whole field (browser tests find controls by it).
    on_value : callable
    slider : tuple (min, max, step), optional
        Adds a slider with ``continuous_update`` for live exploration.
    tooltip : str, optional
    """

    def __init__(self, label, value, css, on_value, slider=None, tooltip=""):
        self._quiet = Quiet()
        self._on_value = on_value
        self._recently_shown = [(float(value), time.monotonic())]  # (value, when) pushed from the program
        self.text = widgets.FloatText(
            value=value,
            description=label,
            style=_LABEL_STYLE,
            continuous_update=False,
            tooltip=tooltip or label,
            layout=widgets.Layout(width="17em"),
        )
        children = [self.text]
        self.slider = None
        if slider is not None:
            lo, hi, step = slider
            self.slider = widgets.FloatSlider(
                value=min(max(value, lo), hi),
                min=lo,
                max=hi,
                step=step,
                readout=False,
                continuous_update=True,
                layout=widgets.Layout(width="14em"),
            )
            self.slider.observe(self._slider_moved, "value")
            children.append(self.slider)
        self.text.observe(self._typed, "value")
        super().__init__(children)
        self.add_class(css)
        self.add_class("mwkin-field")

    @property
    def value(self):
        """The value in the text box (what the user sees, valid or not)."""
        return self.text.value

    def show(self, value):
        """Display ``value`` (a valid value from the state) without calling back; clears the mark."""
        now = time.monotonic()
        self._recently_shown = [(v, t) for v, t in self._recently_shown if now - t < ECHO_WINDOW_S]
        self._recently_shown.append((float(value), now))
        with self._quiet:
            self.text.value = value
            if self.slider is not None:
                if value > self.slider.max:
                    self.slider.max = value
                if value < self.slider.min:
                    self.slider.min = value
                self.slider.value = value
        self.mark_invalid(False)

    def mark_invalid(self, invalid):
        """Flag the text box (CSS class ``mwkin-invalid``) while it holds a refused value."""
        if invalid:
            self.add_class("mwkin-invalid")
        else:
            self.remove_class("mwkin-invalid")
        self.invalid = invalid

    invalid = False

    def _typed(self, change):
        if self._quiet:
            return
        if self.slider is not None:
            with self._quiet:
                self.slider.value = min(max(change["new"], self.slider.min), self.slider.max)
        self._user_value(change["new"])

    def _slider_moved(self, change):
        if self._quiet or self._is_echo(change["new"]):
            return
        if self._is_stale_echo(change["new"]):
            # The browser still had an older value: put the current one back on its slider.
            with self._quiet:
                self.slider.value = min(max(self.text.value, self.slider.min), self.slider.max)
            return
        with self._quiet:
            self.text.value = change["new"]
        self._user_value(change["new"])

    def _user_value(self, value):
        # The user's own value: every echo of older program values has come in before it (the
        # browser sends in order), so none is pending any more, and a drag back over recent positions
        # is never taken for one.
        self._recently_shown = []
        self._on_value(value)

    def _is_echo(self, slider_value):
        """True if the slider only repeats the text box's value at its step (the one slider-echo rule).

        A slider shown in the browser snaps a value set from Python to its step grid (12.9 ->
        12.899999999999999; vz = -10.83 with step 0.5 -> -11.0) and, with ``continuous_update``, sends
        the snapped value back as if the user had moved it; taking it would replace a shown value
        (a preset, a converted or restored star) by a rounded one and edit the shared state. A value
        within half a step of the text box's is that echo; a real move (one key press) lands a whole
        step away.
        """
        return abs(slider_value - self.text.value) <= 0.5 * self.slider.step * (1 + 1e-9)

    def _is_stale_echo(self, slider_value):
        """True if the slider repeats a value the program showed shortly before the current one.

        A slider still being drawn in the browser when the program shows a new value (a preset applied
        in the cell after the one that displays the controls) sends back its older value, snapped,
        after the new one was set; taken as a user's move it would undo part of the preset. A value
        within half a step of one shown in the last :data:`ECHO_WINDOW_S` seconds is that echo; a
        user's move lands on such a value within that time only by a deliberate return.
        """
        now = time.monotonic()
        tolerance = 0.5 * self.slider.step * (1 + 1e-9)
        return any(
            now - when < ECHO_WINDOW_S and abs(slider_value - shown) <= tolerance
            for shown, when in self._recently_shown[:-1]
        )
