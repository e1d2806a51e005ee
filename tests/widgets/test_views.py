"""SampleScatter and GalaxyView driven from Python, and the ES-module inliner behind them.

The browser side of these views is covered by ``js/tests`` (node) and ``tests/browser``; here we
check what Python sends (binary layout, ranges, defaults) and what it makes of messages coming back
from the browser, fed through the same comm handler a real front end reaches.
"""

from __future__ import annotations

import shutil
import subprocess

import astropy.units as u
import numpy as np
import pytest
import traitlets

from mwkin.units import UnitMismatchError
from mwkin.widgets import _assets
from mwkin.widgets._assets import BundleError, bundle
from mwkin.widgets.views import GalaxyView, SampleScatter, ViewDataError

NODE = shutil.which("node")


def browser_update(widget, state, buffers=()):
    """Feed ``widget`` an update message as the browser sends it (binary parts as buffers)."""
    state = dict(state)
    paths = []
    for name in list(state):
        if isinstance(state[name], (bytes, memoryview)):
            paths.append([name])
            buffers = [*buffers, memoryview(state.pop(name))]
    msg = {"content": {"data": {"method": "update", "state": state, "buffer_paths": paths}}, "buffers": list(buffers)}
    widget._handle_msg(msg)


def run_node_module(source, tmp_path, expr):
    """Import ES module ``source`` in node and print JSON of ``expr`` (``m`` is the module)."""
    assert NODE, "node is needed for the JS parts of the test suite (see the README)"
    path = tmp_path / "bundle.mjs"
    path.write_text(source)
    script = f"import('{path.as_uri()}').then(m => console.log(JSON.stringify({expr})))"
    out = subprocess.run([NODE, "--input-type=module", "-e", script], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    return out.stdout.strip()


# ---- the inliner --------------------------------------------------------------------------------


def write_modules(root, files):
    for rel, text in files.items():
        path = root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    return root


def test_bundle_inlines_nested_imports_with_aliases_and_private_names(tmp_path):
    root = write_modules(
        tmp_path / "js",
        {
            "lib/a.js": "const helper = 2;\nexport function double(x) { return helper * x; }\n",
            "lib/b.js": (
                'import { double as twice } from "./a.js";\nconst helper = 10;\n'
                "export const ten = helper;\nexport function quad(x) { return twice(twice(x)); }\n"
            ),
            "main.js": (
                "import { quad, ten } from './lib/b.js';\nimport { double } from './lib/a.js';\n"
                "export default { value: quad(3) + ten + double(1) };\n"
            ),
        },
    )
    source = bundle("main.js", root=root)
    assert "import " not in source
    # each module is inlined once, in dependency order
    assert source.count("const __mwkin_lib_a =") == 1
    assert source.index("__mwkin_lib_a = ") < source.index("__mwkin_lib_b = ")
    assert run_node_module(source, tmp_path, "m.default.value") == str(12 + 10 + 2)


@pytest.mark.parametrize(
    "text, message",
    [
        ('import { x } from "https://cdn.example.org/x.js";\nexport default {};\n', "only relative imports"),
        ('import { x } from "d3";\nexport default {};\n', "only relative imports"),
        ('import * as m from "./lib/a.js";\nexport default {};\n', "unsupported import form"),
        ('import a from "./lib/a.js";\nexport default {};\n', "unsupported import form"),
        ('const m = await import("./lib/a.js");\nexport default {};\n', "unsupported import form"),
        ('import { nothere } from "./lib/a.js";\nexport default {};\n', "does not export nothere"),
        ('import { f } from "./lib/missing.js";\nexport default {};\n', "not found"),
        ('import { f } from "./lib/a.js";\n', "needs `export default"),
    ],
)
def test_bundle_rejects_what_it_cannot_inline(tmp_path, text, message):
    root = write_modules(tmp_path / "js", {"lib/a.js": "export function f() {}\n", "main.js": text})
    with pytest.raises(BundleError, match=message):
        bundle("main.js", root=root)


def test_bundle_rejects_cycles_and_unsupported_exports(tmp_path):
    root = write_modules(
        tmp_path / "js",
        {
            "lib/a.js": 'import { g } from "./b.js";\nexport function f() { return g(); }\n',
            "lib/b.js": 'import { f } from "./a.js";\nexport function g() { return 1; }\n',
            "lib/c.js": "function h() {}\nexport { h };\n",
            "cyc.js": 'import { f } from "./lib/a.js";\nexport default {};\n',
            "exp.js": 'import { h } from "./lib/c.js";\nexport default {};\n',
        },
    )
    with pytest.raises(BundleError, match="circular import"):
        bundle("cyc.js", root=root)
    with pytest.raises(BundleError, match="unsupported export form"):
        bundle("exp.js", root=root)


def test_js_dir_prefers_the_wheel_copy(tmp_path, monkeypatch):
    pkg = tmp_path / "site" / "mwkin"
    (pkg / "_js" / "lib").mkdir(parents=True)
    (tmp_path / "site" / "js" / "lib").mkdir(parents=True)
    monkeypatch.setattr(_assets, "_PACKAGE_DIR", pkg)
    assert _assets.js_dir() == pkg / "_js"
    shutil.rmtree(pkg / "_js")
    assert _assets.js_dir() == tmp_path / "site" / "js"
    shutil.rmtree(tmp_path / "site" / "js")
    with pytest.raises(FileNotFoundError, match="ES modules were not found"):
        _assets.js_dir()


@pytest.mark.parametrize("entry", ["scatter.js", "galaxy.js"])
def test_shipped_views_bundle_to_one_offline_module(entry, tmp_path):
    source = bundle(entry)
    assert not [line for line in source.splitlines() if line.lstrip().startswith("import ")]
    for word in ("http://", "https://", "fetch(", "XMLHttpRequest", "WebSocket("):
        assert word not in source, f"{entry} must not reach the network ({word})"
    assert run_node_module(source, tmp_path, "typeof m.default.render") == '"function"'


# ---- SampleScatter ------------------------------------------------------------------------------


def own_synced_traits(cls):
    """Synced traits the class itself declares (not those of ipywidgets' base classes)."""
    return {name: trait for name, trait in cls.class_own_traits(sync=True).items() if not name.startswith("_")}


@pytest.mark.parametrize("cls", [SampleScatter, GalaxyView])
def test_every_synced_trait_has_help(cls):
    traits = own_synced_traits(cls)
    assert len(traits) >= 10
    missing = [name for name, trait in traits.items() if not trait.help]
    assert not missing, f"synced traits without help=: {missing}"


def test_set_data_sends_little_endian_float32_and_ranges():
    x = np.array([1.0, 2.5, np.nan, -3.0, 4.0])
    y = np.array([10.0, 20.0, 30.0, np.nan, 50.0])
    c = np.array([0.5, np.nan, 2.0, 3.0, -1.0])
    w = SampleScatter()
    w.set_data(x, y, c, x_label="U", y_label="V", c_label="W", x_unit="km/s", y_unit="km/s", c_unit="km/s")
    np.testing.assert_array_equal(np.frombuffer(w.x, "<f4"), x.astype(np.float32))
    np.testing.assert_array_equal(np.frombuffer(w.y, "<f4"), y.astype(np.float32))
    np.testing.assert_array_equal(np.frombuffer(w.c, "<f4"), c.astype(np.float32))
    assert w.n_points == 5
    assert (w.x_label, w.x_unit, w.c_label) == ("U", "km/s", "W")
    # NaN ignored; 4 % margin on each side of the finite extent
    assert w.home_range == pytest.approx([-3.0 - 0.28, 4.0 + 0.28, 10.0 - 1.6, 50.0 + 1.6])
    assert w.view_range == w.home_range
    assert w.c_range == [-1.0, 3.0]
    w.set_data(x, y)
    assert w.c == b"" and w.c_range == []


def test_set_data_takes_quantities_and_converts_to_the_unit_asked():
    w = SampleScatter()
    w.set_data(np.array([1.0, 2.0]) * u.km / u.s, np.array([3.0, 4.0]) * u.kpc, y_unit="pc")
    assert w.x_unit == "km / s"
    assert w.y_unit == "pc"
    np.testing.assert_allclose(w.data()["y"], [3000.0, 4000.0])
    with pytest.raises(UnitMismatchError, match="x"):
        w.set_data(np.array([1.0]) * u.deg, [1.0], x_unit="km/s")


def test_set_data_errors_name_the_array():
    w = SampleScatter()
    with pytest.raises(ViewDataError, match="x and y differ in length: 3 and 2"):
        w.set_data([1, 2, 3], [1, 2])
    with pytest.raises(ViewDataError, match="c has 1 values, x and y have 2"):
        w.set_data([1, 2], [1, 2], c=[1])
    with pytest.raises(ViewDataError, match=r"y: expected a 1-D array, got shape \(2, 2\)"):
        w.set_data([1, 2], [[1, 2], [3, 4]])


def test_all_nan_and_constant_columns_still_give_a_usable_view():
    w = SampleScatter()
    w.set_data([np.nan, np.nan], [5.0, 5.0])
    assert w.home_range[:2] == [0.0, 1.0]
    lo, hi = w.home_range[2:]
    assert lo < 5.0 < hi


def test_selection_from_the_browser_reaches_python_as_uint32_indices():
    w = SampleScatter()
    w.set_data(np.arange(10.0), np.arange(10.0))
    seen = []
    w.on_select(seen.append)
    region = {"kind": "box", "x": [2.5, 6.5], "y": [0.0, 9.0]}
    browser_update(w, {"selected": np.array([3, 4, 5, 6], "<u4").tobytes(), "selection_region": region})
    assert isinstance(w.selected, bytes)
    np.testing.assert_array_equal(w.selected_indices, [3, 4, 5, 6])
    assert w.selected_indices.dtype == np.uint32
    assert w.selected_mask.tolist() == [i in (3, 4, 5, 6) for i in range(10)]
    assert len(seen) == 1 and seen[0].tolist() == [3, 4, 5, 6]
    assert w.selection_region == region
    # a new sample clears the selection; keep_selection keeps it
    w.set_data(np.arange(10.0), np.arange(10.0) + 1, keep_selection=True)
    assert w.selected_indices.tolist() == [3, 4, 5, 6]
    w.set_data(np.arange(10.0), np.arange(10.0))
    assert w.selected_indices.size == 0 and w.selection_region == {}
    assert len(seen) == 2 and seen[1].size == 0
    w.on_select(seen.append, remove=True)
    w.selected_indices = [1]
    assert len(seen) == 2


def test_selection_set_from_python_is_validated_and_sorted():
    w = SampleScatter()
    w.set_data(np.zeros(5), np.zeros(5))
    w.selected_indices = [4, 0, 4]
    assert np.frombuffer(w.selected, "<u4").tolist() == [0, 4]
    w.selected_mask = [False, True, True, False, False]
    assert w.selected_indices.tolist() == [1, 2]
    with pytest.raises(ViewDataError, match=r"1 indices outside 0..4, first 5"):
        w.selected_indices = [1, 5]
    with pytest.raises(ViewDataError, match=r"selected_mask has shape \(3,\), expected \(5,\)"):
        w.selected_mask = [True, False, True]
    with pytest.raises(ViewDataError, match="use selected_mask"):
        w.selected_indices = np.ones(5, bool)
    w.clear_selection()
    assert w.selected_indices.size == 0


def test_view_changes_from_the_browser_and_reset():
    w = SampleScatter()
    w.set_data([0.0, 10.0], [0.0, 10.0])
    home = list(w.home_range)
    browser_update(w, {"view_range": [1.0, 2.0, 3.0, 4.0], "draw_count": 7})
    assert w.view_range == [1.0, 2.0, 3.0, 4.0] and w.draw_count == 7
    w.reset_view()
    assert w.view_range == home
    w.set_data([0.0, 10.0], [0.0, 20.0], keep_view=True)
    assert w.view_range == home
    w.set_data([0.0, 1.0], [0.0, 1.0], view_range=(1, 0, 0, 1))  # reversed x axis
    assert w.view_range == [1.0, 0.0, 0.0, 1.0]
    with pytest.raises(ViewDataError, match="view_range must be 4 finite numbers"):
        w.set_data([0.0], [0.0], view_range=(0, 1, 0, np.nan))


def test_trait_validation_keeps_settings_sane():
    w = SampleScatter()
    with pytest.raises(traitlets.TraitError):
        w.density = "sometimes"
    with pytest.raises(traitlets.TraitError):
        w.selection_mode = "magic"
    with pytest.raises(traitlets.TraitError):
        w.point_size = 0


# ---- GalaxyView ---------------------------------------------------------------------------------


def test_set_track_and_cloud_send_float32_with_nan_separators():
    g = GalaxyView()
    t = np.linspace(0, 2 * np.pi, 50)
    g.set_track(8 * np.cos(t) * u.kpc, 8000 * np.sin(t) * u.pc)
    x, y = g.track()
    np.testing.assert_allclose(x, 8 * np.cos(t), rtol=1e-6)
    np.testing.assert_allclose(y, 8 * np.sin(t), rtol=1e-6, atol=1e-6)
    g.set_cloud([([1, 2], [3, 4]), ([5], [6])])
    cx = np.frombuffer(g.cloud_x, "<f4")
    assert cx[:2].tolist() == [1, 2] and np.isnan(cx[2]) and cx[3] == 5 and np.isnan(cx[4])
    g.set_cloud([])
    assert g.cloud_x == b""
    with pytest.raises(ViewDataError, match="track x and y differ in length: 2 and 1"):
        g.set_track([1, 2], [1])
    with pytest.raises(ViewDataError, match="cloud track 1: x and y differ"):
        g.set_cloud([([1], [1]), ([1, 2], [1])])
    with pytest.raises(UnitMismatchError, match="track x"):
        g.set_track([1] * u.s, [1])


def test_galaxy_defaults_follow_astropys_galactocentric_frame():
    # astropy Galactocentric defaults (v4.0 parameter set): galcen_distance 8.122 kpc
    # (Gravity Collaboration 2018, A&A 615, L15), galcen_v_sun (12.9, 245.6, 7.78) km/s
    # (Drimmel & Poggio 2018, RNAAS 2, 210); Sun at x = -R0 (in-plane, ignoring the z_sun tilt)
    from astropy.coordinates import Galactocentric, galactocentric_frame_defaults

    with galactocentric_frame_defaults.set("v4.0"):
        frame = Galactocentric()
    g = GalaxyView()
    assert g.sun_xy[0] == pytest.approx(-frame.galcen_distance.to_value(u.kpc), rel=1e-6)
    vsun = frame.galcen_v_sun.to_cartesian().xyz.to_value(u.km / u.s)
    assert g.sun_velocity_xy == pytest.approx(vsun[:2])
    # the Sun moves toward +y from x < 0: clockwise seen from the north Galactic pole
    assert g.sun_xy[0] * g.sun_velocity_xy[1] - g.sun_xy[1] * g.sun_velocity_xy[0] < 0


def test_dragging_reports_every_frame_or_only_the_release():
    g = GalaxyView()
    every, final = [], []
    g.on_velocity(lambda vx, vy: every.append((vx, vy)))
    g.on_velocity(lambda vx, vy: final.append((vx, vy)), final_only=True)
    browser_update(g, {"dragging": True})
    browser_update(g, {"velocity_xy": [10.0, 200.0]})
    browser_update(g, {"velocity_xy": [20.0, 210.0]})
    browser_update(g, {"velocity_xy": [30.0, 220.0], "dragging": False})
    assert every == [(10.0, 200.0), (20.0, 210.0), (30.0, 220.0)]
    assert final == [(30.0, 220.0)]
    # a release without a new value reports the settled value once
    browser_update(g, {"dragging": True})
    browser_update(g, {"dragging": False})
    assert final == [(30.0, 220.0)]
    g.velocity_xy = [1.0, 2.0]  # set from Python
    assert final[-1] == (1.0, 2.0) and every[-1] == (1.0, 2.0)
    with pytest.raises(traitlets.TraitError):
        g.velocity_xy = [1.0]


def test_rotation_arc_shows_the_sun_turning_clockwise_seen_from_the_north_pole():
    # astropy Galactocentric defaults (v4.0): Sun at x = -8.122 kpc moving with v_y = +245.6 km/s
    # (Gravity Collaboration 2018; Drimmel & Poggio 2018), so x vy - y vx < 0: clockwise.
    from mwkin.widgets.views import rotation_arc

    x, y = rotation_arc([-8.122, 0.0], [12.9, 245.6], fraction=0.5, span_deg=90.0, n_seg=10)
    assert len(x) == len(y) == 11
    # starts at the Sun's azimuth at half its distance and sweeps toward +y: 9 o'clock to 12 o'clock
    assert (x[0], y[0]) == pytest.approx((-4.061, 0.0), abs=1e-9)
    assert (x[-1], y[-1]) == pytest.approx((0.0, 4.061), abs=1e-9)
    assert np.sum(x[:-1] * y[1:] - x[1:] * y[:-1]) < 0  # negative signed area: clockwise


def test_rotation_arc_follows_the_sense_and_is_undefined_for_radial_motion():
    from mwkin.widgets.views import rotation_arc

    x, y = rotation_arc([5.0, 0.0], [0.0, 100.0], fraction=1.0, span_deg=90.0, n_seg=4)
    assert (x[-1], y[-1]) == pytest.approx((0.0, 5.0), abs=1e-9)  # counter-clockwise
    assert rotation_arc([5.0, 0.0], [100.0, 0.0]) is None
    assert rotation_arc([0.0, 0.0], [0.0, 100.0]) is None


def test_galaxy_view_sends_its_arc_and_palette_and_exports_what_it_draws():
    from mwkin.widgets._plots import ORBIT_COLOURS
    from mwkin.widgets.views import rotation_arc

    g = GalaxyView()
    g.sun_xy, g.sun_velocity_xy = [-8.3, 0.5], [11.0, 232.0]
    ax, ay = rotation_arc(g.sun_xy, g.sun_velocity_xy)
    np.testing.assert_allclose(np.frombuffer(g.rotation_x, np.float32), ax, rtol=1e-6)
    np.testing.assert_allclose(np.frombuffer(g.rotation_y, np.float32), ay, rtol=1e-6, atol=1e-6)
    assert g.colors == ORBIT_COLOURS
    g.set_track([-8.0, -7.0, -6.0], [0.0, 1.0, 1.5])
    panel = g.export_panel()
    by_colour = {}
    for layer in panel.layers:
        by_colour.setdefault(layer["color"], []).append(layer)
    # the same arc, colours and region as the canvas
    arc = next(layer for layer in by_colour[ORBIT_COLOURS["rotation"]] if layer["kind"] == "line")
    np.testing.assert_allclose(arc["x"], ax, rtol=1e-6)
    track = by_colour[ORBIT_COLOURS["track"]][0]
    np.testing.assert_allclose(track["y"], [0.0, 1.0, 1.5])
    assert (panel.x_range, panel.y_range) == (tuple(g.view_range[:2]), tuple(g.view_range[2:]))
    velocity = by_colour[ORBIT_COLOURS["arrow"]][0]
    assert velocity["kind"] == "arrow" and velocity["x"][1] == pytest.approx(
        g.star_xy[0] + g.velocity_xy[0] / g.arrow_scale
    )
