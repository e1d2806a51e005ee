"""OrbitExplorer: time from a frame change (FrameState.R0 set) to the plot data updated in the kernel.

Goal (issue 5): under 100 ms. Reference: the bare ``mk.integrate_orbits`` call the widget makes (the same
star, potential and time grid), timed in the same process; the ratio is the widget's overhead factor
(conversion of the star with the new frame, potential look-up, drawing arrays into the bqplot marks,
thread hand-off).

Run: .venv/bin/python benchmarks/bench_widgets_orbit.py
"""

from __future__ import annotations

import statistics
import time

import numpy as np

import mwkin as mk
from mwkin.widgets import FrameState, OrbitExplorer

N_CHANGES = 20
#: (integration time in Gyr, output points): the widget's default, and the long orbit of issue 3's figure.
CASES = ((1.0, 2001), (10.0, 10001))


def measure(T_GYR, N_POINTS):
    """Interleaved timings (the machine is shared, so each widget change is followed by a bare call)."""
    frame = FrameState()
    explorer = OrbitExplorer(frame=frame, n_points=N_POINTS, t_forward=T_GYR, threaded=True).wait()
    t = np.linspace(0.0, T_GYR, N_POINTS)
    R0_values = 8.0 + 0.3 * np.sin(np.arange(N_CHANGES + 1))      # every value differs from the last
    widget, compute, bare = [], [], []
    for R0 in R0_values[1:]:
        before = explorer.face_on_marks["forward"].x
        start = time.perf_counter()
        frame.R0 = float(R0)
        explorer.wait()
        widget.append(time.perf_counter() - start)
        if explorer.face_on_marks["forward"].x is before or explorer.result.frame.R0 != float(R0):
            raise RuntimeError("the plot data did not change")
        compute.append(explorer._runner.last_seconds)
        # the reference: the integration the widget made, called directly with the same inputs
        result = explorer.result
        star = mk.to_galactocentric(explorer._star_table_for_bench(), frame=result.frame,
                                    distance=mk.InverseParallax(min_snr=0))
        start = time.perf_counter()
        mk.integrate_orbits(star, result.potential, frame=result.frame, t=t)
        bare.append(time.perf_counter() - start)
    return widget, compute, bare


def main():
    for T_GYR, N_POINTS in CASES:
        widget, compute, bare = measure(T_GYR, N_POINTS)
        w, c, b = (statistics.median(x) * 1000 for x in (widget, compute, bare))
        print(f"OrbitExplorer, one star, {T_GYR:g} Gyr with {N_POINTS} output points, median of {N_CHANGES} changes")
        print(f"  trait change -> plot data updated  : {w:7.1f} ms   (goal < 100 ms: {'met' if w < 100 else 'NOT met'})")
        print(f"    of which computation (worker)    : {c:7.1f} ms")
        print(f"  reference: bare mk.integrate_orbits: {b:7.1f} ms")
        print(f"  ratio widget / bare integration    : {w / b:7.2f}")


if __name__ == "__main__":
    main()
