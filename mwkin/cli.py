"""Command line: the same core as the notebooks, for scripts and batch jobs.

Examples
--------
::

    mwkin presets
    mwkin demo sample.ecsv --n 20000 --seed 1
    mwkin convert sample.ecsv velocities.ecsv --frame "astropy v4.0" --errors linear
    mwkin orbits sample.ecsv orbits.ecsv --potential MWPotential2014 --method staeckel
    mwkin oort sample.ecsv --use both --distance-range 0 0.5

Notes
-----
Every error is one line on stderr, ``mwkin <command>: error: ...``, with exit status 2 (as argparse
does for usage errors); warnings are one line each, ``mwkin <command>: warning: ...``. Outputs are
checked before any computation (suffix, directory, whether the file exists, whether it is one of the
inputs) and written to a temporary file in the same directory that is renamed into place at the end,
so an interrupted run leaves no half-written file. An existing output is replaced only with
``--overwrite``, and an input is never overwritten.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import tempfile
import warnings

from .distances import DEFAULT_MIN_SNR
from .frames import DEFAULT_PRESET

__all__ = ["main", "build_parser", "CLIError"]


class CLIError(ValueError):
    """A command-line problem found before or after the computation; the message is one line."""


class _UsageError(Exception):
    """Raised by the parser instead of printing the usage and exiting (see :func:`main`)."""

    def __init__(self, prog, message):
        super().__init__(message)
        self.prog = prog
        self.message = message


class _Parser(argparse.ArgumentParser):
    # argparse prints the usage block and calls sys.exit(2); mwkin prints one line and returns 2.
    def error(self, message):
        raise _UsageError(self.prog, message)


# ----------------------------------------------------------------- option types


def _integer(low, what=""):
    """argparse type: an integer >= ``low``."""

    def parse(text):
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected an integer{what}, got {text!r}") from None
        if value < low:
            raise argparse.ArgumentTypeError(f"expected an integer >= {low}{what}, got {text!r}")
        return value

    return parse


def _number(unit, low=None, low_open=False):
    """argparse type: a finite number in ``unit``, optionally bounded below."""
    unit_text = f" in {unit}" if unit else ""

    def parse(text):
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected a number{unit_text}, got {text!r}") from None
        if not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"expected a finite number{unit_text}, got {text!r}")
        if low is not None and (value <= low if low_open else value < low):
            bound = f"> {low:g}" if low_open else f">= {low:g}"
            raise argparse.ArgumentTypeError(f"expected a number {bound}{unit_text}, got {text!r}")
        return value

    return parse


def _add_frame_options(parser):
    group = parser.add_argument_group("solar frame (a preset, optionally with values changed)")
    group.add_argument("--frame", default=DEFAULT_PRESET, help="frame preset name (see `mwkin presets`)")
    group.add_argument("--R0", type=_number("kpc", 0.0, low_open=True), help="Sun-centre distance, kpc")
    group.add_argument("--z-sun", type=_number("pc"), help="height of the Sun above the mid-plane, pc")
    group.add_argument(
        "--v-sun",
        type=_number("km/s"),
        nargs=3,
        metavar=("VX", "VY", "VZ"),
        help="solar velocity in Galactocentric Cartesian axes, km/s",
    )


def _add_distance_options(parser):
    group = parser.add_argument_group("distances")
    group.add_argument("--distance-column", help="use this column (kpc) instead of inverse parallax")
    group.add_argument(
        "--min-parallax-snr",
        type=_number("", 0.0),
        default=DEFAULT_MIN_SNR,
        help=f"inverse parallax only above this parallax/error (default {DEFAULT_MIN_SNR:g})",
    )
    group.add_argument(
        "--parallax-zero-point",
        type=_number("mas"),
        default=0.0,
        help="parallax zero point in mas, subtracted from the parallaxes (e.g. -0.017)",
    )


def _add_overwrite_option(parser):
    parser.add_argument(
        "--overwrite", action="store_true", help="replace an existing output file (an input file is never replaced)"
    )


def _frame(args):
    from .frames import SolarFrame

    try:
        frame = SolarFrame.preset(args.frame)
        changes = {
            k: v
            for k, v in (("R0", args.R0), ("z_sun", args.z_sun), ("v_sun", tuple(args.v_sun) if args.v_sun else None))
            if v is not None
        }
        return frame.replace(**changes) if changes else frame
    except (KeyError, ValueError) as exc:
        raise CLIError(f"solar frame (--frame/--R0/--z-sun/--v-sun): {_message(exc)}") from None


def _distance(args):
    from .distances import DistanceColumn, InverseParallax

    if args.distance_column:
        return DistanceColumn(column=args.distance_column)
    return InverseParallax(min_snr=args.min_parallax_snr, zero_point_mas=args.parallax_zero_point)


# ----------------------------------------------------------------- safe outputs


def _table_format(path, option):
    """The astropy format for an output table, from its suffix; the suffixes are read_catalog's own."""
    from .catalog.files import _FORMATS, _SUFFIXES

    ext = os.path.splitext(path)[1].lower()
    if ext not in _SUFFIXES:
        shown = repr(ext) if ext else "(none)"
        raise CLIError(f"{option}: cannot write {path!r}: unknown suffix {shown}; supported: {', '.join(_SUFFIXES)}")
    return _FORMATS[_SUFFIXES[ext]]


def _same_file(a, b):
    """Whether two paths name the same file (symlinks and hard links included)."""
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet): compare the resolved paths
        return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def _check_output(path, option, inputs, overwrite):
    """Refuse an output that cannot or must not be written, before anything is computed."""
    if not path:
        raise CLIError(f"{option}: the output path is empty")
    for name in inputs:
        if _same_file(path, name):
            raise CLIError(
                f"{option}: {path!r} is the input file {name!r}; refusing to write over an input "
                f"(choose another output path)"
            )
    if os.path.isdir(path):
        raise CLIError(f"{option}: {path!r} is a directory, not a file")
    if os.path.lexists(path) and not overwrite:
        raise CLIError(f"{option}: {path!r} already exists; pass --overwrite to replace it")
    directory = os.path.dirname(os.path.abspath(path))
    if not os.path.exists(directory):
        raise CLIError(f"{option}: the directory {directory!r} of {path!r} does not exist")
    if not os.path.isdir(directory):
        raise CLIError(f"{option}: {directory!r} (the directory of {path!r}) is not a directory")
    if not os.access(directory, os.W_OK | os.X_OK):
        raise CLIError(f"{option}: cannot write to the directory {directory!r}")


def _new_file_mode(path):
    # mkstemp creates 0600; give the result the mode a plain open() would (or the replaced file's).
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _write_atomically(path, write, overwrite):
    """Write through ``write(temporary_path)`` and move the result into place in one step.

    The temporary file sits in the output's directory (so the rename cannot cross file systems) and
    is removed whatever happens, including on KeyboardInterrupt. Without ``overwrite``, a file that
    appeared at ``path`` during the computation is not replaced (os.link refuses to overwrite).
    """
    directory = os.path.dirname(os.path.abspath(path))
    handle, tmp = tempfile.mkstemp(dir=directory, prefix=f".{os.path.basename(path)}.", suffix=".part")
    os.close(handle)
    try:
        write(tmp)
        os.chmod(tmp, _new_file_mode(path))
        if overwrite:
            os.replace(tmp, path)
            return
        try:
            os.link(tmp, path)
        except FileExistsError:
            raise CLIError(
                f"{path!r} was created by someone else during the run; not replaced (pass --overwrite to replace it)"
            ) from None
        except OSError:  # a file system without hard links: check, then rename
            if os.path.lexists(path):
                raise CLIError(
                    f"{path!r} was created by someone else during the run; not replaced "
                    f"(pass --overwrite to replace it)"
                ) from None
            os.replace(tmp, path)
    finally:
        if os.path.lexists(tmp):
            os.unlink(tmp)


def _write_table(table, path, astropy_format, overwrite):
    _write_atomically(path, lambda tmp: table.write(tmp, format=astropy_format, overwrite=True), overwrite)
    print(f"wrote {len(table)} rows to {path}")


# ----------------------------------------------------------------- commands


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

    fmt = _table_format(args.output, "output")
    _check_output(args.output, "output", [], args.overwrite)
    _write_table(survey(n=args.n, seed=args.seed), args.output, fmt, args.overwrite)
    return 0


def _cmd_convert(args):
    from .catalog import read_catalog
    from .kinematics import to_galactocentric

    fmt = _table_format(args.output, "output")
    _check_output(args.output, "output", [args.input], args.overwrite)
    frame, distance = _frame(args), _distance(args)
    stars = read_catalog(args.input)
    out = to_galactocentric(
        stars, frame=frame, errors=args.errors, distance=distance, n_samples=args.n_samples, seed=args.seed
    )
    for reason, count in out.meta.get("dropped", {}).items():
        if count:
            print(f"  {count} stars: {reason}")
    _write_table(out, args.output, fmt, args.overwrite)
    return 0


def _cmd_orbits(args):
    from .catalog import read_catalog
    from .kinematics import to_galactocentric
    from .orbits import orbit_parameters
    from .potentials import Potential

    fmt = _table_format(args.output, "output")
    _check_output(args.output, "output", [args.input], args.overwrite)
    frame, distance = _frame(args), _distance(args)
    try:
        potential = Potential.preset(args.potential)
    except ValueError as exc:
        raise CLIError(f"--potential: {_message(exc)}") from None  # names the option, not only the value
    phase = to_galactocentric(read_catalog(args.input), frame=frame, distance=distance)
    out = orbit_parameters(phase, potential, frame=frame, method=args.method)
    _write_table(out, args.output, fmt, args.overwrite)
    return 0


def _cmd_oort(args):
    from .catalog import read_catalog
    from .oort import fit_oort

    low, high = args.distance_range
    if not low < high:
        raise CLIError(f"--distance-range: MIN must be below MAX, got MIN = {low:g} kpc, MAX = {high:g} kpc")
    if args.json:
        _check_output(args.json, "--json", [args.input], args.overwrite)
    frame, distance = _frame(args), _distance(args)
    fit = fit_oort(
        read_catalog(args.input),
        frame=frame,
        use=args.use,
        distance=distance,
        distance_range=(low, high),
        robust=args.robust,
        bootstrap=args.bootstrap,
        seed=args.seed,
    )
    print(fit.summary())
    if args.json:
        text = json.dumps(fit.to_dict(), indent=2)  # serialise first: a failure leaves no file at all

        def write(tmp):
            with open(tmp, "w") as handle:
                handle.write(text)

        _write_atomically(args.json, write, args.overwrite)
        print(f"wrote {args.json}")
    return 0


def build_parser():
    """The argparse parser of the ``mwkin`` command.

    Returns
    -------
    argparse.ArgumentParser
        Its ``error`` raises instead of exiting; :func:`main` turns that into one line on stderr.
    """
    parser = _Parser(prog="mwkin", description="Milky Way kinematics from astrometric surveys.")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("presets", help="list solar-frame and potential presets with their citations")
    p.set_defaults(run=_cmd_presets)

    p = sub.add_parser("demo", help="write the synthetic demo survey")
    p.add_argument("output")
    p.add_argument("--n", type=_integer(1, " (number of stars)"), default=20000)
    p.add_argument("--seed", type=_integer(0), default=1)
    _add_overwrite_option(p)
    p.set_defaults(run=_cmd_demo)

    p = sub.add_parser("convert", help="observables -> Galactocentric positions and velocities")
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--errors", choices=("none", "linear", "montecarlo"), default="none")
    p.add_argument("--n-samples", type=_integer(1), default=1000, help="Monte Carlo draws per star")
    p.add_argument("--seed", type=_integer(0), default=None)
    _add_overwrite_option(p)
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_convert)

    p = sub.add_parser("orbits", help="orbital parameters in a Galactic potential")
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--potential", default="MWPotential2014")
    p.add_argument("--method", choices=("staeckel", "integrate"), default="staeckel")
    _add_overwrite_option(p)
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_orbits)

    p = sub.add_parser("oort", help="fit the Oort constants and the solar motion")
    p.add_argument("input")
    p.add_argument("--use", choices=("proper_motions", "radial_velocities", "both"), default="proper_motions")
    p.add_argument(
        "--distance-range", type=_number("kpc", 0.0), nargs=2, default=(0.0, 0.5), metavar=("MIN", "MAX"), help="kpc"
    )
    p.add_argument("--robust", action="store_true", help="reject outliers by iterative clipping")
    p.add_argument("--bootstrap", type=_integer(0), default=0)
    p.add_argument("--seed", type=_integer(0), default=None)
    p.add_argument("--json", help="also write the fit as JSON to this path")
    _add_overwrite_option(p)
    _add_frame_options(p)
    _add_distance_options(p)
    p.set_defaults(run=_cmd_oort)
    return parser


def _message(exc):
    """The text of an exception on one line (KeyError's repr quotes dropped)."""
    text = (
        exc.args[0] if isinstance(exc, KeyError) and len(exc.args) == 1 and isinstance(exc.args[0], str) else str(exc)
    )
    lines = [line.strip() for line in str(text).splitlines() if line.strip()]
    # A list of problems ("...:", "- a", "- b") becomes "...: a; b".
    lines = [line[2:] if line.startswith("- ") else line for line in lines]
    return "; ".join(lines) or type(exc).__name__


def main(argv=None):
    """Entry point of the ``mwkin`` command; returns the exit status.

    Parameters
    ----------
    argv : list of str, optional
        The arguments after ``mwkin`` (default ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success; 2 for any error, reported as one line ``mwkin <command>: error: ...`` on stderr.
    """
    from .units import ImplausibleValueWarning

    try:
        args, extra = build_parser().parse_known_args(argv)
        if extra:  # reported for the command they were given to, not for "mwkin"
            raise _UsageError(f"mwkin {args.command}", f"unrecognized arguments: {' '.join(extra)}")
    except _UsageError as exc:
        print(f"{exc.prog}: error: {exc.message} (see `{exc.prog} --help`)", file=sys.stderr)
        return 2
    prog = f"mwkin {args.command}"

    def show(message, category, filename, lineno, file=None, line=None):
        print(f"{prog}: warning: {_message(message) if isinstance(message, Exception) else message}", file=sys.stderr)

    with warnings.catch_warnings():
        warnings.showwarning = show
        try:
            return args.run(args)
        # ImplausibleValueWarning arrives here as an exception only under -W error.
        except (ValueError, KeyError, OSError, MemoryError, ImplausibleValueWarning) as exc:
            print(f"{prog}: error: {_message(exc)}", file=sys.stderr)
            return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
