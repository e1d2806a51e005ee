"""Browser timing of the tour: R0 slider key press -> redrawn plots, against a bare kernel round trip.

Run on its own (needs /usr/bin/chromium and the test extras)::

    .venv/bin/python benchmarks/bench_browser_tour.py [--moves 7]

It starts an isolated JupyterLab with the browser tests' helpers (``tests/browser/labtools.py``),
opens ``example_notebooks/01_tour.ipynb`` in headless chromium, runs it and presses ArrowRight on the
R0 slider of the frame controls ``--moves`` times. For each press it measures, inside the page, the
time from the ``keydown`` event to the DOM change that put each plot's final state on the page (the
measurement of ``tests/browser/test_tour_browser.py``): the orbit's face-on canvas and meridional
SVG, the velocity panel's v_phi-R canvas, and the Oort fitter's status line.

The reference, in the same browser and server: a notebook with one ipywidgets FloatSlider whose
Python observer writes the value into a Label, i.e. the round trip key press -> kernel -> page with
no computation and no plot. The ratio tour / reference says how much the tour's recomputation and
redrawing add on top of the widget round trip itself.
"""

from __future__ import annotations

import argparse
import json
import pathlib
import re
import statistics
import sys
import time

REPO = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests" / "browser"))

import labtools  # noqa: E402  (the browser tests' helpers)
import test_tour_browser as tour  # noqa: E402  (the tour test's in-page measurement)

REFERENCE_CELLS = [
    "import ipywidgets as widgets\n"
    "slider = widgets.FloatSlider(value=8.122, min=6.5, max=10.0, step=0.001, continuous_update=True)\n"
    "slider.add_class('ref-slider')\n"
    "label = widgets.Label('8.122')\n"
    "label.add_class('ref-label')\n"
    "slider.observe(lambda change: setattr(label, 'value', f\"{change['new']:.3f}\"), 'value')\n"
    "widgets.VBox([slider, label])",
]

# keydown -> the Label's text changed (MutationObserver), in the page's clock.
_REFERENCE_ARM_JS = """() => {
  const label = document.querySelector('.ref-label');
  const before = label.textContent;
  const move = { t0: null, ms: null };
  const observer = new MutationObserver(() => {
    if (move.t0 !== null && move.ms === null && label.textContent !== before) {
      move.ms = performance.now() - move.t0;
      observer.disconnect();
    }
  });
  observer.observe(label, { subtree: true, childList: true, characterData: true, attributes: true });
  document.addEventListener('keydown', () => { move.t0 = performance.now(); }, { capture: true, once: true });
  window.__refMove = move;
}"""


def reference_moves(page, lab, n):
    name = labtools.write_notebook(lab, "bench_reference.ipynb", REFERENCE_CELLS)
    labtools.open_and_run(page, lab, name)
    handle = page.locator(".ref-slider .noUi-handle")
    handle.wait_for(state="visible", timeout=120_000)
    times = []
    for _ in range(n):
        page.evaluate(_REFERENCE_ARM_JS)
        handle.focus()
        page.keyboard.press("ArrowRight")
        page.wait_for_function("() => window.__refMove.ms !== null", timeout=60_000)
        times.append(page.evaluate("() => window.__refMove.ms"))
    return times


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--moves", type=int, default=7, help="key presses per measurement (median)")
    args = parser.parse_args(argv)

    from playwright.sync_api import sync_playwright

    lab = labtools.start_lab()
    try:
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(
                executable_path=labtools.CHROMIUM, headless=True, args=labtools.CHROMIUM_ARGS
            )
            try:
                page = browser.new_page(viewport={"width": 1400, "height": 1600})
                page.set_default_timeout(120_000)
                # Nothing may leave the machine (as in the tests' page fixture).
                page.route(
                    re.compile(".*"),
                    lambda route: route.continue_() if labtools.is_local_url(route.request.url) else route.abort(),
                )
                start = time.perf_counter()
                first_render_s = tour.open_tour(lab, page)
                moves = [tour.move_r0_once(page) for _ in range(args.moves)]
                labtools.shutdown_kernels(lab)
                reference = reference_moves(page, lab, args.moves)
                labtools.shutdown_kernels(lab)
            finally:
                browser.close()
    finally:
        labtools.stop_lab(lab)

    ref = statistics.median(reference)
    record = tour.summarise(moves, first_render_s)
    record["reference"] = {
        "what": "FloatSlider -> Python observer -> Label text, keydown to DOM change",
        "median_ms": ref,
        "each_ms": [round(t, 1) for t in reference],
    }
    record["ratio_to_reference"] = {k: v / ref for k, v in record["median_ms"].items()}
    out = labtools.OUTPUT_DIR / "bench_browser_tour.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(record, indent=2))

    print(f"tour first render: {first_render_s:.1f} s; whole run {time.perf_counter() - start:.0f} s")
    print(f"reference (slider -> kernel -> Label, no computation): median {ref:.0f} ms over {args.moves} presses")
    labels = {
        "face_on": "orbit face-on (canvas)",
        "meridional": "orbit meridional (SVG)",
        "v_phi_R": "v_phi-R view (canvas)",
        "oort_status": "Oort fit status ready",
    }
    for key, label in labels.items():
        median = record["median_ms"][key]
        print(f"R0 key press -> {label:>23}: median {median:6.0f} ms = {median / ref:5.1f} x reference")
    print(f"written to {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
