"""OrbitExplorer in a real browser: drag the star's velocity arrow with the mouse, see the orbit change.

A notebook builds an OrbitExplorer on MWPotential2014 for a star of the synthetic demo survey
(``mwkin.demo.survey``) and runs in JupyterLab in headless chromium. The test drags the tip of the
velocity arrow in the face-on view (a GalaxyView) with the mouse and checks, from both sides:

* the page: the view redrew (draw counter up) with the track the kernel computed (same end point);
* the kernel: ``.result`` changed (r_apo), the star became phase space with the dragged velocity,
  the star as given is kept, ``.status`` says why, and the button brings the first orbit back.

It also measures, in the page, the time from the mouse release to the first draw of the orbit for the
released velocity (median over a few drags) and prints it; ``benchmarks/bench_widgets_orbit.py
--browser`` runs the same measurement (:func:`measure_drag_latency`).
"""

from __future__ import annotations

import json
import statistics

import labtools
import pytest

pytestmark = pytest.mark.browser

N_POINTS = 2001
N_TIMED_DRAGS = 5

ORBIT_CELLS = [
    (
        "import json\n"
        "import numpy as np\n"
        "import mwkin as mk\n"
        "from mwkin.widgets import FrameState, PotentialState, OrbitExplorer\n"
        "sample = mk.demo.survey(n=2000, seed=2)\n"
        "snr = np.asarray(sample['parallax'] / sample['parallax_error'], dtype=float)\n"
        "has_rv = np.isfinite(np.asarray(sample['radial_velocity'], dtype=float))\n"
        "row = int(np.flatnonzero(has_rv & (snr > 20))[0])\n"
        "potential = PotentialState()\n"
        "potential.preset = 'MWPotential2014'\n"
        f"ex = OrbitExplorer(frame=FrameState(), potential=potential, stars=sample, row=row, t_forward=1.0,\n"
        f"                   n_points={N_POINTS})\n"
        "ex.add_class('t-orbit')\n"
        "releases = []   # one entry per drag released in the browser (the test waits on it)\n"
        "ex.galaxy_view.observe(lambda c: None if c['new'] else releases.append(1), 'dragging')\n"
        "ex.wait()\n"
        "ex"
    ),
]

# Kernel-side state the test reads back: printed as one JSON line.
STATE_EXPR = (
    "{'rapo': float(ex.result.rapo[0].value), 'source': ex.source.value, 'status': ex.status,"
    " 'v': ex.galaxy_view.velocity_xy, 'releases': len(releases), 'idle': ex._runner.idle,"
    " 'start_v': [float(ex.result.track(0)[0][k].value) for k in ('vx', 'vy')],"
    " 'end': [float(np.float32(a[-1])) for a in ex.galaxy_view.track()],"
    " 'scale': ex.galaxy_view.arrow_scale, 'potential': ex.result.potential.name,"
    " 'original': ex.config['star'].get('original', {}).get('source')}"
)

VIEW = ".t-orbit .mwkin-face-on"

# Log every draw of the view (MutationObserver on the attribute each draw writes) and every pointer
# release on its canvas, with performance.now() times.
_RECORDER_JS = """(el) => {
  window.__orbitLog = [];
  const canvas = el.querySelector('canvas.mwkin-galaxy-plot');
  canvas.addEventListener('pointerup', () => window.__orbitLog.push({kind: 'up', t: performance.now()}),
                          {capture: true});
  canvas.addEventListener('pointermove', () => window.__orbitLog.push({kind: 'move', t: performance.now()}),
                          {capture: true});
  new MutationObserver(() => window.__orbitLog.push({kind: 'draw', t: performance.now(),
      end: JSON.parse(el.dataset.trackEnd), count: Number(el.dataset.drawCount)}))
    .observe(el, {attributes: true, attributeFilter: ['data-draw-count']});
}"""


def kernel_state(page, predicate=lambda s: True, timeout_s=60.0):
    state = labtools.wait_for_kernel_value(page, STATE_EXPR, predicate, timeout_s=timeout_s)
    assert predicate(state), f"kernel state never satisfied the test's condition: {state}"
    return state


def view_data(page, key):
    return page.locator(VIEW).evaluate(f"el => el.dataset.{key}")


def drag_tip(page, dx, dy, steps=10):
    """Drag the arrow tip by (dx, dy) CSS pixels with the mouse (down, moves, up)."""
    canvas = page.locator(VIEW + " canvas.mwkin-galaxy-plot")
    canvas.scroll_into_view_if_needed()
    box = canvas.bounding_box()
    tip = json.loads(view_data(page, "tip"))
    x, y = box["x"] + tip[0], box["y"] + tip[1]
    page.mouse.move(x, y)
    page.mouse.down()
    page.mouse.move(x + dx, y + dy, steps=steps)
    page.mouse.up()


def close(a, b, tol=1e-6):
    return len(a) == len(b) and all(abs(p - q) <= tol * max(1.0, abs(q)) for p, q in zip(a, b))


def drag_and_settle(page, dx, dy, releases_before):
    """One mouse drag; returns the kernel's state once the released velocity's orbit is computed and
    the browser has drawn it."""
    drag_tip(page, dx, dy)
    state = kernel_state(
        page, lambda s: s["releases"] > releases_before and s["idle"] and close(s["start_v"], s["v"], 1e-12)
    )
    wait_track_end(page, state["end"])
    return state


def wait_track_end(page, end):
    """Wait until the view draws a track ending at ``end`` (kpc, float32 values)."""
    page.wait_for_function(
        "([sel, end]) => { const el = document.querySelector(sel); if (!el) return false;"
        " const e = JSON.parse(el.dataset.trackEnd); return e.length === 2 &&"
        " Math.abs(e[0] - end[0]) < 1e-6 * Math.max(1, Math.abs(end[0])) &&"
        " Math.abs(e[1] - end[1]) < 1e-6 * Math.max(1, Math.abs(end[1])); }",
        arg=[VIEW, end],
        timeout=60_000,
    )


def measure_drag_latency(page, n_drags=N_TIMED_DRAGS):
    """Time from the end of a drag to the first draw of the orbit for the released velocity.

    Drags alternate direction so every drag ends on a new velocity. Returns a dict of lists (ms, one per
    drag): ``release`` (mouse release -> drawn), ``last_move`` (last pointer move -> drawn; the view
    sends at most one velocity per frame, so the released value may already be on its way before the
    release, which makes ``release`` short), and ``live`` (distinct orbits drawn during the drag).
    """
    page.locator(VIEW).evaluate(_RECORDER_JS)
    out = {"release": [], "last_move": [], "live": []}
    releases = kernel_state(page)["releases"]
    for i in range(n_drags):
        sign = 1 if i % 2 == 0 else -1
        page.evaluate("() => { window.__orbitLog.length = 0; }")
        state = drag_and_settle(page, sign * 9.0, sign * 5.0, releases)
        releases = state["releases"]
        log = page.evaluate("() => window.__orbitLog")
        ups = [e["t"] for e in log if e["kind"] == "up"]
        assert len(ups) == 1, log
        last_move = max(e["t"] for e in log if e["kind"] == "move" and e["t"] <= ups[0])
        draws = [e for e in log if e["kind"] == "draw"]
        match = [e["t"] for e in draws if e["t"] >= last_move and close(e["end"], state["end"])]
        assert match, f"no draw after the drag showed the final orbit: {draws[-3:]}, {state['end']}"
        out["release"].append(max(0.0, match[0] - ups[0]))
        out["last_move"].append(match[0] - last_move)
        out["live"].append(len({tuple(e["end"]) for e in draws if e["t"] < ups[0]}))
    return out


def latency_text(out):
    med = {k: statistics.median(out[k]) for k in ("release", "last_move")}
    return (
        f"mouse release -> orbit redrawn: median {med['release']:.0f} ms "
        f"({', '.join(f'{v:.0f}' for v in out['release'])}); last pointer move -> orbit redrawn: "
        f"median {med['last_move']:.0f} ms ({', '.join(f'{v:.0f}' for v in out['last_move'])}); "
        f"{len(out['release'])} drags; orbits drawn while dragging: {out['live']}"
    )


def test_dragging_the_velocity_arrow_changes_the_orbit(lab, page):
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    name = labtools.write_notebook(lab, "orbit_explorer_drag.ipynb", ORBIT_CELLS)
    labtools.open_and_run(page, lab, name)
    page.wait_for_function(
        f"() => Number(document.querySelector('{VIEW}')?.dataset.trackPoints) === {N_POINTS}", timeout=120_000
    )
    first = kernel_state(page, lambda s: s["idle"])
    assert first["potential"] == "MWPotential2014" and first["source"] == "table"
    assert close(json.loads(view_data(page, "trackEnd")), first["end"])
    count_before = int(view_data(page, "drawCount"))
    explorer = page.locator(".t-orbit")
    labtools.screenshot(explorer, "orbit_explorer_before_drag")

    # ---- one drag: right and up = larger vx and vy ----
    k = float(view_data(page, "pxPerKpc"))
    dx, dy = 12.0, -8.0
    state = drag_and_settle(page, dx, dy, first["releases"])
    assert int(view_data(page, "drawCount")) > count_before
    assert state["rapo"] != pytest.approx(first["rapo"], rel=1e-4)
    expected = [first["v"][0] + dx / k * first["scale"], first["v"][1] - dy / k * first["scale"]]
    assert state["v"] == pytest.approx(expected, abs=1.01 * first["scale"] / k)  # within a pixel
    assert state["start_v"] == pytest.approx(state["v"], abs=1e-9)  # .result has the dragged velocity
    assert state["source"] == "phase_space" and state["original"] == "table"
    assert "velocity set by dragging" in state["status"]
    # what the user sees says so, and offers the way back
    page.wait_for_function(
        "() => document.querySelector('.t-orbit .mwkin-drag-note')?.textContent.includes('set by dragging')"
    )
    restore = explorer.locator(".mwkin-restore-star")
    assert restore.is_visible() and "table row" in restore.inner_text()
    assert "set by dragging" in explorer.locator(".mwkin-status").inner_text()
    labtools.screenshot(explorer, "orbit_explorer_after_drag")

    # ---- release-to-redraw latency over a few more drags ----
    timings = measure_drag_latency(page)
    print(f"\nOrbitExplorer drag (MWPotential2014, 1 Gyr, {N_POINTS} points): {latency_text(timings)}")
    assert all(v > 0 for v in timings["last_move"])
    assert all(n >= 1 for n in timings["live"])  # the orbit followed the arrow during the drag

    # ---- back to the table row: the first orbit again ----
    restore.click()
    back = kernel_state(page, lambda s: s["source"] == "table" and s["idle"])
    assert back["rapo"] == pytest.approx(first["rapo"], rel=1e-12)
    assert back["original"] is None
    wait_track_end(page, first["end"])
    assert int(labtools.execute_in_kernel(page, "print(ex.galaxy_view.draw_count)")) > count_before
    assert not errors, errors


# ---- saved widget state: reopening a notebook whose kernel is gone ---------------------------------------

SAVED_CELLS = [
    (
        "import ipywidgets as widgets\n"
        "s = widgets.IntSlider(value=7, description='seven')\n"
        "s.add_class('t-saved-slider')\n"
        "s"
    ),
    (
        "import numpy as np\n"
        "import mwkin as mk\n"
        "from mwkin.widgets import OrbitExplorer\n"
        "sample = mk.demo.survey(n=500, seed=2)\n"
        "snr = np.asarray(sample['parallax'] / sample['parallax_error'], dtype=float)\n"
        "row = int(np.flatnonzero(np.isfinite(np.asarray(sample['radial_velocity'], dtype=float)) & (snr > 20))[0])\n"
        "ex = OrbitExplorer(stars=sample, row=row, n_points=501)\n"
        "ex.add_class('t-saved-orbit')\n"
        "ex.wait()   # the result is in the widget state before the output is stored\n"
        "ex"
    ),
]
SAVED_VIEW = ".t-saved-orbit .mwkin-face-on"


def saved_notebook(lab, name, sign, kernelspec=None):
    """Execute ``SAVED_CELLS`` with nbclient (its own kernel, shut down afterwards), store the widget
    state in the notebook and write it into the lab's folder; signed with the lab's notary if asked.

    Returns the saved GalaxyView state (dict) so the test can compare what the page draws.
    """
    import base64

    import nbformat
    import numpy as np
    from nbclient import NotebookClient
    from nbformat.sign import NotebookNotary

    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [nbformat.v4.new_code_cell(src) for src in SAVED_CELLS]
    NotebookClient(
        nb,
        timeout=300,
        kernel_name="python3",
        store_widget_state=True,
        resources={"metadata": {"path": str(lab.root_dir)}},
    ).execute()
    if kernelspec is not None:
        nb.metadata["kernelspec"] = kernelspec
        nb.metadata.pop("language_info", None)
    if sign:
        # the server's own notary: the same secret and signature database (its JUPYTER_DATA_DIR)
        NotebookNotary(data_dir=str(lab.home / "data")).sign(nb)
    nbformat.write(nb, lab.root_dir / name)
    state = nb.metadata["widgets"]["application/vnd.jupyter.widget-state+json"]["state"]
    galaxy = [
        m
        for m in state.values()
        if m["model_name"] == "AnyModel" and "mwkin-face-on" in m["state"].get("_dom_classes", [])
    ]
    assert len(galaxy) == 1, "the GalaxyView's state was not saved"
    saved = galaxy[0]
    assert "export default" in saved["state"]["_esm"]  # the ES module itself is in the state
    buffers = {b["path"][0]: np.frombuffer(base64.b64decode(b["data"]), "<f4") for b in saved["buffers"]}
    return {
        "track_end": [float(buffers["track_x"][-1]), float(buffers["track_y"][-1])],
        "n_track": int(buffers["track_x"].size),
        "n_models": len(state),
    }


def open_notebook(page, lab, name):
    page.goto(lab.url(f"lab/tree/{name}") + "&reset", timeout=120_000)
    page.wait_for_function(
        "(name) => { const nb = window.jupyterapp?.shell?.currentWidget;"
        " return !!(nb && nb.context && nb.context.isReady && nb.context.path === name); }",
        arg=name,
        timeout=120_000,
    )


def test_saved_widget_state_draws_the_views_once_trusted_with_a_fresh_kernel(lab, page):
    errors = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    saved = saved_notebook(lab, "saved_state.ipynb", sign=False)
    assert saved["n_track"] == 501
    open_notebook(page, lab, "saved_state.ipynb")
    # Not trusted (written outside this server): JupyterLab renders only the text/plain of each output,
    # because the widget renderer is registered as unsafe.
    page.wait_for_function(
        "() => [...document.querySelectorAll('.jp-OutputArea-output')].some(e => e.textContent.includes('IntSlider('))"
    )
    assert page.locator(SAVED_VIEW).count() == 0
    labtools.screenshot(page, "saved_state_untrusted")

    # "Trust Notebook" (the user's command): the outputs render from the saved state.
    # (not awaited: the command's promise settles only once its dialog is answered)
    page.evaluate("() => { window.jupyterapp.commands.execute('notebook:trust'); }")
    page.locator(".jp-Dialog .jp-mod-accept").click()
    page.wait_for_function(
        f"() => Number(document.querySelector('{SAVED_VIEW}')?.dataset.trackPoints) === {saved['n_track']}",
        timeout=120_000,
    )
    end = json.loads(view_data_of(page, SAVED_VIEW, "trackEnd"))
    assert end == pytest.approx(saved["track_end"], rel=1e-6)  # the saved float32 buffers, drawn
    page.wait_for_selector(".t-saved-slider .noUi-handle")
    # bqplot's meridional view, from its saved models: the orbit's line has a path (the empty marks' are "null")
    page.wait_for_function(
        "() => [...document.querySelectorAll('.t-saved-orbit .mwkin-meridional path.line')]"
        ".some(p => (p.getAttribute('d') || '').startsWith('M'))"
    )
    assert "r_apo" in page.locator(".t-saved-orbit .mwkin-orbit-parameters").inner_text()
    # Nothing ran in the kernel JupyterLab started: what is drawn came from the notebook's metadata.
    labtools.wait_idle(page)
    assert labtools.execute_in_kernel(
        page, "print('ex' in globals(), 'mwkin' in __import__('sys').modules)"
    ).split() == ["False", "False"]
    labtools.screenshot(page.locator(".t-saved-orbit"), "saved_state_restored")

    # Shutting the kernel down leaves the drawn views on the page (they were never tied to Python).
    page.evaluate("() => window.jupyterapp.shell.currentWidget.sessionContext.shutdown()")
    page.wait_for_function("() => !window.jupyterapp.shell.currentWidget.sessionContext.session")
    assert int(view_data_of(page, SAVED_VIEW, "drawCount")) > 0
    assert page.locator(".t-saved-slider .noUi-handle").count() == 1
    labtools.screenshot(page.locator(".t-saved-orbit"), "saved_state_kernel_shut_down")
    assert not errors, errors


def test_saved_widget_state_is_not_drawn_with_no_kernel(lab, page):
    # Documents a limitation of @jupyter-widgets/jupyterlab-manager 5.0 (ipywidgets 8.1): its widget
    # manager is keyed by the kernel's id and restores a notebook's state through a kernel, so with
    # "No Kernel" the outputs stay at "Loading widget...". If this test starts failing, the manager
    # has learnt to restore without a kernel: update the README's "sharing" section.
    saved_notebook(
        lab,
        "saved_no_kernel.ipynb",
        sign=True,
        kernelspec={"name": "no-such-kernel", "display_name": "gone", "language": "no-such-language"},
    )
    open_notebook(page, lab, "saved_no_kernel.ipynb")
    dialog = page.locator(".jp-Dialog")
    dialog.wait_for()
    assert "Select Kernel" in dialog.inner_text()
    dialog.locator("select").select_option(label="No Kernel")
    dialog.locator(".jp-mod-accept").click()
    page.wait_for_function(
        "() => [...document.querySelectorAll('.jp-OutputArea-output')]"
        ".some(e => e.textContent.includes('Loading widget'))"
    )
    from playwright.sync_api import TimeoutError as PlaywrightTimeout

    with pytest.raises(PlaywrightTimeout):  # bounded wait for something that should not happen
        page.wait_for_function(f"() => !!document.querySelector('{SAVED_VIEW}')", timeout=15_000)
    assert page.evaluate("() => window.jupyterapp.shell.currentWidget.sessionContext.session") is None
    texts = page.locator(".jp-OutputArea-output").all_inner_texts()
    assert texts and all("Loading widget" in t for t in texts), texts
    labtools.screenshot(page, "saved_state_no_kernel")


def view_data_of(page, selector, key):
    return page.locator(selector).evaluate(f"el => el.dataset.{key}")
