"""NumberField: a labelled number (a free text box and, optionally, a slider) for the controls.

The field keeps whatever was typed, calls back with every value the user enters and shows values pushed
from the program without calling back; :class:`~mwkin.widgets.controls.FrameControls`,
:class:`~mwkin.widgets.controls.PotentialControls` and the OrbitExplorer's inputs are built from it.
"""

from __future__ import annotations

import ipywidgets as widgets

from .._base import Quiet

_LABEL_STYLE = {"description_width": "9em"}


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
        self._on_value(change["new"])

    def _slider_moved(self, change):
        if self._quiet or self._is_echo(change["new"]):
            return
        with self._quiet:
            self.text.value = change["new"]
        self._on_value(change["new"])

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
