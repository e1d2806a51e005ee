"""SampleScatter and GalaxyView in a real browser: JupyterLab (and Voila) in headless chromium.

What is checked, each from the kernel's side as well as the page's:

* the views render (draw counters written by the ES modules, screenshots saved);
* a box drawn with the mouse reaches Python as exactly the indices inside it, recomputed here with
  numpy from the same synthetic sample; a hover read-out names the nearest star; a drag pans;
* dragging the velocity arrow's tip sends the new velocity, the kernel integrates a new orbit (a toy
  leapfrog in a logarithmic potential, independent of mwkin.orbits) and the new track is drawn;
* the views render in Voila too.
"""

from __future__ import annotations

import json
import os
import pathlib
import signal
import socket
import subprocess
import sys
import time

import labtools
import numpy as np
import pytest

pytestmark = pytest.mark.browser

SCATTER_N = 20_000
SCATTER_SEED = 3


def scatter_sample():
    """The sample the notebook plots, rebuilt here for the independent check."""
    rs = np.random.default_rng(SCATTER_SEED)
    x = rs.normal(0.0, 40.0, SCATTER_N)
    y = rs.normal(-20.0, 30.0, SCATTER_N)
    c = rs.normal(0.0, 20.0, SCATTER_N)
    x[:50] = np.nan  # rows without a value are neither drawn nor selectable
    return x, y, c


SCATTER_CELLS = [
    "import json, pathlib\n"
    "import numpy as np\n"
    "from mwkin.widgets.views import SampleScatter\n"
    f"rs = np.random.default_rng({SCATTER_SEED})\n"
    f"x = rs.normal(0.0, 40.0, {SCATTER_N}); y = rs.normal(-20.0, 30.0, {SCATTER_N})\n"
    f"c = rs.normal(0.0, 20.0, {SCATTER_N}); x[:50] = np.nan\n"
    "w = SampleScatter(width=640, height=420)\n"
    "w.add_class('t-scatter')\n"
    "w.set_data(x, y, c, x_label='U', y_label='V', c_label='W', x_unit='km/s', y_unit='km/s',\n"
    "           c_unit='km/s', view_range=(-120, 120, -110, 70))\n"
    "def record(indices):\n"
    "    pathlib.Path('selection.json').write_text(json.dumps(\n"
    "        {'indices': indices.tolist(), 'region': w.selection_region,\n"
    "         'mask_sum': int(w.selected_mask.sum())}))\n"
    "w.on_select(record)\n"
    "w",
    "rd = np.random.default_rng(4)\n"
    "dense = SampleScatter(width=480, height=320, density='on')\n"
    "dense.add_class('t-dense')\n"
    "dense.set_data(rd.normal(size=50_000), rd.normal(size=50_000), x_label='x', y_label='y')\n"
    "dense",
]


def wait_for_file(path, timeout_s=60.0, predicate=lambda data: True):
    """Wait until ``path`` holds JSON satisfying ``predicate``; returns the JSON."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            data = json.loads(path.read_text())
            if predicate(data):
                return data
        except (OSError, ValueError):
            pass  # not written yet, or being written
        time.sleep(0.05)
    raise AssertionError(f"{path.name} did not appear with the expected content in {timeout_s} s")


def dataset(locator, key):
    return locator.evaluate(f"el => el.dataset.{key}")


def wait_draw_count_above(page, selector, count, timeout_ms=60_000):
    page.wait_for_function(
        "([sel, n]) => { const el = document.querySelector(sel);"
        " return !!el && Number(el.dataset.drawCount || 0) > n; }",
        arg=[selector, count],
        timeout=timeout_ms,
    )


def to_page(box, rect, domain, x, y):
    """Page coordinates of data point (x, y) in a scatter view."""
    left, top, width, height = rect
    x0, x1, y0, y1 = domain
    return (box["x"] + left + (x - x0) / (x1 - x0) * width, box["y"] + top + (y1 - y) / (y1 - y0) * height)


def test_scatter_renders_brush_selects_the_right_stars_hover_and_pan(lab, page):
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    name = labtools.write_notebook(lab, "views_scatter.ipynb", SCATTER_CELLS)
    selection_file = lab.root_dir / "selection.json"
    selection_file.unlink(missing_ok=True)
    labtools.open_and_run(page, lab, name)

    view = page.locator(".t-scatter")
    wait_draw_count_above(page, ".t-scatter", 0)
    wait_draw_count_above(page, ".t-dense", 0)
    assert dataset(view, "mode") == "points"
    assert dataset(page.locator(".t-dense"), "mode") == "density"
    assert "20,000 stars" in view.locator(".mwkin-scatter-status").inner_text()
    assert "50 without both coordinates" in view.locator(".mwkin-scatter-status").inner_text()
    labtools.screenshot(view, "views_scatter")
    labtools.screenshot(page.locator(".t-dense"), "views_scatter_density")

    # the draw counter reached Python: JS -> kernel
    assert int(labtools.execute_in_kernel(page, "print(w.draw_count)")) >= 1

    rect = json.loads(dataset(view, "plotRect"))
    domain = json.loads(dataset(view, "domain"))
    assert domain == [-120, 120, -110, 70]  # the range Python asked for (aspect not forced)
    overlay = view.locator("canvas.mwkin-scatter-overlay")

    # ---- box selection with the mouse ----
    view.locator("button", has_text="Box select").click()
    overlay.scroll_into_view_if_needed()
    box = overlay.bounding_box()  # after any scrolling (screenshots and clicks scroll the page)
    want = (-30.0, 25.0, -50.0, 5.0)  # data rectangle x0, x1, y0, y1
    ax, ay = to_page(box, rect, domain, want[0], want[3])
    bx, by = to_page(box, rect, domain, want[1], want[2])
    page.mouse.move(ax, ay)
    page.mouse.down()
    page.mouse.move(bx, by, steps=8)
    page.mouse.up()
    got = wait_for_file(selection_file, predicate=lambda d: len(d["indices"]) > 0)

    region = got["region"]
    assert region["kind"] == "box"
    px_x = (domain[1] - domain[0]) / rect[2]  # data units per CSS pixel
    px_y = (domain[3] - domain[2]) / rect[3]
    assert region["x"] == pytest.approx(want[:2], abs=1.01 * px_x)
    assert region["y"] == pytest.approx(want[2:], abs=1.01 * px_y)
    x, y, _ = scatter_sample()
    x32 = x.astype(np.float32).astype(float)  # the values the browser holds
    y32 = y.astype(np.float32).astype(float)
    inside = (x32 >= region["x"][0]) & (x32 <= region["x"][1]) & (y32 >= region["y"][0]) & (y32 <= region["y"][1])
    expected = np.flatnonzero(inside)
    assert 1000 < expected.size < 10_000  # a real selection, not everything or nothing
    assert got["indices"] == expected.tolist()
    assert got["mask_sum"] == expected.size
    assert not np.isnan(x[got["indices"]]).any()
    status = view.locator(".mwkin-scatter-status")
    page.wait_for_function("el => el.textContent.includes('selected')", arg=status.element_handle())
    assert f"{expected.size:,} selected" in status.inner_text()
    labtools.screenshot(view, "views_scatter_selected")

    # ---- hover read-out names the nearest star on screen ----
    view.locator("button", has_text="Pan / zoom").click()
    assert overlay.bounding_box() == box, "the page scrolled; coordinates would be stale"
    hx, hy = to_page(box, rect, domain, 40.0, 20.0)
    page.mouse.move(hx, hy)
    page.wait_for_function("el => el.dataset.hoverIndex !== undefined", arg=view.element_handle())
    hover = int(dataset(view, "hoverIndex"))
    sx = box["x"] + rect[0] + (x32 - domain[0]) / (domain[1] - domain[0]) * rect[2]
    sy = box["y"] + rect[1] + (domain[3] - y32) / (domain[3] - domain[2]) * rect[3]
    d2 = np.where(np.isfinite(sx), (sx - hx) ** 2 + (sy - hy) ** 2, np.inf)
    assert hover == int(np.argmin(d2))
    assert f"star #{hover}" in view.locator(".mwkin-scatter-readout").inner_text()

    # ---- a drag pans; the new range reaches Python ----
    before = int(dataset(view, "drawCount"))
    page.mouse.move(hx, hy)
    page.mouse.down()
    page.mouse.move(hx + 100, hy, steps=5)
    page.mouse.up()
    wait_draw_count_above(page, ".t-scatter", before)
    shifted = labtools.wait_for_kernel_value(page, "w.view_range", lambda v: v[0] != -120)
    assert shifted[0] == pytest.approx(-120 - 100 * px_x, abs=1.01 * px_x)
    assert shifted[2:] == pytest.approx([-110, 70], abs=1e-9)

    # ---- the wheel zooms about the pointer ----
    span = shifted[1] - shifted[0]
    page.mouse.wheel(0, -200)  # the view zooms by exp(-200 * 0.002)
    zoomed = labtools.wait_for_kernel_value(page, "w.view_range", lambda v: v[1] - v[0] < 0.9 * span)
    assert zoomed[1] - zoomed[0] == pytest.approx(span * np.exp(-0.4), rel=1e-6)
    assert zoomed[3] - zoomed[2] == pytest.approx(180 * np.exp(-0.4), rel=1e-6)
    labtools.execute_in_kernel(page, "w.reset_view()")
    page.wait_for_function("el => el.dataset.domain === '[-120,120,-110,70]'", arg=view.element_handle())

    # ---- lasso: a triangle drawn with the mouse; checked against matplotlib's point-in-polygon ----
    from matplotlib.path import Path

    selection_file.unlink()
    view.locator("button", has_text="Lasso").click()
    corners = [(-60.0, -70.0), (50.0, -60.0), (0.0, 40.0)]
    points = [to_page(box, rect, domain, *p) for p in corners]
    page.mouse.move(*points[0])
    page.mouse.down()
    for p in points[1:] + points[:1]:
        page.mouse.move(*p, steps=10)
    page.mouse.up()
    got = wait_for_file(selection_file, predicate=lambda d: len(d["indices"]) > 0)
    region = got["region"]
    assert region["kind"] == "lasso"
    poly = np.column_stack([region["x"], region["y"]])
    area = 0.5 * abs(np.dot(poly[:, 0], np.roll(poly[:, 1], -1)) - np.dot(poly[:, 1], np.roll(poly[:, 0], -1)))
    assert area == pytest.approx(0.5 * abs(110 * 110 - 10 * 60), rel=0.03)  # the triangle drawn
    finite = np.isfinite(x32) & np.isfinite(y32)
    inside = np.zeros(x32.size, bool)
    inside[finite] = Path(poly).contains_points(np.column_stack([x32[finite], y32[finite]]))
    assert got["indices"] == np.flatnonzero(inside).tolist()
    labtools.screenshot(view, "views_scatter_lasso")

    # ---- selection set from Python is drawn ----
    before = int(dataset(view, "drawCount"))
    labtools.execute_in_kernel(page, "w.selected_indices = np.arange(100, 200)")
    wait_draw_count_above(page, ".t-scatter", before)
    assert "100 selected" in status.inner_text()
    assert not errors, errors


# ---- Galaxy view ---------------------------------------------------------------------------------

GALAXY_CELLS = [
    "import json, pathlib\n"
    "import numpy as np\n"
    "from mwkin.widgets.views import GalaxyView\n"
    "def toy_orbit(x, y, vx, vy, vc=220.0, dt=0.001, n=4000):\n"
    "    # leapfrog in the logarithmic potential Phi = vc^2 ln R (flat rotation curve);\n"
    "    # kpc, km/s, time in kpc/(km/s)\n"
    "    pos = np.empty((n, 2)); p = np.array([x, y], float); v = np.array([vx, vy], float)\n"
    "    acc = lambda p: -vc**2 * p / (p @ p)\n"
    "    for i in range(n):\n"
    "        v += 0.5 * dt * acc(p); p += dt * v; v += 0.5 * dt * acc(p); pos[i] = p\n"
    "    return pos[:, 0], pos[:, 1]\n"
    "g = GalaxyView()\n"
    "g.add_class('t-galaxy')\n"
    "calls = {'every': 0}\n"
    "def count(vx, vy):\n"
    "    calls['every'] += 1\n"
    "def update(vx, vy):\n"
    "    tx, ty = toy_orbit(*g.star_xy, vx, vy)\n"
    "    g.set_track(tx, ty)\n"
    "    end = [float(np.float32(tx[-1])), float(np.float32(ty[-1]))]\n"
    "    pathlib.Path('velocity.json').write_text(json.dumps(\n"
    "        {'v': [vx, vy], 'end': end, 'rmax': float(np.hypot(tx, ty).max()), 'every': calls['every']}))\n"
    "g.on_velocity(count)\n"
    "g.on_velocity(update, final_only=True)\n"
    "update(*g.velocity_xy)\n"
    "g",
]


def test_galaxy_view_drag_changes_the_orbit(lab, page):
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    name = labtools.write_notebook(lab, "views_galaxy.ipynb", GALAXY_CELLS)
    state_file = lab.root_dir / "velocity.json"
    state_file.unlink(missing_ok=True)
    labtools.open_and_run(page, lab, name)
    view = page.locator(".t-galaxy")
    page.wait_for_function("el => Number(el.dataset.trackPoints) === 4000", arg=view.element_handle())
    first = wait_for_file(state_file)
    assert first["v"] == [12.9, 245.6]
    assert json.loads(dataset(view, "trackEnd")) == pytest.approx(first["end"], rel=1e-6)
    labtools.screenshot(view, "views_galaxy")

    canvas = view.locator("canvas.mwkin-galaxy-plot")
    canvas.scroll_into_view_if_needed()
    box = canvas.bounding_box()
    tip = json.loads(dataset(view, "tip"))
    k = float(dataset(view, "pxPerKpc"))  # CSS px per kpc along x (y has the same scale, flipped)
    scale = float(labtools.execute_in_kernel(page, "print(g.arrow_scale)"))
    tx, ty = box["x"] + tip[0], box["y"] + tip[1]
    dx, dy = -60.0, 35.0  # screen pixels: left and down = lower vx and vy
    page.mouse.move(tx, ty)
    page.mouse.down()
    page.mouse.move(tx + dx, ty + dy, steps=12)
    page.mouse.up()

    final = wait_for_file(state_file, predicate=lambda d: d["v"] != first["v"])
    expected_v = [12.9 + dx / k * scale, 245.6 - dy / k * scale]
    assert final["v"] == pytest.approx(expected_v, abs=1.0 / k * scale)  # within 1 px of the pointer
    assert 1 <= final["every"] <= 13  # at most one message per frame (one per mouse step here) + release
    assert final["rmax"] != pytest.approx(first["rmax"], rel=1e-3)
    # the new track computed in the kernel is what the browser now draws
    page.wait_for_function(
        "([el, end]) => JSON.stringify(JSON.parse(el.dataset.trackEnd)) === JSON.stringify(end)",
        arg=[view.element_handle(), final["end"]],
    )
    assert "v_x = " in view.locator(".mwkin-galaxy-readout").inner_text()
    assert labtools.wait_for_kernel_value(page, "g.dragging", lambda v: v is False) is False
    labtools.screenshot(view, "views_galaxy_dragged")
    assert not errors, errors


# ---- Voila ---------------------------------------------------------------------------------------


def _wait_tcp(port, process, timeout_s=120.0):
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise AssertionError(f"voila exited with code {process.returncode}")
        try:
            socket.create_connection(("127.0.0.1", port), timeout=1).close()
            return
        except OSError:
            time.sleep(0.2)
    raise AssertionError(f"voila did not listen on port {port} within {timeout_s} s")


def test_views_render_in_voila(page, tmp_path):
    voila = pathlib.Path(sys.executable).parent / "voila"
    assert voila.exists(), "voila is a test dependency (pip install -e '.[test]')"
    import nbformat

    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [
        nbformat.v4.new_code_cell(src)
        for src in (
            "import numpy as np\nfrom mwkin.widgets.views import SampleScatter, GalaxyView\n"
            "rs = np.random.default_rng(1)\n"
            "w = SampleScatter(); w.add_class('t-scatter')\n"
            "w.set_data(rs.normal(size=5000), rs.normal(size=5000), rs.normal(size=5000), c_label='c')\nw",
            "g = GalaxyView(); g.add_class('t-galaxy')\n"
            "t = np.linspace(0, 6, 300); g.set_track(-8.1 * np.cos(t), 8.1 * np.sin(t))\ng",
        )
    ]
    nbformat.write(nb, tmp_path / "views.ipynb")
    home = tmp_path / "home"
    env = dict(os.environ)
    for var, sub in (
        ("JUPYTER_CONFIG_DIR", "config"),
        ("JUPYTER_DATA_DIR", "data"),
        ("JUPYTER_RUNTIME_DIR", "runtime"),
        ("IPYTHONDIR", "ipython"),
    ):
        (home / sub).mkdir(parents=True)
        env[var] = str(home / sub)
    # the kernel must be the interpreter running the tests (same mwkin)
    spec = home / "data" / "kernels" / "python3"
    spec.mkdir(parents=True)
    (spec / "kernel.json").write_text(
        json.dumps(
            {
                "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
                "display_name": "Python 3",
                "language": "python",
            }
        )
    )
    port = labtools.free_port()
    log = open(tmp_path / "voila.log", "wb")  # noqa: SIM115
    process = subprocess.Popen(
        [str(voila), "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1", "views.ipynb"],
        cwd=tmp_path,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
        start_new_session=True,
    )
    log.close()
    try:
        _wait_tcp(port, process)
        page.goto(f"http://127.0.0.1:{port}/", timeout=120_000)
        page.wait_for_function(
            "() => Number(document.querySelector('.t-scatter')?.dataset.drawCount) > 0"
            " && Number(document.querySelector('.t-galaxy')?.dataset.drawCount) > 0",
            timeout=120_000,
        )
        assert page.locator(".t-scatter").evaluate("el => el.dataset.mode") == "points"
        assert page.locator(".t-galaxy").evaluate("el => el.dataset.trackPoints") == "300"
        labtools.screenshot(page, "views_voila")
    finally:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=15)
        except subprocess.TimeoutExpired:
            os.killpg(process.pid, signal.SIGKILL)
            process.wait(timeout=15)
    # Voila's page template asks a CDN for its icon font (not our views); anything else is a failure.
    others = [u for u in page.outside_requests if not _is_template_font(u)]
    assert not others, others
    page.outside_requests.clear()


def _is_template_font(url):
    return any(url.split("?")[0].endswith(ext) for ext in (".woff", ".woff2", ".ttf", ".css")) and (
        "font" in url.lower()
    )
