#!/usr/bin/env python
"""Hostile but realistic user run of mwkin: bad inputs and misuses across the public surface.

Run from the repository root::

    .venv/bin/python tools/hostile_run.py                  # every case, table and counts
    .venv/bin/python tools/hostile_run.py --only cli       # cases whose id, area or title contain "cli"
    .venv/bin/python tools/hostile_run.py --json out.json  # also write the verdicts as JSON
    .venv/bin/python tools/hostile_run.py --case O01       # one case in this process (debugging)
    .venv/bin/python tools/hostile_run.py --list           # the cases, without running them

Each case sets up its own inputs in a fresh temporary folder (its working directory), performs one
misuse through the public API only (``import mwkin as mk``, ``mwkin.scale``, ``mwkin.widgets``, the
command line through ``python -m mwkin.cli``) and classifies what happened by inspecting the outcome.
Cases run in worker processes, each case with its own timeout: a case that does not answer in time
is classified "bad: hang" and its worker is killed and replaced, so a hang never stalls the run.

Classification rules
--------------------
good
    A clear error: an exception that is a ``ValueError`` subclass (for a trait assignment on a widget
    state, ``traitlets.TraitError`` is the library's own form of refusal and counts the same), or a
    command-line exit code != 0 with a message and no Python traceback, whose message names the
    offending column/key/option AND the value or row; or a correct result (checked by the case's own
    predicate against an independent expectation); or a result where the bad rows are NaN and
    flagged; or, where the case asks for one, a warning naming the value and the unit.
weak
    An error that is correct to raise but of the wrong type (TypeError, KeyError, AttributeError,
    OSError, ArrowInvalid, ...) or whose message does not name what is wrong; a Python traceback
    from the command line; a missing warning where one is asked for; a reasonable input refused.
bad
    A hang (timeout) or a crashed worker; a silent wrong result (wrong numbers, no error, no flag);
    a lost or overwritten file; a half-applied config; a stale result shown with "ready".

The verdict of every case is computed from what the code does when the script is run; nothing is
hard-coded, so the same script measures the project before and after fixes.
"""

from __future__ import annotations

import argparse
import contextlib
import copy
import hashlib
import json
import math
import os
import queue
import re
import shutil
import signal
import struct
import subprocess
import sys
import tempfile
import threading
import time
import traceback
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

GOOD, WEAK, BAD = "good", "weak", "bad"
_RANK = {GOOD: 0, WEAK: 1, BAD: 2}
DEFAULT_TIMEOUT = 60.0  # seconds per case
WORKER_START_TIMEOUT = 240.0  # seconds for a worker to import mwkin (slow on a loaded machine)
CLI_TIMEOUT = 50.0  # seconds for one command-line run inside a case (below the case timeout)
_MARK = "@@HOSTILE@@"


# ====================================================================================== registry
@dataclass
class Case:
    id: str
    area: str
    title: str
    func: object
    timeout: float = DEFAULT_TIMEOUT


CASES: dict[str, Case] = {}


def case(cid, area, title, timeout=DEFAULT_TIMEOUT):
    """Register a case: ``func(folder) -> (verdict, reason)``, run with ``folder`` as the working dir."""

    def register(func):
        if cid in CASES:
            raise RuntimeError(f"duplicate case id {cid}")
        CASES[cid] = Case(cid, area, title, func, timeout)
        return func

    return register


# ====================================================================================== judging
def one_line(text, limit=230):
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def num_alts(value):
    """Spellings of a value a message may use (numbers in several formats)."""
    if isinstance(value, str):
        return (value,)
    if isinstance(value, bool):
        return (str(value), str(value).lower())
    try:
        f = float(value)
    except (TypeError, ValueError):
        return (str(value),)
    if math.isnan(f):
        return ("nan",)
    if math.isinf(f):
        return ("inf",) if f > 0 else ("-inf",)
    alts = {str(value), repr(value), repr(f), f"{f:g}", f"{f:.10g}", f"{f:.6g}", f"{f:.4g}", f"{f:.3g}"}
    if f == int(f) and abs(f) < 1e17:
        alts.add(str(int(f)))
    for a in list(alts):
        alts.add(a.replace("e+0", "e").replace("e-0", "e-").replace("e+", "e"))
    return tuple(sorted(alts, key=len, reverse=True))


def _group(g):
    if isinstance(g, tuple):
        out = []
        for item in g:
            out.extend(num_alts(item))
        return tuple(out)
    return num_alts(g)


def missing_groups(text, groups):
    """Groups (each a value or a tuple of alternatives) of which no spelling occurs in ``text``."""
    low = str(text).lower()
    missing = []
    for g in groups:
        alts = _group(g)
        if not any(a.lower() in low for a in alts):
            first = g[0] if isinstance(g, tuple) and g else g
            missing.append(str(first))
    return missing


def judge_error(exc, names=(), values=(), types=(ValueError,)):
    """Classify an exception: good if of an accepted type and naming the names and the values."""
    text = f"{type(exc).__name__}: {exc}"
    if not isinstance(exc, types):
        return WEAK, f"wrong error type {type(exc).__name__} (not a ValueError): {one_line(text)}"
    if not str(exc).strip():
        return WEAK, f"{type(exc).__name__} with an empty message"
    missing = missing_groups(str(exc), list(names) + list(values))
    if missing:
        return WEAK, f"message does not name {', '.join(map(repr, missing))}: {one_line(text)}"
    return GOOD, f"clear error: {one_line(text)}"


def worst(results):
    """The worst of several (verdict, reason); reasons of that verdict joined."""
    top = max(results, key=lambda r: _RANK[r[0]])[0]
    return top, " | ".join(r[1] for r in results if r[0] == top)


@dataclass
class Outcome:
    value: object = None
    exc: BaseException | None = None
    warnings: list | None = None
    seconds: float = 0.0

    def warned(self, *groups):
        """Warnings whose message names every group."""
        return [w for w in self.warnings or [] if not missing_groups(str(w.message), groups)]


def attempt(fn, *args, **kwargs):
    """Call ``fn`` catching every exception and recording every warning."""
    t0 = time.perf_counter()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            value = fn(*args, **kwargs)
            return Outcome(value, None, list(caught), time.perf_counter() - t0)
        except Exception as exc:  # noqa: BLE001 - the exception is what we judge
            return Outcome(None, exc, list(caught), time.perf_counter() - t0)


def fval(x):
    """Plain float array of a Quantity, column or number."""
    return np.asarray(getattr(x, "value", x), dtype=float)


def file_digest(path):
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


# ====================================================================================== fixtures
def mk():
    import mwkin

    return mwkin


_POT = {}


def mwpot():
    if "p" not in _POT:
        _POT["p"] = mk().Potential.preset("MWPotential2014")
    return _POT["p"]


def survey(n=300, seed=5):
    return mk().demo.survey(n=n, seed=seed)


BASIC = {
    "source_id": [11, 12, 13, 14],
    "ra": [10.0, 200.0, 350.0, 45.0],
    "dec": [5.0, -30.0, 60.0, 20.0],
    "parallax": [2.0, 1.0, 4.0, 2.5],
    "parallax_error": [0.05, 0.05, 0.05, 0.05],
    "pmra": [3.0, -2.0, 1.0, 4.0],
    "pmdec": [-1.0, 4.0, 2.0, -3.0],
    "radial_velocity": [10.0, -20.0, 5.0, 30.0],
}


def basic(**changes):
    cols = {k: list(v) for k, v in BASIC.items()}
    for key, value in changes.items():
        if value is None:
            cols.pop(key, None)
        else:
            cols[key] = value
    return cols


def basic_table(**changes):
    from astropy.table import Table

    return Table(basic(**changes))


def write_csv(path, cols, delim=",", encoding="utf-8", bom=False, names=None):
    names = names or list(cols)
    rows = [delim.join(names)]
    n = len(next(iter(cols.values())))
    for i in range(n):
        rows.append(delim.join(str(cols[k][i]) for k in cols))
    text = "\n".join(rows) + "\n"
    data = text.encode(encoding)
    if bom:
        data = b"\xef\xbb\xbf" + data
    Path(path).write_bytes(data)
    return path


def sun_star():
    """A disc star near the Sun in Galactocentric Cartesian phase space (kpc, km/s)."""
    return np.array([[-8.1, 0.3, 0.05, 25.0, 215.0, 12.0]])


def orbit_sanity(orbits, i, pot, x0=None, tol=2e-3):
    """Problems of integrated orbit ``i``: finite, parameters in range, energy kept, starts at x0."""
    problems = []
    rperi, rapo, zmax, ecc = (float(fval(getattr(orbits, k))[i]) for k in ("rperi", "rapo", "zmax", "eccentricity"))
    if not all(math.isfinite(v) for v in (rperi, rapo, zmax, ecc)):
        problems.append(f"non-finite parameters rperi={rperi}, rapo={rapo}, zmax={zmax}, e={ecc}")
        return problems
    if not (0 <= rperi <= rapo + 1e-12):
        problems.append(f"rperi={rperi:.4g} > rapo={rapo:.4g} or negative")
    if not (0 <= zmax <= rapo * (1 + 1e-6) + 1e-9):
        problems.append(f"zmax={zmax:.4g} outside [0, rapo={rapo:.4g}]")
    if not (0 <= ecc <= 1 + 1e-12):
        problems.append(f"eccentricity {ecc:.4g} outside [0, 1]")
    R = fval(orbits.R)[i]
    z = fval(orbits.z)[i]
    v2 = fval(orbits.v_R)[i] ** 2 + fval(orbits.v_phi)[i] ** 2 + fval(orbits.v_z)[i] ** 2
    if not (np.all(np.isfinite(R)) and np.all(np.isfinite(z)) and np.all(np.isfinite(v2))):
        problems.append("track has non-finite values")
        return problems
    energy = fval(pot.potential(R, z)) + 0.5 * v2
    spread = float(np.max(np.abs(energy - energy[0])) / max(abs(energy[0]), 1.0))
    if spread > tol:
        problems.append(f"energy not conserved along the track (relative spread {spread:.2g})")
    if x0 is not None:
        start = np.array([fval(orbits.x)[i][0], fval(orbits.y)[i][0], fval(orbits.z)[i][0]])
        if np.max(np.abs(start - np.asarray(x0[:3]))) > 1e-6:
            problems.append(f"track starts at {np.round(start, 6).tolist()}, not at the input {list(x0[:3])}")
    return problems


def judge_flagged_or_valid(out, i, pot, x0=None):
    """For orbit ``i`` of an OrbitSet: good if flagged, or unflagged and valid (orbit_sanity); else bad."""
    flag = str(out.flags[i])
    vals = {k: float(fval(getattr(out, k))[i]) for k in ("rperi", "rapo", "zmax", "eccentricity")}
    if flag:
        if all(math.isnan(v) for v in vals.values()):
            return GOOD, f"flagged {flag!r} with NaN parameters"
        return GOOD, f"flagged {flag!r} (parameters {fmt_params(vals)})"
    problems = orbit_sanity(out, i, pot, x0)
    if problems:
        return BAD, f"no flag, but {'; '.join(problems)}"
    return GOOD, f"valid orbit: {fmt_params(vals)}"


def fmt_params(vals):
    return ", ".join(f"{k}={v:.4g}" for k, v in vals.items())


# ---------------------------------------------------------------------------------- command line
def _folder_digests():
    return {p.name: file_digest(p) for p in Path(".").iterdir() if p.is_file()}


def cli(args, timeout=CLI_TIMEOUT):
    """Run ``python -m mwkin.cli ARGS`` in the working directory.

    Returns ``(proc, seconds)``; ``proc`` is None on a timeout. ``proc.changed`` lists the files that
    existed before the run and were changed or deleted by it (every input must keep its bytes).
    """
    cmd = [sys.executable, "-m", "mwkin.cli", *map(str, args)]
    before = _folder_digests()
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return None, timeout
    after = _folder_digests()
    proc.changed = [name for name, digest in before.items() if after.get(name) != digest]
    return proc, time.perf_counter() - t0


def changed_files(proc):
    """(BAD, reason) if the run changed or deleted a file that existed before it, else None."""
    changed = getattr(proc, "changed", None) if proc is not None else None
    if changed:
        return BAD, f"changed or deleted existing file(s) {changed} (exit {proc.returncode})"
    return None


def cli_text(proc):
    return (proc.stderr or "") + (proc.stdout or "")


def judge_cli_error(proc, names=(), values=()):
    """Classify a command-line run that should have failed."""
    if proc is None:
        return BAD, f"hang: the command did not finish in {CLI_TIMEOUT:g} s"
    lost = changed_files(proc)
    if lost:
        return lost
    err = proc.stderr or ""
    lines = [line for line in err.strip().splitlines() if line.strip()]
    raised = [line for line in lines if re.match(r"^[A-Za-z_][\w.]*(Error|Exception|Warning)\b", line)]
    last = one_line(raised[-1] if raised else (lines[-1] if lines else ""))
    if proc.returncode == 0:
        return None, "exit 0"
    if "Traceback (most recent call last)" in err:
        return WEAK, f"exit {proc.returncode} with a Python traceback: {last}"
    missing = missing_groups(cli_text(proc), list(names) + list(values))
    message = one_line(err.strip() or proc.stdout.strip())
    if missing:
        return WEAK, f"exit {proc.returncode}, message does not name {', '.join(map(repr, missing))}: {message}"
    return GOOD, f"exit {proc.returncode}: {message}"


def demo_file(name="s.ecsv", n=300, seed=5):
    survey(n, seed).write(name, overwrite=True)
    return name


# ====================================================================================== ORBITS
@case("O01", "orbits", "integrate_orbits on a star at R = 0 (x = y = 0) with a velocity")
def _(d):
    x0 = [0.0, 0.0, 0.1, 30.0, 150.0, 20.0]
    o = attempt(mk().integrate_orbits, np.array([x0]), mwpot(), t=np.linspace(0, 0.5, 501))
    if o.exc:
        return judge_error(o.exc, [("R", "x", "y", "axis", "centre", "center")], [("0", "R = 0", "R=0")])
    return judge_flagged_or_valid(o.value, 0, mwpot(), x0)


@case("O02", "orbits", "integrate_orbits on the z axis at rest (falls through the centre)")
def _(d):
    x0 = [0.0, 0.0, 1.0, 0.0, 0.0, 0.0]
    o = attempt(mk().integrate_orbits, np.array([x0]), mwpot(), t=np.linspace(0, 0.3, 1501))
    if o.exc:
        return judge_error(o.exc, [("R", "x", "y", "axis", "centre", "center")], [("0",)])
    res = o.value
    verdict = judge_flagged_or_valid(res, 0, mwpot(), x0)
    if verdict[0] != GOOD or str(res.flags[0]):
        return verdict
    rapo, zmax = float(fval(res.rapo)[0]), float(fval(res.zmax)[0])
    if abs(rapo - 1.0) > 0.02 or abs(zmax - 1.0) > 0.02:
        return BAD, f"no flag, but rapo={rapo:.4g}, zmax={zmax:.4g} kpc for a star dropped from rest at z = 1 kpc"
    return verdict


def _eccentric_star():
    return np.array([[-8.1, 0.0, 0.1, 60.0, 180.0, 45.0]])


@case("O03", "orbits", "orbit_parameters(method='integrate') with a two-point time grid")
def _(d):
    star = _eccentric_star()
    ref = mk().orbit_parameters(star, mwpot(), method="integrate", t=np.linspace(0, 3, 3001))
    o = attempt(mk().orbit_parameters, star, mwpot(), method="integrate", t=[0.0, 1.0])
    if o.exc:
        return judge_error(o.exc, [("t", "time grid")], [("2 ", "two", "2 times", "2 points", "(2,)")])
    res = o.value
    flag = str(res["flag"][0])
    if flag or o.warned(("t", "grid", "time")):
        said = [one_line(w.message, 80) for w in o.warnings]
        return GOOD, f"coarse grid flagged/warned: flag={flag!r}, warnings={said}"
    diffs = {k: (float(fval(res[k])[0]), float(fval(ref[k])[0])) for k in ("rperi", "rapo", "eccentricity")}
    off = {k: v for k, v in diffs.items() if abs(v[0] - v[1]) > 0.05 * max(abs(v[1]), 0.05)}
    if off:
        return BAD, "silently wrong, no flag or warning: " + ", ".join(
            f"{k}={a:.3g} (3001-point grid: {b:.3g})" for k, (a, b) in off.items()
        )
    return GOOD, "two-point grid gave the right parameters"


def _staeckel_vs_integrated(stars, label):
    s = attempt(mk().orbit_parameters, stars, mwpot(), method="staeckel")
    if s.exc:
        return judge_error(s.exc, [("staeckel", "Lz", "polar", "eccentric")], [])
    ref = mk().orbit_parameters(stars, mwpot(), method="integrate", t=np.linspace(0, 3, 3001))
    out = []
    for i in range(len(stars)):
        flag = str(s.value["flag"][i])
        vals = {k: float(fval(s.value[k])[i]) for k in ("rperi", "rapo", "zmax", "eccentricity")}
        if flag:
            out.append((GOOD, f"{label} {i}: flagged {flag!r}"))
            continue
        bad = []
        if not all(math.isfinite(v) for v in vals.values()):
            bad.append(f"non-finite {fmt_params(vals)} without a flag")
        else:
            if vals["zmax"] < 0:
                bad.append(f"negative zmax {vals['zmax']:.3g} kpc")
            if not 0 <= vals["eccentricity"] <= 1:
                bad.append(f"eccentricity {vals['eccentricity']:.3g} outside [0, 1]")
            if not 0 <= vals["rperi"] <= vals["rapo"]:
                bad.append(f"rperi {vals['rperi']:.3g} > rapo {vals['rapo']:.3g}")
            zi, ri = float(fval(ref["zmax"])[i]), float(fval(ref["rapo"])[i])
            if abs(vals["zmax"] - zi) > 0.3 * zi + 0.05:
                bad.append(f"zmax {vals['zmax']:.3g} kpc against {zi:.3g} kpc integrated")
            if abs(vals["rapo"] - ri) > 0.2 * ri:
                bad.append(f"rapo {vals['rapo']:.3g} kpc against {ri:.3g} kpc integrated")
        out.append(
            (BAD, f"{label} {i}: unflagged " + "; ".join(bad))
            if bad
            else (GOOD, f"{label} {i}: {fmt_params(vals)} agrees with integration")
        )
    return worst(out)


@case("O04", "orbits", "Staeckel on a polar orbit (Lz = 0): x=(-8.1,0,0.02) kpc, v=(250,0,250) km/s")
def _(d):
    return _staeckel_vs_integrated(np.array([[-8.1, 0.0, 0.02, 250.0, 0.0, 250.0]]), "polar star")


@case("O05", "orbits", "Staeckel on halo stars with e near 1 (zmax against integration)")
def _(d):
    stars = np.array(
        [
            [-8.1, 0.0, 0.1, 320.0, 8.0, 90.0],
            [-8.1, 0.0, 0.1, -280.0, 15.0, 160.0],
            [-8.1, 0.0, 0.5, 200.0, -5.0, 260.0],
        ]
    )
    return _staeckel_vs_integrated(stars, "halo star")


def _time_error_case(t, values):
    o = attempt(mk().integrate_orbits, sun_star(), mwpot(), t=t)
    if o.exc:
        return judge_error(o.exc, [("t", "time")], values)
    return BAD, f"accepted the time grid {one_line(repr(t), 80)} without error (flags {list(o.value.flags)})"


@case("O06", "orbits", "time grid containing NaN")
def _(d):
    t = np.linspace(0, 1, 11)
    t[4] = np.nan
    return _time_error_case(t, [("nan", "finite", "index 4", "indices [4]")])


@case("O07", "orbits", "unsorted time grid")
def _(d):
    return _time_error_case(
        np.array([0.0, 0.2, 0.1, 0.3]), [("-0.1", "0.2", "index 1", "indices 1", "sorted", "order")]
    )


@case("O08", "orbits", "zero-length time grid")
def _(d):
    return _time_error_case(np.array([]), [("(0,)", "empty", "0 times", "got 0", "no times", "size 0")])


@case("O09", "orbits", "float32 linspace time grid (should be accepted and agree with float64)")
def _(d):
    t32 = np.linspace(0, 3, 3001, dtype=np.float32)
    o = attempt(mk().integrate_orbits, _eccentric_star(), mwpot(), t=t32)
    if o.exc:
        v, r = judge_error(o.exc, [("t",)], [("float32", "step", "evenly")])
        return WEAK, f"refuses a float32 numpy.linspace grid ({r})"
    ref = mk().integrate_orbits(_eccentric_star(), mwpot(), t=np.linspace(0, 3, 3001))
    a, b = float(fval(o.value.rapo)[0]), float(fval(ref.rapo)[0])
    if abs(a - b) > 1e-3 * b:
        return BAD, f"float32 grid gives rapo {a:.6g} against {b:.6g} kpc with float64"
    return GOOD, f"float32 grid accepted, rapo {a:.6g} kpc as with float64"


@case("O10", "orbits", "time grid as a Quantity in Myr")
def _(d):
    import astropy.units as u

    o = attempt(mk().integrate_orbits, _eccentric_star(), mwpot(), t=np.linspace(0, 1000, 1001) * u.Myr)
    if o.exc:
        return WEAK, f"refuses a time grid in Myr: {one_line(o.exc)}"
    ref = mk().integrate_orbits(_eccentric_star(), mwpot(), t=np.linspace(0, 1, 1001))
    a, b = float(fval(o.value.rapo)[0]), float(fval(ref.rapo)[0])
    end = float(fval(o.value.t)[-1])
    if abs(a - b) > 1e-6 * b or abs(end - 1.0) > 1e-9:
        return BAD, f"Myr grid gives rapo {a:.6g} (Gyr grid {b:.6g}), t[-1] = {end} Gyr"
    return GOOD, "Myr grid converted to Gyr, same orbit"


@case("O11", "orbits", "time grid as a Quantity in km (wrong unit)")
def _(d):
    import astropy.units as u

    return _time_error_case(np.linspace(0, 1, 11) * u.km, [("km",)])


@case("O12", "orbits", "orbit_parameters with method='stackel' (typo)")
def _(d):
    o = attempt(mk().orbit_parameters, sun_star(), mwpot(), method="stackel")
    if o.exc:
        return judge_error(o.exc, ["method"], ["stackel"])
    return BAD, "unknown method accepted"


@case("O13", "orbits", "potential passed as its name (a string)")
def _(d):
    o = attempt(mk().integrate_orbits, sun_star(), "MWPotential2014", t=np.linspace(0, 1, 11))
    if o.exc:
        return judge_error(o.exc, [("pot", "potential")], [("str", "MWPotential2014")])
    if len(o.value) == 1 and not orbit_sanity(o.value, 0, mwpot()):
        return GOOD, "a preset name is accepted and gives a valid orbit"
    return BAD, "a preset name is accepted but the orbit is not valid"


@case("O14", "orbits", "phase-space array with a NaN row among good ones")
def _(d):
    stars = np.vstack([sun_star(), [[np.nan, 0, 0, 0, 220, 0]], _eccentric_star()])
    o = attempt(mk().integrate_orbits, stars, mwpot(), t=np.linspace(0, 1, 1001))
    if o.exc:
        return WEAK, f"one NaN row stops the whole batch: {one_line(o.exc)}"
    res = o.value
    flags = [str(f) for f in res.flags]
    if not flags[1] or not math.isnan(float(fval(res.rapo)[1])):
        return BAD, f"NaN row not flagged/NaN: flag {flags[1]!r}, rapo {float(fval(res.rapo)[1])}"
    others = [orbit_sanity(res, i, mwpot()) for i in (0, 2)]
    if flags[0] or flags[2] or any(others):
        return BAD, f"good rows harmed: flags {flags}, {others}"
    return GOOD, f"NaN row flagged {flags[1]!r}, other rows fine"


@case("O15", "orbits", "empty phase-space array (0, 6)")
def _(d):
    o = attempt(mk().integrate_orbits, np.zeros((0, 6)), mwpot(), t=np.linspace(0, 1, 11))
    if o.exc:
        return judge_error(
            o.exc, [("stars", "table", "input", "phase")], [("no rows", "0 rows", "empty", "no stars", "(0, 6)")]
        )
    if len(o.value) == 0:
        return GOOD, "empty input gives an empty OrbitSet"
    return BAD, f"{len(o.value)} orbits from nothing"


@case("O16", "orbits", "unbound star (1500 km/s) in orbit_parameters")
def _(d):
    o = attempt(mk().orbit_parameters, np.array([[-8.1, 0, 0.02, 0, 1500.0, 0]]), mwpot(), method="staeckel")
    if o.exc:
        return WEAK, f"an unbound star raises for the whole batch: {one_line(o.exc)}"
    t = o.value
    flag, rapo = str(t["flag"][0]), float(fval(t["rapo"])[0])
    if "unbound" in flag and math.isnan(rapo):
        return GOOD, f"flagged {flag!r}, rapo NaN"
    if flag:
        return GOOD, f"flagged {flag!r}"
    return BAD, f"no flag, rapo {rapo:.4g} kpc for an unbound star"


@case("O17", "orbits", "orbit_parameters with n_samples=-3")
def _(d):
    o = attempt(mk().orbit_parameters, sun_star(), mwpot(), n_samples=-3)
    return judge_error(o.exc, ["n_samples"], [-3]) if o.exc else (BAD, "negative n_samples accepted")


@case("O18", "orbits", "observables with a negative parallax in orbit_parameters")
def _(d):
    t = survey(5, 3)
    t["parallax"][2] = -0.5 * t["parallax"].unit
    o = attempt(mk().orbit_parameters, t, mwpot())
    if o.exc:
        return WEAK, f"one negative parallax stops the batch: {one_line(o.exc)}"
    res = o.value
    flag, rapo = str(res["flag"][2]), float(fval(res["rapo"])[2])
    if flag and math.isnan(rapo):
        return GOOD, f"row 2 flagged {flag!r}, NaN parameters"
    return BAD, f"negative-parallax row gave rapo {rapo} with flag {flag!r}"


@case("O19", "orbits", "frame passed as a dict to integrate_orbits")
def _(d):
    frame = mk().SolarFrame().to_dict()
    o = attempt(mk().integrate_orbits, sun_star(), mwpot(), frame=frame, t=np.linspace(0, 1, 11))
    if o.exc:
        return judge_error(o.exc, ["frame"], [("dict", "SolarFrame")])
    if getattr(o.value, "frame", None) == mk().SolarFrame.from_dict(frame):
        return GOOD, "a frame dict is accepted and used"
    return BAD, "frame dict accepted but not used"


@case("O20", "orbits", "chunk_size=0")
def _(d):
    o = attempt(mk().orbit_parameters, sun_star(), mwpot(), chunk_size=0)
    return judge_error(o.exc, ["chunk_size"], [0]) if o.exc else (BAD, "chunk_size=0 accepted")


@case("O21", "orbits", "dict of Quantities with velocities in m/s")
def _(d):
    import astropy.units as u

    x = sun_star()[0]
    stars = {
        "x": [x[0]] * u.kpc,
        "y": [x[1]] * u.kpc,
        "z": [x[2] * 1000] * u.pc,
        "vx": [x[3] * 1000] * u.m / u.s,
        "vy": [x[4] * 1000] * u.m / u.s,
        "vz": [x[5] * 1000] * u.m / u.s,
    }
    o = attempt(mk().orbit_parameters, stars, mwpot())
    if o.exc:
        return WEAK, f"Quantities in pc and m/s refused: {one_line(o.exc)}"
    ref = mk().orbit_parameters(sun_star(), mwpot())
    a, b = float(fval(o.value["rapo"])[0]), float(fval(ref["rapo"])[0])
    if not abs(a - b) <= 1e-6 * b:
        return BAD, f"rapo {a:.6g} kpc with m/s input against {b:.6g} with km/s"
    return GOOD, "units converted: same rapo"


@case("O22", "orbits", "Staeckel for a star exactly at R = 0")
def _(d):
    return _staeckel_vs_integrated(np.array([[0.0, 0.0, 0.5, 20.0, 0.0, 30.0]]), "R=0 star")


@case("O23", "orbits", "n_samples > 0 with a plain phase-space array (no covariance)")
def _(d):
    o = attempt(mk().orbit_parameters, sun_star(), mwpot(), n_samples=10)
    if o.exc:
        return judge_error(o.exc, [("n_samples", "covariance", "uncertaint")], [("cov",)])
    return BAD, "sampling without a covariance accepted silently"


@case("O24", "orbits", "control: Staeckel on ordinary disc stars (no flag, agrees with integration)")
def _(d):
    stars = np.array(
        [
            [-8.1, 0.0, 0.02, 10.0, 225.0, 8.0],
            [-7.5, 1.0, -0.1, -35.0, 200.0, 20.0],
            [-9.0, -0.5, 0.2, 50.0, 235.0, -15.0],
        ]
    )
    s = attempt(mk().orbit_parameters, stars, mwpot(), method="staeckel")
    if s.exc:
        return BAD, f"ordinary disc stars fail: {one_line(s.exc)}"
    ref = mk().orbit_parameters(stars, mwpot(), method="integrate", t=np.linspace(0, 3, 3001))
    out = []
    for i in range(len(stars)):
        flag = str(s.value["flag"][i])
        got = {k: float(fval(s.value[k])[i]) for k in ("rperi", "rapo", "zmax")}
        exp = {k: float(fval(ref[k])[i]) for k in got}
        off = {k: (got[k], exp[k]) for k in got if abs(got[k] - exp[k]) > 0.05 * exp[k] + 0.02}
        if flag:
            out.append((WEAK, f"disc star {i} needlessly flagged {flag!r}"))
        elif off:
            text = ", ".join(f"{k} {a:.3g} vs {b:.3g}" for k, (a, b) in off.items())
            out.append((BAD, f"disc star {i} off without a flag: {text}"))
        else:
            out.append((GOOD, f"disc star {i} agrees"))
    return worst(out)


# ====================================================================================== POTENTIAL
@case("P01", "potential", "unknown potential preset name")
def _(d):
    o = attempt(mk().Potential.preset, "MWPotential2015")
    return judge_error(o.exc, [("preset", "potential")], ["MWPotential2015"]) if o.exc else (BAD, "accepted")


@case("P02", "potential", "three_component with a negative bulge mass")
def _(d):
    o = attempt(mk().Potential.three_component, bulge={"mass": -1e9})
    return judge_error(o.exc, [("bulge.mass", "bulge mass")], [-1e9]) if o.exc else (BAD, "negative mass accepted")


@case("P03", "potential", "three_component with a negative disc mass")
def _(d):
    o = attempt(mk().Potential.three_component, disc={"mass": -6e10})
    return judge_error(o.exc, [("disc.mass", "disc mass")], [-6e10]) if o.exc else (BAD, "negative mass accepted")


@case("P04", "potential", "three_component with halo mass True (a JSON boolean)")
def _(d):
    o = attempt(mk().Potential.three_component, halo={"mass": True})
    if o.exc:
        return judge_error(o.exc, [("halo.mass", "halo mass")], ["True"])
    return BAD, "halo mass True silently taken as 1 Msun"


@case("P05", "potential", "three_component with disc mass as text 'heavy'")
def _(d):
    o = attempt(mk().Potential.three_component, disc={"mass": "heavy"})
    return judge_error(o.exc, [("disc.mass", "disc mass")], ["heavy"]) if o.exc else (BAD, "text mass accepted")


@case("P06", "potential", "Potential.from_dict with missing keys and wrong types")
def _(d):
    P = mk().Potential
    out = []
    for data, names, values in [
        ({}, ["kind"], []),
        ({"kind": "preset"}, ["name"], []),
        ({**mk().Potential.three_component().to_dict(), "disc": [1, 2]}, ["disc"], [("[1, 2]", "list")]),
        ({"kind": "preset", "name": 7}, ["name"], [7]),
        ("MWPotential2014", [("dict", "mapping", "potential")], [("str", "MWPotential2014")]),
    ]:
        o = attempt(P.from_dict, data)
        if o.exc:
            v, r = judge_error(o.exc, names, values)
            out.append((v, f"{data!r}: {r}"))
        else:
            out.append((WEAK, f"{data!r} accepted as {o.value.name!r} (missing or wrong keys filled in)"))
    return worst(out)


@case("P07", "potential", "from_dict scaled to a negative circular velocity")
def _(d):
    data = mk().Potential.preset("MWPotential2014").to_dict()
    data["scaled_to"] = {"vc_kms": -220.0, "R_kpc": 8.0}
    o = attempt(mk().Potential.from_dict, data)
    return judge_error(o.exc, ["vc"], [-220]) if o.exc else (BAD, "negative vc accepted")


@case("P08", "potential", "vcirc at a negative radius")
def _(d):
    o = attempt(mwpot().vcirc, -8.0)
    if o.exc:
        return judge_error(o.exc, ["R"], [-8])
    v = fval(o.value)
    if np.all(np.isnan(v)):
        return WEAK, "NaN for R = -8 kpc without an error"
    return WEAK, f"negative radius accepted silently: vc(-8 kpc) = {float(np.ravel(v)[0]):.4g} km/s"


@case("P09", "potential", "oort_constants at R0 = 0")
def _(d):
    o = attempt(mwpot().oort_constants, 0.0)
    if o.exc:
        return judge_error(o.exc, [("R0", "R")], [0])
    A = fval(o.value.A)
    return (
        (WEAK, f"NaN/inf Oort constants (A = {A}) without an error")
        if not np.all(np.isfinite(A))
        else (BAD, f"finite Oort constants at R0 = 0: A = {A}")
    )


@case("P10", "potential", "three_component with bulge model 'king'")
def _(d):
    o = attempt(mk().Potential.three_component, bulge={"model": "king", "mass": 1e10})
    return judge_error(o.exc, [("bulge", "model")], ["king"]) if o.exc else (BAD, "unknown model accepted")


@case("P11", "potential", "scaled_to(vc=NaN)")
def _(d):
    o = attempt(mwpot().scaled_to, float("nan"))
    return judge_error(o.exc, ["vc"], ["nan"]) if o.exc else (BAD, "NaN vc accepted")


@case("P12", "potential", "three_component with an unknown parameter 'masss' (typo)")
def _(d):
    o = attempt(mk().Potential.three_component, halo={"masss": 1e12})
    return judge_error(o.exc, [("halo",)], ["masss"]) if o.exc else (BAD, "typo silently ignored")


# ====================================================================================== FRAME
def _frame_dict(**changes):
    data = mk().SolarFrame().to_dict()
    data.update(changes)
    return data


@case("F01", "frame", "SolarFrame.from_dict with v_sun_kms = '245' (a string)")
def _(d):
    o = attempt(mk().SolarFrame.from_dict, _frame_dict(v_sun_kms="245"))
    if o.exc:
        return judge_error(o.exc, [("v_sun_kms", "v_sun")], ["245"])
    return BAD, f"string '245' accepted as v_sun = {o.value.v_sun}"


@case("F02", "frame", "SolarFrame.from_dict with R0_kpc = true (a boolean)")
def _(d):
    o = attempt(mk().SolarFrame.from_dict, _frame_dict(R0_kpc=True))
    if o.exc:
        return judge_error(o.exc, [("R0_kpc", "R0")], [("True", "true", "bool")])
    return BAD, f"boolean accepted as R0 = {o.value.R0} kpc"


@case("F03", "frame", "SolarFrame.from_dict with nested lists")
def _(d):
    out = []
    for key, value, name in (
        ("R0_kpc", [8.1], "R0"),
        ("v_sun_kms", [[12.9, 245.6, 7.78]], "v_sun"),
        ("z_sun_pc", [[20.8]], "z_sun"),
    ):
        o = attempt(mk().SolarFrame.from_dict, _frame_dict(**{key: value}))
        if o.exc:
            v, r = judge_error(o.exc, [(key, name)], [(repr(value), "list", "nested", "shape", "sequence")])
            out.append((v, f"{key}={value!r}: {r}"))
            continue
        got = getattr(o.value, name)
        if name == "v_sun":
            ok = isinstance(got, tuple) and len(got) == 3 and all(isinstance(g, float) for g in got)
        else:
            ok = isinstance(got, float)
        out.append(
            (GOOD, f"{key}={value!r} read as {got!r}")
            if ok
            else (WEAK, f"{key}={value!r} accepted and kept as {type(got).__name__} {got!r}")
        )
    return worst(out)


@case("F04", "frame", "SolarFrame.from_dict with missing keys ({'R0_kpc': 8.2} only)")
def _(d):
    o = attempt(mk().SolarFrame.from_dict, {"R0_kpc": 8.2})
    if o.exc:
        return judge_error(o.exc, [("missing", "required")], [("z_sun_pc", "v_sun_kms")])
    return WEAK, f"missing keys silently take defaults: {o.value.describe()}"


@case("F05", "frame", "SolarFrame.from_dict with a string and with None")
def _(d):
    out = []
    for data in ("astropy v4.0", None):
        o = attempt(mk().SolarFrame.from_dict, data)
        if o.exc:
            v, r = judge_error(o.exc, [("dict", "mapping")], [(repr(data), type(data).__name__)])
            out.append((v, f"{data!r}: {r}"))
        else:
            out.append((BAD, f"{data!r} accepted as {o.value.describe()}"))
    return worst(out)


@case("F06", "frame", "SolarFrame.presets() mutation leaking into SolarFrame.preset(name)")
def _(d):
    SF = mk().SolarFrame
    name = next(iter(SF.presets()))
    before = SF.preset(name).R0
    presets = SF.presets()
    entry = presets[name]
    restore = []
    mutated = []
    try:
        params = getattr(entry, "params", None)
        if params is not None:
            old = params.get("R0") if hasattr(params, "get") else None
            try:
                params["R0"] = 99.0
                restore.append((params, "R0", old))
                mutated.append("presets()[name].params['R0'] = 99")
            except (TypeError, AttributeError):
                mutated.append("params['R0'] = 99 refused")
        try:
            presets[name] = None
            mutated.append("presets()[name] = None")
        except (TypeError, AttributeError):
            mutated.append("presets()[name] = None refused")
        o = attempt(SF.preset, name)
    finally:
        for target, key, value in restore:
            try:
                target[key] = value
            except TypeError:
                pass
    if o.exc:
        return BAD, f"after {mutated}, SolarFrame.preset({name!r}) fails: {one_line(o.exc)}"
    if o.value.R0 != before:
        return BAD, f"after {mutated}, SolarFrame.preset({name!r}).R0 = {o.value.R0} (was {before})"
    return GOOD, f"mutations {mutated or '(refused)'} did not leak into preset({name!r})"


def _warn_case(fn, names, values, what):
    o = attempt(fn)
    if o.exc:
        return judge_error(o.exc, names, values)
    hits = o.warned(*names, *values) if values else o.warned(*names)
    if hits:
        return GOOD, f"warning: {one_line(hits[0].message)}"
    others = [one_line(w.message, 80) for w in o.warnings]
    return WEAK, f"no warning for {what}" + (f" (other warnings: {others})" if others else "")


@case("F07", "frame", "SolarFrame(z_sun=0.0208): kpc typed for pc")
def _(d):
    return _warn_case(lambda: mk().SolarFrame(z_sun=0.0208), [("z_sun",)], [("pc",), ("0.0208",)], "z_sun = 0.0208 pc")


@case("F08", "frame", "SolarFrame(R0=8122): pc typed for kpc (R0 >= 100)")
def _(d):
    return _warn_case(lambda: mk().SolarFrame(R0=8122.0), [("R0",)], [("kpc",), ("8122",)], "R0 = 8122 kpc")


@case("F09", "frame", "SolarFrame(R0=0.5): R0 < 1 kpc")
def _(d):
    return _warn_case(lambda: mk().SolarFrame(R0=0.5), [("R0",)], [("kpc",), ("0.5",)], "R0 = 0.5 kpc")


@case("F10", "frame", "SolarFrame(z_sun=0.5): z_sun under 1 pc")
def _(d):
    return _warn_case(lambda: mk().SolarFrame(z_sun=0.5), [("z_sun",)], [("pc",), ("0.5",)], "z_sun = 0.5 pc")


@case("F11", "frame", "SolarFrame(R0=-8)")
def _(d):
    o = attempt(mk().SolarFrame, R0=-8.0)
    return judge_error(o.exc, ["R0"], [-8]) if o.exc else (BAD, "negative R0 accepted")


@case("F12", "frame", "SolarFrame(R0=inf)")
def _(d):
    o = attempt(mk().SolarFrame, R0=float("inf"))
    return judge_error(o.exc, ["R0"], ["inf"]) if o.exc else (BAD, "R0 = inf accepted")


@case("F13", "frame", "SolarFrame with a two-component v_sun")
def _(d):
    o = attempt(mk().SolarFrame, v_sun=(12.9, 245.6))
    return judge_error(o.exc, ["v_sun"], [("2", "two")]) if o.exc else (BAD, "two components accepted")


@case("F14", "frame", "SolarFrame(R0 in km/s)")
def _(d):
    import astropy.units as u

    o = attempt(mk().SolarFrame, R0=8.1 * u.km / u.s)
    return judge_error(o.exc, ["R0"], [("km / s", "km/s")]) if o.exc else (BAD, "R0 in km/s accepted")


@case("F15", "frame", "SolarFrame.preset with an unknown name")
def _(d):
    o = attempt(mk().SolarFrame.preset, "astropy")
    return judge_error(o.exc, [("preset",)], ["astropy"]) if o.exc else (BAD, "unknown preset accepted")


@case("F16", "frame", "frame.replace(R0='8.3') and replace(unknown=1)")
def _(d):
    f = mk().SolarFrame()
    out = []
    o = attempt(f.replace, R0="8.3")
    if o.exc:
        out.append(judge_error(o.exc, ["R0"], ["8.3"]))
    else:
        out.append(
            (GOOD, "R0='8.3' read as 8.3")
            if o.value.R0 == 8.3 and isinstance(o.value.R0, float)
            else (BAD, f"R0='8.3' became {o.value.R0!r}")
        )
    o = attempt(f.replace, R_0=8.3)
    out.append(judge_error(o.exc, [("R_0",)], []) if o.exc else (BAD, "unknown field accepted"))
    return worst(out)


@case("F17", "frame", "SolarFrame.from_dict with an unknown key (typo)")
def _(d):
    o = attempt(mk().SolarFrame.from_dict, _frame_dict(R0_kcp=8.2))
    return judge_error(o.exc, [("R0_kcp",)], []) if o.exc else (BAD, "typo silently ignored")


# ====================================================================================== CATALOG
@case("C01", "catalog", "CSV with a duplicated column name (pmra twice)")
def _(d):
    Path("dup.csv").write_text(
        "ra,dec,parallax,parallax_error,pmra,pmdec,pmra\n10,5,2,0.05,3,-1,30\n200,-30,1,0.05,-2,4,-20\n"
    )
    o = attempt(mk().read_catalog, "dup.csv")
    if o.exc:
        return judge_error(
            o.exc, ["pmra"], [("twice", "duplicate", "more than once", "pmra_2", "2 columns", "same name")]
        )
    t = o.value
    extra = [c for c in t.colnames if c.startswith("pmra") and c != "pmra"]
    return BAD, (
        f"duplicated column read silently: pmra = {fval(t['pmra']).tolist()}, the other kept as {extra or 'nothing'}"
    )


@case("C02", "catalog", "alias clash: pmra and pm_ra both present")
def _(d):
    t = basic_table()
    t["pm_ra"] = [9.0, 9.0, 9.0, 9.0]
    o = attempt(mk().read_catalog, t)
    if o.exc:
        return judge_error(o.exc, ["pmra"], ["pm_ra"])
    return BAD, f"clash resolved silently, pmra = {fval(o.value['pmra']).tolist()}"


@case("C03", "catalog", "Parquet with a corrupted data page of ra (footer intact)")
def _(d):
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = 200
    ra = np.linspace(10.0, 350.0, n)
    cols = {
        "source_id": np.arange(n, dtype=np.int64),
        "ra": ra,
        "dec": np.linspace(-60, 60, n),
        "parallax": np.full(n, 2.0),
        "parallax_error": np.full(n, 0.05),
        "pmra": np.linspace(-5, 5, n),
        "pmdec": np.linspace(5, -5, n),
    }
    table = pa.table(cols)
    kwargs = dict(compression=None, use_dictionary=False)
    try:
        pq.write_table(table, "c.parquet", write_page_checksum=True, **kwargs)
        note = "written with page checksums"
    except TypeError:
        pq.write_table(table, "c.parquet", **kwargs)
        note = "written without page checksums (old pyarrow)"
    meta = pq.ParquetFile("c.parquet").metadata
    index = meta.schema.names.index("ra")
    chunk = meta.row_group(0).column(index)
    start, size = chunk.data_page_offset, chunk.total_compressed_size
    raw = bytearray(Path("c.parquet").read_bytes())
    first = raw.find(ra[:4].astype("<f8").tobytes(), start, start + size)
    if first < 0:
        return BAD, "setup: could not find the ra values in the first data page"
    k0, k1 = 5, 6
    raw[first + 8 * k0 : first + 8 * k0 + 8] = bytes(8)
    raw[first + 8 * k1 : first + 8 * k1 + 8] = struct.pack("<d", 5e-310)
    Path("c.parquet").write_bytes(bytes(raw))
    o = attempt(mk().read_catalog, "c.parquet")
    if o.exc:
        return judge_error(o.exc, [("c.parquet", "ra")], [("corrupt", "checksum", "crc", "page", "row 5", "5e-310")])
    got = fval(o.value["ra"])
    changed = np.flatnonzero(got != ra)
    if changed.size == 0:
        return GOOD, f"values read as written ({note})"
    flagged = bool(np.all(np.asarray(o.value["has_nan"])[changed])) if "has_nan" in o.value.colnames else False
    if flagged and np.all(np.isnan(got[changed])):
        return GOOD, f"corrupted rows {changed.tolist()} NaN and flagged"
    return BAD, (
        f"silently wrong ra ({note}): rows {changed.tolist()} read as "
        f"{[float(got[i]) for i in changed]} deg, written {[round(float(ra[i]), 4) for i in changed]}"
    )


@case("C36", "catalog", "Parquet with page checksums, one ra value bit-flipped to a plausible number")
def _(d):
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = 100
    ra = np.linspace(20.0, 340.0, n)
    table = pa.table(
        {
            "ra": ra,
            "dec": np.linspace(-50, 50, n),
            "parallax": np.full(n, 2.0),
            "parallax_error": np.full(n, 0.05),
            "pmra": np.linspace(-5, 5, n),
            "pmdec": np.zeros(n),
        }
    )
    try:
        pq.write_table(table, "f.parquet", compression=None, use_dictionary=False, write_page_checksum=True)
    except TypeError:
        return GOOD, "skipped: this pyarrow cannot write page checksums"
    meta = pq.ParquetFile("f.parquet").metadata
    chunk = meta.row_group(0).column(meta.schema.names.index("ra"))
    raw = bytearray(Path("f.parquet").read_bytes())
    first = raw.find(
        ra[:4].astype("<f8").tobytes(), chunk.data_page_offset, chunk.data_page_offset + chunk.total_compressed_size
    )
    if first < 0:
        return BAD, "setup: could not find the ra values in the data page"
    k = 10
    raw[first + 8 * k + 6] ^= 0x10  # lowest exponent bit: the value halves or doubles
    Path("f.parquet").write_bytes(bytes(raw))
    flipped = struct.unpack("<d", bytes(raw[first + 8 * k : first + 8 * k + 8]))[0]
    try:  # does the file itself let a reader notice? (pyarrow verifies checksums on request)
        pq.read_table("f.parquet", page_checksum_verification=True)
        detectable = "pyarrow's checksum check does not notice"
    except TypeError:
        detectable = "this pyarrow cannot verify checksums"
    except Exception:  # noqa: BLE001
        detectable = "pyarrow's page checksum check notices it"
    o = attempt(mk().read_catalog, "f.parquet")
    if o.exc:
        return judge_error(o.exc, [("f.parquet", "ra")], [("checksum", "crc", "corrupt", "damaged")])
    got = fval(o.value["ra"])
    if got[k] == ra[k]:
        return GOOD, "value read as written"
    return BAD, (
        f"row {k} ra read as {got[k]:.6g} deg (written {ra[k]:.6g}; the damaged bytes give "
        f"{flipped:.6g}) silently; {detectable}"
    )


def _judge_read_same(o, names, expect_rows=4, label=""):
    """A text-format variant of BASIC: good if read right, weak if refused, bad if read wrong."""
    if o.exc:
        # The issue asks for the likely cause to be named: a refusal that names it is good, one that
        # does not is weak (reading the file right would be good too).
        v, r = judge_error(o.exc, names, [])
        return (GOOD if v == GOOD else WEAK), f"{label} refused: {r}"
    t = o.value
    try:
        ok = (
            len(t) == expect_rows
            and np.allclose(fval(t["ra"]), BASIC["ra"])
            and np.allclose(fval(t["pmdec"]), BASIC["pmdec"])
        )
    except Exception as exc:  # noqa: BLE001
        return BAD, f"{label} read into something else: {one_line(exc)}"
    return (GOOD, f"{label} read correctly") if ok else (BAD, f"{label} read with wrong values")


@case("C04", "catalog", "CSV with a UTF-8 byte order mark")
def _(d):
    write_csv("bom.csv", basic(), bom=True)
    return _judge_read_same(attempt(mk().read_catalog, "bom.csv"), [("ra", "bom", "byte order")], label="BOM CSV")


@case("C05", "catalog", "CSV with ';' delimiters")
def _(d):
    write_csv("semi.csv", basic(), delim=";")
    return _judge_read_same(attempt(mk().read_catalog, "semi.csv"), [(";", "delimiter", "semicolon")], label="';' CSV")


@case("C06", "catalog", "CSV with tab delimiters")
def _(d):
    write_csv("tab.csv", basic(), delim="\t")
    return _judge_read_same(attempt(mk().read_catalog, "tab.csv"), [("tab", "\\t", "delimiter")], label="tab CSV")


@case("C07", "catalog", "CSV with Latin-1 bytes in a name column")
def _(d):
    cols = basic()
    cols["name"] = ["Sirius", "Sa\xefph", "Ca\xf1on", "M\xe9rope"]
    write_csv("latin.csv", cols, encoding="latin-1")
    o = attempt(mk().read_catalog, "latin.csv")
    if o.exc:
        return judge_error(o.exc, [("latin.csv",)], [("utf-8", "utf8", "encoding", "latin")])
    return _judge_read_same(o, [], label="Latin-1 CSV")


@case("C08", "catalog", "distance column with median above 50 (pc typed for kpc)")
def _(d):
    cols = basic(parallax=None, parallax_error=None)
    cols["distance"] = [120.0, 350.0, 80.0, 500.0]
    write_csv("dpc.csv", cols)
    return _warn_case(lambda: mk().read_catalog("dpc.csv"), [("distance",)], [("pc",)], "distances of 80-500 'kpc'")


@case("C09", "catalog", "parallax ignored when a distance column is used: said in the metadata?")
def _(d):
    t = basic_table()
    t["distance"] = [0.5, 1.0, 0.25, 0.4]
    out = mk().to_galactocentric(t, distance=mk().DistanceColumn("distance"))
    text = json.dumps(out.meta, default=str).lower()
    if "parallax" in text and any(w in text for w in ("not used", "ignored", "unused")):
        return GOOD, "metadata says the parallax column is not used"
    return WEAK, "metadata does not say the parallax column was ignored in favour of 'distance'"


@case("C10", "catalog", "non-positive-definite correlation set (linear errors)")
def _(d):
    t = basic_table()
    for name, err in (("ra_error", 0.05), ("dec_error", 0.05), ("pmra_error", 0.05), ("pmdec_error", 0.05)):
        t[name] = [err] * 4
    t["parallax_error"] = [0.2] * 4
    t["ra_dec_corr"] = [0.0, 0.99, 0.0, 0.0]
    t["ra_parallax_corr"] = [0.0, 0.99, 0.0, 0.0]
    t["dec_parallax_corr"] = [0.0, -0.99, 0.0, 0.0]
    o = attempt(mk().to_galactocentric, t, errors="linear")
    if o.exc:
        return judge_error(o.exc, [("corr",)], [("row 1", "rows 1", "source_id 12", "12")])
    out = o.value
    flag = str(out["flag"][1])
    meta = json.dumps(out.meta, default=str).lower()
    if "corr" in flag or "definite" in flag:
        return GOOD, f"row 1 flagged {flag!r}"
    if "corr" in meta and ("definite" in meta or "psd" in meta or "semi" in meta):
        return GOOD, "metadata reports the invalid correlation set"
    sig = float(fval(out["sigma_x"])[1])
    return WEAK, f"invalid correlation matrix not flagged (row 1 flag {flag!r}, sigma_x = {sig:.3g})"


@case("C11", "catalog", "ra = 1e20 (wrapped silently?)")
def _(d):
    o = attempt(mk().read_catalog, basic_table(ra=[10.0, 1e20, 350.0, 45.0]))
    if o.exc:
        return judge_error(o.exc, ["ra"], [(1e20, "1e+20")])
    wrapped = float(fval(o.value["ra"])[1])
    count = o.value.meta.get("ra_wrapped")
    return WEAK, f"ra = 1e20 accepted and wrapped to {wrapped:.6g} deg (meta ra_wrapped = {count})"


@case("C12", "catalog", "numeric strings in a Parquet string column vs the same text in a CSV")
def _(d):
    import pyarrow as pa
    import pyarrow.parquet as pq

    cols = basic()
    text = [str(v) for v in cols["pmra"]]
    table = pa.table({**{k: v for k, v in cols.items() if k != "pmra"}, "pmra": pa.array(text, pa.string())})
    pq.write_table(table, "s.parquet")
    write_csv("s.csv", cols)
    a = attempt(mk().read_catalog, "s.parquet")
    b = attempt(mk().read_catalog, "s.csv")
    if a.exc is None and b.exc is None:
        same = np.allclose(fval(a.value["pmra"]), fval(b.value["pmra"]))
        return (GOOD, "one rule: both read as numbers") if same else (BAD, "both read, different numbers")
    if a.exc is not None and b.exc is not None:
        return worst([judge_error(a.exc, ["pmra"], []), judge_error(b.exc, ["pmra"], [])])
    which = "Parquet refused, CSV read" if a.exc else "CSV refused, Parquet read"
    return WEAK, f"two rules for the same text: {which} ({one_line(a.exc or b.exc, 140)})"


@case("C13", "catalog", "negative parallaxes through to_galactocentric")
def _(d):
    t = basic_table(parallax=[2.0, -1.0, 0.0, 2.5])
    o = attempt(mk().to_galactocentric, t)
    if o.exc:
        return WEAK, f"negative parallaxes stop the conversion: {one_line(o.exc)}"
    out = o.value
    rows = [1, 2]
    ok = all(str(out["flag"][i]) and math.isnan(float(fval(out["x"])[i])) for i in rows)
    good_rows = all(not str(out["flag"][i]) and math.isfinite(float(fval(out["x"])[i])) for i in (0, 3))
    if ok and good_rows:
        return GOOD, f"rows 1, 2 NaN and flagged {[str(out['flag'][i]) for i in rows]}"
    return BAD, f"flags {list(map(str, out['flag']))}, x {fval(out['x']).round(3).tolist()}"


@case("C14", "catalog", "NaN in every column")
def _(d):
    nan = [np.nan] * 4
    t = basic_table(ra=nan, dec=nan, parallax=nan, pmra=nan, pmdec=nan, radial_velocity=nan)
    o = attempt(mk().to_galactocentric, t)
    if o.exc:
        return judge_error(o.exc, [("ra", "nan", "no usable")], [])
    out = o.value
    if all(str(f) for f in out["flag"]) and np.all(np.isnan(fval(out["x"]))):
        return GOOD, f"all rows NaN and flagged ({str(out['flag'][0])!r})"
    return BAD, "NaN rows not flagged"


@case("C15", "catalog", "empty table (columns, no rows)")
def _(d):
    t = basic_table(**{k: [] for k in BASIC})
    o = attempt(mk().to_galactocentric, t)
    if o.exc:
        return judge_error(o.exc, [("row", "empty")], [("no rows", "0 rows", "empty", "no stars")])
    if len(o.value) == 0:
        return GOOD, "empty result for an empty table"
    return BAD, f"{len(o.value)} rows from nothing"


@case("C16", "catalog", "one-row table against astropy's Galactocentric transformation")
def _(d):
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    t = basic_table(**{k: [v[1]] for k, v in BASIC.items()})
    frame = mk().SolarFrame(R0=8.2, z_sun=25.0, v_sun=(11.1, 240.0, 7.3))
    o = attempt(mk().to_galactocentric, t, frame=frame)
    if o.exc:
        return BAD, f"a valid one-row table fails: {one_line(o.exc)}"
    c = SkyCoord(
        ra=t["ra"][0] * u.deg,
        dec=t["dec"][0] * u.deg,
        distance=(1 / t["parallax"][0]) * u.kpc,
        pm_ra_cosdec=t["pmra"][0] * u.mas / u.yr,
        pm_dec=t["pmdec"][0] * u.mas / u.yr,
        radial_velocity=t["radial_velocity"][0] * u.km / u.s,
    )
    g = c.transform_to(frame.to_astropy())  # reference: astropy's own Galactocentric frame
    ref = [
        g.x.to_value(u.kpc),
        g.y.to_value(u.kpc),
        g.z.to_value(u.kpc),
        g.v_x.to_value(u.km / u.s),
        g.v_y.to_value(u.km / u.s),
        g.v_z.to_value(u.km / u.s),
    ]
    got = [float(fval(o.value[k])[0]) for k in ("x", "y", "z", "vx", "vy", "vz")]
    err = max(abs(a - b) for a, b in zip(got, ref))
    if err > 1e-6:
        return BAD, f"differs from astropy by {err:.3g}: {np.round(got, 6).tolist()} vs {np.round(ref, 6).tolist()}"
    return GOOD, f"matches astropy to {err:.1g}"


@case("C17", "catalog", "ECSV with pmra in deg/yr and ra in rad (units stated)")
def _(d):
    import astropy.units as u
    from astropy.table import QTable

    t = QTable({k: np.array(v, dtype=float) for k, v in BASIC.items() if k != "source_id"})
    t["ra"] = np.radians(BASIC["ra"]) * u.rad
    t["dec"] = np.array(BASIC["dec"]) * u.deg
    t["pmra"] = (np.array(BASIC["pmra"]) * u.mas / u.yr).to(u.deg / u.yr)
    t["pmdec"] = np.array(BASIC["pmdec"]) * u.mas / u.yr
    t.write("units.ecsv", overwrite=True)
    o = attempt(mk().read_catalog, "units.ecsv")
    if o.exc:
        return WEAK, f"stated units refused: {one_line(o.exc)}"
    ok = np.allclose(fval(o.value["ra"]), BASIC["ra"], rtol=1e-12) and np.allclose(
        fval(o.value["pmra"]), BASIC["pmra"], rtol=1e-9
    )
    return (GOOD, "converted to deg and mas/yr") if ok else (BAD, "wrong conversion of rad / deg/yr")


@case("C18", "catalog", "ECSV with radial_velocity in m/s")
def _(d):
    import astropy.units as u
    from astropy.table import QTable

    t = QTable(basic_table())
    t["radial_velocity"] = np.array(BASIC["radial_velocity"]) * 1000 * u.m / u.s
    t.write("rv.ecsv", overwrite=True)
    o = attempt(mk().read_catalog, "rv.ecsv")
    if o.exc:
        return WEAK, f"m/s refused: {one_line(o.exc)}"
    ok = np.allclose(fval(o.value["radial_velocity"]), BASIC["radial_velocity"])
    return (GOOD, "m/s converted to km/s") if ok else (BAD, f"rv read as {fval(o.value['radial_velocity']).tolist()}")


@case("C19", "catalog", "CSV with radial velocities in m/s but no unit (|rv| ~ 30000)")
def _(d):
    write_csv("rvms.csv", basic(radial_velocity=[10000.0, -20000.0, 5000.0, 30000.0]))
    return _warn_case(
        lambda: mk().read_catalog("rvms.csv"),
        [("radial_velocity",)],
        [("km/s", "km / s", "m/s")],
        "radial velocities of 30000 km/s",
    )


@case("C20", "catalog", "correlation column above 1")
def _(d):
    t = basic_table()
    t["pmra_pmdec_corr"] = [0.1, 1.7, 0.0, 0.2]
    o = attempt(mk().read_catalog, t)
    return judge_error(o.exc, ["pmra_pmdec_corr"], [("1.7",), ("row 1", "rows 1")]) if o.exc else (BAD, "accepted")


@case("C21", "catalog", "FITS file with a .csv suffix")
def _(d):
    basic_table().write("real.fits", overwrite=True)
    shutil.copy("real.fits", "wrong.csv")
    o = attempt(mk().read_catalog, "wrong.csv")
    if o.exc:
        return judge_error(o.exc, ["wrong.csv"], [("fits", "binary", "format", "not a text", "not text")])
    return BAD, f"a FITS file read as CSV gave {len(o.value)} rows"


@case("C22", "catalog", "a directory given as the path")
def _(d):
    os.mkdir("stars.csv")
    o = attempt(mk().read_catalog, "stars.csv")
    return judge_error(o.exc, ["stars.csv"], [("directory", "folder")]) if o.exc else (BAD, "read a directory")


@case("C23", "catalog", "a path that does not exist")
def _(d):
    o = attempt(mk().read_catalog, "nope.csv")
    return judge_error(o.exc, ["nope.csv"], [("no such", "not exist", "not found", "no file")]) if o.exc else (BAD, "?")


@case("C24", "catalog", "unknown format suffix .txt")
def _(d):
    write_csv("stars.txt", basic())
    o = attempt(mk().read_catalog, "stars.txt")
    if o.exc:
        return judge_error(o.exc, ["stars.txt"], [".txt"])
    return _judge_read_same(o, [], label=".txt")


@case("C25", "catalog", "dec = 95 in row 2")
def _(d):
    o = attempt(mk().read_catalog, basic_table(dec=[5.0, -30.0, 95.0, 20.0]))
    return judge_error(o.exc, ["dec"], [95, ("row 2",)]) if o.exc else (BAD, "dec = 95 accepted")


@case("C26", "catalog", "text 'n/a' in the parallax column")
def _(d):
    cols = basic(parallax=["2.0", "n/a", "4.0", "2.5"])
    write_csv("na.csv", cols)
    o = attempt(mk().read_catalog, "na.csv")
    if o.exc:
        return judge_error(o.exc, ["parallax"], ["n/a", ("row 1",)])
    v = fval(o.value["parallax"])
    if math.isnan(v[1]) and bool(o.value["has_nan"][1]):
        return GOOD, "'n/a' read as a missing value and flagged"
    return BAD, f"'n/a' read as {v[1]}"


@case("C27", "catalog", "negative uncertainty")
def _(d):
    o = attempt(mk().read_catalog, basic_table(parallax_error=[0.05, -0.05, 0.05, 0.05]))
    return judge_error(o.exc, ["parallax_error"], [-0.05, ("row 1",)]) if o.exc else (BAD, "accepted")


@case("C28", "catalog", "infinite proper motion")
def _(d):
    o = attempt(mk().read_catalog, basic_table(pmdec=[1.0, 2.0, float("inf"), 3.0]))
    return judge_error(o.exc, ["pmdec"], ["inf", ("row 2",)]) if o.exc else (BAD, "inf accepted")


@case("C29", "catalog", "units= with a unit that does not exist")
def _(d):
    o = attempt(mk().read_catalog, basic_table(), units={"parallax": "milliarcsex"})
    return judge_error(o.exc, ["parallax"], ["milliarcsex"]) if o.exc else (BAD, "bogus unit accepted")


@case("C30", "catalog", "read_catalog(42)")
def _(d):
    o = attempt(mk().read_catalog, 42)
    return judge_error(o.exc, [("int",)], [("path", "table")]) if o.exc else (BAD, "42 read as a catalogue")


@case("C31", "catalog", "a .csv.gz that is not gzipped")
def _(d):
    write_csv("plain.csv.gz", basic())
    o = attempt(mk().read_catalog, "plain.csv.gz")
    if o.exc:
        return judge_error(o.exc, ["plain.csv.gz"], [("gzip", "compress", "not a gz", "csv")])
    return _judge_read_same(o, [], label="mislabelled .gz")


@case("C32", "catalog", "distance = 0 in a distance column")
def _(d):
    t = basic_table()
    t["distance"] = [0.5, 0.0, 0.25, 0.4]
    o = attempt(mk().read_catalog, t)
    if o.exc:
        return judge_error(o.exc, ["distance"], [("row 1",)])
    out = mk().to_galactocentric(o.value, distance=mk().DistanceColumn("distance"))
    if str(out["flag"][1]) and math.isnan(float(fval(out["x"])[1])):
        return GOOD, f"row 1 flagged {str(out['flag'][1])!r}"
    return BAD, "distance 0 used silently"


@case("C33", "catalog", "distance_pc alias is read in pc")
def _(d):
    cols = basic(parallax=None, parallax_error=None)
    cols["distance_pc"] = [500.0, 1000.0, 250.0, 400.0]
    write_csv("dpc2.csv", cols)
    o = attempt(mk().read_catalog, "dpc2.csv")
    if o.exc:
        return BAD, f"valid distance_pc column refused: {one_line(o.exc)}"
    v = fval(o.value["distance"])
    return (GOOD, "distance_pc converted to kpc") if np.allclose(v, [0.5, 1.0, 0.25, 0.4]) else (BAD, f"distance {v}")


@case("C34", "catalog", "pandas DataFrame with an object column of numbers and None")
def _(d):
    import pandas as pd

    df = pd.DataFrame(basic())
    df["pmra"] = pd.Series([3.0, None, 1.0, 4.0], dtype=object)
    o = attempt(mk().read_catalog, df)
    if o.exc:
        return judge_error(o.exc, ["pmra"], [("row 1", "None")])
    v = fval(o.value["pmra"])
    if math.isnan(v[1]) and bool(o.value["has_nan"][1]) and v[0] == 3.0:
        return GOOD, "None read as NaN and flagged"
    return BAD, f"pmra read as {v.tolist()}"


@case("C35", "catalog", "missing required column (no pmdec)")
def _(d):
    o = attempt(mk().read_catalog, basic_table(pmdec=None))
    return judge_error(o.exc, ["pmdec"], [("missing",)]) if o.exc else (BAD, "accepted without pmdec")


# ====================================================================================== KINEMATICS
@case("K01", "kinematics", "errors='linear ' (trailing blank)")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), errors="linear ")
    return judge_error(o.exc, ["errors"], ["'linear '"]) if o.exc else (BAD, "typo accepted")


@case("K02", "kinematics", "errors='montecarlo' with n_samples=1")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), errors="montecarlo", n_samples=1)
    return judge_error(o.exc, ["n_samples"], [1]) if o.exc else (BAD, "n_samples=1 accepted")


@case("K03", "kinematics", "DistanceColumn naming a column the table lacks")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), distance=mk().DistanceColumn("dist_pc"))
    return judge_error(o.exc, ["dist_pc"], [("column", "no")]) if o.exc else (BAD, "missing column accepted")


@case("K04", "kinematics", "InverseParallax(min_snr=-1)")
def _(d):
    o = attempt(mk().InverseParallax, min_snr=-1)
    return judge_error(o.exc, ["min_snr"], [-1]) if o.exc else (BAD, "negative cut accepted")


@case("K05", "kinematics", "from_galactocentric round trip")
def _(d):
    s = survey(50, 9)
    g = mk().to_galactocentric(s, distance=mk().InverseParallax(min_snr=0))
    ok = np.asarray(g["has_velocity"], dtype=bool)
    back = mk().from_galactocentric(g[ok])
    errs = {}
    for k in ("ra", "dec", "pmra", "pmdec", "radial_velocity"):
        errs[k] = float(np.nanmax(np.abs(fval(back[k]) - fval(s[k])[ok])))
    plx = 0.0
    if "parallax" in back.colnames:
        plx = float(np.nanmax(np.abs(fval(back["parallax"]) - fval(s["parallax"])[ok])))
    worst_err = max(list(errs.values()) + [plx])
    if worst_err > 1e-6:
        return BAD, f"round trip off by {worst_err:.3g} ({errs})"
    return GOOD, f"round trip of {ok.sum()} stars within {worst_err:.1g}"


@case("K06", "kinematics", "frame passed as a dict to to_galactocentric")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), frame={"R0_kpc": 8.3})
    if o.exc:
        return judge_error(o.exc, ["frame"], [("dict", "SolarFrame")])
    R0 = o.value.meta.get("frame", {}).get("R0_kpc")
    return (GOOD, "frame dict used") if R0 == 8.3 else (BAD, f"frame dict accepted but R0 = {R0} used")


@case("K07", "kinematics", "percentiles outside [0, 100]")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), errors="montecarlo", n_samples=20, percentiles=[5, 150])
    return judge_error(o.exc, ["percentiles"], [150]) if o.exc else (BAD, "percentile 150 accepted")


@case("K08", "kinematics", "default InverseParallax on a table without parallax_error")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(parallax_error=None))
    if o.exc:
        return judge_error(o.exc, ["parallax_error"], [("min_snr", "cut")])
    flags = set(map(str, o.value["flag"]))
    return (GOOD, f"rows flagged {flags}") if all(flags) else (BAD, "distances used without the promised cut")


@case("K09", "kinematics", "Monte Carlo with seed=-5")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), errors="montecarlo", n_samples=20, seed=-5)
    if o.exc:
        return judge_error(o.exc, ["seed"], [-5])
    again = mk().to_galactocentric(basic_table(), errors="montecarlo", n_samples=20, seed=-5)
    same = np.array_equal(fval(o.value["sigma_x"]), fval(again["sigma_x"]), equal_nan=True)
    return (GOOD, "negative seed accepted and reproducible") if same else (BAD, "seed -5 not reproducible")


@case("K10", "kinematics", "distance=a plain number instead of a distance choice")
def _(d):
    o = attempt(mk().to_galactocentric, basic_table(), distance=0.5)
    return judge_error(o.exc, ["distance"], [0.5]) if o.exc else (BAD, "number accepted as distance choice")


# ====================================================================================== OORT
@case("Q01", "oort", "fit_oort without robust on 1% extreme outliers (warning?)")
def _(d):
    s = survey(3000, 11)
    rng = np.random.default_rng(1)
    rows = rng.choice(len(s), 30, replace=False)
    s["pmra"][rows] = s["pmra"][rows] + 400.0 * s["pmra"].unit
    o = attempt(mk().fit_oort, s, use="proper_motions")
    if o.exc:
        return judge_error(o.exc, [("outlier",)], [])
    hits = o.warned(("outlier", "heavy", "robust"))
    if hits:
        return GOOD, f"warning: {one_line(hits[0].message)}"
    return WEAK, f"no warning; A = {o.value.A:.3g}, B = {o.value.B:.3g} km/s/kpc"


@case("Q02", "oort", "fit_oort(bootstrap=10**9)")
def _(d):
    s = survey(500, 11)
    o = attempt(mk().fit_oort, s, use="proper_motions", bootstrap=10**9, seed=1)
    if o.exc:
        return judge_error(o.exc, ["bootstrap"], [10**9])
    return WEAK, f"bootstrap=10**9 silently handled (bootstrap info: {one_line(o.value.bootstrap, 100)})"


@case("Q03", "oort", "distance_range reversed (0.5, 0.1)")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), distance_range=(0.5, 0.1))
    return judge_error(o.exc, ["distance_range"], [0.5]) if o.exc else (BAD, "reversed range accepted")


@case("Q04", "oort", "use='pm'")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), use="pm")
    return judge_error(o.exc, ["use"], ["pm"]) if o.exc else (BAD, "accepted")


@case("Q05", "oort", "distance range with no stars")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), distance_range=(20.0, 30.0))
    return judge_error(o.exc, [("no star", "no stars")], [20]) if o.exc else (BAD, "fit with no stars")


@case("Q06", "oort", "bootstrap with seed=-5")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), use="proper_motions", bootstrap=20, seed=-5)
    if o.exc:
        return judge_error(o.exc, ["seed"], [-5])
    return GOOD, "negative seed accepted"


@case("Q07", "oort", "quality names a column that does not exist")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), quality="good_star")
    return judge_error(o.exc, [("quality", "column")], ["good_star"]) if o.exc else (BAD, "accepted")


@case("Q08", "oort", "fit on the demo survey recovers the true A and B")
def _(d):
    s = survey(8000, 4)
    truth = s.meta["truth"]
    fit = mk().fit_oort(s, use="proper_motions", distance_range=(0.0, 0.5))
    tA = next((float(v) for k, v in truth.items() if k == "A" or k.startswith("A_")), None)
    tB = next((float(v) for k, v in truth.items() if k == "B" or k.startswith("B_")), None)
    if tA is None or tB is None:
        return BAD, f"setup: truth has no A/B ({sorted(truth)[:10]})"
    eA, eB = fit.errors.get("A"), fit.errors.get("B")
    off = [(n, v, t, e) for n, v, t, e in (("A", fit.A, tA, eA), ("B", fit.B, tB, eB)) if abs(v - t) > 4 * e + 0.3]
    if off:
        return BAD, "fit far from the truth: " + ", ".join(f"{n}={v:.3g}+-{e:.2g} (true {t:.3g})" for n, v, t, e in off)
    return GOOD, f"A={fit.A:.3g}+-{eA:.2g} (true {tA:.3g}), B={fit.B:.3g}+-{eB:.2g} (true {tB:.3g})"


@case("Q09", "oort", "robust=True with clip=0")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), robust=True, clip=0)
    return judge_error(o.exc, ["clip"], [0]) if o.exc else (BAD, "clip=0 accepted")


@case("Q10", "oort", "bins with min > max")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), bins=[(0.3, 0.1)])
    return judge_error(o.exc, [("bin",)], [0.3]) if o.exc else (BAD, "accepted")


@case("Q11", "oort", "bootstrap=2.5 (not a whole number)")
def _(d):
    o = attempt(mk().fit_oort, survey(500, 11), bootstrap=2.5)
    return judge_error(o.exc, ["bootstrap"], [2.5]) if o.exc else (BAD, "2.5 resamples accepted")


# ====================================================================================== CLI
def _cli_protects_input(args, input_name, label):
    before = file_digest(input_name)
    proc, _ = cli(args)
    after = file_digest(input_name)
    if after != before:
        state = "deleted" if after is None else "overwritten"
        rc = "hang" if proc is None else proc.returncode
        return BAD, f"{label}: the input file was {state} (exit {rc})"
    v, r = judge_cli_error(proc, [input_name], [("same", "input", "overwrite", "exists")])
    if v is None:
        return BAD, f"{label}: exit 0 although the output is the input?"
    return v, r


@case("L01", "cli", "mwkin convert s.ecsv s.ecsv (output = input)", timeout=90)
def _(d):
    demo_file()
    return _cli_protects_input(["convert", "s.ecsv", "s.ecsv"], "s.ecsv", "convert s.ecsv s.ecsv")


@case("L02", "cli", "mwkin convert onto an existing output", timeout=90)
def _(d):
    demo_file()
    Path("out.ecsv").write_text("precious results from last week\n")
    before = file_digest("out.ecsv")
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv"])
    if proc is None:
        return BAD, "hang"
    if file_digest("out.ecsv") != before:
        if any(w in cli_text(proc).lower() for w in ("overwr", "replac")):
            return WEAK, f"existing output replaced, said so: {one_line(proc.stdout)}"
        return BAD, f"existing output silently replaced (exit {proc.returncode})"
    v, r = judge_cli_error(proc, ["out.ecsv"], [("exist", "overwrite")])
    return (v, r) if v else (BAD, "exit 0 but output unchanged?")


@case("L03", "cli", "mwkin oort in.ecsv --json in.ecsv", timeout=90)
def _(d):
    demo_file("in.ecsv")
    return _cli_protects_input(["oort", "in.ecsv", "--json", "in.ecsv"], "in.ecsv", "oort --json in.ecsv")


@case("L04", "cli", "mwkin orbits s.ecsv s.ecsv", timeout=90)
def _(d):
    demo_file(n=50)
    return _cli_protects_input(["orbits", "s.ecsv", "s.ecsv"], "s.ecsv", "orbits s.ecsv s.ecsv")


@case("L05", "cli", "mwkin convert ./s.ecsv <absolute path of s.ecsv> (same file, other spelling)", timeout=90)
def _(d):
    demo_file()
    return _cli_protects_input(["convert", "./s.ecsv", os.path.abspath("s.ecsv")], "s.ecsv", "other spelling")


@case("L06", "cli", "mwkin convert with an unknown output suffix .xyz", timeout=90)
def _(d):
    demo_file()
    proc, _ = cli(["convert", "s.ecsv", "out.xyz"])
    v, r = judge_cli_error(proc, [("out.xyz", ".xyz")], [("suffix", "format")])
    if v is None:
        return BAD, f"exit 0 with an unknown suffix; files: {sorted(os.listdir('.'))}"
    return v, r


@case("L07", "cli", "mwkin orbits into a missing directory (computed first, fails after?)", timeout=150)
def _(d):
    demo_file(n=500)
    common = ["--method", "integrate"]
    proc0, t0 = cli(["orbits", "missing-input.ecsv", "out.ecsv"])
    proc1, t1 = cli(["orbits", "s.ecsv", "ok.ecsv", *common], timeout=100)
    proc2, t2 = cli(["orbits", "s.ecsv", "nodir/out.ecsv", *common], timeout=100)
    if proc1 is None or proc2 is None:
        return BAD, "hang"
    v, r = judge_cli_error(proc2, ["nodir"], [("director", "folder", "no such", "not exist")])
    if v is None:
        return BAD, "exit 0 writing into a missing directory?"
    compute = t1 - t0
    late = t2 - t0 > 0.5 * compute and compute > 1.5
    if late and v == GOOD:
        return WEAK, f"fails only after computing ({t2:.1f} s; startup {t0:.1f} s, full run {t1:.1f} s): {r}"
    return v, r + (f" (after {t2:.1f} s; full run {t1:.1f} s)" if late else f" (fails early: {t2:.1f} s)")


@case("L08", "cli", "mwkin convert --errors montecarlo --seed -5", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--errors", "montecarlo", "--n-samples", "20", "--seed", "-5"])
    v, r = judge_cli_error(proc, [("seed",)], [-5])
    if v:
        return v, r
    again, _ = cli(["convert", "s.ecsv", "out2.ecsv", "--errors", "montecarlo", "--n-samples", "20", "--seed", "-5"])
    same = again is not None and again.returncode == 0 and Path("out.ecsv").read_text() == Path("out2.ecsv").read_text()
    return (GOOD, "negative seed accepted and reproducible") if same else (BAD, "--seed -5 accepted, not reproducible")


@case("L09", "cli", "mwkin convert --z-sun 0.0208 (kpc typed for pc)", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--z-sun", "0.0208"])
    if proc is None:
        return BAD, "hang"
    if proc.returncode != 0:
        return judge_cli_error(proc, [("z-sun", "z_sun")], [0.0208])
    lost = changed_files(proc)
    if lost:
        return lost
    text = cli_text(proc)
    if not missing_groups(text, [("z_sun", "z-sun"), ("pc",), ("0.0208",)]) and "warn" in text.lower():
        return GOOD, f"warned: {one_line(proc.stderr)}"
    return WEAK, "no warning for z_sun = 0.0208 pc"


@case("L10", "cli", "mwkin convert --R0 inf", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--R0", "inf"])
    v, r = judge_cli_error(proc, ["R0"], ["inf"])
    return (v, r) if v else (BAD, "R0 = inf accepted")


@case("L11", "cli", "mwkin convert with an input file that does not exist", timeout=90)
def _(d):
    proc, _ = cli(["convert", "nothing.ecsv", "out.ecsv"])
    v, r = judge_cli_error(proc, ["nothing.ecsv"], [])
    return (v, r) if v else (BAD, "exit 0")


@case("L12", "cli", "mwkin convert --frame astropy (unknown preset)", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--frame", "astropy"])
    v, r = judge_cli_error(proc, [("frame", "preset")], ["astropy"])
    return (v, r) if v else (BAD, "unknown preset accepted")


@case("L13", "cli", "mwkin orbits --potential Foo", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["orbits", "s.ecsv", "out.ecsv", "--potential", "Foo"])
    v, r = judge_cli_error(proc, [("potential", "preset")], ["Foo"])
    return (v, r) if v else (BAD, "unknown potential accepted")


@case("L14", "cli", "mwkin oort --bootstrap -1", timeout=90)
def _(d):
    demo_file(n=300)
    proc, _ = cli(["oort", "s.ecsv", "--bootstrap", "-1"])
    v, r = judge_cli_error(proc, ["bootstrap"], [-1])
    return (v, r) if v else (BAD, "bootstrap -1 accepted")


@case("L15", "cli", "mwkin convert of a CSV with dec = 95", timeout=90)
def _(d):
    write_csv("bad.csv", basic(dec=[5.0, -30.0, 95.0, 20.0]))
    proc, _ = cli(["convert", "bad.csv", "out.ecsv"])
    v, r = judge_cli_error(proc, ["dec"], [95, ("row 2",)])
    return (v, r) if v else (BAD, "dec = 95 accepted")


@case("L16", "cli", "mwkin demo out.ecsv --n 0", timeout=90)
def _(d):
    proc, _ = cli(["demo", "out.ecsv", "--n", "0"])
    v, r = judge_cli_error(proc, [("n",)], [0])
    return (v, r) if v else (BAD, "n = 0 accepted")


@case("L17", "cli", "mwkin convert --errors montecarlo --n-samples 0", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--errors", "montecarlo", "--n-samples", "0"])
    v, r = judge_cli_error(proc, [("n_samples", "n-samples")], [0])
    return (v, r) if v else (BAD, "n-samples 0 accepted")


@case("L18", "cli", "mwkin oort --json into a missing directory", timeout=90)
def _(d):
    demo_file(n=300)
    proc, _ = cli(["oort", "s.ecsv", "--json", "nodir/fit.json"])
    v, r = judge_cli_error(proc, ["nodir"], [("director", "no such", "not exist", "folder")])
    return (v, r) if v else (BAD, "exit 0 with an unwritable --json path")


@case("L19", "cli", "mwkin convert --v-sun with two values", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--v-sun", "12", "245"])
    v, r = judge_cli_error(proc, ["--v-sun"], [("3", "three", "expected")])
    return (v, r) if v else (BAD, "two components accepted")


@case("L20", "cli", "mwkin convert --min-parallax-snr -2", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--min-parallax-snr", "-2"])
    v, r = judge_cli_error(proc, [("min_snr", "min-parallax-snr")], [-2])
    return (v, r) if v else (BAD, "negative cut accepted")


@case("L21", "cli", "mwkin convert --distance-column with a column the file lacks", timeout=90)
def _(d):
    demo_file(n=50)
    proc, _ = cli(["convert", "s.ecsv", "out.ecsv", "--distance-column", "dist_bj"])
    v, r = judge_cli_error(proc, ["dist_bj"], [])
    return (v, r) if v else (BAD, "missing column accepted")


# ====================================================================================== DASK
def _dask_input(n=400, nparts=3, bad_row=None):
    import dask.dataframe as dd

    s = survey(n, 7)
    df = s.to_pandas()
    if "source_id" in df.columns:
        df["source_id"] = df["source_id"].astype("int64")
    if bad_row is not None:
        df.loc[bad_row, "dec"] = 95.0
    dd.from_pandas(df, npartitions=nparts).to_parquet("in_dir")
    return s, df


def _dask_convert():
    import mwkin.scale as ms

    fn = getattr(ms, "to_galactocentric_dask", None) or getattr(ms, "to_galactocentric", None)
    if fn is None:
        raise RuntimeError(f"mwkin.scale has no to_galactocentric[_dask]; names: {getattr(ms, '__all__', dir(ms))}")
    return fn


@case("D01", "dask", "to_galactocentric_dask(...).to_parquet(out): values against the in-memory path", timeout=120)
def _(d):
    import dask
    import dask.dataframe as dd
    import pandas as pd

    s, df = _dask_input()
    out = _dask_convert()(dd.read_parquet("in_dir"))
    with dask.config.set(scheduler="synchronous"):
        o = attempt(out.to_parquet, "out.parquet")
    if o.exc:
        return WEAK, f"valid input refused: the Dask output cannot be written: {one_line(o.exc, 160)}"
    back = pd.read_parquet("out.parquet")
    ref = mk().to_galactocentric(s)
    if len(back) != len(ref):
        return BAD, f"{len(back)} rows written for {len(ref)} stars"
    if "source_id" in back.columns:
        back = back.set_index("source_id").loc[np.asarray(ref["source_id"])]
    else:
        back = back.sort_index()
    errs = []
    for k in ("x", "y", "z", "vx", "vy", "vz"):
        a, b = back[k].to_numpy(dtype=float), fval(ref[k])
        same_nan = np.array_equal(np.isnan(a), np.isnan(b))
        diff = np.nanmax(np.abs(a - b)) if np.any(np.isfinite(a)) else 0.0
        if not same_nan or diff > 1e-9:
            errs.append(f"{k}: max diff {diff:.3g}, NaN pattern {'same' if same_nan else 'differs'}")
    if errs:
        return BAD, "written values differ from to_galactocentric: " + "; ".join(errs)
    return GOOD, f"{len(back)} rows agree with the in-memory conversion"


@case("D02", "dask", "read the Dask output back with mk.read_catalog", timeout=120)
def _(d):
    import dask
    import dask.dataframe as dd

    _dask_input()
    with dask.config.set(scheduler="synchronous"):  # Dask writes a folder; users often name it *.parquet
        o = attempt(_dask_convert()(dd.read_parquet("in_dir")).to_parquet, "out.parquet")
    if o.exc:
        return WEAK, f"valid input refused: the Dask output cannot be written (see D01): {one_line(o.exc, 120)}"
    parts = sorted(p for p in os.listdir("out.parquet") if p.endswith(".parquet"))
    out = []
    for path in ("out.parquet", os.path.join("out.parquet", parts[0])):
        o = attempt(mk().read_catalog, path)
        if o.exc:
            # the output holds Galactocentric columns, not observables: naming what is missing is clear
            out.append(
                judge_error(
                    o.exc,
                    [("ra", "director", path, os.path.basename(path))],
                    [("missing", "columns found", "director", "not a file")],
                )
            )
        else:
            out.append((GOOD, f"{path}: read {len(o.value)} rows"))
    return worst(out)


@case("D03", "dask", "orbit_parameters on the Dask output read with pandas", timeout=120)
def _(d):
    import dask
    import dask.dataframe as dd
    import pandas as pd

    s, _ = _dask_input(n=60, nparts=2)
    with dask.config.set(scheduler="synchronous"):
        o = attempt(_dask_convert()(dd.read_parquet("in_dir")).to_parquet, "out.parquet")
    if o.exc:
        return WEAK, f"valid input refused: the Dask output cannot be written (see D01): {one_line(o.exc, 120)}"
    back = pd.read_parquet("out.parquet")
    o = attempt(mk().orbit_parameters, back, mwpot())
    if o.exc:
        return WEAK, f"the Dask output is not accepted as phase space: {one_line(o.exc)}"
    ref = mk().orbit_parameters(mk().to_galactocentric(s), mwpot())
    a, b = fval(o.value["rapo"]), fval(ref["rapo"])
    if len(a) != len(b) or not np.allclose(np.sort(a[np.isfinite(a)]), np.sort(b[np.isfinite(b)]), rtol=1e-9):
        return BAD, "orbit parameters from the Dask output differ from the in-memory path"
    flagged_ok = np.array_equal(np.isnan(np.sort(a)), np.isnan(np.sort(b)))
    return (GOOD, "same orbit parameters as the in-memory path") if flagged_ok else (BAD, "NaN rows differ")


@case("D04", "dask", "bad row (dec = 95) in partition 3: reported by source_id and file?", timeout=120)
def _(d):
    import dask
    import dask.dataframe as dd

    bad = 330
    s, df = _dask_input(bad_row=bad)
    sid = int(df.loc[bad, "source_id"])
    out = _dask_convert()(dd.read_parquet("in_dir"))
    with dask.config.set(scheduler="synchronous"):
        o = attempt(out.compute)
    if o.exc is None:
        return BAD, "dec = 95 converted without error"
    text = str(o.exc)
    if not isinstance(o.exc, ValueError):
        return WEAK, f"wrong error type {type(o.exc).__name__}: {one_line(text)}"
    if "dec" not in text or "95" not in text:
        return WEAK, f"does not name dec = 95: {one_line(text)}"
    if str(sid) in text or f"row {bad}" in text or "part." in text:
        return GOOD, f"names the star: {one_line(text)}"
    return WEAK, f"bad row reported by its row within the partition, not source_id {sid} or the file: {one_line(text)}"


@case("D05", "dask", "to_galactocentric_dask with errors='montecarlo'", timeout=120)
def _(d):
    import dask.dataframe as dd

    _dask_input(n=40, nparts=2)
    o = attempt(_dask_convert(), dd.read_parquet("in_dir"), errors="montecarlo")
    return judge_error(o.exc, ["errors"], ["montecarlo"]) if o.exc else (BAD, "montecarlo silently accepted")


# ====================================================================================== WIDGETS
def W():
    import mwkin.widgets as w

    return w


def _status(widget):
    return str(widget.status)


def _ready(widget):
    return _status(widget).startswith("ready")


def _result_R0(widget):
    r = widget.result
    if r is None:
        return None
    frame = getattr(r, "frame", None)
    if frame is not None and hasattr(frame, "R0"):
        return float(frame.R0)
    meta = getattr(r, "meta", {}) or {}
    f = meta.get("frame")
    if isinstance(f, dict):
        return float(f.get("R0_kpc", float("nan")))
    return None


def _wait(*widgets, timeout=40.0):
    for w in widgets:
        w.wait(timeout)


@case("W01", "widgets", "frame.R0 = 8.5 then frame.R0 = inf with three widgets sharing a FrameState", timeout=120)
def _(d):
    w = W()
    fs, ps = w.FrameState(), w.PotentialState()
    s = survey(1500, 3)
    widgets = [
        w.VelocityPanel(s, frame=fs, potential=ps, threaded=False),
        w.OortFitter(s, frame=fs, potential=ps, threaded=False),
        w.OrbitExplorer(frame=fs, potential=ps, threaded=False),
    ]
    fs.R0 = 8.5
    _wait(*widgets)
    not_ready = [(type(x).__name__, _status(x)) for x in widgets if not _ready(x) or _result_R0(x) != 8.5]
    if not_ready:
        return BAD, f"after R0 = 8.5 not ready at 8.5: {not_ready}"
    o = attempt(setattr, fs, "R0", float("inf"))
    _wait(*widgets)
    if o.exc is None and not math.isfinite(fs.R0):
        stale = [type(x).__name__ for x in widgets if _ready(x)]
        if stale:
            return BAD, f"R0 = inf accepted and {stale} still say ready with results from R0 = 8.5"
        shown = [judge_error(ValueError(_status(x)), ["R0"], ["inf"]) for x in widgets]
        return worst(shown)
    if fs.R0 != 8.5:
        return BAD, f"R0 now {fs.R0} after the refused assignment"
    stale = [(type(x).__name__, _status(x)) for x in widgets if not _ready(x) or _result_R0(x) != 8.5]
    if stale:
        return BAD, f"refused but widgets out of step: {stale}"
    if o.exc is None:
        return BAD, "R0 = inf silently ignored"
    return judge_error(o.exc, ["R0"], ["inf"], types=(ValueError, _trait_error()))


def _trait_error():
    import traitlets

    return traitlets.TraitError


def _bad_parameters(component="disc", mass=-5e10):
    params = copy.deepcopy(W().PotentialState().parameters)
    params[component]["mass"] = mass
    return params


@case("W02", "widgets", "PotentialState with bad parameters, then preset = '' (OrbitExplorer sharing it)", timeout=90)
def _(d):
    w = W()
    ps = w.PotentialState()
    ox = w.OrbitExplorer(potential=ps, threaded=False)
    _wait(ox)
    if not _ready(ox):
        return BAD, f"setup: not ready: {_status(ox)}"
    a = attempt(setattr, ps, "parameters", _bad_parameters())
    _wait(ox)
    b = attempt(setattr, ps, "preset", "")
    _wait(ox)
    exc = a.exc or b.exc
    in_use = ps.preset == "" and ps.parameters.get("disc", {}).get("mass") == -5e10
    if not in_use:
        if exc is None:
            return BAD, f"bad parameters silently dropped (preset {ps.preset!r})"
        if not _ready(ox) or ox.result is None:
            return BAD, f"refused, but the widget is not ready with the old potential: {_status(ox)}"
        return judge_error(exc, [("disc.mass", "disc mass", "mass")], [-5e10], types=(ValueError, _trait_error()))
    if _ready(ox):
        return BAD, f"stale: status {_status(ox)!r} while the potential has a disc mass of -5e10 Msun"
    if ox.result is not None:
        return BAD, f"status {one_line(_status(ox), 80)!r} but .result still holds the old orbit"
    return judge_error(ValueError(_status(ox)), [("disc.mass", "disc mass", "disc")], [-5e10])


@case("W03", "widgets", "OrbitExplorer given the R = 0 star as phase space", timeout=90)
def _(d):
    star = {"x": 0.0, "y": 0.0, "z": 0.1, "vx": 30.0, "vy": 150.0, "vz": 20.0}
    o = attempt(W().OrbitExplorer, star=star, threaded=False)
    if o.exc:
        return WEAK, f"raises into the caller: {one_line(o.exc)}"
    ox = o.value
    _wait(ox)
    status = _status(ox)
    if status.startswith("computing"):
        return BAD, "stuck at 'computing...'"
    if status.startswith("error"):
        return judge_error(ValueError(status), [("R", "x", "axis", "centre", "center", "orbit")], [])
    res = ox.result
    if res is None:
        return BAD, f"status {status!r} but no result"
    verdict = judge_flagged_or_valid(res, 0, ox.potential_state.potential, [0.0, 0.0, 0.1])
    return verdict[0], f"status {one_line(status, 60)!r}; {verdict[1]}"


@case("W04", "widgets", "load_config with R0 = 9.5 and a missing sample path (all or nothing?)", timeout=90)
def _(d):
    w = W()
    demo_file("sample.ecsv", n=800)
    fs = w.FrameState()
    of = w.OortFitter("sample.ecsv", frame=fs, threaded=False)
    _wait(of)
    R0_before, sample_before = fs.R0, of.sample
    cfg = copy.deepcopy(of.config)
    cfg["frame"]["R0_kpc"] = 9.5
    cfg["sample"]["path"] = os.path.abspath("missing.ecsv")
    o = attempt(of.load_config, cfg)
    _wait(of)
    changed = []
    if fs.R0 != R0_before:
        changed.append(f"frame R0 {R0_before} -> {fs.R0}")
    if of.sample is not sample_before:
        changed.append("sample replaced")
    if o.exc is None:
        return BAD, f"config with a missing sample file accepted; changes: {changed or 'none'}"
    if changed:
        return BAD, f"half-applied: {', '.join(changed)} although load_config raised {one_line(o.exc, 100)}"
    return judge_error(o.exc, [("sample", "path")], ["missing.ecsv"])


@case("W05", "widgets", "OortFitter with a negative bulge mass in PotentialState.parameters", timeout=90)
def _(d):
    w = W()
    fs, ps = w.FrameState(), w.PotentialState()
    ps.preset = ""
    of = w.OortFitter(survey(1500, 3), frame=fs, potential=ps, threaded=False)
    _wait(of)
    if not _ready(of):
        return BAD, f"setup: not ready: {_status(of)}"
    before = of.result
    o = attempt(setattr, ps, "parameters", _bad_parameters("bulge", -1e9))
    _wait(of)
    if o.exc is not None and ps.parameters["bulge"]["mass"] != -1e9:
        return judge_error(o.exc, [("bulge.mass", "bulge mass")], [-1e9], types=(ValueError, _trait_error()))
    if _ready(of):
        same = of.result is before
        kind = "stale result" if same else "new result"
        return BAD, f"status {one_line(_status(of), 70)!r} with a negative bulge mass ({kind})"
    if of.result is not None:
        return BAD, "error shown but .result still holds the previous fit"
    return judge_error(ValueError(_status(of)), [("bulge.mass", "bulge mass", "bulge")], [-1e9])


@case("W06", "widgets", "VelocityPanel given an invalid sample (dec = 95)", timeout=90)
def _(d):
    w = W()
    o = attempt(w.VelocityPanel, basic_table(dec=[5.0, -30.0, 95.0, 20.0]), threaded=False)
    if o.exc:
        return WEAK, f"raises into the caller instead of status line + warning: {one_line(o.exc)}"
    vp = o.value
    status = _status(vp)
    warned = [x for x in o.warnings if issubclass(x.category, w.SampleWarning)]
    v, r = judge_error(ValueError(status), ["dec"], [95])
    if not status.startswith("error"):
        return BAD, f"status {status!r} for an invalid sample"
    if not warned:
        return WEAK, f"no SampleWarning; status: {one_line(status)}"
    return v, f"status + SampleWarning: {r}"


@case("W07", "widgets", "widget config naming a file outside the notebook folder", timeout=90)
def _(d):
    w = W()
    Path("secret.csv").write_text("ra,dec,parallax,pmra,pmdec\nSECRET-TOKEN-4711,1,1,1,1\n")
    os.mkdir("nb")
    os.chdir("nb")
    of = w.OortFitter(threaded=False)
    cfg = copy.deepcopy(of.config)
    cfg["sample"] = {"kind": "path", "path": "../secret.csv", "name": "", "n_rows": 1, "fingerprint": ""}
    o = attempt(of.load_config, cfg)
    texts = [str(o.exc or ""), _status(of)] + [str(x.message) for x in o.warnings]
    if any("SECRET-TOKEN" in t for t in texts):
        return BAD, "the error echoes the content of a file outside the notebook folder"
    if of.sample is not None:
        return BAD, "read a sample file outside the notebook folder"
    if o.exc is None:
        return WEAK, f"no error, sample not read; status {one_line(_status(of), 80)!r}"
    return judge_error(o.exc, [("sample", "path")], [("secret.csv",), ("outside", "folder")])


@case("W08", "widgets", "FrameState.R0 = inf", timeout=60)
def _(d):
    fs = W().FrameState()
    o = attempt(setattr, fs, "R0", float("inf"))
    if o.exc is None:
        return WEAK, f"FrameState accepted R0 = {fs.R0}"
    if fs.R0 != 8.122:
        return BAD, f"R0 changed to {fs.R0} although refused"
    return judge_error(o.exc, ["R0"], ["inf"], types=(ValueError, _trait_error()))


@case("W09", "widgets", "OortFitter bootstrap = 10**9", timeout=90)
def _(d):
    w = W()
    of = w.OortFitter(survey(800, 3), threaded=False)
    _wait(of)
    o = attempt(setattr, of.bootstrap, "value", 10**9)
    _wait(of)
    if o.exc is not None:
        return judge_error(o.exc, ["bootstrap"], [10**9], types=(ValueError, _trait_error()))
    status = _status(of)
    if status.startswith("error"):
        return judge_error(ValueError(status), ["bootstrap"], [10**9])
    got = of.bootstrap.value
    if got != 10**9:
        return WEAK, f"bootstrap silently clamped to {got}; status {one_line(status, 60)!r}"
    return BAD, f"status {one_line(status, 80)!r} with bootstrap = 10**9"


@case("W10", "widgets", "config with an unknown sample kind 's3'", timeout=90)
def _(d):
    w = W()
    of = w.OortFitter(survey(800, 3), threaded=False)
    _wait(of)
    cfg = copy.deepcopy(of.config)
    cfg["sample"]["kind"] = "s3"
    o = attempt(of.load_config, cfg)
    if o.exc:
        return judge_error(o.exc, [("kind",)], ["s3"])
    return WEAK, "unknown sample kind silently ignored"


@case("W11", "widgets", "non-dict configs (list, str, None, int)", timeout=90)
def _(d):
    w = W()
    of = w.OortFitter(threaded=False)
    out = []
    for target, value in (
        (of.load_config, ["frame"]),
        (of.load_config, "config.json"),
        (w.FrameState().load_config, 5),
        (w.PotentialState().load_config, None),
    ):
        o = attempt(target, value)
        if o.exc:
            v, r = judge_error(o.exc, [("dict", "mapping", "JSON object")], [(type(value).__name__,)])
            out.append((v, f"{value!r}: {r}"))
        else:
            out.append((BAD, f"{value!r} accepted as a config"))
    return worst(out)


@case("W12", "widgets", "OrbitExplorer n_points = 1", timeout=90)
def _(d):
    ox = W().OrbitExplorer(threaded=False)
    _wait(ox)
    o = attempt(setattr, ox.n_points, "value", 1)
    _wait(ox)
    if o.exc:
        return WEAK, f"raises into the caller: {one_line(o.exc)}"
    status = _status(ox)
    if _ready(ox):
        return BAD, f"status {one_line(status, 80)!r} with 1 output point"
    return judge_error(ValueError(status), [("points", "n_points")], [1])


@case("W13", "widgets", "FrameState.z_sun = 0.0208 (kpc typed for pc)", timeout=60)
def _(d):
    fs = W().FrameState()
    return _warn_case(lambda: setattr(fs, "z_sun", 0.0208), [("z_sun",)], [("pc",), ("0.0208",)], "z_sun = 0.0208 pc")


@case("W14", "widgets", "PotentialState.preset = 'NoSuch' with an OrbitExplorer", timeout=90)
def _(d):
    w = W()
    ps = w.PotentialState()
    ox = w.OrbitExplorer(potential=ps, threaded=False)
    _wait(ox)
    o = attempt(setattr, ps, "preset", "NoSuch")
    _wait(ox)
    if o.exc is not None:
        if ps.preset == "NoSuch":
            return BAD, "raised, but the preset was changed anyway"
        return judge_error(o.exc, ["preset"], ["NoSuch"], types=(ValueError, _trait_error()))
    if _ready(ox):
        return BAD, f"stale: {one_line(_status(ox), 80)!r} with preset 'NoSuch'"
    return judge_error(ValueError(_status(ox)), [("preset", "potential")], ["NoSuch"])


@case("W15", "widgets", "OrbitExplorer load_config with t_forward_gyr = -1", timeout=90)
def _(d):
    w = W()
    fs = w.FrameState()
    ox = w.OrbitExplorer(frame=fs, threaded=False)
    _wait(ox)
    cfg = copy.deepcopy(ox.config)
    cfg["frame"]["R0_kpc"] = 8.4
    cfg["t_forward_gyr"] = -1.0
    o = attempt(ox.load_config, cfg)
    _wait(ox)
    if o.exc is None:
        status = _status(ox)
        if _ready(ox):
            return BAD, f"t_forward = -1 accepted: {one_line(status, 80)!r}"
        return judge_error(ValueError(status), [("t_forward", "forward", "time")], [-1])
    if fs.R0 != 8.122:
        return BAD, f"half-applied: R0 = {fs.R0} after the config was refused"
    return judge_error(o.exc, [("t_forward", "forward")], [-1])


@case("W16", "widgets", "OortFitter with a proper-motion error cut that leaves no star", timeout=90)
def _(d):
    s = survey(800, 3)
    of = W().OortFitter(s, threaded=False)
    _wait(of)
    cut = 1e-6
    left = int(np.count_nonzero(np.fmax(fval(s["pmra_error"]), fval(s["pmdec_error"])) <= cut))
    o = attempt(setattr, of.max_pm_error, "value", cut)
    _wait(of)
    if o.exc:
        return WEAK, f"raises into the caller: {one_line(o.exc)}"
    if _ready(of):
        return BAD, f"ready although {left} stars pass the cut: {one_line(_status(of), 80)!r}"
    return judge_error(ValueError(_status(of)), [("no star",)], [("quality", "pm error", "cut")])


@case("W17", "widgets", "VelocityPanel.sample = a path that does not exist", timeout=90)
def _(d):
    w = W()
    vp = w.VelocityPanel(survey(300, 3), threaded=False)
    _wait(vp)
    before = vp.sample
    o = attempt(setattr, vp, "sample", "nope.ecsv")
    if o.exc:
        return WEAK, f"raises into the caller: {one_line(o.exc)}"
    if vp.sample is not before:
        return BAD, "previous sample lost"
    warned = [x for x in o.warnings if issubclass(x.category, w.SampleWarning)]
    v, r = judge_error(ValueError(_status(vp)), ["nope.ecsv"], [])
    if not warned:
        return WEAK, f"no SampleWarning; {r}"
    return v, r


@case("W18", "widgets", "PotentialState.load_config({'preset': 5})", timeout=60)
def _(d):
    ps = W().PotentialState()
    o = attempt(ps.load_config, {"preset": 5})
    if o.exc:
        return judge_error(o.exc, ["preset"], [5])
    return BAD, f"preset 5 accepted (now {ps.preset!r})"


@case("W19", "widgets", "rapid frame changes on a threaded VelocityPanel (newest wins?)", timeout=90)
def _(d):
    w = W()
    fs = w.FrameState()
    vp = w.VelocityPanel(survey(3000, 3), frame=fs)
    for r0 in (8.2, 8.3, 8.4, 8.5):
        fs.R0 = r0
    vp.wait(40)
    got = _result_R0(vp)
    if not _ready(vp) or got != 8.5:
        return BAD, f"after R0 = 8.5 the panel shows R0 = {got} with status {one_line(_status(vp), 60)!r}"
    return GOOD, "newest request won: result at R0 = 8.5"


@case("W20", "widgets", "OrbitExplorer config round trip into a new widget", timeout=90)
def _(d):
    w = W()
    star = {"ra": 150.0, "dec": 20.0, "parallax": 1.5, "pmra": -8.0, "pmdec": 3.0, "radial_velocity": 40.0}
    a = w.OrbitExplorer(star=star, threaded=False)
    _wait(a)
    cfg = json.loads(json.dumps(a.config))
    b = w.OrbitExplorer(threaded=False)
    o = attempt(b.load_config, cfg)
    _wait(b)
    if o.exc:
        return BAD, f"own config refused: {one_line(o.exc)}"
    pa, pb = a.orbital_parameters(), b.orbital_parameters()
    if not pa or not pb:
        return BAD, f"no parameters: {pa} / {pb}"
    diff = {k: (pa[k], pb[k]) for k in pa if not math.isclose(pa[k], pb[k], rel_tol=1e-9, abs_tol=1e-12)}
    return (BAD, f"round trip changed {diff}") if diff else (GOOD, "same orbit after the round trip")


@case("W21", "widgets", "save_config into a missing directory", timeout=90)
def _(d):
    of = W().OortFitter(threaded=False)
    o = attempt(of.save_config, "nodir/a.json")
    if o.exc:
        return judge_error(o.exc, ["nodir"], [])
    return BAD, "no error writing into a missing directory"


@case("W22", "widgets", "OrbitExplorer(stars=table, row=999)", timeout=90)
def _(d):
    w = W()
    o = attempt(w.OrbitExplorer, stars=survey(20, 3), row=999, threaded=False)
    if o.exc:
        return WEAK, f"raises into the caller: {one_line(o.exc)}"
    ox = o.value
    warned = [x for x in o.warnings if issubclass(x.category, w.SampleWarning)]
    v, r = judge_error(ValueError(_status(ox)), ["row"], [999])
    if not _status(ox).startswith("error"):
        return BAD, f"status {one_line(_status(ox), 80)!r} for row 999 of 20"
    return (v, r) if warned else (WEAK, f"no SampleWarning; {r}")


@case("W23", "widgets", "FrameState.v_sun = (1, 2)", timeout=60)
def _(d):
    fs = W().FrameState()
    o = attempt(setattr, fs, "v_sun", (1.0, 2.0))
    if o.exc:
        return judge_error(o.exc, ["v_sun"], [("(1.0, 2.0)", "2", "3")], types=(ValueError, _trait_error()))
    return BAD, f"v_sun = {fs.v_sun}"


# ====================================================================================== self-test
def register_self_test():
    """Two cases that check the harness itself: a hang and a dying worker must both come out "bad"."""
    if "S01" in CASES:
        return

    @case("S01", "selftest", "harness: a case that sleeps past its timeout", timeout=3)
    def _(d):
        time.sleep(60)
        return GOOD, "slept"

    @case("S02", "selftest", "harness: a case whose process dies", timeout=20)
    def _(d):
        os._exit(3)

    @case("S03", "selftest", "harness: a quick case after the dead and the hung worker", timeout=20)
    def _(d):
        return GOOD, "answered"


if os.environ.get("HOSTILE_SELF_TEST") == "1":
    register_self_test()


# ====================================================================================== running
def run_case_here(cid):
    """Run one case in this process, in a fresh temporary working directory."""
    c = CASES[cid]
    old = os.getcwd()
    folder = tempfile.mkdtemp(prefix=f"hostile-{cid}-")
    t0 = time.perf_counter()
    try:
        os.chdir(folder)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            verdict, reason = c.func(Path(folder))
        if verdict not in _RANK:
            verdict, reason = BAD, f"case returned no verdict ({verdict!r}): {reason}"
    except Exception as exc:  # noqa: BLE001 - a setup step on valid input failed
        tb = traceback.extract_tb(exc.__traceback__)
        where = f"{tb[-1].filename.rsplit('/', 1)[-1]}:{tb[-1].lineno}" if tb else "?"
        verdict, reason = BAD, f"setup on valid input failed at {where}: {type(exc).__name__}: {exc}"
    finally:
        os.chdir(old)
        shutil.rmtree(folder, ignore_errors=True)
    return {
        "id": cid,
        "area": c.area,
        "title": c.title,
        "verdict": verdict,
        "reason": one_line(reason, 400),
        "seconds": round(time.perf_counter() - t0, 2),
    }


def worker_loop():
    """Answer case ids read from stdin with one JSON line each on the original stdout."""
    out = os.fdopen(os.dup(1), "w", buffering=1)
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, 1)  # stray prints of the library must not mix with the answers
    import mwkin  # noqa: F401 - warm-up, not counted against the first case's timeout

    out.write(_MARK + json.dumps({"ready": True}) + "\n")
    for line in sys.stdin:
        cid = line.strip()
        if not cid:
            continue
        out.write(_MARK + json.dumps(run_case_here(cid)) + "\n")


class Worker:
    """One worker process and a thread that reads its answers."""

    def __init__(self, log_dir):
        self.log = open(os.path.join(log_dir, f"worker-{time.monotonic_ns()}.log"), "w")
        self.proc = subprocess.Popen(
            [sys.executable, os.path.abspath(__file__), "--worker"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=self.log,
            text=True,
            start_new_session=True,
            cwd=str(Path(__file__).resolve().parents[1]),
        )
        self.lines = queue.Queue()
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        for line in self.proc.stdout:
            if line.startswith(_MARK):
                self.lines.put(json.loads(line[len(_MARK) :]))
        self.lines.put(None)

    def get(self, timeout):
        try:
            return self.lines.get(timeout=timeout)
        except queue.Empty:
            return "timeout"

    def send(self, cid):
        self.proc.stdin.write(cid + "\n")
        self.proc.stdin.flush()

    def kill(self):
        """Kill this worker's own process group (it and the command-line runs it started)."""
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(self.proc.pid, signal.SIGKILL)
        with contextlib.suppress(Exception):
            self.proc.wait(10)
        self.log.close()

    def log_tail(self):
        self.log.flush()
        with contextlib.suppress(OSError):
            lines = Path(self.log.name).read_text(errors="replace").strip().splitlines()
            return one_line(lines[-1] if lines else "", 160)
        return ""


def drive(pending, results, log_dir, progress):
    worker = None
    while True:
        try:
            cid = pending.get_nowait()
        except queue.Empty:
            break
        c = CASES[cid]
        if worker is None:
            worker = Worker(log_dir)
            ready = worker.get(WORKER_START_TIMEOUT)
            if not isinstance(ready, dict):
                worker.kill()
                worker = None
                results[cid] = {
                    "id": cid,
                    "area": c.area,
                    "title": c.title,
                    "verdict": BAD,
                    "reason": f"worker could not start ({ready})",
                    "seconds": 0.0,
                }
                progress(results[cid])
                continue
        t0 = time.perf_counter()
        worker.send(cid)
        answer = worker.get(c.timeout)
        if answer == "timeout":
            worker.kill()
            worker = None
            answer = {
                "id": cid,
                "area": c.area,
                "title": c.title,
                "verdict": BAD,
                "reason": f"hang: no answer within {c.timeout:g} s (worker killed)",
                "seconds": round(time.perf_counter() - t0, 2),
            }
        elif answer is None:
            rc = worker.proc.wait()
            tail = worker.log_tail()
            worker.kill()
            worker = None
            answer = {
                "id": cid,
                "area": c.area,
                "title": c.title,
                "verdict": BAD,
                "reason": f"crash: the worker died with exit code {rc} ({tail})",
                "seconds": round(time.perf_counter() - t0, 2),
            }
        results[cid] = answer
        progress(answer)
    if worker is not None:
        with contextlib.suppress(Exception):
            worker.proc.stdin.close()
            worker.proc.wait(20)
        worker.kill()


def print_table(rows, stream=sys.stdout):
    print(f"{'case':<5} {'area':<10} {'verdict':<7} reason", file=stream)
    print("-" * 120, file=stream)
    for r in rows:
        print(f"{r['id']:<5} {r['area']:<10} {r['verdict']:<7} {r['reason']}", file=stream)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--only", help="run only cases whose id, area or title contain this (case-insensitive)")
    parser.add_argument("--json", help="write the verdicts to this JSON file")
    parser.add_argument("--case", help="run one case in this process and print its verdict")
    parser.add_argument("--jobs", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--list", action="store_true", help="list the cases and exit")
    parser.add_argument(
        "--self-test",
        action="store_true",
        help="check the harness: a hanging and a crashing case must be classified bad",
    )
    parser.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.worker:
        worker_loop()
        return 0
    if args.self_test:
        os.environ["HOSTILE_SELF_TEST"] = "1"  # the workers register the same cases
        register_self_test()
        args.only = "selftest"
    if args.list:
        for c in CASES.values():
            print(f"{c.id:<5} {c.area:<10} {c.title}")
        return 0
    if args.case:
        if args.case not in CASES:
            parser.error(f"unknown case {args.case!r}")
        r = run_case_here(args.case)
        print_table([r])
        return 0
    selected = [
        c.id for c in CASES.values() if not args.only or args.only.lower() in f"{c.id} {c.area} {c.title}".lower()
    ]
    if not selected:
        parser.error(f"no case matches {args.only!r}")
    pending = queue.Queue()
    # Cases with long timeouts first, so that a hang among them overlaps with the quick ones.
    for cid in sorted(selected, key=lambda i: -CASES[i].timeout):
        pending.put(cid)
    results = {}
    lock = threading.Lock()
    done = [0]
    t_start = time.perf_counter()

    def progress(r):
        with lock:
            done[0] += 1
            print(
                f"[{done[0]:>3}/{len(selected)}] {r['id']:<5} {r['verdict']:<5} {r['seconds']:>6.1f} s",
                file=sys.stderr,
                flush=True,
            )

    log_dir = tempfile.mkdtemp(prefix="hostile-logs-")
    threads = [
        threading.Thread(target=drive, args=(pending, results, log_dir, progress)) for _ in range(max(1, args.jobs))
    ]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    shutil.rmtree(log_dir, ignore_errors=True)
    rows = [results[cid] for cid in selected if cid in results]
    print_table(rows)
    counts = {v: sum(r["verdict"] == v for r in rows) for v in (GOOD, WEAK, BAD)}
    print("-" * 120)
    print(f"({time.perf_counter() - t_start:.0f} s wall time, {max(1, args.jobs)} workers)")
    print(f"cases {len(rows)}, good {counts[GOOD]}, weak {counts[WEAK]}, bad {counts[BAD]}")
    if args.self_test:
        expect = {"S01": "hang", "S02": "crash", "S03": "answered"}
        ok = all(
            results.get(k, {}).get("reason", "").startswith(v) or v in results.get(k, {}).get("reason", "")
            for k, v in expect.items()
        )
        ok = ok and [results[k]["verdict"] for k in ("S01", "S02", "S03")] == [BAD, BAD, GOOD]
        print("self-test " + ("passed" if ok else "FAILED"))
        return 0 if ok else 1
    if args.json:
        Path(args.json).write_text(json.dumps({"counts": {"cases": len(rows), **counts}, "cases": rows}, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
