"""Getting a star sample into an analysis widget: a table, a DataFrame, a path, or a file uploaded in it.

Every route ends in :func:`mwkin.catalog.read_catalog`, so a widget always works on the standard columns.
A :class:`SampleSource` remembers where the sample came from, for the widget's ``config`` (a path can be
read again; a table in memory cannot, so the config says it must be passed again) and its ``code()``.
:class:`SampleLoader` is the upload button, :class:`DistanceControls` the distance choice shared by the
velocity panel and the Oort fitter.
"""

from __future__ import annotations

import hashlib
import os
import pathlib
import tempfile
import warnings
from dataclasses import asdict, dataclass, fields

import ipywidgets as widgets
import numpy as np

from ..catalog import CatalogError, read_catalog
from ..columns import column_values
from ..distances import DEFAULT_MIN_SNR, InverseParallax
from ._base import Quiet, Setting
from .state import ConfigError, require_mapping

__all__ = [
    "SampleSource",
    "load_sample",
    "read_upload",
    "sample_fingerprint",
    "parallax_snr",
    "inverse_parallax_caveat",
    "SampleLoader",
    "DistanceControls",
    "SAMPLE_SETTING",
    "DISTANCE_SETTING",
    "UPLOAD_SUFFIXES",
    "LOW_SNR",
    "SampleWarning",
    "allow_sample_folder",
    "allowed_sample_folders",
]


class SampleWarning(UserWarning):
    """A sample given to a widget could not be used; the widget's status line says why."""


#: Folders, besides the working directory, from which a widget config may read its sample file.
_EXTRA_SAMPLE_FOLDERS: list[pathlib.Path] = []


def allow_sample_folder(folder):
    """Let widget configs read sample files under ``folder`` (besides the working directory).

    A config can come from someone else's notebook; by default it may only name files under the
    working directory (the notebook's folder in Jupyter). Call this to trust another folder.
    """
    path = pathlib.Path(folder).expanduser().resolve()
    if path not in _EXTRA_SAMPLE_FOLDERS:
        _EXTRA_SAMPLE_FOLDERS.append(path)
    return path


def allowed_sample_folders():
    """The folders a widget config may read a sample from: the working directory, then the allowed ones."""
    return [pathlib.Path.cwd().resolve(), *_EXTRA_SAMPLE_FOLDERS]


def _config_sample_path(path):
    """Resolve a sample path named in a config, refusing anything outside the allowed folders."""
    if not isinstance(path, str) or not path:
        raise ConfigError(f"config['sample']['path'] must be a non-empty file path, got {path!r:.80}")
    resolved = pathlib.Path(path).expanduser()
    if not resolved.is_absolute():
        resolved = pathlib.Path.cwd() / resolved
    resolved = resolved.resolve()
    folders = allowed_sample_folders()
    if not any(resolved.is_relative_to(folder) for folder in folders):
        raise ConfigError(
            f"config['sample']['path'] = {path!r} is outside the folders a config may read from "
            f"({', '.join(str(f) for f in folders)}): a config from a shared notebook may only name files "
            "under the notebook's folder. Copy the file there, or trust its folder with "
            "mwkin.widgets.allow_sample_folder(...)"
        )
    return resolved


#: File suffixes the upload button accepts (read_catalog tells the format from them).
UPLOAD_SUFFIXES = (".csv", ".ecsv", ".fits", ".fit", ".fts", ".vot", ".votable", ".xml", ".parquet", ".pq")

#: Parallax signal-to-noise below which 1/parallax is a biased, noisy distance: the core's default cut,
#: :data:`mwkin.distances.DEFAULT_MIN_SNR` (Bailer-Jones 2015, PASP 127, 994), the caveats' threshold.
LOW_SNR = DEFAULT_MIN_SNR

#: Fraction of stars below :data:`LOW_SNR` from which the caveat is shown (our choice).
LOW_SNR_FRACTION = 0.10


@dataclass
class SampleSource:
    """Where a widget's sample came from.

    Attributes
    ----------
    kind : str
        "none", "path", "table" (astropy), "dataframe" (pandas) or "upload".
    path : str
        Absolute path for "path", else "".
    name : str
        File name for "upload", else "".
    n_rows : int
    fingerprint : str
        Short hash of the positions and proper motions, to recognise the same sample passed again.
    """

    kind: str = "none"
    path: str = ""
    name: str = ""
    n_rows: int = 0
    fingerprint: str = ""

    def to_config(self):
        """JSON-able dict, with a note saying what must be done to get the sample back."""
        out = asdict(self)
        notes = {
            "none": "no sample",
            "path": "read again from the path",
            "table": "the table was passed in memory: pass it again with sample=...",
            "dataframe": "the DataFrame was passed in memory: pass it again with sample=...",
            "upload": "the file was uploaded in the widget: upload it again or pass it with sample=...",
        }
        out["note"] = notes[self.kind]
        return out

    @classmethod
    def from_config(cls, config):
        """Inverse of :meth:`to_config`; a bad key, kind or value raises :class:`ConfigError` naming it."""
        config = require_mapping(config, "config['sample']")
        config.pop("note", None)
        known = {f.name: f.type for f in fields(cls)}
        unknown = set(config) - set(known)
        if unknown:
            raise ConfigError(f"config['sample'] has unknown keys {sorted(unknown)}; expected {sorted(known)}")
        kinds = ("none", "path", "table", "dataframe", "upload")
        kind = config.get("kind", "none")
        if kind not in kinds:
            raise ConfigError(f"config['sample']['kind'] must be one of {kinds}, got {kind!r:.80}")
        for key in ("path", "name", "fingerprint"):
            if not isinstance(config.get(key, ""), str):
                raise ConfigError(f"config['sample'][{key!r}] must be a string, got {config[key]!r:.80}")
        n_rows = config.get("n_rows", 0)
        if isinstance(n_rows, bool) or not isinstance(n_rows, int) or n_rows < 0:
            raise ConfigError(f"config['sample']['n_rows'] must be a whole number >= 0, got {n_rows!r:.80}")
        return cls(**config)

    def describe(self):
        """Short text for the status line and provenance."""
        if self.kind == "path":
            return f"{self.n_rows} stars from {self.path}"
        if self.kind == "upload":
            return f"{self.n_rows} stars uploaded as {self.name}"
        if self.kind == "none":
            return "no sample"
        return f"{self.n_rows} stars from a {'pandas DataFrame' if self.kind == 'dataframe' else 'table'}"

    def read_expression(self):
        """The Python expression that reads the sample in a snippet (``sample`` names an in-memory table)."""
        if self.kind == "path":
            return f"mk.read_catalog({self.path!r})"
        if self.kind == "upload":
            return f"mk.read_catalog({self.name!r})  # the file uploaded in the widget"
        return "mk.read_catalog(sample)  # sample: the table given to the widget"


def sample_fingerprint(stars):
    """Short hash of ra, dec, pmra and pmdec (float64 bytes) of a standardised table."""
    digest = hashlib.sha1()
    for name in ("ra", "dec", "pmra", "pmdec"):
        digest.update(np.ascontiguousarray(column_values(stars, name)).tobytes())
    return digest.hexdigest()[:12]


def load_sample(sample):
    """Read a sample given to a widget.

    Parameters
    ----------
    sample : None, str, path-like, astropy Table/QTable or pandas DataFrame

    Returns
    -------
    stars : QTable or None
        The standardised table (:func:`~mwkin.catalog.read_catalog`), None for no sample.
    source : SampleSource

    Raises
    ------
    CatalogError
        From :func:`~mwkin.catalog.read_catalog`.
    """
    if sample is None:
        return None, SampleSource()
    if isinstance(sample, (str, os.PathLike)):
        path = str(pathlib.Path(sample).expanduser().resolve())
        stars = read_catalog(path)
        kind = "path"
    else:
        stars = read_catalog(sample)
        path = ""
        kind = "dataframe" if stars.meta.get("mwkin_source") == "pandas DataFrame" else "table"
    return stars, SampleSource(kind=kind, path=path, n_rows=len(stars), fingerprint=sample_fingerprint(stars))


def read_upload(entry):
    """Read one file from an ipywidgets ``FileUpload`` value.

    Parameters
    ----------
    entry : dict
        ``{"name": ..., "content": bytes or memoryview, ...}`` as ipywidgets 8 gives it.

    Returns
    -------
    stars : QTable
    source : SampleSource

    Raises
    ------
    CatalogError
        Unknown suffix, or anything :func:`~mwkin.catalog.read_catalog` finds wrong with the file.

    Notes
    -----
    The bytes are written to a temporary file with the upload's own suffix (read_catalog tells the
    format from it), read, and the file is removed.
    """
    name = os.path.basename(str(entry.get("name") or "upload"))
    lowered = name.lower()
    for compressed in (".gz", ".bz2", ".xz"):
        if lowered.endswith(compressed):
            lowered = lowered[: -len(compressed)]
    if not lowered.endswith(UPLOAD_SUFFIXES):
        raise CatalogError(
            f"cannot tell the format of the uploaded file {name!r}: its name should end in "
            f"one of {', '.join(UPLOAD_SUFFIXES)}"
        )
    content = bytes(entry.get("content") or b"")
    if not content:
        raise CatalogError(f"the uploaded file {name!r} is empty")
    with tempfile.TemporaryDirectory(prefix="mwkin-upload-") as folder:
        path = os.path.join(folder, name)
        with open(path, "wb") as fh:
            fh.write(content)
        try:
            stars = read_catalog(path)
        except CatalogError as exc:
            raise CatalogError(str(exc).replace(path, name)) from None
    stars.meta["mwkin_source"] = f"upload {name}"
    return stars, SampleSource(kind="upload", name=name, n_rows=len(stars), fingerprint=sample_fingerprint(stars))


def parallax_snr(stars, zero_point_mas=0.0):
    """Parallax signal-to-noise, (parallax - zero_point) / parallax_error; NaN where either is missing."""
    if "parallax" not in stars.colnames or "parallax_error" not in stars.colnames:
        return np.full(len(stars), np.nan)
    plx = column_values(stars, "parallax", "mas") - zero_point_mas
    err = column_values(stars, "parallax_error", "mas")
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(err > 0, plx / err, np.nan)


def inverse_parallax_caveat(stars, method, min_snr, zero_point_mas=0.0):
    """Text warning that 1/parallax is biased, or "" when it does not apply.

    Shown when the inverse-parallax distance is used and either the cut is below :data:`LOW_SNR` or more
    than :data:`LOW_SNR_FRACTION` of the stars with a parallax have a signal-to-noise below it.
    """
    if stars is None or method != "inverse parallax":
        return ""
    reasons = []
    if min_snr < LOW_SNR:
        reasons.append(f"the cut is parallax/error >= {min_snr:g}, below {LOW_SNR:g}")
    snr = parallax_snr(stars, zero_point_mas)
    measured = np.isfinite(snr)
    if measured.any():
        low = float(np.count_nonzero(snr[measured] < LOW_SNR)) / float(np.count_nonzero(measured))
        if low > LOW_SNR_FRACTION:
            reasons.append(f"{100 * low:.0f}% of the stars have parallax/error < {LOW_SNR:g}")
    elif min_snr <= 0 or "parallax_error" not in stars.colnames:
        reasons.append("the sample has no parallax errors, so no cut can be made")
    if not reasons:
        return ""
    return (
        "Caution: 1/parallax is a biased and noisy distance at low parallax signal-to-noise "
        "(" + "; ".join(reasons) + "). Distances, and the velocities that scale with them, "
        "are then pushed outward; raise the cut or give a distance column."
    )


class SampleLoader(widgets.HBox):
    """An upload button for a star table, reporting through callbacks.

    ``on_loaded(stars, source)`` is called with a good file; ``on_error(exception)`` with a bad one (the
    widget keeps its previous sample).
    """

    def __init__(self, on_loaded, on_error):
        self._on_loaded = on_loaded
        self._on_error = on_error
        self.upload = widgets.FileUpload(
            accept=",".join(UPLOAD_SUFFIXES),
            multiple=False,
            description="Load a table",
            tooltip="CSV, ECSV, FITS, VOTable or Parquet",
        )
        self.upload.add_class("mwkin-upload")
        self.upload.observe(self._uploaded, "value")
        self.label = widgets.HTML()
        super().__init__([self.upload, self.label])

    def _uploaded(self, change):
        files = change["new"]
        if not files:
            return
        entry = files[0] if isinstance(files, (list, tuple)) else next(iter(files.values()))
        try:
            stars, source = read_upload(entry)
        except Exception as exc:  # noqa: BLE001 - the widget shows it and keeps its sample
            self._on_error(exc)
            return
        self.label.value = f"<small>{source.describe()}</small>"
        self._on_loaded(stars, source)


class DistanceControls(widgets.VBox):
    """How distances are obtained: inverse parallax (signal-to-noise cut, zero point) or a distance column.

    Changes are reported to ``on_change()``. :meth:`choice` gives the core object
    (:class:`mwkin.distances.InverseParallax` or :class:`mwkin.distances.DistanceColumn`).
    """

    METHODS = ("inverse parallax", "distance column")

    def __init__(self, on_change, *, min_snr=None, zero_point_mas=None):
        # The defaults are the core's (mwkin.distances.DEFAULT_MIN_SNR and InverseParallax()'s zero point).
        min_snr = DEFAULT_MIN_SNR if min_snr is None else min_snr
        zero_point_mas = InverseParallax().zero_point_mas if zero_point_mas is None else zero_point_mas
        self._on_change = on_change
        self._quiet = Quiet()
        self.method = widgets.ToggleButtons(
            options=[self.METHODS[0]],
            value=self.METHODS[0],
            description="distance",
            style={"button_width": "135px"},
            tooltip="how each star's distance is obtained",
        )
        # A plain box: the core's InverseParallax refuses a negative cut by name; a bounded box would
        # clamp it to 0 silently (no cut at all).
        self.min_snr = widgets.FloatText(
            value=min_snr,
            step=1.0,
            description="min parallax/error",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="15em"),
            continuous_update=False,
        )
        self.zero_point = widgets.FloatText(
            value=zero_point_mas,
            step=0.005,
            description="zero point [mas]",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="15em"),
            continuous_update=False,
            tooltip="subtracted from every parallax (e.g. -0.017 mas for Gaia EDR3)",
        )
        self.min_snr.add_class("mwkin-min-snr")
        self.zero_point.add_class("mwkin-zero-point")
        self.method.add_class("mwkin-distance-method")
        for control in (self.method, self.min_snr, self.zero_point):
            control.observe(self._changed, "value")
        super().__init__([self.method, widgets.HBox([self.min_snr, self.zero_point])])

    def set_sample(self, stars):
        """Offer the distance column only when the sample has one."""
        has_column = stars is not None and "distance" in stars.colnames
        has_parallax = stars is not None and "parallax" in stars.colnames
        options = ([self.METHODS[0]] if has_parallax or stars is None else []) + (
            [self.METHODS[1]] if has_column else []
        )
        current = self.method.value
        with self._quiet:
            self.method.options = options
            self.method.value = current if current in options else options[0]
        self._update_enabled()

    def _update_enabled(self):
        inverse = self.method.value == self.METHODS[0]
        self.min_snr.disabled = self.zero_point.disabled = not inverse

    def _changed(self, change):
        self._update_enabled()
        if not self._quiet:
            self._on_change()

    def choice(self):
        """The core distance choice for the current settings."""
        from ..distances import DistanceColumn, InverseParallax

        if self.method.value == self.METHODS[1]:
            return DistanceColumn("distance")
        return InverseParallax(min_snr=float(self.min_snr.value), zero_point_mas=float(self.zero_point.value))

    def code(self):
        """Python expression building :meth:`choice` in a snippet (``mk`` is the mwkin package)."""
        if self.method.value == self.METHODS[1]:
            return "mk.DistanceColumn('distance')"
        return (
            f"mk.InverseParallax(min_snr={float(self.min_snr.value)!r}, "
            f"zero_point_mas={float(self.zero_point.value)!r})"
        )

    @property
    def config(self):
        return {
            "method": self.method.value,
            "min_snr": float(self.min_snr.value),
            "zero_point_mas": float(self.zero_point.value),
        }

    def check_config(self, config):
        """A :attr:`config`-like dict checked (nothing applied); a :class:`ConfigError` names what is wrong."""
        config = require_mapping(config, "config['distance']")
        unknown = set(config) - {"method", "min_snr", "zero_point_mas"}
        if unknown:
            raise ConfigError(
                f"unknown distance settings {sorted(unknown)}; expected ['method', 'min_snr', 'zero_point_mas']"
            )
        method = config.get("method", self.method.value)
        if method not in self.METHODS:
            raise ConfigError(f"config['distance']['method'] must be one of {self.METHODS}, got {method!r:.80}")
        for key, unit in (("min_snr", ""), ("zero_point_mas", " mas")):
            value = config.get(key, 0.0)
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
                raise ConfigError(f"config['distance'][{key!r}] must be a finite number{unit}, got {value!r:.80}")
        return config

    def apply_config(self, config):
        """Show a checked config (:meth:`check_config`) without reporting a change: the owner refreshes."""
        method = config.get("method", self.method.value)
        with self._quiet:
            if method not in self.method.options:
                self.method.options = tuple(self.method.options) + (method,)
            self.min_snr.value = config.get("min_snr", self.min_snr.value)
            self.zero_point.value = config.get("zero_point_mas", self.zero_point.value)
            self.method.value = method
        self._update_enabled()

    def load_config(self, config):
        """Check, then apply, a :attr:`config`-like dict."""
        self.apply_config(self.check_config(config))


def _check_sample_config(widget, config):
    """The ``sample`` part of a widget config, checked: ``(stars, source) or None`` to take, and a note.

    A path is read here, before anything is applied (unless it is the sample the widget already has). A
    table, DataFrame or upload cannot be restored from a config: the widget keeps the sample it was
    given, and the note says so when there is none, or when its fingerprint differs from the one saved.
    """
    source = SampleSource.from_config(config)
    if source.kind == "path":
        path = str(_config_sample_path(source.path))
        if widget._source.kind == "path" and widget._source.path == path:
            return None, ""
        if not os.path.isfile(path):
            raise ConfigError(f"config['sample']['path']: there is no file {path}")
        try:
            return load_sample(path), ""
        except Exception as exc:  # noqa: BLE001 - reworded: never echo the file's content
            raise ConfigError(
                f"config['sample']['path']: {path} could not be read as a star table "
                f"({type(exc).__name__}); read it with mwkin.read_catalog({path!r}) to see why"
            ) from None
    if source.kind == "none":
        return None, ""
    if widget._stars is None:
        return None, f"the saved sample ({source.describe()}) is not in the config: {source.to_config()['note']}"
    if source.fingerprint and widget._source.fingerprint != source.fingerprint:
        return None, (
            f"note: the config was saved with a different sample ({source.describe()}, fingerprint "
            f"{source.fingerprint}); using the current one ({widget._source.describe()})"
        )
    return None, ""


def _apply_sample_config(widget, checked):
    loaded, note = checked
    if loaded is not None:
        widget._take_sample(*loaded)
    widget._note = note


def _restore_sample(widget, saved):
    stars, source, note = saved
    if stars is not widget._stars:
        widget._take_sample(stars, source)
    widget._source, widget._note = source, note


#: The ``sample`` entry of a sample widget's config (a path is read again; a table in memory is kept).
SAMPLE_SETTING = Setting(
    lambda w: w._source.to_config(),
    _apply_sample_config,
    check=_check_sample_config,
    save=lambda w: (w._stars, w._source, w._note),
    restore=_restore_sample,
)

#: The ``distance`` entry: the :class:`DistanceControls` settings.
DISTANCE_SETTING = Setting(
    lambda w: w.distance_controls.config,
    lambda w, config: w.distance_controls.apply_config(config),
    check=lambda w, config: w.distance_controls.check_config(config),
)


class SampleInput:
    """Mixin for widgets that take a star sample: the ``sample`` property and its source.

    The widget implements ``_set_sample(stars, source)`` (a new sample from the user: take it and
    recompute); :meth:`_take_sample` only takes it (configs, undo), and widgets that derive something
    from the sample extend it.
    """

    def _take_sample(self, stars, source):
        """Hold ``stars`` (from ``source``) and offer the distance choices it supports; no recomputation."""
        self._stars, self._source = stars, source
        self.distance_controls.set_sample(stars)

    @property
    def sample(self):
        """The input sample as read by ``read_catalog`` (None before one is given); assignable."""
        return self._stars

    @sample.setter
    def sample(self, sample):
        try:
            stars, source = load_sample(sample)
        except Exception as exc:  # noqa: BLE001 - shown in the status line, the cell gets a warning
            self._sample_failed(exc)
            return
        self._set_sample(stars, source)

    def _upload_failed(self, exc):
        """An uploaded file could not be read: say why in the status line and keep the previous sample."""
        from ._base import error_text

        kept = f" (kept the previous sample: {self._source.describe()})" if self._stars is not None else ""
        self.status_line.show_error(error_text(exc) + kept)

    def _sample_failed(self, exc):
        """Show why a sample could not be used; keep the previous one; warn the cell that gave it."""
        from ._base import error_text

        kept = f" (kept the previous sample: {self._source.describe()})" if self._stars is not None else " (no sample)"
        text = error_text(exc) + kept
        self.status_line.show_error(text)
        warnings.warn(f"{type(self).__name__}: the sample was not used: {text}", SampleWarning, stacklevel=3)

    @property
    def sample_source(self):
        """Where the sample came from (:class:`SampleSource`)."""
        return self._source
