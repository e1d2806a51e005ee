"""Command line: the same core as the notebooks, for scripts and batch jobs.

Examples
--------
::

    mwkin presets
    mwkin demo sample.ecsv --n 20000 --seed 1
    mwkin convert sample.ecsv velocities.ecsv --frame "astropy v4.0" --errors linear
    mwkin orbits sample.ecsv orbits.ecsv --potential MWPotential2014 --method staeckel
    mwkin oort sample.ecsv --use both --distance-range 0 0.5
"""

from __future__ import annotations

import argparse
import json
import sys

__all__ = ["main", "build_parser"]


def _add_frame_options(parser):
    group = parser.add_argument_group("solar frame (a preset, optionally with values changed)")
    group.add_argument("--frame", default="astropy v4.0", help="frame preset name (see `mwkin presets`)")
    group.add_argument("--R0", type=float, help="Sun-centre distance, kpc")
    group.add_argument("--z-sun", type=float, help="height of the Sun above the mid-plane, pc")
    group.add_argument("--v-sun", type=float, nargs=3, metavar=("VX", "VY", "VZ"),
                       help="solar velocity in Galactocentric Cartesian axes, km/s")


def _add_distance_options(parser):
    group = parser.add_argument_group("distances")
    group.add_argument("--distance-column", help="use this column (kpc) instead of inverse parallax")
    group.add_argument("--min-parallax-snr", type=float, default=5.0,
                       help="inverse parallax only above this parallax/error (default 5)")
    group.add_argument("--parallax-zero-point", type=float, default=0.0,
                       help="parallax zero point in mas, subtracted from the parallaxes (e.g. -0.017)")


def _frame(args):
    from .frames import SolarFrame

    frame = SolarFrame.preset(args.frame)
    changes = {k: v for k, v in (("R0", args.R0), ("z_sun", args.z_sun),
                                 ("v_sun", tuple(args.v_sun) if args.v_sun else None)) if v is not None}
    return frame.replace(**changes) if changes else frame


def _distance(args):
    from .distances import DistanceColumn, InverseParallax

    if args.distance_column:
        return DistanceColumn(column=args.distance_column)
    return InverseParallax(min_snr=args.min_parallax_snr, zero_point_mas=args.parallax_zero_point)


def _write(table, path):
    table.write(path, overwrite=True)
    print(f"wrote {len(table)} rows to {path}")


def _cmd_presets(args):
    from .frames import SolarFrame
    from .potentials import Potential

    print("Solar frames:")
    for name, preset in SolarFrame.presets().items():
        frame = SolarFrame.preset(name)
        print(f"  {name!r}: {frame.describe()}\n      {preset.citation}")
    print("Potentials:")
    for name, info in Potential.presets().items():
        citation = getattr(info, "citation", info)
        print(f"  {name!r}: {citation}")
    return 0


def _cmd_demo(args):
    from .demo import survey

    _write(survey(n=args.n, seed=args.seed), args.output)
    return 0


def _cmd_convert(args):
    from .catalog import read_catalog
    from .kinematics import to_galactocentric

    stars = read_catalog(args.input)
    out = to_galactocentric(stars, frame=_frame(args), errors=args.errors, distance=_distance(args),
                            n_samples=args.n_samples, seed=args.seed)
    for reason, count in out.meta.get("dropped", {}).items():
        if count:
            print(f"  {count} stars: {reason}")
    _write(out, args.output)
    return 0


def _cmd_orbits(args):
    from .catalog import read_catalog
    from .kinematics import to_galactocentric
    from .orbits import orbit_parameters
    from .potentials import Potential

    frame = _frame(args)
    phase = to_galactocentric(read_catalog(args.input), frame=frame, distance=_distance(args))
    out = orbit_parameters(phase, Potential.preset(args.potential), frame=frame, method=args.method)
    _write(out, args.output)
    return 0


def _cmd_oort(args):
    from .catalog import read_catalog
    from .oort import fit_oort

    fit = fit_oort(read_catalog(args.input), frame=_frame(args), use=args.use, distance=_distance(args),
                   distance_range=tuple(args.distance_range), robust=args.robust,
                   bootstrap=args.bootstrap, seed=args.seed)
    print(fit.summary())
    if args.json:
        with open(args.json, "w") as handle:
            json.dump(fit.to_dict(), handle, indent=2)
        print(f"wrote {args.json}")
    return 0


def build_parser():
    """The argparse parser of the ``mwkin`` command."""
    parser = argparse.ArgumentParser(prog="mwkin", description="Milky Way kinematics from astrometric surveys.")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("presets", help="list solar-frame and potential presets with their citations")
    p.set_defaults(run=_cmd_presets)

    p = sub.add_parser("demo", help="write the synthetic demo survey")
    p.add_argument("output")
    p.add_argument("--n", type=int, default=20000)
    p.add_argument("--seed", type=int, default=1)
    p.set_defaults(run=_cmd_demo)

    p = sub.add_parser("convert", help="observables -> Galactocentric positions and velocities")
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--errors", choices=("none", "linear", "montecarlo"), default="none")
    p.add_argument("--n-samples", type=int, default=1000, help="Monte Carlo draws per star")
    p.add_argument("--seed", type=int, default=None)
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_convert)

    p = sub.add_parser("orbits", help="orbital parameters in a Galactic potential")
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--potential", default="MWPotential2014")
    p.add_argument("--method", choices=("staeckel", "integrate"), default="staeckel")
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_orbits)

    p = sub.add_parser("oort", help="fit the Oort constants and the solar motion")
    p.add_argument("input")
    p.add_argument("--use", choices=("proper_motions", "radial_velocities", "both"), default="proper_motions")
    p.add_argument("--distance-range", type=float, nargs=2, default=(0.0, 0.5), metavar=("MIN", "MAX"),
                   help="kpc")
    p.add_argument("--robust", action="store_true", help="reject outliers by iterative clipping")
    p.add_argument("--bootstrap", type=int, default=0)
    p.add_argument("--seed", type=int, default=None)
    p.add_argument("--json", help="also write the fit as JSON to this path")
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_oort)
    return parser


def main(argv=None):
    """Entry point of the ``mwkin`` command; returns the exit status."""
    args = build_parser().parse_args(argv)
    try:
        return args.run(args)
    except (ValueError, KeyError, OSError) as exc:
        print(f"mwkin {args.command}: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
