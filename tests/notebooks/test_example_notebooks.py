"""Every example notebook runs headless from top to bottom (nbclient), in a scratch copy of the folder."""

from __future__ import annotations

import pathlib
import shutil
import sys

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOK_DIR = pathlib.Path(__file__).resolve().parents[2] / "example_notebooks"
NOTEBOOKS = sorted(NOTEBOOK_DIR.glob("*.ipynb"))


def test_there_are_example_notebooks():
    names = {p.name for p in NOTEBOOKS}
    assert "01_tour.ipynb" in names, names
    assert len(names) >= 5, names


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs(path, tmp_path):
    work = tmp_path / "nb"
    shutil.copytree(NOTEBOOK_DIR, work, ignore=shutil.ignore_patterns(".ipynb_checkpoints"))
    nb = nbformat.read(work / path.name, as_version=4)
    client = NotebookClient(nb, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(work)}})
    client.execute()
    errors = [
        out
        for cell in nb.cells
        if cell.cell_type == "code"
        for out in cell.get("outputs", [])
        if out.get("output_type") == "error"
    ]
    assert not errors, errors
    # The kernel is the test's own interpreter environment, so mwkin resolves to this checkout.
    assert sys.executable


def test_notebooks_match_their_generator_script():
    # The notebooks are written by example_notebooks/_build_notebooks.py; --check fails on any drift.
    import subprocess

    result = subprocess.run(
        [sys.executable, str(NOTEBOOK_DIR / "_build_notebooks.py"), "--check"], capture_output=True, text=True
    )
    assert result.returncode == 0, result.stdout + result.stderr
