"""Orbit timings: one slider-move orbit, a batch against plain galpy, Staeckel against integration.

Run: ``.venv/bin/python benchmarks/bench_orbits.py [--quick]``. Prints timings and ratios, all measured
in this one process. OpenMP is limited to one thread (set before galpy loads) so that the three ways
of integrating the batch use the same single core and the comparison is like for like.

Figures:
1. One 10-Gyr orbit with 10,001 output points in MWPotential2014 through ``integrate_orbits``
   (goal < 50 ms), and its ratio to a bare galpy ``Orbit.integrate`` of the same orbit.
2. 1,000 orbits over 10 Gyr: ``integrate_orbits`` against (a) a plain Python loop of one galpy
   ``Orbit`` per star and (b) galpy's own batch integration of the same ``Orbit`` array (goal: our
   overhead < 10 %). All three use the same grid of 1,001 output times: 10,001 points for 1,000
   orbits would be 0.5 GB per copy of the tracks, and dop853_c's cost does not depend on the number
   of output times. Each of 5 slices of 200 stars is timed twice per method, interleaved, and the
   faster run kept: on a shared machine single runs vary by 10-20 %.
3. Staeckel parameters for 10^4 stars, and the ratio against integrating them (integration timed on
   1,000 of them with ``orbit_parameters(method="integrate")``'s default grid, scaled to 10^4).
"""

from __future__ import annotations

import os

os.environ.setdefault("OMP_NUM_THREADS", "1")

import argparse  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402

import numpy as np  # noqa: E402

from mwkin import Potential, integrate_orbits, orbit_parameters  # noqa: E402
from mwkin.orbits.inputs import _cartesian  # noqa: E402


def disc_sample(n, seed=1):
    rng = np.random.default_rng(seed)
    cyl = (
        rng.uniform(5.0, 11.0, n),
        rng.uniform(-0.5, 0.5, n),
        rng.normal(0, 0.3, n),
        rng.normal(0, 35, n),
        rng.normal(215, 25, n),
        rng.normal(0, 20, n),
    )
    return np.column_stack(_cartesian(*cyl)), np.column_stack(cyl)


def best_of(fn, repeat):
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def interleaved(functions, rounds, reduce=min):
    """Time several functions in alternation (so load changes hit them alike); reduce each one's times."""
    times = {name: [] for name in functions}
    for _ in range(rounds):
        for name, fn in functions.items():
            start = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - start)
    return {name: reduce(values) for name, values in times.items()}


def galpy_vxvv(cyl, ro=8.0, vo=220.0):
    """galpy's [R, vR, vT, z, vz, phi] in natural units (MWPotential2014's ro, vo)."""
    return cyl[:, [0, 3, 4, 2, 5, 1]] / [ro, vo, vo, ro, vo, 1.0]


def main(quick=False):
    from galpy.orbit import Orbit
    from galpy.potential import MWPotential2014
    from galpy.util import conversion

    warnings.simplefilter("ignore")
    pot = Potential.preset("MWPotential2014")
    t_unit = conversion.time_in_Gyr(220.0, 8.0)

    # 1. one orbit on every slider move
    xyz, cyl = disc_sample(1)
    t = np.linspace(0, 10.0, 10001)
    integrate_orbits(xyz, pot, t=t)  # warm-up: galpy import, potential set-up
    timings = interleaved(
        {
            "ours": lambda: integrate_orbits(xyz, pot, t=t),
            "galpy": lambda: Orbit(galpy_vxvv(cyl)[0]).integrate(
                t / t_unit, MWPotential2014, method="dop853_c", progressbar=False
            ),
        },
        rounds=15,
        reduce=min,
    )
    ours, bare = timings["ours"], timings["galpy"]
    print(
        f"1. one 10-Gyr orbit, 10,001 points: integrate_orbits {ours * 1e3:.1f} ms (goal < 50 ms); "
        f"bare galpy Orbit {bare * 1e3:.1f} ms; ratio ours/galpy = {ours / bare:.3f}"
    )

    # 2. 1,000 orbits over 10 Gyr, same grid for all three, in interleaved slices so that changes in the
    # load of the shared machine hit the three alike.
    n = 200 if quick else 1000
    xyz, cyl = disc_sample(n, seed=2)
    t = np.linspace(0, 10.0, 1001)
    vxvv = galpy_vxvv(cyl)
    t_nat = t / t_unit
    slices = np.array_split(np.arange(n), 5)
    totals = {"ours": 0.0, "galpy batch": 0.0, "galpy loop": 0.0}
    for k, idx in enumerate(slices):
        methods = {
            "ours": lambda: integrate_orbits(xyz[idx], pot, t=t),
            "galpy batch": lambda: Orbit(vxvv[idx]).integrate(
                t_nat, MWPotential2014, method="dop853_c", progressbar=False
            ),
            "galpy loop": lambda: [
                Orbit(row).integrate(t_nat, MWPotential2014, method="dop853_c", progressbar=False) for row in vxvv[idx]
            ],
        }
        order = list(methods)[k % 3 :] + list(methods)[: k % 3]
        best = interleaved({name: methods[name] for name in order}, rounds=2, reduce=min)
        for name, value in best.items():
            totals[name] += value
    t_ours, t_batch, t_loop = totals["ours"], totals["galpy batch"], totals["galpy loop"]
    print(
        f"2. {n} orbits x 10 Gyr (1,001 points each, 1 thread): integrate_orbits {t_ours:.2f} s, "
        f"galpy batch {t_batch:.2f} s, galpy loop {t_loop:.2f} s"
    )
    print(
        f"   ratio ours/galpy-batch = {t_ours / t_batch:.3f} (overhead goal < 1.10); "
        f"ratio galpy-loop/ours = {t_loop / t_ours:.2f}"
    )

    # 3. Staeckel for 10^4 stars vs integrating them
    n_st = 2000 if quick else 10000
    xyz, _ = disc_sample(n_st, seed=3)
    orbit_parameters(xyz[:10], pot)  # warm-up
    t_staeckel = best_of(lambda: orbit_parameters(xyz, pot, method="staeckel"), 1)
    n_int = 200 if quick else 1000
    t_int = best_of(lambda: orbit_parameters(xyz[:n_int], pot, method="integrate"), 1)
    t_int_all = t_int * n_st / n_int
    print(
        f"3. Staeckel parameters for {n_st} stars: {t_staeckel:.2f} s ({t_staeckel / n_st * 1e6:.0f} us/star); "
        f"integrating them (default 3 Gyr, 3,001 points; timed on {n_int}, scaled): {t_int_all:.1f} s; "
        f"ratio integrate/Staeckel = {t_int_all / t_staeckel:.0f}"
    )


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller batches (a quick smoke run)")
    main(parser.parse_args().quick)
