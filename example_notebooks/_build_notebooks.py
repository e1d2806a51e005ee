"""Write the example notebooks of this folder from the cell sources below.

The notebooks are generated so that they stay reviewable: a change to a notebook is a change to this
file, and the ``.ipynb`` files hold no outputs, no execution counts and stable cell ids, so rebuilding
them without a change to the sources gives byte-identical files.

Usage (from the repository's top folder)::

    .venv/bin/python example_notebooks/_build_notebooks.py          # (re)write every notebook
    .venv/bin/python example_notebooks/_build_notebooks.py --check  # exit 1 if a notebook is stale

Every notebook runs on the synthetic demo survey made by :func:`mwkin.demo.survey` (nothing is
downloaded) and writes files only into its working folder (``output/`` below it).
``tests/notebooks/test_example_notebooks.py`` runs each one headless.
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import textwrap

import nbformat

HERE = pathlib.Path(__file__).resolve().parent

KERNELSPEC = {"name": "python3", "display_name": "Python 3", "language": "python"}
LANGUAGE_INFO = {"name": "python"}


def md(text):
    """A markdown cell (the text is dedented and stripped)."""
    return ("markdown", textwrap.dedent(text).strip("\n"))


def code(*parts):
    """A code cell from one or more pieces of source, each dedented, joined by a blank line."""
    return ("code", "\n\n".join(textwrap.dedent(part).strip("\n") for part in parts))


# Printed beside every fit: the demo survey's truth. Shared by the notebooks that compare with it.
TRUTH_HELPER = '''
def show_truth(sample):
    """Print the model the demo survey was drawn from (kept in sample.meta["truth"])."""
    truth = sample.meta["truth"]
    print(f"  mean flow {truth['rotation_curve']}: v0 = {truth['v0_kms']} km/s, beta = {truth['beta']}, "
          f"R_sun = {truth['R_sun_kpc']:.3f} kpc")
    print(f"  A = {truth['A_kms_kpc']:.2f}, B = {truth['B_kms_kpc']:.2f}, C = {truth['C_kms_kpc']:.2f}, "
          f"K = {truth['K_kms_kpc']:.2f} km/s/kpc")
    sun = truth["solar_motion_kms"]
    print(f"  solar motion relative to the stars' mean flow (U, V, W) = "
          f"({sun['U']:.2f}, {sun['V']:.2f}, {sun['W']:.2f}) km/s")
    dispersion = truth["dispersions_kms"]
    print(f"  dispersions (sigma_R, sigma_phi, sigma_z) = ({dispersion['sigma_R']}, "
          f"{dispersion['sigma_phi']}, {dispersion['sigma_z']}) km/s")
'''

# =====================================================================================================
# 01: the tour
# =====================================================================================================
TOUR = [
    md("""
    # A tour of mwkin: solar frame → space velocities → orbits → Oort constants

    This notebook follows one analysis of a stellar survey from start to finish: the assumptions about
    the Sun, the conversion of the measurements into Galactocentric positions and velocities, the orbit
    of one star, and a fit of the local velocity field (the Oort constants and the solar motion).

    All the widgets below share **one solar frame** and **one potential**. Change R0 or the solar
    velocity in the frame controls and every plot below follows: the velocity diagrams, the orbit and
    the Oort fit.

    The stars are a **synthetic survey** that mwkin makes itself (`mwkin.demo.survey`): stars drawn
    from a disc model whose mean rotation, velocity dispersions and solar motion are known, turned into
    sky positions, parallaxes, proper motions and radial velocities with survey-like, correlated errors.
    Nothing is downloaded. Because the true model is stored with the sample (`sample.meta["truth"]`),
    each step can be checked against it: you see where a method recovers the truth and where it does
    not.

    Run the cells from top to bottom. Widgets compute in the background; each has a status line that
    says *computing...*, *ready* (with a one-line summary) or the error.
    """),
    code("""
    import numpy as np
    import mwkin as mk
    from mwkin.widgets import (FrameState, PotentialState, FrameControls, PotentialControls,
                               OrbitExplorer, VelocityPanel, OortFitter)
    """),
    md("""
    ## The sample

    20,000 stars keep the plots quick to draw in the browser; `mk.demo.survey` is deterministic, so
    the same `seed` always gives the same stars. The columns are named as in the Gaia archive (`ra`,
    `dec`, `parallax`, `pmra`, `pmdec`, `radial_velocity`, their `*_error` columns and the ten
    correlation coefficients). As in a real magnitude-limited survey, only the brighter stars (30 %)
    have a radial velocity, and the parallaxes of the faint, distant stars are noisy.
    """),
    code(
        TRUTH_HELPER,
        """
    sample = mk.demo.survey(n=20000, seed=1)
    print(len(sample), "stars; columns:", ", ".join(sample.colnames))
    print(sample.meta["description"])
    print("The model the stars were drawn from:")
    show_truth(sample)
    """,
    ),
    md("""
    ## 1. The solar frame

    Turning heliocentric measurements into Galactocentric coordinates needs three things about the
    Sun: its distance from the Galactic centre **R0**, its height **z_sun** above the mid-plane, and
    its velocity **v_sun** with respect to the centre. None of them is known exactly, and published
    analyses use different values; the preset menu lists a few sets, each with its citation. The
    velocity can be typed as Galactocentric Cartesian components or, as it is often quoted, as the
    circular velocity of the local standard of rest vc plus the Sun's peculiar motion (U, V, W).

    The last line of the controls is a consistency check: the reflex proper motion of the Galactic
    centre that the chosen R0 and v_sun imply, against the measured proper motion of Sgr A*. The ratio
    v_sun,y / R0 is measured far better than either number alone, so a frame that misses this line by
    many standard deviations combines an R0 and a v_sun that do not belong together.

    `FrameState` is the single source of truth; every widget below is handed the same object.
    """),
    code("""
    frame_state = FrameState()            # the solar frame every widget below uses
    potential_state = PotentialState()    # the Galactic potential (orbits, and the Oort comparison)
    frame_controls = FrameControls(frame_state)
    frame_controls.add_class("tour-frame")
    frame_controls
    """),
    md("""
    ## 2. Space velocities, in code

    `mk.to_galactocentric` converts the whole table with the current frame. It never drops a row: a star
    without a usable distance or without a radial velocity keeps its row, with NaN where a value cannot
    be computed and a `flag` that says why.

    **Caveat: distances from parallaxes.** By default the distance is 1/parallax, and only for stars
    whose parallax is at least 5 times its error. The inverse of a noisy parallax is a biased, skewed
    estimate of the distance: a parallax scattered low lengthens the distance more than one scattered
    high shortens it, so at a signal-to-noise of a few the distances grow a long tail toward large
    values, and the tangential velocities (proportional to the distance) inherit it. A cut on the
    *observed* parallax/error adds a second bias: among the stars that pass it, those whose parallax
    happened to scatter upward are over-represented, which pulls 1/parallax toward smaller distances.
    Lowering the cut gains stars but fills the tails of the velocity distribution with spurious fast
    stars; keeping it favours nearby, well-measured stars. Either way the choice is recorded in each
    result. The second cell below measures both effects on this survey, whose noise-free twin
    (`noise=False`: the same stars with exact observables) gives the true distances.
    """),
    code("""
    gc = mk.to_galactocentric(sample, frame=frame_state.frame)
    print(f"{gc.meta['n_input']} stars in, {gc.meta['n_position']} with positions, "
          f"{gc.meta['n_velocity']} with full space velocities")
    for reason, count in gc.meta["dropped"].items():
        if count:
            print(f"  {count:6d} without: {reason.replace('_', ' ')}")
    ok = np.asarray(gc["has_velocity"])
    v_phi = gc["v_phi"].to_value("km/s")[ok]
    print(f"v_phi (positive in the sense of rotation): median {np.median(v_phi):.1f} km/s, "
          f"16-84 % {np.percentile(v_phi, 16):.1f} to {np.percentile(v_phi, 84):.1f} km/s")
    """),
    code("""
    exact = mk.demo.survey(n=20000, seed=1, noise=False)       # the same stars without noise
    true_distance = 1.0 / exact["parallax"].to_value("mas")
    parallax = sample["parallax"].to_value("mas")
    parallax_snr = parallax / sample["parallax_error"].to_value("mas")
    has_rv = np.isfinite(sample["radial_velocity"].to_value("km/s"))
    print("(1/parallax) / true distance, by parallax/error")
    print(f"{'parallax/error':>14} {'stars':>7} {'median':>8} {'mean':>8}")
    for lo, hi in ((20, np.inf), (10, 20), (5, 10), (3, 5), (1, 3)):
        pick = (parallax_snr >= lo) & (parallax_snr < hi)
        ratio = (1.0 / parallax[pick]) / true_distance[pick]
        print(f"{lo:>5g} to {hi:<5g} {pick.sum():7d} {np.median(ratio):8.3f} {np.mean(ratio):8.3f}")
    print(f"lowest parallax/error among the stars with a radial velocity: {parallax_snr[has_rv].min():.1f}")
    """),
    md("""
    In this survey the stars with radial velocities are the bright ones, all with precise parallaxes,
    so the full space velocities below are safe from the bias; in a survey whose radial velocities
    reach fainter stars, the cut matters for them too.

    ## 3. The same conversion, live: `VelocityPanel`

    Three views of the whole sample: the **Toomre diagram** (speed relative to circular motion against
    v_phi; disc stars gather near the local standard of rest, a non-rotating halo would sit near
    v_phi = 0), the **U-V plane** (heliocentric velocities relative to the Sun) and **v_phi against R**.
    A box or lasso selection in any view is highlighted in the others and available from Python as
    `velocities.selection`, a boolean mask over the rows of `sample`.

    Move R0 in the frame controls above: R and v_phi shift, while the U-V plane does not move at all,
    because U and V are velocities relative to the Sun and do not depend on the frame.
    """),
    code("""
    velocities = VelocityPanel(sample, frame=frame_state, potential=potential_state)
    velocities.add_class("tour-velocities")
    velocities
    """),
    md("""
    ## 4. Orbits

    An orbit needs a Galactic potential as well as the frame. The controls below choose a published
    mass model or an adjustable bulge + disc + halo, and draw its rotation curve with the circular
    velocity that the frame implies at the Sun marked on it.

    **Caveat: the frame and the potential must agree on the circular velocity.** The default frame has
    v_sun,y = 245.6 km/s; with the Sun moving 12.24 km/s faster than the local standard of rest, it
    implies vc(R0) ≈ 233 km/s, while MWPotential2014 has vc ≈ 220 km/s there. Used together as they
    are, a star that the frame puts on a circular orbit (v_phi ≈ 233 km/s at the Sun) moves ~13 km/s
    faster than circular in the potential and comes out on an eccentric orbit that swings outward.
    Which of the two is right is a question about the Galaxy, not about the code, but they must be
    made to agree, or the difference must be known. The read-out under the rotation curve gives it;
    *match the frame's circular velocity* rescales the potential so that the two agree.
    """),
    code("""
    potential_controls = PotentialControls(potential_state, frame_state)
    potential_controls
    """),
    md("""
    `OrbitExplorer` takes one row of the sample: here the first star with a parallax better than 5 %
    and a radial velocity, so that its orbit is well determined. The face-on view is seen from the north
    Galactic pole, with the Sun, the centre and the sense of rotation marked; the meridional view shows
    z against R. Tick *show orbits from the uncertainties* to add orbits of stars drawn from the
    measurement errors.
    """),
    code("""
    row = int(np.flatnonzero(has_rv & (parallax_snr > 20))[0])
    orbit = OrbitExplorer(frame=frame_state, potential=potential_state, stars=sample, row=row,
                          t_forward=1.0)
    orbit.add_class("tour-orbit")
    orbit
    """),
    md("""
    ## 5. Oort constants

    `OortFitter` fits the local, first-order velocity field (the Oort constants A, B, C, K) together
    with the solar motion (U, V, W) to the proper motions and, where present, radial velocities of the
    stars within a distance range, here 0 to 0.5 kpc. Beside the fitted values it shows what the current
    potential implies at R0.

    **Caveat: the first-order formulas hold only near the Sun.** They expand the mean velocity field
    to first order in d / R0. A few hundred pc from the Sun the neglected terms are far below the
    errors; further out they grow, and A and B then change with the distance range for that reason
    alone. The panel of fits in distance bins is the test: where the bins disagree beyond their
    errors, the model, not the data, has stopped holding. (This synthetic disc is smooth, so here the
    drift stays small out to 1.5 kpc; the real Galaxy's velocity field is lumpier.)

    The potential's A and B are those of the potential as it is, so they carry the vc mismatch of
    section 4 (A - B = vc / R0 at the Sun).
    """),
    code("""
    oort = OortFitter(sample, frame=frame_state, potential=potential_state, distance_range=(0.0, 0.5))
    oort.add_class("tour-oort")
    oort
    """),
    md("""
    ## 6. The fit beside the truth

    The widgets computed in the background; `wait()` blocks until they are done (scripts and tests use
    it; interactively you would watch the status lines). The errors are the fit's 1-sigma errors: most
    differences from the truth should be within one or two of them. Other seeds of the survey show how
    they scatter.
    """),
    code("""
    for widget in (velocities, orbit, oort):
        widget.wait(300)
        print(f"{type(widget).__name__:>13}: {widget.status}")

    fit = oort.result
    truth = sample.meta["truth"]
    true_values = {"A": truth["A_kms_kpc"], "B": truth["B_kms_kpc"], "C": truth["C_kms_kpc"],
                   "K": truth["K_kms_kpc"], **truth["solar_motion_kms"]}
    fitted = dict(zip(("A", "B", "C", "K"), (fit.A, fit.B, fit.C, fit.K)))
    fitted.update(zip(("U", "V", "W"), fit.solar_motion))
    print()
    print(f"{fit.n_used} stars within {fit.distance_range[0]:g}-{fit.distance_range[1]:g} kpc")
    print(f"{'':>3} {'fit':>16} {'truth':>8} {'(fit - truth) / error':>23}")
    for key, value in fitted.items():
        error = fit.errors[key]
        print(f"{key:>3} {value:8.2f} ± {error:5.2f} {true_values[key]:8.2f} "
              f"{(value - true_values[key]) / error:23.1f}")
    print("(A, B, C, K in km/s/kpc; U, V, W in km/s, the Sun relative to the stars' mean flow)")
    """),
    md("""
    ## Things to try

    * Move **R0** by a few hundred pc: the v_phi-R diagram slides and the orbit changes shape, while
      the fitted A and B stay where they are: they describe the velocity field around the Sun and need
      only the directions, distances and motions of the stars. V0 = R0 (A - B) moves with R0.
    * Tick **match the frame's circular velocity** under the rotation curve and compare the orbit's
      apocentre and eccentricity with and without it.
    * In the Oort fitter, move the **distance range** out to 1-3 kpc and watch A, B and their errors;
      the distance-bin panel shows the same bin by bin.
    * Type a different **R0** and watch the reflex-motion line of the frame controls: the distance
      between R0 and the Sgr A* constraint grows in standard deviations.
    """),
]

# =====================================================================================================
# 02: OrbitExplorer
# =====================================================================================================
ORBIT = [
    md("""
    # `OrbitExplorer`: the orbit of one star, live in the shared frame and potential

    The star can come from a **row of a table**, from typed **observables** (ra, dec, parallax or
    distance, proper motions, radial velocity, with their errors) or from typed Galactocentric
    **phase space** (x, y, z, vx, vy, vz). The orbit is integrated forward and backward in time in the
    shared potential, drawn face-on and in the meridional plane, and summarised by its pericentre,
    apocentre, maximum height, eccentricity, energy and angular momentum. Every widget here exposes the
    same things: `.status`, `.result`, `.config`, `code()` and `export_figure()`.
    """),
    code("""
    import json
    import pathlib

    import numpy as np
    import mwkin as mk
    from mwkin.widgets import FrameState, PotentialState, PotentialControls, OrbitExplorer

    output = pathlib.Path("output")      # everything this notebook writes goes here
    output.mkdir(exist_ok=True)
    sample = mk.demo.survey(n=2000, seed=2)
    frame_state, potential_state = FrameState(), PotentialState()
    """),
    md("""
    ## A star from the sample

    The controls on the left choose the star and the integration time (forward and backward, Gyr)
    and the number of output points. Here: the first star of the sample with a 5 % parallax and a
    radial velocity, integrated 2 Gyr forward and 1 Gyr backward.
    """),
    code("""
    parallax_snr = np.asarray(sample["parallax"] / sample["parallax_error"], dtype=float)
    has_rv = np.isfinite(np.asarray(sample["radial_velocity"], dtype=float))
    row = int(np.flatnonzero(has_rv & (parallax_snr > 20))[0])
    orbit = OrbitExplorer(frame=frame_state, potential=potential_state, stars=sample, row=row,
                          t_forward=2.0, t_backward=1.0)
    orbit
    """),
    md("""
    ## `.status` and `.result`

    `.status` is the status line's text. `.result` is the core result, an `OrbitSet` (the forward
    integration), the same object `mk.integrate_orbits` returns; `orbital_parameters()` combines the
    backward and forward parts.
    """),
    code("""
    orbit.wait()
    print("status:", orbit.status)
    orbits = orbit.result
    print(type(orbits).__name__, "with", len(orbits.t), "output times from", orbits.t[0], "to", orbits.t[-1])
    for key, value in orbit.orbital_parameters().items():
        print(f"  {key:>12}: {value:.4g}")
    """),
    md("""
    ## Copy as code

    `code()` (the *Copy as code* button) gives a short script that reproduces the result with the core
    API only: the frame, the potential, the star and the calls. Running it here gives the same orbit.
    """),
    code("""
    snippet = orbit.code()
    print(snippet)
    namespace = {}
    exec(snippet, namespace)
    assert np.allclose(namespace["orbits"].rapo, orbit.result.rapo, rtol=1e-10)
    assert np.allclose(namespace["orbits"].zmax, orbit.result.zmax, rtol=1e-10)
    print("the snippet reproduces the widget's orbit")
    """),
    md("""
    ## The frame and the potential must agree on the circular velocity

    The rotation curve below marks the circular velocity the frame implies at the Sun (v_sun,y minus
    the Sun's motion relative to the local standard of rest) against the potential's own. With the
    defaults they differ by ~13 km/s (233 against 220 km/s). The star's Galactocentric velocity comes
    from the frame, but whether that velocity is faster or slower than circular, and so how eccentric
    the orbit is, depends on the potential's circular velocity. Rescaling the potential so that the two
    agree changes the orbit, as the numbers show; which of the two circular velocities is right is a
    question about the Galaxy, but using both at once without noticing is a mistake.
    """),
    code("""
    potential_controls = PotentialControls(potential_state, frame_state)
    potential_controls
    """),
    code("""
    as_is = orbit.orbital_parameters()
    potential_state.match_frame_vc = True      # the same as ticking the box under the rotation curve
    orbit.wait()
    matched = orbit.orbital_parameters()
    print(f"{'':>12}  {'potential as is':>16}  {'matched to frame':>16}")
    for key in ("rperi", "rapo", "zmax", "eccentricity"):
        print(f"{key:>12}  {as_is[key]:16.3f}  {matched[key]:16.3f}")
    potential_state.match_frame_vc = False
    """),
    md("""
    ## A poorly measured star: the orbit cloud

    A typed star about 4 kpc away whose parallax is only ~4 times its error. The read-out warns that
    1/parallax is a biased distance at this signal-to-noise; the cloud draws stars from the measurement
    uncertainties and integrates each, which shows how little the orbit is really constrained.

    **Caveat:** the cloud is drawn from the *linear* (first-order) covariance of the Galactocentric
    position and velocity. At low parallax signal-to-noise the true distance distribution is skewed
    toward large distances, so the cloud is too symmetric and understates the far side.
    """),
    code("""
    faint = OrbitExplorer(frame=frame_state, potential=potential_state, n_cloud=30, star={
        "ra": 266.0, "dec": -20.0, "parallax": 0.25, "parallax_error": 0.06,
        "pmra": -3.0, "pmdec": -5.0, "pmra_error": 0.05, "pmdec_error": 0.05,
        "radial_velocity": 40.0, "radial_velocity_error": 2.0})
    faint.cloud_toggle.value = True
    faint
    """),
    code("""
    faint.wait(300)
    print("status:", faint.status)
    cloud = faint.view.cloud
    for key in ("rperi", "rapo", "zmax"):
        values = getattr(cloud, key).to_value("kpc")      # OrbitSet parameters are Quantities
        lo, mid, hi = np.nanpercentile(values, [16, 50, 84])
        print(f"{key:>6}: {mid:.2f} kpc, 16-84% of the cloud {lo:.2f} - {hi:.2f} kpc")
    """),
    md("""
    ## Figures and config

    `export_figure` draws the current plots with matplotlib (PNG or SVG by the suffix), so a figure can
    be made without a browser. `.config` is a JSON-able dict of everything needed to rebuild the widget;
    a table itself is not stored, only the row's values (pass `stars=` again to use the table).
    """),
    code("""
    for suffix in ("png", "svg"):
        path = orbit.export_figure(output / f"orbit.{suffix}")
        print(path, path.stat().st_size, "bytes")
    config = orbit.config
    print("config keys:", ", ".join(config))
    print("frame:", config["frame"])
    print("star:", json.dumps({k: v for k, v in config["star"].items() if k != "row_values"}, indent=1))
    """),
    code("""
    from IPython.display import Image
    Image(filename=str(output / "orbit.png"), width=700)
    """),
]

# =====================================================================================================
# 03: VelocityPanel
# =====================================================================================================
VELOCITY = [
    md("""
    # `VelocityPanel`: the space velocities of a sample under the shared frame

    The panel converts a whole sample with `mk.to_galactocentric` every time the frame or one of its
    settings changes, off the kernel's main thread, and shows three diagrams: the Toomre diagram, the
    U-V plane and v_phi against R. It says how many stars had no usable distance or velocity and why,
    and a selection made with the mouse (box or lasso) is available from Python as a boolean mask over
    the input rows. The sample can also be a file uploaded in the widget.
    """),
    code("""
    import json
    import pathlib

    import numpy as np
    import mwkin as mk
    from mwkin.widgets import FrameState, VelocityPanel

    output = pathlib.Path("output")
    output.mkdir(exist_ok=True)
    sample = mk.demo.survey(n=20000, seed=3)
    frame_state = FrameState()
    """),
    code("""
    panel = VelocityPanel(sample, frame=frame_state)
    panel
    """),
    md("""
    ## `.status` and `.result`

    `.result` is the table `mk.to_galactocentric` returned: one row per input row, in input order, with
    NaN and a `flag` for the stars that lack what a column needs.
    """),
    code("""
    panel.wait(300)
    print("status:", panel.status)
    out = panel.result
    print(len(out), "rows;", out.meta["n_velocity"], "with full space velocities")
    for reason, count in out.meta["dropped"].items():
        if count:
            print(f"  {count:6d} without: {reason}")
    print(out["R", "phi", "z", "v_R", "v_phi", "v_z", "flag"][:5])
    """),
    md("""
    ## Caveat: 1/parallax at low signal-to-noise

    The default distance is 1/parallax for stars with parallax/error ≥ 5 (the *min parallax/error*
    box). Lowering the cut keeps more stars, but the ones it adds have the least certain distances, and
    since tangential velocities scale with the distance, a distance overestimated by half makes the
    tangential velocity relative to the Sun half as large again. The survey's noise-free twin (the
    same stars with exact observables, `noise=False`) shows how 1/parallax compares with the true
    distance in bins of the *observed* signal-to-noise. Two biases meet there: the inverse of a noisy
    parallax has a long tail toward large distances, while selecting on the observed parallax/error
    favours parallaxes that scattered upward (too small a distance); which one wins depends on the
    bin, and both grow as the signal-to-noise drops.
    """),
    code("""
    exact = mk.demo.survey(n=20000, seed=3, noise=False)
    true_distance = 1.0 / exact["parallax"].to_value("mas")
    parallax = sample["parallax"].to_value("mas")
    parallax_snr = parallax / sample["parallax_error"].to_value("mas")
    print("(1/parallax) / true distance, by parallax/error")
    print(f"{'parallax/error':>14} {'stars':>7} {'median':>8} {'mean':>8}")
    for lo, hi in ((20, np.inf), (10, 20), (5, 10), (3, 5), (1, 3)):
        pick = (parallax_snr >= lo) & (parallax_snr < hi)
        ratio = (1.0 / parallax[pick]) / true_distance[pick]
        print(f"{lo:>5g} to {hi:<5g} {pick.sum():7d} {np.median(ratio):8.3f} {np.mean(ratio):8.3f}")
    """),
    md("""
    The panel draws the stars with full space velocities, which need a radial velocity. In this survey
    those are the brightest stars, all with precise parallaxes, so lowering the cut adds positions but
    no velocities here; in a survey whose radial velocities reach fainter stars it would add exactly
    the stars of the last rows above.
    """),
    code("""
    has_rv = np.isfinite(sample["radial_velocity"].to_value("km/s"))
    print(f"lowest parallax/error among the stars with a radial velocity: {parallax_snr[has_rv].min():.1f}")
    counts = {}
    for cut in (5.0, 0.0):
        panel.distance_controls.min_snr.value = cut
        panel.wait(300)
        counts[cut] = (panel.result.meta["n_position"], panel.result.meta["n_velocity"])
        print(f"min parallax/error {cut:g}: {counts[cut][0]} stars with positions, "
              f"{counts[cut][1]} with full space velocities")
    panel.distance_controls.min_snr.value = 5.0      # back to the default cut
    panel.wait(300)
    assert counts[0.0][0] > counts[5.0][0]
    print("status:", panel.status)
    """),
    md("""
    ## Selections from Python and from the plots

    Assign a boolean mask (or row numbers) to `panel.selection` and the stars are highlighted in the
    three views; a selection drawn with the mouse comes back the same way. Here: the stars lagging the
    local standard of rest by more than 60 km/s, a crude way to pick out hot or thick-disc-like orbits.
    """),
    code("""
    v_lsr = frame_state.frame.lsr_circular_velocity()   # the local standard of rest (Sun 12.24 km/s ahead of it)
    v_phi = panel.result["v_phi"].to_value("km/s")
    panel.selection = np.nan_to_num(v_phi, nan=np.inf) < v_lsr - 60.0
    selected = sample[panel.selection]
    print(panel.n_selected, "stars selected;", len(selected), "rows of the input table")
    """),
    md("""
    ## Uncertainties

    With *errors = linear* each velocity gets its propagated standard deviation (`sigma_*` columns),
    from the full covariance of the astrometry and the radial velocity.
    """),
    code("""
    panel.errors_control.value = "linear"
    panel.wait(300)
    sigma = np.asarray(panel.result["sigma_v_phi"].value)
    print(f"sigma(v_phi): median {np.nanmedian(sigma):.2f} km/s, 90th percentile {np.nanpercentile(sigma, 90):.2f} km/s")
    """),
    md("""
    ## Copy as code, figures, config

    The snippet reads the sample from a variable named `sample` (a table in memory cannot be written
    into a script); running it reproduces the panel's result.
    """),
    code("""
    snippet = panel.code()
    print(snippet)
    namespace = {"sample": sample}
    exec(snippet, namespace)
    assert np.allclose(np.asarray(namespace["out"]["v_phi"].value), np.asarray(panel.result["v_phi"].value),
                       equal_nan=True, rtol=1e-12)
    assert np.allclose(np.asarray(namespace["out"]["sigma_v_phi"].value),
                       np.asarray(panel.result["sigma_v_phi"].value), equal_nan=True, rtol=1e-12)
    print("the snippet reproduces the panel's result")
    for suffix in ("png", "svg"):
        path = panel.export_figure(output / f"velocities.{suffix}")
        print(path, path.stat().st_size, "bytes")
    print(json.dumps(panel.config, indent=1))
    """),
    code("""
    from IPython.display import Image
    Image(filename=str(output / "velocities.png"), width=900)
    """),
]

# =====================================================================================================
# 04: OortFitter
# =====================================================================================================
OORT = [
    md("""
    # `OortFitter`: the Oort constants and the solar motion, fitted live

    The fitter models the mean motion of the stars near the Sun as a linear velocity field, described
    by the Oort constants A (shear), B (vorticity), C and K (the non-axisymmetric and expanding parts),
    plus the reflex of the Sun's own motion (U, V, W). It fits proper motions and, where present,
    radial velocities, with each star's measurement errors and a fitted velocity dispersion. It
    reruns on every change of its settings, of the frame or of the potential, and shows the data and
    the model against Galactic longitude, the residuals, a parameter table, the fits in distance bins
    and the values implied by the current potential.
    """),
    code(
        """
    import json
    import pathlib

    import numpy as np
    import mwkin as mk
    from mwkin.widgets import FrameState, PotentialState, OortFitter

    output = pathlib.Path("output")
    output.mkdir(exist_ok=True)
    sample = mk.demo.survey(n=20000, seed=4)
    frame_state, potential_state = FrameState(), PotentialState()
    """,
        TRUTH_HELPER,
    ),
    code("""
    fitter = OortFitter(sample, frame=frame_state, potential=potential_state, distance_range=(0.0, 0.5))
    fitter
    """),
    md("""
    ## `.status`, `.result` and the truth

    `.result` is an `OortFit`, the same object `mk.fit_oort` returns; `wait()` also waits for the fits in
    distance bins.
    """),
    code("""
    fitter.wait(300)
    print("status:", fitter.status)
    fit = fitter.result
    print(fit.summary())
    print()
    print("The model the survey was drawn from:")
    show_truth(sample)
    """),
    code("""
    fit.table()
    """),
    md("""
    ## Caveat: the first-order model far from the Sun

    The linear field is a first-order expansion in d / R0. Near the Sun the neglected terms are far
    below the errors; with distance they grow, and eventually A and B move away from their local
    values although the stars follow the same model. Here the same fit is run on three distance
    ranges and compared with the truth. This synthetic disc has a smooth power-law rotation and no
    spiral arms or bar, so the drift is small and shows up only a few kpc out; in the Galaxy the
    velocity field is lumpier and the range over which a first-order model describes it has to be
    checked, which is what the distance-bin panel is for.
    """),
    code("""
    truth = sample.meta["truth"]
    print(f"{'distance':>10} {'stars':>6} {'A':>14} {'B':>14}   (fit - truth) / error: A, B")
    for lo, hi in ((0.0, 0.5), (0.5, 1.5), (1.5, 3.0)):
        fitter.distance_range.value = (lo, hi)
        fitter.wait(300)
        f = fitter.result
        dA = (f.A - truth["A_kms_kpc"]) / f.errors["A"]
        dB = (f.B - truth["B_kms_kpc"]) / f.errors["B"]
        print(f"{lo:4.1f}-{hi:3.1f} kpc {f.n_used:6d} {f.A:7.2f} ± {f.errors['A']:4.2f} "
              f"{f.B:7.2f} ± {f.errors['B']:4.2f}   {dA:+5.1f}, {dB:+5.1f}")
    print(f"truth: A = {truth['A_kms_kpc']:.2f}, B = {truth['B_kms_kpc']:.2f} km/s/kpc")
    fitter.distance_range.value = (0.0, 0.5)         # back to the local fit
    fitter.wait(300)
    print()
    print("Fits in distance bins (the panel beside the residuals):")
    print(fitter.result.bins)
    """),
    md("""
    ## Caveat: the potential's values carry its own circular velocity

    The parameter table shows A and B implied by the current potential at the frame's R0. For an
    axisymmetric potential A - B = vc / R0, so a potential whose vc disagrees with the frame's (220
    against ~233 km/s with the defaults) also disagrees on A - B. Matching the potential to the
    frame rescales its velocities, and with them A and B.
    """),
    code("""
    as_is = fitter.result.potential_oort
    potential_state.match_frame_vc = True
    fitter.wait(300)
    matched = fitter.result.potential_oort
    print(f"{'':>4} {'potential as is':>16} {'matched to frame':>17}  [km/s/kpc]")
    for key in ("A", "B"):
        print(f"{key:>4} {as_is[key]:16.2f} {matched[key]:17.2f}")
    print(f"A - B: {as_is['A'] - as_is['B']:.2f} as is, {matched['A'] - matched['B']:.2f} matched")
    potential_state.match_frame_vc = False
    fitter.wait(300)
    print("status:", fitter.status)
    """),
    md("""
    ## Copy as code, figures, config
    """),
    code("""
    snippet = fitter.code()
    print(snippet)
    namespace = {"sample": sample}
    exec(snippet, namespace)
    for key in ("A", "B", "C", "K"):
        assert np.isclose(getattr(namespace["fit"], key), getattr(fitter.result, key), rtol=1e-8, equal_nan=True), key
    print("the snippet reproduces the fit")
    for suffix in ("png", "svg"):
        path = fitter.export_figure(output / f"oort.{suffix}")
        print(path, path.stat().st_size, "bytes")
    print(json.dumps(fitter.config, indent=1))
    """),
    code("""
    from IPython.display import Image
    Image(filename=str(output / "oort.png"), width=900)
    """),
]

# =====================================================================================================
# 05: shared analysis, saved and reloaded
# =====================================================================================================
SHARED = [
    md("""
    # One frame and one potential driving several widgets; the analysis saved and reloaded

    A `FrameState` and a `PotentialState` are the single source of truth of an analysis. Widgets given
    the same state objects update together when any control (or any line of code) changes them, and
    no widget reaches into another. Each widget's `.config` holds everything needed to rebuild its
    result, so the whole analysis can be written to a JSON file, sent to a colleague and reloaded into
    fresh widgets, which then give the same numbers. This notebook does exactly that and checks it.
    """),
    code("""
    import json
    import pathlib

    import ipywidgets as widgets
    import numpy as np
    import mwkin as mk
    from mwkin.widgets import (FrameState, PotentialState, FrameControls, PotentialControls,
                               OrbitExplorer, VelocityPanel, OortFitter)

    output = pathlib.Path("output")
    output.mkdir(exist_ok=True)
    sample = mk.demo.survey(n=10000, seed=5)
    parallax_snr = np.asarray(sample["parallax"] / sample["parallax_error"], dtype=float)
    has_rv = np.isfinite(np.asarray(sample["radial_velocity"], dtype=float))
    row = int(np.flatnonzero(has_rv & (parallax_snr > 20))[0])
    """),
    md("""
    ## One state, several widgets

    The tabs hold the frame and potential controls and three analysis widgets, all built on the same
    two state objects.
    """),
    code("""
    def build(frame_state, potential_state):
        \"\"\"The analysis widgets of this notebook, all sharing the two states.\"\"\"
        return {
            "orbit": OrbitExplorer(frame=frame_state, potential=potential_state, stars=sample, row=row),
            "velocities": VelocityPanel(sample, frame=frame_state, potential=potential_state),
            "oort": OortFitter(sample, frame=frame_state, potential=potential_state),
        }

    frame_state, potential_state = FrameState(), PotentialState()
    analysis = build(frame_state, potential_state)
    tabs = widgets.Tab(children=[FrameControls(frame_state), PotentialControls(potential_state, frame_state),
                                 *analysis.values()])
    for i, title in enumerate(["Solar frame", "Potential", "Orbit", "Velocities", "Oort constants"]):
        tabs.set_title(i, title)
    tabs
    """),
    md("""
    ## Change the frame once, everything follows

    Switch to another published frame, match the potential's circular velocity to it, and change the
    settings of the Oort fit. Every widget recomputes; each result records the frame it was computed
    with, which is checked here.
    """),
    code("""
    frame_state.apply_preset("Schoenrich 2010 + GRAVITY 2019")
    potential_state.match_frame_vc = True
    analysis["oort"].distance_range.value = (0.05, 0.6)
    analysis["velocities"].errors_control.value = "linear"
    for name, widget in analysis.items():
        widget.wait(300)
        print(f"{name:>10}: {widget.status}")

    frame = frame_state.frame.to_dict()
    assert analysis["orbit"].view.frame.to_dict() == frame
    assert analysis["oort"].result.frame.to_dict() == frame
    assert analysis["velocities"].result.meta["frame"] == frame
    print("every result was computed with", frame_state.frame.describe())
    """),
    md("""
    ## Save the analysis

    One JSON file: the two states and each widget's config. The sample itself is not in it (a table
    in memory cannot be), only its size and a fingerprint; whoever reloads passes the sample again,
    and a different sample is noticed and reported in the widget's status line.
    """),
    code("""
    saved = {"frame": frame_state.config, "potential": potential_state.config,
             "widgets": {name: widget.config for name, widget in analysis.items()}}
    path = output / "shared_analysis.json"
    path.write_text(json.dumps(saved, indent=1))
    print(path, path.stat().st_size, "bytes")
    print(json.dumps(saved["frame"], indent=1))
    """),
    md("""
    ## Reload it into fresh widgets and compare

    New state objects, new widgets on the same sample, then the saved configs applied. The reloaded
    results must match the originals: the same orbit, the same velocities, the same fit.
    """),
    code("""
    loaded = json.loads(path.read_text())
    frame_state_2, potential_state_2 = FrameState(), PotentialState()
    frame_state_2.load_config(loaded["frame"])
    potential_state_2.load_config(loaded["potential"])
    analysis_2 = build(frame_state_2, potential_state_2)
    for name, widget in analysis_2.items():
        widget.load_config(loaded["widgets"][name])
    for name, widget in analysis_2.items():
        widget.wait(300)
        print(f"{name:>10}: {widget.status}")
    """),
    code("""
    assert frame_state_2.frame.to_dict() == frame_state.frame.to_dict()
    assert potential_state_2.config == potential_state.config

    old, new = analysis["orbit"].result, analysis_2["orbit"].result
    assert np.allclose(new.rapo, old.rapo, rtol=1e-12) and np.allclose(new.zmax, old.zmax, rtol=1e-12)

    old, new = analysis["velocities"].result, analysis_2["velocities"].result
    for column in ("R", "v_phi", "sigma_v_phi"):
        assert np.allclose(np.asarray(new[column].value), np.asarray(old[column].value),
                           rtol=1e-12, equal_nan=True), column

    old, new = analysis["oort"].result, analysis_2["oort"].result
    assert tuple(new.distance_range) == tuple(old.distance_range)
    for key in ("A", "B", "C", "K"):
        assert np.isclose(getattr(new, key), getattr(old, key), rtol=1e-10, equal_nan=True), key
    print("the reloaded analysis reproduces the original results:")
    print(f"  orbit: r_apo = {analysis_2['orbit'].result.rapo[0]:.3f}")
    print(f"  Oort fit: A = {new.A:.3f}, B = {new.B:.3f} km/s/kpc from {new.n_used} stars")
    """),
]

NOTEBOOKS = {
    "01_tour.ipynb": TOUR,
    "02_orbit_explorer.ipynb": ORBIT,
    "03_velocity_panel.ipynb": VELOCITY,
    "04_oort_fitter.ipynb": OORT,
    "05_shared_analysis.ipynb": SHARED,
}


def make_notebook(stem, cells):
    """An nbformat notebook from (kind, source) pairs, with stable cell ids and no outputs."""
    nb = nbformat.v4.new_notebook()
    nb.metadata = {"kernelspec": dict(KERNELSPEC), "language_info": dict(LANGUAGE_INFO)}
    for index, (kind, source) in enumerate(cells):
        make = nbformat.v4.new_markdown_cell if kind == "markdown" else nbformat.v4.new_code_cell
        cell = make(source)
        cell.id = f"{stem[:40]}-{index:02d}"
        nb.cells.append(cell)
    nbformat.validate(nb)
    return nb


def render(name):
    """The text of notebook ``name`` as it should be on disk."""
    stem = name.removesuffix(".ipynb")
    return nbformat.writes(make_notebook(stem, NOTEBOOKS[name])) + "\n"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only check that the notebooks are up to date")
    args = parser.parse_args(argv)
    stale = []
    for name in NOTEBOOKS:
        path = HERE / name
        text = render(name)
        current = path.read_text() if path.exists() else None
        if current == text:
            continue
        if args.check:
            stale.append(name)
        else:
            path.write_text(text)
            print("wrote", path.relative_to(HERE.parent))
    if stale:
        print("out of date (run example_notebooks/_build_notebooks.py):", ", ".join(stale), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
