"""OrbitExplorer: time from an input change to the plot data updated in the kernel, and (``--browser``)
from the release of a mouse drag of the velocity arrow to the redrawn orbit in the browser.

Goal (issue 5): trait change -> plot data updated under 100 ms. Reference: the bare
``mk.integrate_orbits`` call the widget makes (the same star, potential and time grid), timed in the same
process; the ratio is the widget's overhead factor (conversion of the star with the new frame, potential
look-up, sending the arrays to the views, thread hand-off).

Two kinds of change are timed:

* a frame change (``FrameState.R0`` set), the star given as observables;
* a drag of the velocity arrow as the browser sends it (``galaxy_view.set_state({"velocity_xy": ...})``,
  the call ipywidgets makes for a comm message), the star then typed phase space.

``--browser`` also starts an isolated JupyterLab and headless chromium (``/usr/bin/chromium``; the
browser tests' helpers) and measures, in the page, mouse release -> first draw of the released velocity's
orbit, median over ``--drags`` drags, with its ratio to the kernel-side drag time measured here.

Run: .venv/bin/python benchmarks/bench_widgets_orbit.py [--browser] [--drags 5]
"""

from __future__ import annotations

import argparse
import pathlib
import statistics
import sys
import time

import numpy as np

import mwkin as mk
from mwkin.widgets import FrameState, OrbitExplorer

N_CHANGES = 20
#: (integration time in Gyr, output points): the widget's default, and the long orbit of issue 3's figure.
CASES = ((1.0, 2001), (10.0, 10001))
REPO = pathlib.Path(__file__).resolve().parents[1]


def _bare(explorer, t):
    """The reference: the integration the widget made, called directly with the same inputs."""
    result = explorer.result
    star = explorer._star_table_for_bench()
    if "ra" in star.colnames:
        star = mk.to_galactocentric(star, frame=result.frame, distance=mk.InverseParallax(min_snr=0))
    start = time.perf_counter()
    mk.integrate_orbits(star, result.potential, frame=result.frame, t=t)
    return time.perf_counter() - start


def measure_frame(T_GYR, N_POINTS):
    """Interleaved timings (the machine is shared, so each widget change is followed by a bare call)."""
    frame = FrameState()
    explorer = OrbitExplorer(frame=frame, n_points=N_POINTS, t_forward=T_GYR, threaded=True).wait()
    t = np.linspace(0.0, T_GYR, N_POINTS)
    R0_values = 8.0 + 0.3 * np.sin(np.arange(N_CHANGES + 1))  # every value differs from the last
    widget, compute, bare = [], [], []
    for R0 in R0_values[1:]:
        before = explorer.galaxy_view.track_x
        start = time.perf_counter()
        frame.R0 = float(R0)
        explorer.wait()
        widget.append(time.perf_counter() - start)
        if explorer.galaxy_view.track_x == before or explorer.result.frame.R0 != float(R0):
            raise RuntimeError("the plot data did not change")
        compute.append(explorer._runner.last_seconds)
        bare.append(_bare(explorer, t))
    return widget, compute, bare


def measure_drag(T_GYR, N_POINTS):
    """Velocity set as the browser sets it after a drag -> result and the view's track updated."""
    explorer = OrbitExplorer(n_points=N_POINTS, t_forward=T_GYR, threaded=True).wait()
    g = explorer.galaxy_view
    vx0, vy0 = g.velocity_xy
    t = np.linspace(0.0, T_GYR, N_POINTS)
    widget, compute, bare = [], [], []
    for i in range(N_CHANGES + 1):
        v = [vx0 + 20.0 * np.sin(i), vy0 + 20.0 * np.cos(i)]
        before = g.track_x
        start = time.perf_counter()
        g.set_state({"velocity_xy": [float(v[0]), float(v[1])], "dragging": False})
        explorer.wait()
        elapsed = time.perf_counter() - start
        if g.track_x == before or abs(explorer.result.track(0)[0]["vx"].value - v[0]) > 1e-9:
            raise RuntimeError("the dragged velocity did not reach the result and the view")
        if i == 0:
            continue  # the first drag also converts the observables to phase space
        widget.append(elapsed)
        compute.append(explorer._runner.last_seconds)
        bare.append(_bare(explorer, t))
    return widget, compute, bare


def report(title, widget, compute, bare):
    w, c, b = (statistics.median(x) * 1000 for x in (widget, compute, bare))
    print(title)
    print(f"  change -> plot data updated         : {w:7.1f} ms   (goal < 100 ms: {'met' if w < 100 else 'NOT met'})")
    print(f"    of which computation (worker)     : {c:7.1f} ms")
    print(f"  reference: bare mk.integrate_orbits : {b:7.1f} ms")
    print(f"  ratio widget / bare integration     : {w / b:7.2f}")
    return w


def browser(n_drags, kernel_drag_ms):
    """Mouse release -> redrawn orbit in JupyterLab (headless chromium), median of ``n_drags``."""
    sys.path.insert(0, str(REPO / "tests" / "browser"))
    import labtools
    from playwright.sync_api import sync_playwright
    from test_orbit_explorer_browser import (
        N_POINTS,
        ORBIT_CELLS,
        VIEW,
        measure_drag_latency,
    )

    lab = labtools.start_lab()
    try:
        with sync_playwright() as pw:
            chromium = pw.chromium.launch(executable_path=labtools.CHROMIUM, headless=True, args=labtools.CHROMIUM_ARGS)
            try:
                page = chromium.new_context(viewport={"width": 1280, "height": 1000}).new_page()
                page.set_default_timeout(120_000)
                name = labtools.write_notebook(lab, "bench_orbit_drag.ipynb", ORBIT_CELLS)
                labtools.open_and_run(page, lab, name)
                page.wait_for_function(
                    f"() => Number(document.querySelector('{VIEW}')?.dataset.trackPoints) === {N_POINTS}"
                )
                timings = measure_drag_latency(page, n_drags)
            finally:
                chromium.close()
    finally:
        labtools.shutdown_kernels(lab)
        labtools.stop_lab(lab)
    print(
        f"Browser (JupyterLab, headless chromium): end of a drag -> orbit redrawn, demo-survey star, "
        f"MWPotential2014, 1 Gyr, {N_POINTS} points, medians of {n_drags} drags"
    )
    for key, label in (("release", "mouse release -> redrawn "), ("last_move", "last pointer move -> redrawn")):
        med = statistics.median(timings[key])
        print(f"  {label}        : {med:7.1f} ms   ({', '.join(f'{v:.0f}' for v in timings[key])} ms)")
    print(f"  orbits drawn live during each drag   : {timings['live']}")
    print(f"  reference: kernel-side drag (above)  : {kernel_drag_ms:7.1f} ms")
    print(f"  ratio last move -> redrawn / kernel  : {statistics.median(timings['last_move']) / kernel_drag_ms:7.2f}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--browser", action="store_true", help="also measure in JupyterLab + chromium")
    parser.add_argument("--drags", type=int, default=5, help="drags timed in the browser")
    args = parser.parse_args()
    drag_ms = None
    for T_GYR, N_POINTS in CASES:
        what = f"one star, {T_GYR:g} Gyr with {N_POINTS} output points, median of {N_CHANGES} changes"
        report(f"OrbitExplorer, frame change (R0), {what}", *measure_frame(T_GYR, N_POINTS))
        ms = report(
            f"OrbitExplorer, velocity arrow dragged (as sent by the browser), {what}", *measure_drag(T_GYR, N_POINTS)
        )
        if N_POINTS == 2001:
            drag_ms = ms
    if args.browser:
        browser(args.drags, drag_ms)


if __name__ == "__main__":
    main()
