"""Browser timings of the SampleScatter view, with bqplot's Scatter as the reference, in one run.

Run on its own (needs /usr/bin/chromium and the test extras)::

    .venv/bin/python benchmarks/bench_browser_views.py [--reps 3] [--skip-bqplot-1e5]

It starts an isolated JupyterLab (the browser tests' own helpers in ``tests/browser/labtools.py``),
opens a notebook in headless chromium and measures, inside the page:

1. **data change -> redrawn view**: from the moment the page sends an execute request that sets new
   data on the widget (``SampleScatter.set_data`` / bqplot ``Scatter.x, .y, .color``) to the first
   task after the frame that shows the new data (canvas: the view's ``data-draw-count`` changed;
   bqplot: the SVG holds N dot groups ``g.object_grp`` and the last one moved), for 1e4, 1e5 and 1e6 stars.
   bqplot stops at 1e5: its SVG scatter needs ~10 s there already and 1e6 SVG nodes are impractical.
   Goals (issue 6): < 100 ms, < 300 ms, < 1 s.
2. **brush -> mask in Python** over 1e5 stars: a box dragged with the mouse; the kernel's selection
   callback builds the boolean mask and writes its count into a Label. Reported: pointer release ->
   kernel has the mask (one way, from wall clocks on the same machine), and the round trip until the
   Label shows the count in the page. Goal: < 200 ms.

Medians over ``--reps`` repetitions; each repetition sends different numbers (same N).
"""

from __future__ import annotations

import argparse
import json
import pathlib
import statistics
import sys
import time

REPO = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests" / "browser"))

import labtools  # noqa: E402  (the browser tests' helpers)

SIZES = (10_000, 100_000, 1_000_000)
BQPLOT_MAX = 100_000
GOALS_MS = {10_000: 100, 100_000: 300, 1_000_000: 1000}
BRUSH_N = 100_000
BRUSH_GOAL_MS = 200


def setup_cells(sizes, reps):
    return [
        "import time, json\n"
        "import numpy as np\n"
        "import ipywidgets as widgets\n"
        "import bqplot as bq\n"
        "from mwkin.widgets.views import SampleScatter\n"
        "rs = np.random.default_rng(0)\n"
        f"DATA = {{n: [(rs.normal(0, 40, n), rs.normal(-20, 30, n), rs.normal(0, 20, n)) for _ in range({reps})]\n"
        f"        for n in {tuple(sizes)}}}\n"
        "KERNEL_MS = []\n"
        "def timed(f):\n"
        "    t = time.perf_counter(); f(); KERNEL_MS.append(1e3 * (time.perf_counter() - t))\n"
        "w = SampleScatter(width=640, height=420)\n"
        "w.add_class('b-scatter')\n"
        "w",
        "xs, ys, cs = bq.LinearScale(), bq.LinearScale(), bq.ColorScale()\n"
        "dots = bq.Scatter(x=np.zeros(1), y=np.zeros(1), color=np.zeros(1), default_size=4,\n"
        "                  scales={'x': xs, 'y': ys, 'color': cs})\n"
        "fig = bq.Figure(marks=[dots], axes=[bq.Axis(scale=xs), bq.Axis(scale=ys, orientation='vertical')],\n"
        "                animation_duration=0, layout=widgets.Layout(width='640px', height='420px'))\n"
        "fig.add_class('b-bq')\n"
        "fig",
        "ack = widgets.Label('none')\n"
        "ack.add_class('b-ack')\n"
        "RECEIVED = []\n"
        "def on_select(indices):\n"
        "    mask = w.selected_mask\n"
        "    RECEIVED.append(time.time() * 1e3)\n"
        "    ack.value = f'mask {int(mask.sum())} {len(RECEIVED)}'\n"
        "w.on_select(on_select)\n"
        "ack",
    ]


MEASURE_JS = """
async ([code, selector, kind, n, timeoutMs]) => {
  const el = document.querySelector(selector);
  const kernel = window.jupyterapp.shell.currentWidget.sessionContext.session.kernel;
  let detect = null;
  let stop = () => {};
  const seen = new Promise((resolve) => {
    if (kind === 'canvas') {
      const before = Number(el.dataset.drawCount || 0);
      const obs = new MutationObserver(() => {
        if (Number(el.dataset.drawCount || 0) > before) { obs.disconnect(); resolve(performance.now()); }
      });
      obs.observe(el, { attributes: true, attributeFilter: ['data-draw-count'] });
      stop = () => obs.disconnect();
    } else {
      // bqplot: poll once per frame (a MutationObserver on 1e5 nodes would slow bqplot itself)
      const dots = () => el.querySelectorAll('g.object_grp');  // one group per dot, positioned by transform
      const d0 = dots();
      const prev = d0.length ? d0[d0.length - 1].getAttribute('transform') : null;
      let live = true;
      const poll = () => {
        if (!live) return;
        const d = dots();
        if (d.length === n && d[n - 1].getAttribute('transform') !== prev) resolve(performance.now());
        else requestAnimationFrame(poll);
      };
      requestAnimationFrame(poll);
      stop = () => { live = false; };
    }
  });
  const timeout = new Promise((resolve) => setTimeout(() => resolve(null), timeoutMs));
  const t0 = performance.now();
  kernel.requestExecute({ code, store_history: false, silent: true });
  detect = await Promise.race([seen, timeout]);
  stop();
  if (detect === null) return { timeout: true };
  // both detections run inside a rendering step; the next task starts after that frame is painted
  await new Promise((resolve) => setTimeout(resolve, 0));
  const t1 = performance.now();
  return { total: t1 - t0, detect: detect - t0, drawMs: Number(el.dataset.drawMs || NaN),
           mode: el.dataset.mode || '' };
}
"""


def kernel_json(page, expr):
    return json.loads(
        page.evaluate(
            """async (code) => {
          const kernel = window.jupyterapp.shell.currentWidget.sessionContext.session.kernel;
          const future = kernel.requestExecute({ code, store_history: false });
          let text = '';
          future.onIOPub = (msg) => { if (msg.header.msg_type === 'stream') text += msg.content.text; };
          await future.done;
          return text;
        }""",
            f"import json as _j; print(_j.dumps({expr}))",
        )
    )


def measure(page, code, selector, kind, n, timeout_ms):
    out = page.evaluate(MEASURE_JS, [code, selector, kind, n, timeout_ms])
    if out.get("timeout"):
        raise RuntimeError(f"{selector}: no redraw within {timeout_ms} ms for n={n}")
    return out


def fmt(ms):
    return "-" if ms is None else (f"{ms:.0f}" if ms >= 10 else f"{ms:.1f}")


def run(reps, with_bq_1e5):
    lab = labtools.start_lab()
    from playwright.sync_api import sync_playwright

    rows, brush_rows = [], []
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=labtools.CHROMIUM, headless=True, args=labtools.CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": 1280, "height": 1400})
            name = labtools.write_notebook(lab, "bench_views.ipynb", setup_cells(SIZES, reps))
            labtools.open_and_run(page, lab, name, timeout_ms=300_000)
            page.wait_for_function("() => Number(document.querySelector('.b-scatter')?.dataset.drawCount) > 0")

            for n in SIZES:
                variants = [("SampleScatter (canvas)", "auto")]
                if n > 200_000:
                    variants.append(("SampleScatter, points forced", "off"))
                for label, setting in variants:
                    kernel_json(page, f"setattr(w, 'density', '{setting}') or 0")
                    runs = []
                    kernel_json(page, "KERNEL_MS.clear() or 0")
                    for r in range(reps):
                        code = f"timed(lambda: w.set_data(*DATA[{n}][{r}], keep_view=False))"
                        runs.append(measure(page, code, ".b-scatter", "canvas", n, 60_000))
                    kms = kernel_json(page, "KERNEL_MS")
                    rows.append((label, n, runs, statistics.median(kms), runs[-1]["mode"]))
                if n <= BQPLOT_MAX and (n < BQPLOT_MAX or with_bq_1e5):
                    runs = []
                    kernel_json(page, "KERNEL_MS.clear() or 0")
                    bq_reps = reps if n < BQPLOT_MAX else min(reps, 2)
                    for r in range(bq_reps):
                        code = (
                            f"X, Y, C = DATA[{n}][{r}]\n"
                            "def _set():\n"
                            "    with dots.hold_sync():\n"
                            "        dots.x, dots.y, dots.color = X, Y, C\n"
                            "timed(_set)"
                        )
                        runs.append(measure(page, code, ".b-bq", "svg", n, 180_000))
                    kms = kernel_json(page, "KERNEL_MS")
                    rows.append(("bqplot Scatter (SVG)", n, runs, statistics.median(kms), "svg"))
                    # free the browser from 1e5 SVG nodes before the next size
                    kernel_json(
                        page,
                        "setattr(dots, 'x', np.zeros(1)) or setattr(dots, 'y', np.zeros(1)) "
                        "or setattr(dots, 'color', np.zeros(1)) or 0",
                    )

            # ---- brush over 1e5 stars -> mask in Python ----
            kernel_json(
                page,
                "setattr(w, 'density', 'auto') or "
                f"w.set_data(*DATA[{BRUSH_N}][0], view_range=(-150, 150, -130, 90)) or 0",
            )
            view = page.locator(".b-scatter")
            view.scroll_into_view_if_needed()
            page.wait_for_function("() => document.querySelector('.b-scatter').dataset.domain === '[-150,150,-130,90]'")
            view.locator("button", has_text="Box select").click()
            overlay = view.locator("canvas.mwkin-scatter-overlay")
            overlay.scroll_into_view_if_needed()
            box = overlay.bounding_box()
            rect = json.loads(view.evaluate("el => el.dataset.plotRect"))
            page.evaluate("""() => {
              const ov = document.querySelector('.b-scatter canvas.mwkin-scatter-overlay');
              window.__ups = [];
              ov.addEventListener('pointerup', () => window.__ups.push([performance.now(),
                  performance.timeOrigin + performance.now()]), { capture: true });
              window.__acks = [];
              const label = document.querySelector('.b-ack');
              new MutationObserver(() => window.__acks.push([performance.now(), label.textContent]))
                .observe(label, { subtree: true, childList: true, characterData: true });
            }""")
            for r in range(reps):
                fx0, fy0, fx1, fy1 = 0.2 + 0.05 * r, 0.25, 0.6 + 0.05 * r, 0.7
                ax = box["x"] + rect[0] + fx0 * rect[2]
                ay = box["y"] + rect[1] + fy0 * rect[3]
                bx = box["x"] + rect[0] + fx1 * rect[2]
                by = box["y"] + rect[1] + fy1 * rect[3]
                page.mouse.move(ax, ay)
                page.mouse.down()
                page.mouse.move(bx, by, steps=6)
                page.mouse.up()
                page.wait_for_function(f"() => window.__acks.some(a => a[1].endsWith(' {r + 1}'))", timeout=60_000)
                up_perf, up_wall = page.evaluate("() => window.__ups[window.__ups.length - 1]")
                ack_perf = page.evaluate(f"() => window.__acks.find(a => a[1].endsWith(' {r + 1}'))[0]")
                hit_ms = float(view.evaluate("el => el.dataset.selectMs"))
                received = kernel_json(page, "RECEIVED")[r]
                count = kernel_json(page, "int(w.selected_mask.sum())")
                brush_rows.append(
                    {
                        "one_way": received - up_wall,
                        "round_trip": ack_perf - up_perf,
                        "hit_ms": hit_ms,
                        "selected": count,
                    }
                )
            browser.close()
    finally:
        labtools.shutdown_kernels(lab)
        labtools.stop_lab(lab)
    return rows, brush_rows


def report(rows, brush_rows, reps):
    print(f"\nData change in the kernel -> redrawn view (headless chromium, medians of up to {reps})")
    print(f"{'view':32} {'N':>9} {'total ms':>9} {'JS draw ms':>10} {'kernel ms':>9} {'mode':>8} {'goal ms':>8}")
    by_n = {}
    for label, n, runs, kernel_ms, mode in rows:
        total = statistics.median(r["total"] for r in runs)
        draw = statistics.median(r["drawMs"] for r in runs) if runs[0]["drawMs"] == runs[0]["drawMs"] else None
        by_n.setdefault(n, {})[label] = total
        goal = GOALS_MS[n] if label.startswith("SampleScatter (") else None
        print(f"{label:32} {n:>9,} {fmt(total):>9} {fmt(draw):>10} {fmt(kernel_ms):>9} {mode:>8} {fmt(goal):>8}")
        if len(runs) > 1:
            print(f"{'':32} {'':>9} runs: {', '.join(fmt(r['total']) for r in runs)}")
    print("\nRatio bqplot SVG / SampleScatter (same N, same run):")
    for n, d in by_n.items():
        if "bqplot Scatter (SVG)" in d:
            ratio = d["bqplot Scatter (SVG)"] / d["SampleScatter (canvas)"]
            print(f"  N = {n:>9,}: {ratio:6.1f} x")
        else:
            print(f"  N = {n:>9,}: bqplot not run (1e6 SVG nodes are impractical; capped at {BQPLOT_MAX:,})")
    if brush_rows:
        print(f"\nBox selection over {BRUSH_N:,} stars -> boolean mask in Python (goal < {BRUSH_GOAL_MS} ms)")
        print(f"{'selected':>9} {'JS hit-test ms':>14} {'release->mask ms':>17} {'round trip ms':>14}")
        for b in brush_rows:
            print(f"{b['selected']:>9,} {fmt(b['hit_ms']):>14} {fmt(b['one_way']):>17} {fmt(b['round_trip']):>14}")
        print(
            f"median release->mask: {fmt(statistics.median(b['one_way'] for b in brush_rows))} ms, "
            f"round trip: {fmt(statistics.median(b['round_trip'] for b in brush_rows))} ms"
        )


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--reps", type=int, default=3)
    parser.add_argument(
        "--skip-bqplot-1e5", action="store_true", help="skip bqplot at 1e5 points (takes ~10-25 s per repetition)"
    )
    args = parser.parse_args(argv)
    t = time.monotonic()
    rows, brush_rows = run(args.reps, not args.skip_bqplot_1e5)
    report(rows, brush_rows, args.reps)
    print(f"\n(total benchmark time {time.monotonic() - t:.0f} s)")


if __name__ == "__main__":
    main()
