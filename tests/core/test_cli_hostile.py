"""The command line under hostile use: outputs over inputs, existing files, bad suffixes and options.

Every error is one line on stderr, ``mwkin <command>: error: ...``, exit status 2, no traceback; no
input or existing file is ever lost; problems with the output are found before any computation.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pytest
from astropy.table import QTable

import mwkin as mk
from mwkin import cli
from mwkin.cli import main


@pytest.fixture(scope="module")
def sample_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("hostile") / "sample.ecsv"
    assert main(["demo", str(path), "--n", "300", "--seed", "5"]) == 0
    return path


@pytest.fixture
def sample(sample_path, tmp_path):
    """A private copy of the sample, so tests may try to damage it."""
    path = tmp_path / "in.ecsv"
    path.write_bytes(sample_path.read_bytes())
    return path


def _one_error_line(capsys, command):
    err = capsys.readouterr().err
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith(f"mwkin {command}: error: "), err
    assert "Traceback" not in err
    return lines[0]


@pytest.fixture
def no_computation(monkeypatch):
    """Make any computation fail the test: errors about the output must come before it."""

    def forbidden(*args, **kwargs):
        raise AssertionError("the computation ran before the output was checked")

    import mwkin.catalog
    import mwkin.demo
    import mwkin.kinematics
    import mwkin.oort

    monkeypatch.setattr(mwkin.catalog, "read_catalog", forbidden)
    monkeypatch.setattr(mwkin.kinematics, "to_galactocentric", forbidden)
    monkeypatch.setattr(mwkin.oort, "fit_oort", forbidden)
    monkeypatch.setattr(mwkin.demo, "survey", forbidden)


# ---------------------------------------------------------------- never write over an input


@pytest.mark.parametrize("command", ["convert", "orbits"])
def test_output_equal_to_input_is_refused_and_the_input_kept(sample, capsys, no_computation, command):
    before = sample.read_bytes()
    assert main([command, str(sample), str(sample)]) == 2
    line = _one_error_line(capsys, command)
    assert str(sample) in line and "input" in line
    assert sample.read_bytes() == before
    # --overwrite never allows replacing an input.
    assert main([command, str(sample), str(sample), "--overwrite"]) == 2
    _one_error_line(capsys, command)
    assert sample.read_bytes() == before


def test_output_reaching_the_input_through_a_symlink_or_hard_link_is_refused(sample, tmp_path, capsys, no_computation):
    before = sample.read_bytes()
    link = tmp_path / "link.ecsv"
    link.symlink_to(sample)
    hard = tmp_path / "hard.ecsv"
    os.link(sample, hard)
    for out in (link, hard, tmp_path / "." / "in.ecsv"):
        assert main(["convert", str(sample), str(out), "--overwrite"]) == 2
        assert "input" in _one_error_line(capsys, "convert")
    assert sample.read_bytes() == before


def test_oort_json_over_the_input_is_refused(sample, capsys, no_computation):
    before = sample.read_bytes()
    assert main(["oort", str(sample), "--json", str(sample)]) == 2
    assert "--json" in _one_error_line(capsys, "oort")
    assert sample.read_bytes() == before


# ---------------------------------------------------------------- existing outputs


@pytest.mark.parametrize("command", ["demo", "convert"])
def test_existing_output_needs_overwrite(sample, tmp_path, capsys, command):
    out = tmp_path / "out.ecsv"
    out.write_text("precious\n")
    args = ["demo", str(out), "--n", "50"] if command == "demo" else ["convert", str(sample), str(out)]
    assert main(args) == 2
    line = _one_error_line(capsys, command)
    assert str(out) in line and "--overwrite" in line
    assert out.read_text() == "precious\n"
    assert main(args + ["--overwrite"]) == 0
    assert len(QTable.read(out)) > 0
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []  # no temporaries left


def test_oort_existing_json_needs_overwrite(sample, tmp_path, capsys):
    out = tmp_path / "fit.json"
    out.write_text("{}")
    assert main(["oort", str(sample), "--json", str(out)]) == 2
    assert "--overwrite" in _one_error_line(capsys, "oort")
    assert out.read_text() == "{}"
    assert main(["oort", str(sample), "--json", str(out), "--overwrite", "--distance-range", "0", "2"]) == 0
    fit = mk.OortFit.from_dict(json.loads(out.read_text()))
    assert np.isfinite(fit.A)


def test_interrupted_write_leaves_no_partial_file_and_keeps_the_old_one(sample, tmp_path, monkeypatch):
    out = tmp_path / "out.ecsv"
    out.write_text("old\n")

    def write_half_then_interrupt(self, path, **kwargs):
        with open(path, "w") as handle:
            handle.write("# %ECSV 1.0\nhalf")
        raise KeyboardInterrupt

    monkeypatch.setattr(QTable, "write", write_half_then_interrupt)
    with pytest.raises(KeyboardInterrupt):
        main(["convert", str(sample), str(out), "--overwrite"])
    assert out.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.ecsv", "out.ecsv"]  # no temporary left
    fresh = tmp_path / "fresh.ecsv"
    with pytest.raises(KeyboardInterrupt):
        main(["convert", str(sample), str(fresh)])
    assert not fresh.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.ecsv", "out.ecsv"]
    monkeypatch.undo()
    assert main(["convert", str(sample), str(fresh)]) == 0 and len(QTable.read(fresh)) > 0


def test_written_file_has_the_usual_permissions(sample, tmp_path):
    out = tmp_path / "gc.ecsv"
    assert main(["convert", str(sample), str(out)]) == 0
    umask = os.umask(0)
    os.umask(umask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~umask


# ---------------------------------------------------------------- outputs checked before computing


@pytest.mark.parametrize("name", ["out.txt", "out", "out.ecsv.gz", "out.hdf5"])
def test_unknown_output_suffix_is_one_line_naming_suffix_and_supported(sample, tmp_path, capsys, no_computation, name):
    assert main(["convert", str(sample), str(tmp_path / name)]) == 2
    line = _one_error_line(capsys, "convert")
    suffix = os.path.splitext(name)[1]
    assert (repr(suffix) if suffix else "(none)") in line
    assert ".ecsv" in line and ".fits" in line and ".parquet" in line
    assert not (tmp_path / name).exists()


def test_missing_directory_and_file_as_directory_are_caught_first(sample, tmp_path, capsys, no_computation):
    assert main(["convert", str(sample), str(tmp_path / "nowhere" / "gc.ecsv")]) == 2
    assert "does not exist" in _one_error_line(capsys, "convert")
    assert main(["orbits", str(sample), str(sample / "gc.ecsv")]) == 2  # the "directory" is a file
    assert "not a directory" in _one_error_line(capsys, "orbits")
    assert main(["demo", str(tmp_path)]) == 2
    _one_error_line(capsys, "demo")
    assert main(["oort", str(sample), "--json", str(tmp_path / "nowhere" / "fit.json")]) == 2
    assert "does not exist" in _one_error_line(capsys, "oort")


def test_unknown_presets_are_caught_before_computing(sample, tmp_path, capsys, no_computation):
    assert main(["orbits", str(sample), str(tmp_path / "o.ecsv"), "--potential", "MWPot"]) == 2
    line = _one_error_line(capsys, "orbits")
    assert "--potential" in line and "MWPot" in line and "MWPotential2014" in line
    assert main(["convert", str(sample), str(tmp_path / "o.ecsv"), "--frame", "astropy v9"]) == 2
    line = _one_error_line(capsys, "convert")
    assert "--frame" in line and "astropy v9" in line


# ---------------------------------------------------------------- options


@pytest.mark.parametrize(
    "args, option, value",
    [
        (["demo", "{out}", "--seed", "-5"], "--seed", "-5"),
        (["demo", "{out}", "--n", "0"], "--n", "0"),
        (["demo", "{out}", "--n", "ten"], "--n", "ten"),
        (["convert", "{inp}", "{out}", "--seed", "-5"], "--seed", "-5"),
        (["convert", "{inp}", "{out}", "--n-samples", "0"], "--n-samples", "0"),
        (["convert", "{inp}", "{out}", "--R0", "inf"], "--R0", "inf"),
        (["convert", "{inp}", "{out}", "--R0", "-8"], "--R0", "-8"),
        (["convert", "{inp}", "{out}", "--z-sun", "nan"], "--z-sun", "nan"),
        (["convert", "{inp}", "{out}", "--v-sun", "1", "x", "3"], "--v-sun", "x"),
        (["convert", "{inp}", "{out}", "--min-parallax-snr", "-1"], "--min-parallax-snr", "-1"),
        (["convert", "{inp}", "{out}", "--parallax-zero-point", "inf"], "--parallax-zero-point", "inf"),
        (["oort", "{inp}", "--bootstrap", "-2"], "--bootstrap", "-2"),
        (["oort", "{inp}", "--distance-range", "1", "0.5"], "--distance-range", "1 0.5"),
        (["oort", "{inp}", "--distance-range", "-1", "0.5"], "--distance-range", "-1"),
        (["convert", "{inp}", "{out}", "--errors", "bayes"], "--errors", "bayes"),
        (["convert", "{inp}", "{out}", "--no-such-option"], "--no-such-option", "--no-such-option"),
    ],
)
def test_bad_option_is_one_line_naming_option_and_value(sample, tmp_path, capsys, no_computation, args, option, value):
    args = [a.format(inp=sample, out=tmp_path / "out.ecsv") for a in args]
    assert main(args) == 2
    line = _one_error_line(capsys, args[0])
    assert option in line and value.split()[0] in line
    assert not (tmp_path / "out.ecsv").exists()


def test_units_are_named_in_option_errors(sample, tmp_path, capsys, no_computation):
    assert main(["convert", str(sample), str(tmp_path / "o.ecsv"), "--R0", "far"]) == 2
    assert "kpc" in _one_error_line(capsys, "convert")
    assert main(["convert", str(sample), str(tmp_path / "o.ecsv"), "--v-sun", "1", "2", "inf"]) == 2
    assert "km/s" in _one_error_line(capsys, "convert")


def test_frame_errors_after_parsing_name_the_options(sample, tmp_path, capsys, no_computation):
    # z_sun must be below R0: only the frame can tell, but the message still names the options.
    assert main(["convert", str(sample), str(tmp_path / "o.ecsv"), "--R0", "0.001", "--z-sun", "20"]) == 2
    line = _one_error_line(capsys, "convert")
    assert "--z-sun" in line and "20" in line and "pc" in line


def test_top_level_usage_errors_are_one_line(capsys):
    assert main([]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("mwkin: error:")
    assert main(["frobnicate"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "frobnicate" in err


def test_catalogue_errors_are_one_line(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("ra,dec,parallax,pmra,pmdec\n10,95,1,1,inf\n")
    assert main(["convert", str(bad), str(tmp_path / "x.ecsv")]) == 2
    line = _one_error_line(capsys, "convert")
    assert "dec" in line and "95" in line and "pmdec" in line
    assert not (tmp_path / "x.ecsv").exists()


# ---------------------------------------------------------------- unit slips warn, in one line


def test_z_sun_in_kpc_warns_naming_value_and_unit(sample, tmp_path, capsys):
    out = tmp_path / "gc.ecsv"
    assert main(["convert", str(sample), str(out), "--z-sun", "0.0208"]) == 0
    err = capsys.readouterr().err
    warning_lines = [line for line in err.splitlines() if "warning" in line]
    assert len(warning_lines) == 1 and warning_lines[0].startswith("mwkin convert: warning: ")
    assert "z_sun = 0.0208 pc" in warning_lines[0] and "kpc" in warning_lines[0]
    # The value is used as given: no silent change.
    assert QTable.read(out).meta["frame"]["z_sun_pc"] == 0.0208


def test_warning_as_error_is_one_line(sample, tmp_path, capsys):
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", mk.units.ImplausibleValueWarning)
        assert main(["convert", str(sample), str(tmp_path / "gc.ecsv"), "--R0", "8122"]) == 2
    assert "R0 = 8122 kpc" in _one_error_line(capsys, "convert")


# ---------------------------------------------------------------- other formats still round-trip


@pytest.mark.parametrize("suffix", [".fits", ".parquet", ".vot", ".csv"])
def test_every_supported_suffix_writes_a_readable_table(sample, tmp_path, suffix):
    out = tmp_path / f"copy{suffix}"
    assert main(["demo", str(out), "--n", "200", "--seed", "3"]) == 0
    back = mk.read_catalog(out)
    direct = mk.demo.survey(n=200, seed=3)
    np.testing.assert_allclose(back["parallax"].value, direct["parallax"].value, rtol=1e-12)


def test_the_format_table_is_the_catalogue_readers_own():
    # One home for the suffix list: the writer accepts exactly what read_catalog reads.
    from mwkin.catalog.files import _SUFFIXES

    for suffix in _SUFFIXES:
        assert cli._table_format(f"x{suffix}", "output")
