"""The command line drives the same core functions as the notebooks."""

from __future__ import annotations

import json

import numpy as np
import pytest
from astropy.table import QTable

import mwkin as mk
from mwkin.cli import main


@pytest.fixture(scope="module")
def sample_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "sample.ecsv"
    assert main(["demo", str(path), "--n", "3000", "--seed", "4"]) == 0
    return path


def test_presets_lists_frames_and_potentials(capsys):
    assert main(["presets"]) == 0
    text = capsys.readouterr().out
    for name in mk.SolarFrame.presets():
        assert name in text
    assert "MWPotential2014" in text and "Bovy" in text


def test_demo_is_the_package_demo(sample_path):
    written = QTable.read(sample_path)
    direct = mk.demo.survey(n=3000, seed=4)
    np.testing.assert_allclose(written["parallax"].value, direct["parallax"].value)


def test_convert_matches_the_library_call(sample_path, tmp_path):
    out_path = tmp_path / "gc.ecsv"
    args = ["convert", str(sample_path), str(out_path), "--R0", "8.3", "--min-parallax-snr", "8"]
    assert main(args) == 0
    written = QTable.read(out_path)
    frame = mk.SolarFrame.preset("astropy v4.0").replace(R0=8.3)
    direct = mk.to_galactocentric(mk.read_catalog(sample_path), frame=frame, distance=mk.InverseParallax(min_snr=8))
    np.testing.assert_allclose(written["v_phi"].value, direct["v_phi"].value, equal_nan=True)
    assert written.meta["frame"]["R0_kpc"] == 8.3


def test_oort_prints_summary_and_writes_json(sample_path, tmp_path, capsys):
    json_path = tmp_path / "fit.json"
    assert (
        main(["oort", str(sample_path), "--use", "both", "--distance-range", "0", "1", "--json", str(json_path)]) == 0
    )
    text = capsys.readouterr().out
    assert "A" in text and "km/s/kpc" in text
    data = json.loads(json_path.read_text())
    fit = mk.fit_oort(mk.read_catalog(sample_path), use="both", distance_range=(0, 1))
    assert mk.OortFit.from_dict(data).A == pytest.approx(fit.A)


def test_orbits_staeckel_table(sample_path, tmp_path):
    out_path = tmp_path / "orbits.ecsv"
    small = QTable.read(sample_path)[:200]
    small_path = tmp_path / "small.ecsv"
    small.write(small_path)
    assert main(["orbits", str(small_path), str(out_path)]) == 0
    table = QTable.read(out_path)
    assert len(table) == 200
    ok = np.isfinite(np.asarray(table["rapo"].value if hasattr(table["rapo"], "value") else table["rapo"]))
    assert ok.sum() > 20


def test_bad_input_is_a_clear_error_not_a_traceback(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("ra,dec,parallax,pmra,pmdec\n10,95,1,1,1\n")
    assert main(["convert", str(bad), str(tmp_path / "x.ecsv")]) == 2
    err = capsys.readouterr().err
    assert "dec" in err and "95" in err


def test_unknown_frame_preset(tmp_path, sample_path, capsys):
    assert main(["convert", str(sample_path), str(tmp_path / "x.ecsv"), "--frame", "nonsense"]) == 2
    assert "nonsense" in capsys.readouterr().err
