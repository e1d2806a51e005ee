"""JupyterLab renders the three widget libraries we build on, and a slider reaches a Python observer.

This guards the test machinery itself (server isolation, lab extensions found, kernel = the
project's interpreter, page guard) before any mwkin widget is involved.
"""

from __future__ import annotations

import sys
import time

import labtools
import pytest

N_POINTS = 40

CELLS = [
    # The kernel reports which interpreter it is and where mwkin comes from.
    "import sys, importlib.util\n"
    "spec = importlib.util.find_spec('mwkin')\n"
    "print('KERNEL', sys.executable)\n"
    "print('MWKIN', None if spec is None else list(spec.submodule_search_locations or []))",
    # Slider -> Python observer -> label and anywidget counter.
    "import ipywidgets as widgets\n"
    "import anywidget, traitlets\n"
    "import bqplot as bq\n"
    "import numpy as np\n"
    "class Echo(anywidget.AnyWidget):\n"
    "    _esm = '''\n"
    "    function render({ model, el }) {\n"
    "      const draw = () => {\n"
    "        el.textContent = 'echo ' + model.get('value');\n"
    "        el.dataset.draws = String(Number(el.dataset.draws || 0) + 1);\n"
    "      };\n"
    "      draw();\n"
    "      model.on('change:value', draw);\n"
    "      return () => model.off('change:value', draw);\n"
    "    }\n"
    "    export default { render };\n"
    "    '''\n"
    "    value = traitlets.Int(0).tag(sync=True)\n"
    "slider = widgets.IntSlider(value=3, min=0, max=10, description='n')\n"
    "slider.add_class('smoke-slider')\n"
    "label = widgets.Label(value='value 3')\n"
    "label.add_class('smoke-label')\n"
    "echo = Echo(value=3)\n"
    "echo.add_class('smoke-echo')\n"
    "def on_value(change):\n"
    "    label.value = f\"value {change['new']}\"\n"
    "    echo.value = change['new']\n"
    "slider.observe(on_value, names='value')\n"
    "widgets.VBox([slider, label, echo])",
    # A bqplot scatter with a known number of points.
    f"rs = np.random.default_rng(0)\n"
    f"xs, ys = bq.LinearScale(), bq.LinearScale()\n"
    f"dots = bq.Scatter(x=rs.normal(size={N_POINTS}), y=rs.normal(size={N_POINTS}),\n"
    f"                  scales={{'x': xs, 'y': ys}})\n"
    f"fig = bq.Figure(marks=[dots], axes=[bq.Axis(scale=xs), bq.Axis(scale=ys, orientation='vertical')],\n"
    f"                layout=widgets.Layout(width='400px', height='300px'))\n"
    f"fig.add_class('smoke-fig')\n"
    f"fig",
    # An empty last cell, as notebooks often have: JupyterLab never executes it.
    "",
]


@pytest.mark.browser
def test_widgets_render_and_slider_reaches_python(lab, page):
    page_errors: list[str] = []
    page.on("pageerror", lambda exc: page_errors.append(str(exc)))

    name = labtools.write_notebook(lab, "smoke.ipynb", CELLS)
    labtools.open_and_run(page, lab, name)

    # The kernel is the interpreter running these tests, and mwkin is importable there.
    text = labtools.cell_outputs_text(page)
    assert f"KERNEL {sys.executable}" in text, text
    assert "MWKIN None" not in text, text

    # All three libraries rendered: slider handle, our anywidget's text, bqplot's SVG dots.
    handle = page.locator(".smoke-slider .noUi-handle")
    handle.wait_for(state="visible", timeout=120_000)
    page.wait_for_function(
        "() => { const e = document.querySelector('.smoke-echo'); return e && e.textContent.includes('echo 3'); }",
        timeout=120_000,
    )
    page.wait_for_function(
        f"() => document.querySelectorAll('.smoke-fig g.object_grp path.dot').length === {N_POINTS}", timeout=120_000
    )
    labtools.screenshot(page.locator(".smoke-fig"), "smoke-figure")
    box = page.locator(".widget-vbox", has=page.locator(".smoke-slider"))
    labtools.screenshot(box, "smoke-before")

    # One ArrowRight: 3 -> 4 in the browser, through the kernel's observer, back to two views.
    handle.focus()
    t0 = time.perf_counter()
    page.keyboard.press("ArrowRight")
    page.wait_for_function(
        "() => { const l = document.querySelector('.smoke-label'); return l && l.textContent.includes('value 4'); }",
        timeout=60_000,
    )
    page.wait_for_function(
        "() => { const e = document.querySelector('.smoke-echo');"
        " return e && e.textContent === 'echo 4' && Number(e.dataset.draws) >= 2; }",
        timeout=60_000,
    )
    elapsed_ms = (time.perf_counter() - t0) * 1e3
    print(f"slider key press -> label and anywidget redrawn via the kernel: {elapsed_ms:.0f} ms")
    labtools.screenshot(box, "smoke-after")

    assert page_errors == []


@pytest.mark.browser
def test_page_guard_aborts_outside_requests(page):
    # `.invalid` is reserved and never resolves (RFC 2606), so even a broken guard sends nothing.
    outside = "http://mwkin-guard-check.invalid/probe.js"
    page.goto("data:text/html,<title>guard</title>")
    failed = page.evaluate("(url) => fetch(url).then(() => false, () => true)", outside)
    assert failed
    assert page.outside_requests == [outside]
    page.outside_requests.clear()  # recorded as expected; let the fixture's own check pass


@pytest.mark.parametrize(
    "url, local",
    [
        ("http://127.0.0.1:8888/lab?token=x", True),
        ("ws://localhost:9999/api/kernels/abc/channels", True),
        ("blob:http://127.0.0.1:8888/0f0e", True),
        ("data:text/javascript,export default {}", True),
        ("https://cdn.example.org/require.js", False),
        ("http://127.0.0.2.example.org/", False),
        ("wss://10.0.0.1/socket", False),
    ],
)
def test_local_url_classification(url, local):
    assert labtools.is_local_url(url) is local


@pytest.mark.browser
def test_open_and_run_reports_a_failing_cell(lab, page):
    # Run-all stops at an error; the helper must say so with the traceback instead of timing out.
    name = labtools.write_notebook(
        lab,
        "fails.ipynb",
        [
            "x = 1",
            "raise ValueError('deliberate failure 42')",
            "print('never reached')",
        ],
    )
    with pytest.raises(labtools.LabError, match="ValueError: deliberate failure 42"):
        labtools.open_and_run(page, lab, name, timeout_ms=120_000)
    assert "never reached" not in labtools.cell_outputs_text(page)
