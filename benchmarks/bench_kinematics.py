"""Speed and memory of mwkin.kinematics.to_galactocentric, against astropy, in one process.

Run:  .venv/bin/python benchmarks/bench_kinematics.py [--n 1000000] [--repeat 3]

1. No uncertainties: ``to_galactocentric`` (catalogue checks, distance choice, Cartesian, cylindrical,
   heliocentric UVW, flags) against astropy's ``SkyCoord(...).transform_to(Galactocentric)`` plus the
   cylindrical representation, on the same stars. Prints both times (best of ``--repeat``), the ratio
   and the largest differences. Goal: at least 5x faster, differences at round-off.
2. Linear error propagation (full 6x6 covariance with the Gaia correlations): time relative to the plain
   conversion of the same table (goal: at most 3x) and peak memory, measured in a fresh subprocess
   (goal: under 2 GB).

Timings are wall-clock and depend on the machine's load; on a shared machine run it a few times
and compare the ratios of the same run. mwkin works on blocks of stars on ``MWKIN_THREADS`` threads
(default min(2, CPUs)); ``--threads`` sets it for this run, and the load average is printed with the
figures.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time

import numpy as np

from mwkin.columns import CORRELATION_COLUMNS

CORRELATIONS = CORRELATION_COLUMNS


def make_stars(n, seed=1, errors=False):
    """Plain arrays of random stars over the sky (and Gaia-like uncertainty columns when asked)."""
    rng = np.random.default_rng(seed)
    stars = {
        "ra": rng.uniform(0.0, 360.0, n),
        "dec": np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n))),
        "parallax": rng.uniform(0.2, 10.0, n),
        "pmra": rng.normal(0.0, 10.0, n),
        "pmdec": rng.normal(0.0, 10.0, n),
        "radial_velocity": rng.normal(0.0, 50.0, n),
    }
    if errors:
        stars.update(
            ra_error=rng.uniform(0.01, 0.3, n),
            dec_error=rng.uniform(0.01, 0.3, n),
            parallax_error=0.05 * stars["parallax"],
            pmra_error=rng.uniform(0.02, 0.3, n),
            pmdec_error=rng.uniform(0.02, 0.3, n),
            radial_velocity_error=rng.uniform(0.5, 5.0, n),
        )
        # Valid correlations: small random values keep every 5x5 matrix positive definite.
        stars.update({name: rng.uniform(-0.15, 0.15, n) for name in CORRELATIONS})
    return stars


def as_table(stars):
    from astropy.table import QTable

    from mwkin.catalog import STANDARD_UNITS

    return QTable({k: v * STANDARD_UNITS[k] for k, v in stars.items()})


def best_of(func, repeat):
    times, result = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - t0)
    return min(times), result


def bench_plain(n, repeat):
    import astropy.units as u
    from astropy.coordinates import CylindricalDifferential, CylindricalRepresentation, SkyCoord

    from mwkin import SolarFrame
    from mwkin.distances import InverseParallax
    from mwkin.kinematics import cylindrical_from_cartesian, galactocentric_from_observables, to_galactocentric

    stars = make_stars(n)
    table = as_table(stars)
    frame = SolarFrame.preset("astropy v4.0")
    astropy_frame = frame.to_astropy()
    choice = InverseParallax(min_snr=0)  # every star used, as astropy uses them all
    kms, masyr = u.km / u.s, u.mas / u.yr

    def ours():
        return to_galactocentric(table, frame, distance=choice)

    def core():
        gc = galactocentric_from_observables(
            stars["ra"],
            stars["dec"],
            1.0 / stars["parallax"],
            stars["pmra"],
            stars["pmdec"],
            stars["radial_velocity"],
            frame,
        )
        return gc, cylindrical_from_cartesian(*(gc[k] for k in ("x", "y", "z", "vx", "vy", "vz")))

    def theirs():
        c = SkyCoord(
            ra=stars["ra"] * u.deg,
            dec=stars["dec"] * u.deg,
            distance=(1.0 / stars["parallax"]) * u.kpc,
            pm_ra_cosdec=stars["pmra"] * masyr,
            pm_dec=stars["pmdec"] * masyr,
            radial_velocity=stars["radial_velocity"] * kms,
            frame="icrs",
        )
        gc = c.transform_to(astropy_frame)
        return gc, gc.represent_as(CylindricalRepresentation, CylindricalDifferential)

    ours(), theirs(), core()  # warm up both (imports, caches, first-touch memory)
    t_ours, out = best_of(ours, repeat)
    t_theirs, (gc, cyl) = best_of(theirs, repeat)
    t_core, _ = best_of(core, repeat)

    diffs = {
        "x [kpc]": np.max(np.abs(out["x"].value - gc.x.to_value(u.kpc))),
        "y [kpc]": np.max(np.abs(out["y"].value - gc.y.to_value(u.kpc))),
        "z [kpc]": np.max(np.abs(out["z"].value - gc.z.to_value(u.kpc))),
        "vx [km/s]": np.max(np.abs(out["vx"].value - gc.v_x.to_value(kms))),
        "vy [km/s]": np.max(np.abs(out["vy"].value - gc.v_y.to_value(kms))),
        "vz [km/s]": np.max(np.abs(out["vz"].value - gc.v_z.to_value(kms))),
        "R [kpc]": np.max(np.abs(out["R"].value - cyl.rho.to_value(u.kpc))),
        # astropy's cylindrical phi and d_phi run the other way: phi_ours = 180 - phi, v_phi = -rho d_phi
        "phi [deg]": np.max(
            np.abs(np.mod(out["phi"].value - (180.0 - cyl.phi.to_value(u.deg)) + 180.0, 360.0) - 180.0)
        ),
        "v_phi [km/s]": np.max(
            np.abs(
                out["v_phi"].value + (cyl.rho * cyl.differentials["s"].d_phi).to_value(kms, u.dimensionless_angles())
            )
        ),
        "v_R [km/s]": np.max(np.abs(out["v_R"].value - cyl.differentials["s"].d_rho.to_value(kms))),
    }
    print(f"== {n:.0e} stars, no uncertainties (best of {repeat}) ==")
    print(f"astropy SkyCoord.transform_to(Galactocentric) + cylindrical: {t_theirs:8.3f} s")
    print(
        f"mwkin to_galactocentric (table in, checks, flags, 20 columns): {t_ours:8.3f} s"
        f"   ratio astropy/mwkin = {t_theirs / t_ours:5.2f}  (goal >= 5)"
    )
    print(
        f"mwkin array functions (Cartesian + cylindrical only):         {t_core:8.3f} s"
        f"   ratio astropy/mwkin = {t_theirs / t_core:5.2f}"
    )
    print("largest differences from astropy: " + ", ".join(f"{k} {v:.2e}" for k, v in diffs.items()))
    return t_ours


def bench_linear(n, repeat):
    from mwkin.distances import InverseParallax
    from mwkin.kinematics import to_galactocentric

    table = as_table(make_stars(n, errors=True))
    choice = InverseParallax(min_snr=0)
    to_galactocentric(table[:1000], errors="linear", distance=choice)
    t_plain, _ = best_of(lambda: to_galactocentric(table, distance=choice), repeat)
    t_lin, _ = best_of(lambda: to_galactocentric(table, errors="linear", distance=choice), repeat)
    t_cov, _ = best_of(
        lambda: to_galactocentric(table, errors="linear", distance=choice, return_covariance=True), max(1, repeat - 1)
    )
    print(f"== {n:.0e} stars with all Gaia uncertainty and correlation columns (best of {repeat}) ==")
    print(f"plain conversion of that table:           {t_plain:8.3f} s")
    print(f"errors='linear':                          {t_lin:8.3f} s   ratio {t_lin / t_plain:5.2f}  (goal <= 3)")
    print(f"errors='linear', return_covariance=True:  {t_cov:8.3f} s   ratio {t_cov / t_plain:5.2f}")


_MEMORY_CHILD = """
import json, resource, sys, tracemalloc
sys.path.insert(0, {here!r})
from bench_kinematics import as_table, make_stars
from mwkin.distances import InverseParallax
from mwkin.kinematics import to_galactocentric
table = as_table(make_stars({n}, errors=True))
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
tracemalloc.start()
out = to_galactocentric(table, errors="linear", distance=InverseParallax(min_snr=0), return_covariance={cov})
peak = tracemalloc.get_traced_memory()[1]
tracemalloc.stop()
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({{"traced_peak": peak, "rss_before_kb": before, "rss_peak_kb": after}}))
"""
# ru_maxrss of a child starts from its parent's size at the fork, so the memory figures are measured
# first, while this process is still small.


def bench_memory(n):
    import os

    here = os.path.dirname(os.path.abspath(__file__))
    print(f"== peak memory of errors='linear' on {n:.0e} stars (fresh subprocess) ==")
    for cov in (False, True):
        code = _MEMORY_CHILD.format(here=here, n=n, cov=cov)
        res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
        m = json.loads(res.stdout.strip().splitlines()[-1])
        print(
            f"return_covariance={cov!s:5}: allocations during the call (tracemalloc peak) "
            f"{m['traced_peak'] / 2**30:5.2f} GB; process peak RSS {m['rss_peak_kb'] / 2**20:5.2f} GB "
            f"(of which {m['rss_before_kb'] / 2**20:4.2f} GB before the call: Python, astropy, the input table)"
            f"  (goal < 2 GB)"
        )


def _load():
    import os

    try:
        return "load average " + " ".join(f"{x:.2f}" for x in os.getloadavg())
    except OSError:
        return "load average unknown"


def main(argv=None):
    import os

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--threads", type=int, default=None, help="sets MWKIN_THREADS for this run")
    args = parser.parse_args(argv)
    if args.threads is not None:
        os.environ["MWKIN_THREADS"] = str(args.threads)
    from mwkin._blocks import thread_count

    print("note: wall-clock timings on a shared machine are noisy; compare ratios from the same run")
    print(f"mwkin threads: {thread_count()} (CPUs: {os.cpu_count()}); {_load()}")
    bench_memory(args.n)
    bench_plain(args.n, args.repeat)
    bench_linear(args.n, args.repeat)
    print(f"at the end: {_load()}")


if __name__ == "__main__":
    main()
