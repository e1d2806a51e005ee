"""What every analysis widget shares: status line, live runner, config, code snippet, figure export.

Subclasses implement a few small methods:

* ``_request()`` -> a snapshot (plain Python objects) of every input the computation needs, taken on the
  kernel's main thread so the worker never reads traits halfway through a change;
* ``_compute(request)`` -> the core result object (runs on the worker thread, no widget access);
* ``_show(result, request)`` -> put the result into the plots (numpy arrays only);
* ``_code(request)`` / ``_figure_panels()`` for sharing;

and declare their settings once, in the class attribute ``SETTINGS`` (name -> :class:`Setting`), from
which the base class builds ``config``, ``load_config`` (every value checked before any is applied) and
its snapshot for undoing a failed config. :func:`snippet_preamble` writes the part of every ``code()``
that the shared states and the sample give (imports, frame, potential, sample).

:class:`Quiet` is the one re-entrancy guard of all widgets and controls: ``with self._quiet:`` around a
change the program makes, and observers that would take it for a user's edit return early while it is on.
"""

from __future__ import annotations

import html
import json
import math
import os
import pathlib
import threading

import ipywidgets as widgets
import traitlets

from ._live import LiveRunner
from .state import (
    ConfigError,
    FrameState,
    PotentialState,
    frame_from_config,
    require_mapping,
    validated_potential_config,
)

__all__ = [
    "AnalysisWidget",
    "StatusLine",
    "Panel",
    "Quiet",
    "Setting",
    "control_setting",
    "within_control",
    "one_of",
    "snippet_preamble",
]


class Quiet:
    """A re-entrancy guard: true while the program itself is changing controls, in this thread.

    ``with guard:`` marks a change made by the program (showing a value from the state, applying a
    config, drawing a result); an observer that would otherwise take the change for a user's edit returns
    early ``if guard``. Nestable; per thread, so a result drawn on the worker thread never silences an
    edit arriving on the kernel's main thread at the same moment.
    """

    def __init__(self):
        self._local = threading.local()

    def __enter__(self):
        self._local.depth = getattr(self._local, "depth", 0) + 1
        return self

    def __exit__(self, *exc):
        self._local.depth -= 1
        return False

    def __bool__(self):
        return getattr(self._local, "depth", 0) > 0


class Setting:
    """One entry of a widget's config: how to read it, check a value for it, and apply it.

    Parameters
    ----------
    get : callable
        ``get(widget) -> value``: the JSON-able value for ``config``.
    set : callable
        ``set(widget, value)``: apply a checked value (no recomputation; the widget refreshes once after
        the whole config).
    types : tuple of type, optional
        The JSON types accepted (``True`` is never taken for a number); ``type(None)`` allows null.
    check : callable, optional
        ``check(widget, value) -> value``: raises ValueError saying what is wrong (the key is added to the
        message), else returns the value to apply. Runs before anything is applied.
    save, restore : callable, optional
        ``save(widget) -> state`` and ``restore(widget, state)`` for undoing a config that failed while
        being applied, when the config value alone cannot bring the state back (a sample held in memory).
        By default ``get`` and ``set``.
    """

    def __init__(self, get, set, *, types=None, check=None, save=None, restore=None):
        self.get, self._set, self.types, self._check = get, set, types, check
        self._save, self._restore = save, restore

    def save(self, widget):
        """The widget's current state of this setting (by default its config value)."""
        return (self._save or self.get)(widget)

    def restore(self, widget, saved):
        """Put back a state from :meth:`save` (by default by applying the config value again)."""
        (self._restore or self._set)(widget, saved)

    def prepare(self, widget, key, value):
        """The value to apply, or a :class:`ConfigError` naming the widget, the key and the problem."""
        name = type(widget).__name__
        if self.types is not None and (
            (isinstance(value, bool) and bool not in self.types) or not isinstance(value, self.types)
        ):
            names = " or ".join("None" if t is type(None) else t.__name__ for t in self.types)
            raise ConfigError(f"{name} config[{key!r}] must be {names}, got {type(value).__name__} {value!r:.80}")
        if self._check is None:
            return value
        try:
            return self._check(widget, value)
        except ConfigError:
            raise
        except Exception as exc:  # noqa: BLE001 - every bad value is a named ConfigError
            raise ConfigError(f"{name} config[{key!r}] = {value!r:.80}: {str(exc) or type(exc).__name__}") from None

    def apply(self, widget, value):
        self._set(widget, value)


def control_setting(control, *, types, convert=None, check=None):
    """A :class:`Setting` held by the ``value`` of the control ``widget.<control>``.

    ``convert`` turns the control's value into the config's (e.g. ``float``); ``check`` as for Setting.
    """
    convert = convert or (lambda value: value)
    return Setting(
        lambda w: convert(getattr(w, control).value),
        lambda w, value: setattr(getattr(w, control), "value", value),
        types=types,
        check=check,
    )


def number_in(low, high, what, unit=""):
    """A Setting check: a finite number with low <= value <= high (either bound may be None)."""

    def check(widget, value):
        value = float(value)
        if not math.isfinite(value) or (low is not None and value < low) or (high is not None and value > high):
            bounds = (
                f"between {low:g} and {high:g}"
                if low is not None and high is not None
                else f">= {low:g}"
                if low is not None
                else f"<= {high:g}"
            )
            raise ValueError(f"{what} must be a finite number {bounds}{unit}")
        return value

    return check


def within_control(control, unit=""):
    """A Setting check: a number within the bounds of the control ``widget.<control>`` (never clamped)."""

    def check(widget, value):
        box = getattr(widget, control)
        if not (math.isfinite(value) and box.min <= value <= box.max):
            raise ValueError(f"must lie in [{box.min:g}, {box.max:g}]{unit}")
        return value

    return check


def one_of(options, what):
    """A Setting check: one of ``options`` (a collection, or a callable(widget) giving one)."""

    def check(widget, value):
        allowed = options(widget) if callable(options) else options
        if value not in allowed:
            raise ValueError(f"{what} must be one of {sorted(allowed)}")
        return value

    return check


def frame_code(frame, name="frame"):
    """The snippet line that builds ``frame`` (a SolarFrame) with the core API."""
    return f"{name} = mk.SolarFrame(R0={frame.R0!r}, z_sun={frame.z_sun!r}, v_sun={tuple(frame.v_sun)!r})"


def potential_code(config, name="pot", frame="frame"):
    """The snippet lines that build the potential of a :attr:`PotentialState.config` (matched if asked)."""
    if config["preset"]:
        lines = [f"{name} = mk.Potential.preset({config['preset']!r})"]
    else:
        lines = [f"{name} = mk.Potential.three_component(**{config['parameters']!r})"]
    if config["match_frame_vc"]:
        lines.append(
            f"{name} = {name}.scaled_to({frame}.v_sun[1] - {config['solar_V']!r}, "
            f"{frame}.inplane_radius)  # match the frame's vc"
        )
    return lines


def snippet_preamble(request, *, imports=(), potential=None, sample=False):
    """The part of a ``code()`` snippet every widget shares: imports, frame, potential and sample.

    Parameters
    ----------
    request : dict
        The widget's request: ``frame`` (a SolarFrame), ``potential_config`` when ``potential`` is
        given, ``source`` (a SampleSource) when ``sample`` is true.
    imports : sequence of str
        Import lines besides ``import mwkin as mk``.
    potential : str, optional
        Name of the potential variable (no potential line when None).
    sample : bool
        Add ``stars = ...`` reading the sample.
    """
    lines = [*imports, "import mwkin as mk", "", frame_code(request["frame"])]
    if potential is not None:
        lines += potential_code(request["potential_config"], name=potential)
    if sample:
        lines.append(f"stars = {request['source'].read_expression()}")
    return lines


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
        self.value = f'<span class="mwkin-status-{state}" style="color:{colour}">{html.escape(text)}</span>'

    def show_ready(self, text):
        self._set(text, "#1d5e2e", "ready")

    def show_busy(self, text="computing..."):
        self._set(text, "#6b5800", "busy")

    def show_error(self, text):
        self._set(text, "#a11d1d", "error")


class Panel:
    """Description of one plot panel for the static (matplotlib) export.

    Built from what a live view shows (:func:`~mwkin.widgets._plots.panel_from_figure`,
    :func:`~mwkin.widgets._plots.layers_from_view`, :meth:`GalaxyView.export_panel`), so the export
    has the live view's data, colours, labels and region.

    Parameters
    ----------
    title, x_label, y_label : str
    layers : list of dict
        Each with ``kind`` and ``x``, ``y`` (numpy arrays; NaN breaks a line), optional ``label``,
        ``color``, ``opacity``, ``width`` and:

        - "line": ``dashed``;
        - "scatter": ``size``, ``marker`` (matplotlib), ``c`` (colour values), ``c_label``, ``edgecolor``;
        - "band": ``y_low``, ``y_high`` instead of ``y``;
        - "arrow": from (x[0], y[0]) to (x[1], y[1]);
        - "text": ``text`` at (x[0], y[0]).
    equal_aspect : bool
    notes : list of str
        Caveats printed under the panel.
    legend_outside : bool
        Put the legend beside the axes instead of inside (for plots whose lines fill the whole box).
    x_range, y_range : (float, float), optional
        The region shown, as in the live view (None: the data's).
    """

    def __init__(
        self,
        title,
        x_label,
        y_label,
        layers,
        equal_aspect=False,
        notes=(),
        legend_outside=False,
        x_range=None,
        y_range=None,
    ):
        self.title, self.x_label, self.y_label = title, x_label, y_label
        self.layers, self.equal_aspect, self.notes = list(layers), equal_aspect, list(notes)
        self.legend_outside = legend_outside
        self.x_range = None if x_range is None else (float(x_range[0]), float(x_range[1]))
        self.y_range = None if y_range is None else (float(y_range[0]), float(y_range[1]))


def error_text(exc):
    """Readable one-line text of an exception for the status line."""
    message = str(exc) or type(exc).__name__
    if isinstance(exc, (ValueError, KeyError, traitlets.TraitError)):
        return f"error: {message}"
    return f"error ({type(exc).__name__}): {message}"


class AnalysisWidget(widgets.VBox):
    """Base class of the analysis widgets; see the module docstring."""

    busy = traitlets.Bool(False, help="True while a computation is running")

    #: The widget's own settings in its config: name -> :class:`Setting`, applied in this order.
    SETTINGS: dict = {}

    def __init__(self, frame=None, potential=None, *, threaded=True, **kwargs):
        super().__init__(**kwargs)
        self._quiet = Quiet()  # on while the program changes controls: refresh() waits for the end
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
        self.code_button = widgets.Button(
            description="Copy as code", icon="code", tooltip="show a Python snippet that reproduces this result"
        )
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
        return {
            "widget": type(self).__name__,
            "frame": self.frame_state.config,
            "potential": self.potential_state.config,
            **self._config(),
        }

    def load_config(self, config):
        """Apply a dict produced by :attr:`config` (frame, potential and the widget's own settings).

        All or nothing: every part is checked first -- the frame, the potential and each setting
        (:attr:`SETTINGS`) -- and only then are the widget's settings applied, and after them the shared
        frame and potential states; one recomputation follows. If anything is wrong, nothing changes, the
        status line says why ("error: config not applied (nothing changed): ...") and the error is raised.

        Raises
        ------
        ConfigError
            A config that is not a dict, is for another widget, or has a bad key or value (named).
        """
        name = type(self).__name__
        try:
            config = require_mapping(config, "the widget config")
            kind = config.pop("widget", name)
            if kind != name:
                raise ConfigError(f"this config is for a {kind}, not a {name}")
            frame = (
                frame_from_config(require_mapping(config.pop("frame"), "config['frame']"))
                if "frame" in config
                else None
            )
            potential = (
                validated_potential_config(require_mapping(config.pop("potential"), "config['potential']"))
                if "potential" in config
                else None
            )
            unknown = set(config) - set(self.SETTINGS)
            if unknown:
                raise ConfigError(f"unknown {name} settings {sorted(unknown)}; expected {sorted(self.SETTINGS)}")
            checked = {
                key: setting.prepare(self, key, config[key]) for key, setting in self.SETTINGS.items() if key in config
            }
            snapshot = self._snapshot()
            try:
                with self._quiet, self.hold_trait_notifications():
                    for key, value in checked.items():
                        self.SETTINGS[key].apply(self, value)
            except Exception:  # a safety net: the checks above should leave nothing to fail here
                self._restore(snapshot)
                raise
        except Exception as exc:
            self.status_line.show_error(
                f"error: config not applied (nothing changed): {str(exc) or type(exc).__name__}"
            )
            raise
        # Only now, with everything checked and applied, do the shared states change.
        with self._quiet:
            if frame is not None:
                self.frame_state.set_frame(frame)
            if potential is not None:
                self.potential_state.load_config(potential)
        self.refresh()

    def _config(self):
        """The widget's own settings, as :attr:`config` holds them."""
        return {key: setting.get(self) for key, setting in self.SETTINGS.items()}

    def _snapshot(self):
        """Everything :meth:`_restore` needs to undo a half-applied config: each setting's saved state."""
        return {key: setting.save(self) for key, setting in self.SETTINGS.items()}

    def _restore(self, snapshot):
        with self._quiet, self.hold_trait_notifications():
            for key, saved in snapshot.items():
                self.SETTINGS[key].restore(self, saved)

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
        self._refresh()

    def _refresh(self, **options):
        """Submit the current inputs, with ``options`` added to the request; nothing while :attr:`_quiet`."""
        if self._quiet:
            return  # the program is still changing controls; whoever did it refreshes once at the end
        try:
            request = {**self._request(), **options}
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
        return export_panels(
            self._figure_panels(), path, title=type(self).__name__, footer=self.provenance_text, dpi=dpi
        )

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

        return provenance_line(
            frame=request.get("frame"), potential=request.get("potential"), distance=request.get("distance")
        )

    def _code(self, request):
        raise NotImplementedError

    def _figure_panels(self):
        raise NotImplementedError
