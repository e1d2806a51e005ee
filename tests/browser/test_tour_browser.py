"""The tour notebook in JupyterLab: it runs, a frame slider moves, and the plots that depend on it redraw.

JupyterLab in headless chromium opens ``example_notebooks/01_tour.ipynb`` (copied into the lab's
folder) and runs all its cells. Then the R0 slider of the frame controls is moved one step at a time
with the keyboard (ArrowRight on its handle), and the test waits on DOM conditions, never on sleeps:

* the orbit, face-on: ``OrbitExplorer``'s ``GalaxyView`` (a canvas) drew a track with a new end
  point (its ``data-track-end``);
* the orbit, meridional: the track of the bqplot figure (its longest ``path.line``) has a new ``d``;
* the velocities: the *v_phi against R* view of ``VelocityPanel`` (a canvas ``SampleScatter``)
  drew with a new data range (``data-domain``), since R depends on R0;
* and the three analysis widgets' status lines went to *computing* and back to *ready* (for the Oort
  fit, whose A and B do not depend on R0, that is what changes: V0 = R0 (A - B) in its table).

The time from the ``keydown`` event to each of these is measured inside the page with
``performance.now()`` and a ``MutationObserver`` (median over a few moves), printed (``pytest -s``)
and written to ``test-output/browser/tour_timing.json``; screenshots before and after are saved in
``test-output/browser/``. Nothing here asserts on a time: the figures are reported, not gated.

Finally a large change typed into the R0 box is checked from the kernel's side: the shared frame
state and every widget's latest result carry the new R0.

A second test opens the tour and touches nothing: the kernel's frame, potential and fit settings must
still be exactly what the notebook set (a front end that echoes rounded values back would edit them).
"""

from __future__ import annotations

import json
import platform
import statistics
import time

import labtools
import pytest

pytestmark = pytest.mark.browser

TOUR = "example_notebooks/01_tour.ipynb"
N_MOVES = 5
R0_STEP_KPC = 0.001  # the R0 slider's step (FrameControls)
R0_TYPED_KPC = 7.6  # typed into the R0 box at the end, for a visible "after" screenshot
TIMING_FILE = labtools.OUTPUT_DIR / "tour_timing.json"

#: The plots watched, with what "redrawn" means for each.
PLOTS = {
    "face_on": "OrbitExplorer face-on view (GalaxyView canvas): first draw of the final track end point",
    "meridional": "OrbitExplorer meridional view (bqplot SVG): first time the track's path d was final",
    "v_phi_R": "VelocityPanel 'v_phi against R' view (SampleScatter canvas): first draw with the final data range",
}

# Locates the parts of the page the test watches; each is null until it exists.
_FIND_JS = """
const q = (sel) => document.querySelector(sel);
const orbitStatus = q('.tour-orbit .mwkin-status');
const oortStatus = q('.tour-oort .mwkin-status');
const velocityStatus = q('.tour-velocities .mwkin-status');
const faceOn = q('.tour-orbit .mwkin-face-on');          // GalaxyView: a canvas, draws write its dataset
const meridional = q('.tour-orbit .mwkin-meridional');   // bqplot figure: SVG paths
const rotationView = (() => {
  // The VelocityPanel view titled "v_phi against R"; its canvas element carries the dataset.
  for (const box of document.querySelectorAll('.tour-velocities .mwkin-sample-view')) {
    if (box.textContent.includes('v_phi against R')) return box.querySelector('[data-draw-count]');
  }
  return null;
})();
const meridionalTrack = () => {
  // The orbit is the longest line of the meridional view (the cloud and backward lines are empty).
  let best = null;
  for (const p of meridional ? meridional.querySelectorAll('path.line') : []) {
    const d = p.getAttribute('d') || '';
    if (d !== 'null' && (best === null || d.length > best.length)) best = d;
  }
  return best;
};
const drawCount = (el) => Number((el && el.dataset.drawCount) || 0);
const statusState = (el) => {
  const span = el && el.querySelector('span[class^="mwkin-status-"]');
  return span ? span.className.replace('mwkin-status-', '') : null;
};
"""

# True once everything the tour shows has been drawn and no widget is computing.
_READY_JS = (
    "() => {"
    + _FIND_JS
    + """
  const views = Array.from(document.querySelectorAll('.tour-velocities [data-draw-count]'));
  return !!(meridionalTrack() && drawCount(faceOn) > 0 && faceOn.dataset.trackEnd !== '[]'
            && views.length === 3 && views.every(v => drawCount(v) > 0)
            && statusState(orbitStatus) === 'ready' && statusState(oortStatus) === 'ready'
            && statusState(velocityStatus) === 'ready');
}"""
)

# Arms the watchers for one key press; the outcome lands in window.__tourMove.
#
# Every change inside the three widgets is logged with its time. Once each widget's status line has
# gone to "busy" and back to "ready" (its result is in: the kernel sends the status after the plot
# data), three more animation frames let bqplot's zero-length transitions and the canvas draws run;
# then the plot as it is now is the final one, and the time of a redraw is the first logged change at
# which the plot equalled its final state. "busy" is looked for in the added nodes of the mutation
# records too, since a busy state and the next ready one can arrive in the same task.
_ARM_JS = (
    "() => {"
    + _FIND_JS
    + """
  const move = { t0: null, done: false, settled: false, ms: {}, changes: {} };
  const statuses = { orbit: orbitStatus, velocity: velocityStatus, oort: oortStatus };
  const phase = { orbit: 'wait', velocity: 'wait', oort: 'wait' };   // wait -> busy -> ready
  const readyAt = {};
  // What each plot looks like now, and the log of its changes: [time, state].
  const looks = {
    face_on: () => drawCount(faceOn) + ' ' + faceOn.dataset.trackEnd,
    meridional: () => meridionalTrack(),
    v_phi_R: () => drawCount(rotationView) + ' ' + rotationView.dataset.domain,
  };
  // The part of the state that must match the final one (a draw counter alone proves nothing).
  const content = { face_on: (s) => s.slice(s.indexOf(' ') + 1), meridional: (s) => s,
                    v_phi_R: (s) => s.slice(s.indexOf(' ') + 1) };
  const last = {}, log = {};
  for (const key of Object.keys(looks)) { last[key] = looks[key](); log[key] = []; }
  const addedBusy = (records, el) => records.some(r => el.contains(r.target) && Array.from(r.addedNodes)
      .some(n => n.nodeType === 1 && (n.matches('.mwkin-status-busy') || n.querySelector('.mwkin-status-busy'))));
  const settle = () => {
    let frames = 0;
    const tick = () => {
      if (++frames < 3) { requestAnimationFrame(tick); return; }
      for (const key of Object.keys(looks)) {
        const final = content[key](looks[key]());
        const first = log[key].find(([, state]) => content[key](state) === final);
        move.ms[key] = first ? first[0] - move.t0 : null;
        move.changes[key] = log[key].length;
      }
      move.ms.oort_status = readyAt.oort - move.t0;
      move.done = true;
      observer.disconnect();
    };
    requestAnimationFrame(tick);
  };
  const check = (records) => {
    if (move.t0 === null || move.done) return;
    const now = performance.now();
    for (const key of Object.keys(looks)) {
      const state = looks[key]();
      if (state !== last[key]) { log[key].push([now, state]); last[key] = state; }
    }
    for (const [key, el] of Object.entries(statuses)) {
      if (phase[key] === 'wait' && (statusState(el) === 'busy' || addedBusy(records, el))) phase[key] = 'busy';
      if (phase[key] === 'busy' && statusState(el) === 'ready') { phase[key] = 'ready'; readyAt[key] = now; }
    }
    if (!move.settled && Object.values(phase).every(p => p === 'ready')) { move.settled = true; settle(); }
  };
  const observer = new MutationObserver(check);
  const options = { subtree: true, attributes: true, childList: true, characterData: true };
  for (const sel of ['.tour-orbit', '.tour-velocities', '.tour-oort']) observer.observe(q(sel), options);
  document.addEventListener('keydown', () => { move.t0 = performance.now(); }, { capture: true, once: true });
  window.__tourMove = move;
}"""
)

_MOVE_DONE_JS = "() => !!(window.__tourMove && window.__tourMove.done)"


def r0_shown(page):
    """R0 as the frame controls' text box shows it, kpc."""
    return float(page.locator(".tour-frame .mwkin-R0 input").input_value())


#: Parts of the tour saved as screenshots (each fits in the enlarged viewport).
SCREENSHOTS = {
    "frame": ".tour-frame",
    "orbit_face_on": ".tour-orbit .mwkin-face-on",
    "orbit_meridional": ".tour-orbit .mwkin-meridional",
    "orbit_parameters": ".tour-orbit .mwkin-orbit-parameters",
    "velocities": ".tour-velocities .mwkin-sample-view >> nth=0 >> xpath=..",
    "oort_table": ".tour-oort .mwkin-oort-table",
    "oort_mu_l": ".tour-oort .mwkin-sample-view >> nth=0 >> xpath=..",
}


def screenshots(page, suffix):
    """Save each part of :data:`SCREENSHOTS` as ``test-output/browser/tour_<part>_<suffix>.png``."""
    for name, selector in SCREENSHOTS.items():
        labtools.screenshot(page.locator(selector).first, f"tour_{name}_{suffix}")


def finished_move(page, timeout_ms):
    """Wait until the armed move settled; returns its record (``ms``: time to each redraw)."""
    page.wait_for_function(_MOVE_DONE_JS, timeout=timeout_ms)
    move = page.evaluate("() => window.__tourMove")
    for key in PLOTS:
        assert move["ms"][key] is not None and move["changes"][key] > 0, f"{key} was not redrawn: {move}"
    return move


def move_r0_once(page, timeout_ms=120_000):
    """One ArrowRight on the R0 slider; returns the in-page record of the three redraws."""
    page.evaluate(_ARM_JS)
    handle = page.locator(".tour-frame .mwkin-R0 .noUi-handle")
    handle.focus()
    page.keyboard.press("ArrowRight")
    return finished_move(page, timeout_ms)


def open_tour(lab, page, timeout_ms=300_000):
    """Copy the tour into the lab, run it, wait until every plot is drawn; returns seconds taken."""
    name = labtools.copy_notebook(lab, TOUR)
    start = time.perf_counter()
    labtools.open_and_run(page, lab, name, timeout_ms=timeout_ms)
    page.wait_for_function(_READY_JS, timeout=timeout_ms)
    return time.perf_counter() - start


def summarise(moves, first_render_s):
    """The timing record written to tour_timing.json."""
    keys = (*PLOTS, "oort_status")
    return {
        "what": (
            "keydown (ArrowRight on the R0 slider of the tour's FrameControls, one 0.001 kpc step) -> the "
            "DOM change that put each plot's final state on the page, ms, measured in the page with "
            "performance.now() and a MutationObserver"
        ),
        "plots": {**PLOTS, "oort_status": "OortFitter status line back to ready with the refit (a table)"},
        "moves": len(moves),
        "median_ms": {k: statistics.median(m["ms"][k] for m in moves) for k in keys},
        "each_ms": {k: [round(m["ms"][k], 1) for m in moves] for k in keys},
        "first_render_s": round(first_render_s, 2),
        "sample": "mwkin.demo.survey(n=20000, seed=1)",
        "machine": {"platform": platform.platform(), "processor": platform.processor() or platform.machine()},
    }


def test_tour_runs_and_the_r0_slider_redraws_its_plots(lab, page):
    page_errors: list[str] = []
    page.on("pageerror", lambda exc: page_errors.append(str(exc)))

    # Tall enough that each screenshot part fits on the page (the whole widgets are taller).
    page.set_viewport_size({"width": 1400, "height": 1600})
    first_render_s = open_tour(lab, page)

    # The notebook printed the fit beside the truth, and no cell raised (open_and_run checks that).
    text = labtools.cell_outputs_text(page)
    assert "(fit - truth) / error" in text, text[-2000:]
    assert "OortFitter: ready" in text and "OrbitExplorer: ready" in text, text[-2000:]
    screenshots(page, "before")

    r0_start = r0_shown(page)
    moves = []
    for i in range(N_MOVES):
        moves.append(move_r0_once(page))
        # The slider step reached the kernel and came back to the text box.
        page.wait_for_function(
            "(want) => Math.abs(Number(document.querySelector('.tour-frame .mwkin-R0 input').value) - want) < 1e-9",
            arg=r0_start + (i + 1) * R0_STEP_KPC,
        )
    r0_after_moves = r0_start + N_MOVES * R0_STEP_KPC
    kernel_r0 = float(labtools.execute_in_kernel(page, "print(repr(frame_state.R0))"))
    assert kernel_r0 == pytest.approx(r0_after_moves, abs=1e-9)

    record = summarise(moves, first_render_s)
    TIMING_FILE.parent.mkdir(parents=True, exist_ok=True)
    TIMING_FILE.write_text(json.dumps(record, indent=2))
    print()
    print(f"tour: first render {first_render_s:.1f} s (open, run all cells, every plot drawn)")
    for key, label in (
        ("face_on", "orbit face-on (canvas)"),
        ("meridional", "orbit meridional (SVG)"),
        ("v_phi_R", "v_phi-R view (canvas)"),
        ("oort_status", "Oort fit status ready"),
    ):
        print(
            f"R0 slider key press -> {label:>23}: median {record['median_ms'][key]:6.0f} ms over "
            f"{N_MOVES} moves; each {record['each_ms'][key]}"
        )
    print(f"written to {TIMING_FILE}")

    # A large change typed into the R0 box: visible in the screenshots, and checked in the kernel.
    page.evaluate(_ARM_JS)
    box = page.locator(".tour-frame .mwkin-R0 input")
    box.fill(f"{R0_TYPED_KPC}")
    box.press("Enter")  # the keydown of Enter starts the clock of this move
    typed = finished_move(page, 120_000)
    page.wait_for_function(_READY_JS, timeout=120_000)
    print(
        f"R0 typed ({R0_TYPED_KPC} kpc), Enter -> "
        + ", ".join(f"{key} {value:.0f} ms" for key, value in typed["ms"].items())
    )
    screenshots(page, "after")
    seen = json.loads(
        labtools.execute_in_kernel(
            page,
            (
                "import json\n"
                "print(json.dumps({'state': frame_state.R0, 'orbit': orbit.view.frame.R0,\n"
                "                  'velocities': velocities.result.meta['frame']['R0_kpc'],\n"
                "                  'oort': oort.result.frame.R0}))"
            ),
        )
    )
    assert seen == pytest.approx(
        {"state": R0_TYPED_KPC, "orbit": R0_TYPED_KPC, "velocities": R0_TYPED_KPC, "oort": R0_TYPED_KPC}
    ), seen

    assert page_errors == [], page_errors


def _differences(want, got, path=""):
    """Paths at which two JSON-like values differ, with both values."""
    if isinstance(want, dict) and isinstance(got, dict):
        out = []
        for key in sorted(set(want) | set(got)):
            out += _differences(want.get(key), got.get(key), f"{path}.{key}" if path else str(key))
        return out
    if isinstance(want, (list, tuple)) and isinstance(got, (list, tuple)) and len(want) == len(got):
        return [d for i, (a, b) in enumerate(zip(want, got)) for d in _differences(a, b, f"{path}[{i}]")]
    return [] if want == got else [f"{path}: {want!r} -> {got!r}"]


def test_showing_the_tour_leaves_the_shared_state_as_the_notebook_set_it(lab, page):
    """Rendering the widgets must not edit the frame, the potential or the fit settings.

    The notebook makes ``FrameState()`` and ``PotentialState()`` (their defaults: the astropy v4.0
    frame, MWPotential2014) and an ``OortFitter`` over 0-0.5 kpc; nobody touches a control here, so
    the kernel must still hold exactly those values once the page has drawn everything. A slider
    whose front end snaps the value to its step and sends it back would change them.
    """
    from mwkin.widgets import FrameState, PotentialState

    open_tour(lab, page)
    got = json.loads(
        labtools.execute_in_kernel(
            page,
            (
                "import json\n"
                "print(json.dumps({'frame': frame_state.config, 'potential': potential_state.config,\n"
                "                  'oort_distance_range': oort.config['distance_range']}))"
            ),
        )
    )
    want = {"frame": FrameState().config, "potential": PotentialState().config, "oort_distance_range": [0.0, 0.5]}
    changed = _differences(want, got)
    assert not changed, "showing the tour changed the shared state:\n  " + "\n  ".join(changed)


def test_a_preset_applied_from_code_wins_over_the_views_echoes(lab, page):
    """A value set from code must win over the echoes of the displayed controls.

    With the tour on screen (FrameControls showing the shared frame), the kernel applies another
    preset; once the views have settled, the shared frame must be exactly that preset, labelled with
    its name, not a mix of the new values and the old ones the sliders sent back.
    """
    from mwkin import SolarFrame

    open_tour(lab, page)
    name = "Schoenrich 2010 + GRAVITY 2019"
    labtools.execute_in_kernel(page, f"frame_state.apply_preset({name!r})")
    time.sleep(3.0)  # let every view receive the new values and send whatever it sends back
    labtools.wait_idle(page)
    got = json.loads(
        labtools.execute_in_kernel(
            page,
            "import json\nprint(json.dumps({'R0': frame_state.R0, 'z_sun': frame_state.z_sun, "
            "'v_sun': list(frame_state.v_sun), 'preset': frame_state.preset}))",
        )
    )
    # common practice (no source): the preset's own numbers, from the core's registry
    want = SolarFrame.preset(name)
    assert got["preset"] == name, got
    assert got["R0"] == want.R0 and got["z_sun"] == want.z_sun, got
    assert got["v_sun"] == list(want.v_sun), got


def test_a_preset_applied_right_after_the_controls_are_shown_wins(lab, page):
    """The same while the controls are still being drawn (as in the shared-analysis notebook).

    One cell shows FrameControls, the next applies a preset at once, before the views have
    finished rendering; whatever the views send back while they render must not undo the preset.
    """
    from mwkin import SolarFrame

    name = "Schoenrich 2010 + GRAVITY 2019"
    nb = labtools.write_notebook(
        lab,
        "preset_from_code",
        [
            "from mwkin.widgets import FrameControls, FrameState\nframe_state = FrameState()\n"
            "controls = FrameControls(frame_state)\ncontrols",
            f"frame_state.apply_preset({name!r})",
        ],
    )
    labtools.open_and_run(page, lab, nb)
    time.sleep(3.0)  # let the views settle and send back whatever they send
    labtools.wait_idle(page)
    got = json.loads(
        labtools.execute_in_kernel(
            page,
            "import json\nprint(json.dumps({'R0': frame_state.R0, 'z_sun': frame_state.z_sun, "
            "'v_sun': list(frame_state.v_sun), 'preset': frame_state.preset}))",
        )
    )
    # common practice (no source): the preset's own numbers, from the core's registry
    want = SolarFrame.preset(name)
    assert got == {"R0": want.R0, "z_sun": want.z_sun, "v_sun": list(want.v_sun), "preset": name}, got
