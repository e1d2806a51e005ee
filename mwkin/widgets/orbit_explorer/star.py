"""OrbitExplorer's inputs: the star (table row, observables or phase space) and the integration time.

:class:`_StarInput` is a mixin of :class:`~mwkin.widgets.orbit_explorer.widget.OrbitExplorer`: it builds
the controls of the left-hand column, turns them into the star and time parts of a request, and reads
and writes the ``star`` part of the config. The module-level helpers below it touch no widget: they
check a config's star and hand a star request to the core (one-row table, distance choice, phase space).
"""

from __future__ import annotations

import html
import math
import warnings

import ipywidgets as widgets
import numpy as np

from ...columns import OUTPUT_COLUMNS, PHASE_SPACE_COLUMNS, column_values
from .._sample import LOW_SNR, parallax_snr
from ..controls import NumberField
from ..state import ConfigError, require_mapping

#: The star shown when none is given: a thin-disc-like star about 1 kpc away (made up for the demo).
DEFAULT_STAR = {
    "ra": 120.0,
    "dec": -30.0,
    "parallax": 1.0,
    "pmra": -4.0,
    "pmdec": 3.0,
    "radial_velocity": 15.0,
    "parallax_error": 0.04,
    "pmra_error": 0.05,
    "pmdec_error": 0.05,
    "radial_velocity_error": 1.0,
    "distance": 1.0,
    "distance_error": 0.04,
}

#: Typed observables: key -> (label with unit, default slider range or None).
_OBSERVABLES = {
    "ra": ("ra [deg]", None),
    "dec": ("dec [deg]", None),
    "parallax": ("parallax [mas]", None),
    "distance": ("distance [kpc]", None),
    "pmra": ("pmra [mas/yr]", (-100.0, 100.0, 0.1)),
    "pmdec": ("pmdec [mas/yr]", (-100.0, 100.0, 0.1)),
    "radial_velocity": ("radial_velocity [km/s]", (-400.0, 400.0, 0.5)),
}
_OBS_ERRORS = {
    "parallax_error": "σ parallax [mas]",
    "distance_error": "σ distance [kpc]",
    "pmra_error": "σ pmra [mas/yr]",
    "pmdec_error": "σ pmdec [mas/yr]",
    "radial_velocity_error": "σ radial_velocity [km/s]",
}
#: Typed Galactocentric phase space (astropy's Galactocentric axes). vx and vy have no slider: the
#: velocity arrow of the face-on view is their live control (a slider would also echo each dragged
#: value back rounded to its step, racing the drag).
_PHASE_SPACE = {
    "x": ("x [kpc]", None),
    "y": ("y [kpc]", None),
    "z": ("z [kpc]", None),
    "vx": ("vx [km/s]", None),
    "vy": ("vy [km/s]", None),
    "vz": ("vz [km/s]", (-300.0, 300.0, 0.5)),
}
DEFAULT_PHASE_SPACE = {"x": -8.0, "y": 0.5, "z": 0.1, "vx": 10.0, "vy": 230.0, "vz": 5.0}

_SOURCES = {"table": "table row", "observables": "observables", "phase_space": "phase space"}


class _StarInput:
    """Mixin of OrbitExplorer: the input controls, the star and time requests, the config's star.

    Uses the widget's ``_quiet``, ``refresh``, ``status_line``, ``frame_state`` and ``_original`` (the
    star as given before a drag, a trait of OrbitExplorer).
    """

    # ================================================================== inputs
    def _build_inputs(self, obs, phase, distance_input, t_forward, t_backward, n_points, n_cloud):
        changed = self._inputs_changed
        self.source = widgets.ToggleButtons(
            options=[(_SOURCES[k], k) for k in ("observables", "phase_space")],
            description="Star from",
            style={"description_width": "6em"},
        )
        self.source.add_class("mwkin-star-source")
        self.source.observe(self._source_changed, "value")

        self.row_selector = widgets.BoundedIntText(
            value=0,
            min=0,
            max=0,
            description="row",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
        )
        self.row_selector.add_class("mwkin-row")
        self.row_selector.observe(changed, "value")
        self.row_label = widgets.HTML()
        self.table_box = widgets.VBox([self.row_selector, self.row_label])

        def field(key, label, value, rng):
            css = "mwkin-" + key.replace("_", "-")
            return NumberField(label, float(value), css, lambda v: changed(None), rng, label)

        self.observable_fields = {k: field(k, lab, obs[k], rng) for k, (lab, rng) in _OBSERVABLES.items()}
        self.error_fields = {k: field(k, lab, obs.get(k, 0.0), None) for k, lab in _OBS_ERRORS.items()}
        self.distance_input = widgets.ToggleButtons(
            options=[("parallax", "parallax"), ("distance", "distance")],
            value=distance_input,
            description="distance from",
            style={"description_width": "9em"},
        )
        self.distance_input.add_class("mwkin-distance-input")
        self.distance_input.observe(self._distance_input_changed, "value")
        f, e = self.observable_fields, self.error_fields
        self.observables_box = widgets.VBox(
            [
                f["ra"],
                f["dec"],
                self.distance_input,
                f["parallax"],
                f["distance"],
                f["pmra"],
                f["pmdec"],
                f["radial_velocity"],
                widgets.HTML("<small>uncertainties (1σ, for the orbit cloud)</small>"),
                e["parallax_error"],
                e["distance_error"],
                e["pmra_error"],
                e["pmdec_error"],
                e["radial_velocity_error"],
            ]
        )
        self.phase_fields = {k: field(k, lab, phase[k], rng) for k, (lab, rng) in _PHASE_SPACE.items()}
        self.phase_box = widgets.VBox(
            [widgets.HTML("<small>Galactocentric Cartesian (astropy axes: the Sun near x = -R0)</small>")]
            + list(self.phase_fields.values())
        )

        self.time_fields = {
            "t_forward": field("t_forward", "forward [Gyr]", t_forward, None),
            "t_backward": field("t_backward", "backward [Gyr]", t_backward, None),
        }
        self.n_points = widgets.IntText(
            value=int(n_points),
            description="output points",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
            continuous_update=False,
        )
        self.n_points.add_class("mwkin-n-points")
        self.n_points.observe(changed, "value")
        self.time_box = widgets.VBox(
            [widgets.HTML("<b>integration time</b>"), *self.time_fields.values(), self.n_points]
        )

        self.cloud_toggle = widgets.Checkbox(
            value=False, description="show orbits from the uncertainties", indent=False
        )
        self.cloud_toggle.add_class("mwkin-cloud-toggle")
        self.cloud_toggle.observe(changed, "value")
        self.n_cloud = widgets.BoundedIntText(
            value=int(n_cloud),
            min=2,
            max=200,
            description="orbits drawn",
            style={"description_width": "9em"},
            layout=widgets.Layout(width="17em"),
        )
        self.n_cloud.add_class("mwkin-n-cloud")
        self.n_cloud.observe(changed, "value")
        self.cloud_box = widgets.VBox([self.cloud_toggle, self.n_cloud])
        self._distance_input_changed(None)

    def set_stars(self, stars, row=0, refresh=True):
        """Use row ``row`` of a table (anything :func:`mwkin.read_catalog` reads) as the star.

        A table that cannot be read, has no rows or has no row ``row`` is not used: the status line says
        why, a :class:`~mwkin.widgets.SampleWarning` is issued and the previous star stays. Returns True
        when the table was taken.
        """
        from ...catalog import read_catalog
        from .._base import error_text
        from .._sample import SampleWarning

        try:
            table = read_catalog(stars)
            if len(table) == 0:
                raise ValueError("the star table has no rows")
            if isinstance(row, bool) or not isinstance(row, (int, np.integer)) or not 0 <= row < len(table):
                raise ValueError(f"row = {row!r}: the star table has rows 0 to {len(table) - 1}")
        except Exception as exc:  # noqa: BLE001 - on screen, and a warning for the cell that gave it
            text = f"{error_text(exc)} (the star table was not used)"
            self.status_line.show_error(text)
            warnings.warn(f"OrbitExplorer: {text}", SampleWarning, stacklevel=2)
            return False
        self._stars = table
        n = len(self._stars)
        with self.hold_sync(), self._quiet:
            self.source.options = [(_SOURCES[k], k) for k in ("table", "observables", "phase_space")]
            self.row_selector.max = n - 1
            self.row_selector.value = int(row)
            self.source.value = "table"
        self._show_row_label()
        if refresh:
            self.refresh()
        return True

    def _show_row_label(self):
        if self._stars is None:
            self.row_label.value = ""
            return
        values = self._row_values()
        ident = f"source_id {values['source_id']}: " if "source_id" in values else ""
        shown = ", ".join(
            f"{k} = {values[k]:.4g}"
            for k in ("ra", "dec", "parallax", "distance", "pmra", "pmdec", "radial_velocity")
            if k in values and np.isfinite(values[k])
        )
        self.row_label.value = f"<small>{html.escape(ident + shown)} (of {len(self._stars)} rows)</small>"

    def _row_values(self):
        """The chosen row's numbers (standard units, NaN where masked) and its source_id, by column name."""
        i = int(self.row_selector.value)
        row = self._stars[i : i + 1]
        out = {}
        for name in self._stars.colnames:
            if name == "source_id":
                value = row[name][0]
                out[name] = value.item() if hasattr(value, "item") else value
                continue
            try:
                values = column_values(row, name)
            except ValueError:  # a text column: not an input of the orbit
                continue
            if values.size == 1:
                out[name] = float(values[0])
        return out

    def _source_changed(self, change):
        source = self.source.value
        if source != "phase_space" and not self._quiet:
            # the user chose another input: the dragged star is left behind, nothing to restore
            self._original = None
        self.table_box.layout.display = None if source == "table" else "none"
        self.observables_box.layout.display = None if source == "observables" else "none"
        self.phase_box.layout.display = None if source == "phase_space" else "none"
        self.cloud_box.layout.display = "none" if source == "phase_space" else None
        self._inputs_changed(change)

    def _distance_input_changed(self, change):
        use_parallax = self.distance_input.value == "parallax"
        for key, shown in (("parallax", use_parallax), ("distance", not use_parallax)):
            self.observable_fields[key].layout.display = None if shown else "none"
            self.error_fields[f"{key}_error"].layout.display = None if shown else "none"
        if change is not None:
            self._inputs_changed(change)

    def _inputs_changed(self, change):
        if change is not None and getattr(change, "get", None) and change.get("owner") is self.row_selector:
            self._show_row_label()
        self.refresh()

    # ================================================================== request
    def _star_request(self):
        """The star as plain values, validated: (kind, values, errors); raises ValueError naming the input."""
        source = self.source.value
        if source == "phase_space":
            values = {k: float(f.value) for k, f in self.phase_fields.items()}
            for key, v in values.items():
                if not math.isfinite(v):
                    raise ValueError(f"{_PHASE_SPACE[key][0]}: got {v}, need a finite number")
            return {"kind": "phase_space", "values": values, "errors": {}}
        if source == "table":
            row = self._row_values()
            use = (
                "distance"
                if ("parallax" not in row or not np.isfinite(row.get("parallax", np.nan)))
                and np.isfinite(row.get("distance", np.nan))
                else "parallax"
            )
            where = f"row {int(self.row_selector.value)}"
        else:
            row = {k: float(f.value) for k, f in self.observable_fields.items()}
            row.update({k: float(f.value) for k, f in self.error_fields.items()})
            use = self.distance_input.value
            where = "typed star"
        drop = "distance" if use == "parallax" else "parallax"
        keys = ["ra", "dec", use, "pmra", "pmdec", "radial_velocity"]
        values = {}
        for key in keys:
            v = row.get(key, np.nan)
            if not np.isfinite(v):
                raise ValueError(
                    f"{where}: {key} is missing or not finite ({v}); the orbit needs ra, dec, "
                    "parallax or distance, pmra, pmdec and radial_velocity"
                )
            values[key] = float(v)
        if not -90.0 <= values["dec"] <= 90.0:
            raise ValueError(f"{where}: dec = {values['dec']} deg is outside [-90, 90] deg")
        if use == "parallax" and not values["parallax"] > 0:
            raise ValueError(
                f"{where}: parallax = {values['parallax']} mas is not positive, so 1/parallax gives "
                "no distance; type a distance [kpc] instead"
            )
        if use == "distance" and not values["distance"] > 0:
            raise ValueError(f"{where}: distance = {values['distance']} kpc must be positive")
        errors = {}
        for key in (f"{use}_error", "pmra_error", "pmdec_error", "radial_velocity_error"):
            v = row.get(key, np.nan)
            if np.isfinite(v):
                if v < 0:
                    raise ValueError(f"{where}: {key} = {v} is negative; uncertainties are standard deviations")
                errors[key] = float(v)
        for key in ("ra_error", "dec_error"):
            if np.isfinite(row.get(key, np.nan)):
                errors[key] = float(row[key])
        corr = {k: float(v) for k, v in row.items() if k.endswith("_corr") and drop not in k and np.isfinite(v)}
        return {"kind": "observables", "values": values, "errors": {**errors, **corr}}

    def _time_request(self):
        t_forward = float(self.time_fields["t_forward"].value)
        t_backward = float(self.time_fields["t_backward"].value)
        n_points = int(self.n_points.value)
        for key, value in (("t_forward", t_forward), ("t_backward", t_backward)):
            label = self.time_fields[key].text.description
            if not math.isfinite(value) or value < 0:
                raise ValueError(
                    f"integration time {label} = {value} must be >= 0 (use the other field for the other direction)"
                )
        if t_forward == 0 and t_backward == 0:
            raise ValueError("integration time: forward and backward are both 0 Gyr; give at least one")
        if n_points < 2:
            raise ValueError(f"output points = {n_points}: need at least 2 output times per direction")
        return t_forward, t_backward, n_points

    def _star_table_for_bench(self):
        """The current star as the one-row table handed to the core (benchmarks, debugging)."""
        return _star_table(self._star_request())

    # ================================================================== config
    def _star_setting(self):
        """The ``star`` part of the config: the inputs, and the star as given once dragged."""
        star = self._star_config()
        if self._original is not None:
            star["original"] = self._original
            star["note"] = (
                "vx, vy set by dragging the velocity arrow; 'original' is the star as given, "
                "'phase_space' its conversion with the frame of that moment"
            )
        return star

    def _apply_star_setting(self, star):
        self._apply_star_config(star)
        original = star.get("original")
        self._original = dict(original) if original and self.source.value == "phase_space" else None

    def _star_config(self):
        star = {
            "source": self.source.value,
            "observables": {k: float(f.value) for k, f in self.observable_fields.items()},
            "errors": {k: float(f.value) for k, f in self.error_fields.items()},
            "distance_input": self.distance_input.value,
            "phase_space": {k: float(f.value) for k, f in self.phase_fields.items()},
            "row": int(self.row_selector.value),
        }
        if self.source.value == "table":
            star["row_values"] = {k: v for k, v in self._row_values().items() if k != "source_id"}
            star["note"] = "the table itself is not saved; pass stars= again to use it"
        return star

    def _apply_star_config(self, star):
        """Show the star of a config's ``"star"`` dict in the inputs (no recomputation)."""
        for key, value in star.get("observables", {}).items():
            self.observable_fields[key].show(float(value))
        for key, value in star.get("errors", {}).items():
            self.error_fields[key].show(float(value))
        for key, value in star.get("phase_space", {}).items():
            self.phase_fields[key].show(float(value))
        if "distance_input" in star:
            self.distance_input.value = star["distance_input"]
        source = star.get("source", self.source.value)
        if source == "table":
            if self._stars is None:
                # No table here: fall back to the row's saved values as typed observables.
                values = star.get("row_values", {})
                for key, field_ in {**self.observable_fields, **self.error_fields}.items():
                    if np.isfinite(values.get(key, np.nan)):
                        field_.show(float(values[key]))
                self.distance_input.value = "parallax" if np.isfinite(values.get("parallax", np.nan)) else "distance"
                source = "observables"
            else:
                self.row_selector.value = int(star.get("row", 0))
                self._show_row_label()
        self.source.value = source


# ====================================================================== helpers (no widget access)
def _checked_star(widget, star, where="OrbitExplorer config['star']", original_allowed=True):
    """The ``star`` part of a config, every key and value checked (nothing applied yet)."""
    star = require_mapping(star, where)
    known = {"source", "observables", "errors", "distance_input", "phase_space", "row", "row_values", "note"}
    known |= {"original"} if original_allowed else {"converted_with_frame"}
    unknown = set(star) - known
    if unknown:
        raise ConfigError(f"{where} has unknown keys {sorted(unknown)}; expected {sorted(known)}")
    fields_by_part = {
        "observables": DEFAULT_STAR,
        "errors": None,
        "phase_space": DEFAULT_PHASE_SPACE,
        "row_values": None,
    }
    for part, names in fields_by_part.items():
        values = require_mapping(star.get(part, {}), f"{where}[{part!r}]")
        for name, value in values.items():
            if part != "row_values" and names is not None and name not in names:
                raise ConfigError(f"{where}[{part!r}] has an unknown field {name!r}; expected {sorted(names)}")
            if not (isinstance(value, (int, float)) and not isinstance(value, bool)):
                raise ConfigError(f"{where}[{part!r}][{name!r}] must be a number, got {value!r:.80}")
    if "source" in star and star["source"] not in _SOURCES:
        raise ConfigError(f"{where}['source'] must be one of {sorted(_SOURCES)}, got {star['source']!r:.80}")
    if "distance_input" in star and star["distance_input"] not in ("parallax", "distance"):
        raise ConfigError(
            f"{where}['distance_input'] must be 'parallax' or 'distance', got {star['distance_input']!r:.80}"
        )
    if "row" in star and (isinstance(star["row"], bool) or not isinstance(star["row"], int) or star["row"] < 0):
        raise ConfigError(f"{where}['row'] must be a whole number >= 0, got {star['row']!r:.80}")
    if "converted_with_frame" in star:
        require_mapping(star["converted_with_frame"], f"{where}['converted_with_frame']")
    if star.get("original"):
        _checked_star(widget, star["original"], f"{where}['original']", original_allowed=False)
    return star


def _given_text(star_config):
    """How a star config was given, for messages: 'table row 3' or 'typed observables'."""
    if star_config.get("source") == "table":
        return f"table row {int(star_config.get('row', 0))}"
    return "typed observables"


def _star_table(star):
    """One-row QTable of a star request (observables with errors, or Galactocentric phase space)."""
    from astropy.table import QTable

    columns = {k: [v] for k, v in {**star["values"], **star["errors"]}.items()}
    return QTable(columns)


def _parallax_caveat(star):
    """A warning when the star's distance is 1/parallax at a signal-to-noise below :data:`LOW_SNR`, else ''."""
    if "parallax" not in star["values"] or not star["errors"].get("parallax_error"):
        return ""
    snr = float(parallax_snr(_star_table(star))[0])
    if snr >= LOW_SNR:
        return ""
    return (
        f"parallax/error = {snr:.1f} < {LOW_SNR:g}: 1/parallax is a biased, noisy distance here "
        "(Bailer-Jones 2015, PASP 127, 994); the orbit cloud shows how uncertain the orbit is"
    )


def _distance_choice(star):
    """The distance choice for a one-star request: the distance typed, or 1/parallax without a cut.

    The user typed (or picked) this one star, so its parallax is inverted whatever its signal-to-noise;
    the read-out warns when that is below :data:`LOW_SNR` (:func:`_parallax_caveat`).
    """
    from ...distances import DistanceColumn, InverseParallax

    return DistanceColumn() if "distance" in star["values"] else InverseParallax(min_snr=0)


def _phase_space(star, frame, want_covariance=False):
    """Galactocentric x..vz of the star (a one-row QTable) and, if asked, its (1, 6, 6) covariance."""
    from ...kinematics import to_galactocentric

    table = _star_table(star)
    if star["kind"] == "phase_space":
        return table, None
    errors = "linear" if want_covariance else "none"
    gc = to_galactocentric(
        table, frame=frame, distance=_distance_choice(star), errors=errors, return_covariance=want_covariance
    )
    if gc["flag"][0]:
        raise ValueError(f"the star has no Galactocentric position and velocity: {gc['flag'][0]}")
    cov = column_values(gc, "cov_galactocentric").reshape(1, 6, 6) if want_covariance else None
    return gc[list(_PHASE_SPACE)], cov


def _phase_space_row(phase):
    """x, y, z (kpc), vx, vy, vz (km/s) of the first row of a phase-space table, as floats."""
    return np.array([column_values(phase, c, OUTPUT_COLUMNS[c][0])[0] for c in PHASE_SPACE_COLUMNS])
