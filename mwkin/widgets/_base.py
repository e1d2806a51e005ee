"""What every analysis widget shares: status line, live runner, config, code snippet, figure export.

Subclasses implement four small methods:

* ``_request()`` -> a snapshot (plain Python objects) of every input the computation needs, taken on the
  kernel's main thread so the worker never reads traits halfway through a change;
* ``_compute(request)`` -> the core result object (runs on the worker thread, no widget access);
* ``_show(result, request)`` -> put the result into the plots (numpy arrays only);
* ``_config()`` / ``_load_config(cfg)`` / ``_code(request)`` / ``_figure_panels()`` for sharing.
"""

from __future__ import annotations

import html
import json
import os
import pathlib

import ipywidgets as widgets
import traitlets

from ._live import LiveRunner
from .state import ConfigError, FrameState, PotentialState, frame_from_config, require_mapping, validated_potential_config

__all__ = ["AnalysisWidget", "StatusLine", "Panel"]


class StatusLine(widgets.HTML):
    """A one-line status read-out: ready, computing, or the error, always visible under the plots."""

    def __init__(self, **kwargs):
        super().__init__(**kwargs)
        self.add_class("mwkin-status")
        self.text = ""
        self.show_ready("ready")

    def _set(self, text, colour, state):
        self.text = text
        self.state = state
        self.value = (f'<span class="mwkin-status-{state}" style="color:{colour}">'
                      f"{html.escape(text)}</span>")

    def show_ready(self, text):
        self._set(text, "#1d5e2e", "ready")

    def show_busy(self, text="computing..."):
        self._set(text, "#6b5800", "busy")

    def show_error(self, text):
        self._set(text, "#a11d1d", "error")


class Panel:
    """Description of one plot panel for the static (matplotlib) export.

    Parameters
    ----------
    title, x_label, y_label : str
    layers : list of dict
        Each with ``kind`` ("scatter" or "line"), ``x``, ``y`` (numpy arrays), optional ``label``,
        ``color``, ``size``, ``c`` (colour values), ``c_label``.
    equal_aspect : bool
    notes : list of str
        Caveats printed under the panel.
    legend_outside : bool
        Put the legend beside the axes instead of inside (for plots whose lines fill the whole box).
    """

    def __init__(self, title, x_label, y_label, layers, equal_aspect=False, notes=(), legend_outside=False):
        self.title, self.x_label, self.y_label = title, x_label, y_label
        self.layers, self.equal_aspect, self.notes = list(layers), equal_aspect, list(notes)
        self.legend_outside = legend_outside


def error_text(exc):
    """Readable one-line text of an exception for the status line."""
    message = str(exc) or type(exc).__name__
    if isinstance(exc, (ValueError, KeyError, traitlets.TraitError)):
        return f"error: {message}"
    return f"error ({type(exc).__name__}): {message}"


class AnalysisWidget(widgets.VBox):
    """Base class of the analysis widgets; see the module docstring."""

    #: Short description shown in the status line once a result is in.
    busy = traitlets.Bool(False, help="True while a computation is running")

    def __init__(self, frame=None, potential=None, *, threaded=True, **kwargs):
        super().__init__(**kwargs)
        self.frame_state = frame if frame is not None else FrameState()
        self.potential_state = potential if potential is not None else PotentialState()
        if not isinstance(self.frame_state, FrameState):
            raise TypeError("frame must be a FrameState (wrap a SolarFrame with FrameState(frame))")
        if not isinstance(self.potential_state, PotentialState):
            raise TypeError("potential must be a PotentialState (wrap a Potential with PotentialState(pot))")
        self.status_line = StatusLine()
        self.provenance_label = widgets.HTML(style={"font_size": "11px"})
        self.provenance_label.add_class("mwkin-provenance")
        self._result = None
        self._last_request = None
        self._runner = LiveRunner(self._compute, self._deliver, self._fail, self._set_busy, threaded=threaded)
        self.code_area = widgets.Textarea(layout=widgets.Layout(width="100%", height="9em", display="none"))
        self.code_area.add_class("mwkin-code")
        self.code_button = widgets.Button(description="Copy as code", icon="code",
                                          tooltip="show a Python snippet that reproduces this result")
        self.code_button.on_click(lambda _: self._toggle_code())
        self.add_class("mwkin-widget")

    # ------------------------------------------------------------------ public surface
    @property
    def result(self):
        """The latest core result object (None before the first computation finishes)."""
        return self._result

    @property
    def status(self):
        """Short text: 'ready ...', 'computing...' or 'error: ...'."""
        return self.status_line.text

    @property
    def config(self):
        """JSON-able dict of everything needed to rebuild this widget's result."""
        return {"widget": type(self).__name__, "frame": self.frame_state.config,
                "potential": self.potential_state.config, **self._config()}

    def load_config(self, config):
        """Apply a dict produced by :attr:`config` (frame, potential and the widget's own settings).

        All or nothing: the frame and potential parts are validated first, then the widget's own settings
        are applied; if anything fails, the widget's settings are put back as they were, the shared
        frame and potential states are left untouched, the status line says why and the error is raised.

        Raises
        ------
        ConfigError
            A config that is not a dict, is for another widget, or has a bad key or value (named).
        """
        try:
            config = require_mapping(config, "the widget config")
            kind = config.pop("widget", type(self).__name__)
            if kind != type(self).__name__:
                raise ConfigError(f"this config is for a {kind}, not a {type(self).__name__}")
            frame = (frame_from_config(require_mapping(config.pop("frame"), "config['frame']"))
                     if "frame" in config else None)
            potential = (validated_potential_config(require_mapping(config.pop("potential"), "config['potential']"))
                         if "potential" in config else None)
            snapshot = self._snapshot()
            try:
                with self.hold_trait_notifications():
                    self._load_config(config)
            except Exception:
                self._restore(snapshot)
                raise
        except Exception as exc:
            self.status_line.show_error(f"error: config not applied (nothing changed): {str(exc) or type(exc).__name__}")
            raise
        # Only now, with everything validated and applied, do the shared states change.
        if frame is not None:
            self.frame_state.set_frame(frame)
        if potential is not None:
            self.potential_state.load_config(potential)
        self.refresh()

    #: Private attributes that hold the widget's sample (restored as they were when a config fails).
    _SNAPSHOT_ATTRIBUTES = ("_stars", "_source", "_geometry", "_note", "_bins_cache", "_original", "_seed")

    def _snapshot(self):
        """Everything :meth:`_restore` needs to undo a half-applied config."""
        attributes = {name: getattr(self, name) for name in self._SNAPSHOT_ATTRIBUTES if hasattr(self, name)}
        return attributes, self._config()

    def _restore(self, snapshot):
        attributes, own = snapshot
        for name, value in attributes.items():
            setattr(self, name, value)
        controls = getattr(self, "distance_controls", None)
        if controls is not None:
            controls.set_sample(attributes.get("_stars"))
        with self.hold_trait_notifications():
            self._load_config(own)

    def save_config(self, path):
        """Write :attr:`config` as JSON to ``path`` (through a temporary file, so a failed write loses nothing).

        Raises
        ------
        ConfigError
            If the folder of ``path`` does not exist or ``path`` is a folder.
        """
        path = pathlib.Path(path)
        if path.is_dir():
            raise ConfigError(f"save_config: {path} is a folder; give a file name such as {path / 'analysis.json'}")
        if not path.parent.is_dir():
            raise ConfigError(f"save_config: the folder {path.parent} does not exist (nothing written)")
        text = json.dumps(self.config, indent=2)
        partial = path.with_name(f".{path.name}.partial")
        try:
            partial.write_text(text)
            os.replace(partial, path)
        finally:
            partial.unlink(missing_ok=True)

    def load_config_file(self, path):
        """Read a JSON file written by :meth:`save_config` and apply it."""
        self.load_config(json.loads(pathlib.Path(path).read_text()))

    def code(self):
        """A short Python snippet reproducing the current result with the core API."""
        request = self._last_request if self._last_request is not None else self._request()
        return self._code(request)

    def refresh(self):
        """Recompute from the current inputs (coalesced, off the main thread)."""
        try:
            request = self._request()
        except Exception as exc:  # noqa: BLE001 - shown on screen, inputs kept as typed
            # The current inputs are the newest request even though they cannot be computed: anything
            # still running from older inputs must not land on top of this error.
            for runner in self._runners():
                runner.supersede()
            self._fail(exc, None)
            return
        self.status_line.show_busy("computing...")
        self._runner.submit(request)

    def wait(self, timeout=60.0):
        """Block until pending computations are done (for scripts and tests); returns self."""
        if not self._runner.wait(timeout):
            raise TimeoutError(f"{type(self).__name__} still computing after {timeout} s")
        return self

    def export_figure(self, path, dpi=150):
        """Save the current plots as PNG or SVG (chosen by the file suffix), drawn with matplotlib.

        This works without a browser (batch jobs, CI) and gives a static copy for sharing.
        """
        from ._export import export_panels

        path = pathlib.Path(path)
        return export_panels(self._figure_panels(), path, title=type(self).__name__,
                             footer=self.provenance_text, dpi=dpi)

    @property
    def provenance_text(self):
        """Provenance line of the current result."""
        return getattr(self, "_provenance", "")

    # ------------------------------------------------------------------ runner callbacks
    def _set_busy(self, busy):
        self.busy = busy
        if busy:
            self.status_line.show_busy("computing...")

    def _runners(self):
        """Every LiveRunner whose results depend on the inputs (the main one, plus any of the subclass)."""
        return [self._runner]

    def _result_views(self):
        """Widgets that show the result; hidden while the current inputs give an error."""
        return []

    def _show_results(self, visible):
        for view in self._result_views():
            view.layout.visibility = "visible" if visible else "hidden"

    def _deliver(self, result, request, seconds):
        self._show_results(True)
        self._result = result
        self._last_request = request
        self._show(result, request)
        self._provenance = self._provenance_for(result, request)
        self.provenance_label.value = f"<small>{html.escape(self._provenance)}</small>"
        self.status_line.show_ready(f"ready: {self._summary(result)} ({seconds * 1000:.0f} ms)")
        if self.code_area.layout.display != "none":
            self.code_area.value = self._code(request)

    def _fail(self, exc, request):
        # The current inputs have no result: whatever is on screen was computed from other inputs, so
        # it is hidden and .result no longer offers it.
        self._result = None
        self._show_results(False)
        self._provenance = ""
        self.provenance_label.value = "<small>no result for the current inputs (see the error above)</small>"
        self.status_line.show_error(error_text(exc))

    def _toggle_code(self):
        showing = self.code_area.layout.display != "none"
        if showing:
            self.code_area.layout.display = "none"
        else:
            self.code_area.value = self.code()
            self.code_area.layout.display = None

    # ------------------------------------------------------------------ for subclasses
    def _request(self):
        raise NotImplementedError

    def _compute(self, request):
        raise NotImplementedError

    def _show(self, result, request):
        raise NotImplementedError

    def _summary(self, result):
        return "done"

    def _provenance_for(self, result, request):
        from ..provenance import provenance_line

        return provenance_line(frame=request.get("frame"), potential=request.get("potential"),
                               distance=request.get("distance"))

    def _config(self):
        return {}

    def _load_config(self, config):
        if config:
            raise ValueError(f"unknown settings {sorted(config)} for {type(self).__name__}")

    def _code(self, request):
        raise NotImplementedError

    def _figure_panels(self):
        raise NotImplementedError
