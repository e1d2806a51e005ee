"""Stars that used to stall galpy's C integrator forever: each case runs in a child process with a
deadline, so a regression fails the test instead of hanging the suite."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

from mwkin.orbits import integrate_orbits, orbit_parameters
from mwkin.potentials import Potential

REPO = Path(__file__).resolve().parents[3]
# Generous: the child imports galpy and integrates a few orbits (about 2 s); a stall runs forever.
DEADLINE_S = 120

GOOD = [[-8.1, 0.0, 0.02, 10.0, 230.0, 5.0], [-7.0, 0.7, -0.1, -20.0, 210.0, 3.0]]
# Starts found to make galpy's dop853_c loop forever (its step size collapses to its floor).
STALLING = {
    "on_z_axis": [0.0, 0.0, 1.0, 0.0, 0.0, 0.0],  # at rest on the z axis
    "on_z_axis, moving": [0.0, 0.0, 0.5, 10.0, 200.0, 5.0],  # R = 0 with any velocity
    "radial_through_centre": [-8.0, 0.0, 0.0, 100.0, 0.0, 0.0],  # in the plane, straight at the centre
    "radial_through_centre, at rest": [-8.0, 0.0, 0.0, 0.0, 0.0, 0.0],
}


def _run_child(code):
    """Run ``code`` in a fresh interpreter with a deadline; return what it printed as JSON."""
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")]))
    try:
        done = subprocess.run(
            [sys.executable, "-c", textwrap.dedent(code)],
            capture_output=True,
            text=True,
            timeout=DEADLINE_S,
            env=env,
            cwd=str(REPO),
        )
    except subprocess.TimeoutExpired:
        pytest.fail(f"the orbit computation did not return within {DEADLINE_S} s (stalled)")
    assert done.returncode == 0, done.stderr[-3000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


@pytest.fixture(scope="module")
def clean():
    pot = Potential.preset("MWPotential2014")
    t = np.linspace(0, 1.0, 1001)
    return (
        integrate_orbits(np.array(GOOD), pot, t=t),
        orbit_parameters(np.array(GOOD), pot, method="integrate", t=t),
        orbit_parameters(np.array(GOOD), pot),
    )


@pytest.mark.parametrize("name", list(STALLING))
def test_stalling_stars_are_screened_and_the_batch_goes_on(name, clean):
    stars = [GOOD[0], STALLING[name], GOOD[1]]
    out = _run_child(f"""
        import json, numpy as np
        from mwkin.orbits import integrate_orbits, orbit_parameters
        from mwkin.potentials import Potential
        pot = Potential.preset("MWPotential2014")
        stars = np.array({stars!r})
        t = np.linspace(0, 1.0, 1001)
        orbits = integrate_orbits(stars, pot, t=t)
        integ = orbit_parameters(stars, pot, method="integrate", t=t)
        st = orbit_parameters(stars, pot, method="staeckel")
        print(json.dumps({{"flags": orbits.flags.tolist(), "x": orbits.x.value.tolist(),
                          "rapo": orbits.rapo.value.tolist(),
                          "integ_flags": list(integ["flag"]), "integ_rapo": integ["rapo"].value.tolist(),
                          "st_flags": list(st["flag"]), "st_rapo": st["rapo"].value.tolist()}}))
    """)
    reason = name.split(",")[0]
    assert out["flags"] == ["", reason, ""]
    assert out["integ_flags"] == ["", reason, ""] and out["st_flags"] == ["", reason, ""]
    assert np.all(np.isnan(out["x"][1])) and np.isnan(out["rapo"][1])
    assert np.isnan(out["integ_rapo"][1]) and np.isnan(out["st_rapo"][1])
    orbits, integ, st = clean
    # The other stars are exactly what they are without the bad one.
    np.testing.assert_allclose(np.array(out["x"])[[0, 2]], orbits.x.value, rtol=1e-12)
    np.testing.assert_allclose(np.array(out["integ_rapo"])[[0, 2]], integ["rapo"].value, rtol=1e-12)
    np.testing.assert_allclose(np.array(out["st_rapo"])[[0, 2]], st["rapo"].value, rtol=1e-12)


def test_time_limit_stops_a_runaway_star_the_screen_misses(clean):
    # The screen switched off in the child, so the R = 0 star reaches galpy and stalls there: the
    # time limit must stop it, flag it, and still deliver the other stars.
    stars = [GOOD[0], STALLING["on_z_axis"], GOOD[1]]
    out = _run_child(f"""
        import json, numpy as np
        import mwkin.orbits as orbits_module
        from mwkin.potentials import _galpy
        from mwkin.potentials import Potential
        import mwkin.orbits.screening
        mwkin.orbits.screening._screen_singular = lambda ps: None
        pot = Potential.preset("MWPotential2014")
        stars = np.array({stars!r})
        t = np.linspace(0, 1.0, 1001)
        orbits = orbits_module.integrate_orbits(stars, pot, t=t, timeout=1.0)
        integ = orbits_module.orbit_parameters(stars, pot, method="integrate", t=t, timeout=1.0)
        # Afterwards the interrupt flag is clear: a normal run is not cut short.
        again = orbits_module.integrate_orbits(stars[[0, 2]], pot, t=t, timeout=60.0)
        print(json.dumps({{"flags": orbits.flags.tolist(), "x": orbits.x.value.tolist(),
                          "integ_flags": list(integ["flag"]), "integ_rapo": integ["rapo"].value.tolist(),
                          "again_flags": again.flags.tolist(), "flag_value": _galpy._interrupt_flag().value}}))
    """)
    assert out["flags"] == ["", "integration_timeout", ""]
    assert out["integ_flags"] == ["", "integration_timeout", ""]
    assert np.all(np.isnan(out["x"][1])) and np.isnan(out["integ_rapo"][1])
    orbits, integ, _ = clean
    np.testing.assert_allclose(np.array(out["x"])[[0, 2]], orbits.x.value, rtol=1e-12)
    np.testing.assert_allclose(np.array(out["integ_rapo"])[[0, 2]], integ["rapo"].value, rtol=1e-12)
    assert out["again_flags"] == ["", ""] and out["flag_value"] == 0


def test_galpy_guard_isolates_the_runaway_star_in_a_batch():
    # _galpy.integrate on its own (no screening): batch limit, then one star at a time.
    out = _run_child("""
        import json, numpy as np
        from mwkin.potentials import _galpy
        from mwkin.potentials import Potential
        model = Potential.preset("MWPotential2014")._model
        w = np.array([[8.1, 0.0, 0.02, 10.0, 230.0, 5.0], [0.0, 0.0, 1.0, 0.0, 0.0, 0.0],
                      [7.0, 0.1, 0.1, -20.0, 210.0, 3.0]])
        t = np.linspace(0, 1.0, 101)
        track, method, stopped = _galpy.integrate(model, w, t, timeout=1.0)
        ref, _, _ = _galpy.integrate(model, w[[0, 2]], t)
        print(json.dumps({"stopped": stopped.tolist(), "finite": np.isfinite(track).all(axis=(1, 2)).tolist(),
                          "diff": float(np.abs(track[[0, 2]] - ref).max())}))
    """)
    assert out["stopped"] == [False, True, False]
    assert out["finite"] == [True, False, True]
    assert out["diff"] == 0.0


@pytest.mark.parametrize("timeout", [0, -1.0, float("nan"), "soon"])
def test_bad_timeout_is_refused(timeout):
    pot = Potential.preset("MWPotential2014")
    with pytest.raises(ValueError, match=r"timeout must be .*seconds"):
        integrate_orbits(np.array(GOOD), pot, t=[0, 0.01], timeout=timeout)
    with pytest.raises(ValueError, match=r"timeout must be .*seconds"):
        orbit_parameters(np.array(GOOD), pot, method="integrate", t=[0, 0.01], timeout=timeout)


def test_a_bad_frame_in_table_metadata_is_an_error_not_a_silent_default():
    import mwkin as mk
    from mwkin.orbits import OrbitError

    stars = mk.to_galactocentric(mk.demo.survey(n=20, seed=2))
    stars.meta["frame"] = dict(stars.meta["frame"], R0_kpc="8.1")
    pot = mk.Potential.preset("MWPotential2014")
    with pytest.raises(OrbitError, match=r"meta\['frame'\].*R0_kpc"):
        mk.orbit_parameters(stars, pot)
