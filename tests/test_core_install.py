"""`pip install mwkin` is the core alone: no JupyterLab, no widget library, and the README's tour runs.

The wheel is built from the checkout and installed with its dependencies from the package registries
(as configured for pip on this machine) into a fresh virtual environment, outside the repository. In
it: the README's API tour runs; no widget library or JupyterLab is installed; importing
``mwkin.widgets`` fails with a one-line message naming the extra to install.
"""

from __future__ import annotations

import pathlib
import re
import subprocess
import sys

import pytest

REPO_ROOT = pathlib.Path(__file__).resolve().parents[1]

pytestmark = pytest.mark.slow

#: What only the extras bring (DESIGN.md, packaging): none may be in a core install.
NOT_IN_CORE = ("jupyterlab", "ipywidgets", "anywidget", "bqplot", "traitlets", "dask", "notebook", "IPython")


def _run(cmd, **kwargs):
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=900, **kwargs)
    assert done.returncode == 0, f"{cmd} failed:\n{done.stdout[-3000:]}\n{done.stderr[-3000:]}"
    return done


def readme_tour() -> str:
    """The python block under the README's 'A short tour of the API' heading."""
    text = (REPO_ROOT / "README.md").read_text()
    section = text.split("## A short tour of the API", 1)[1]
    match = re.search(r"```python\n(.*?)```", section, flags=re.S)
    assert match, "no python block in the README's tour"
    return match.group(1)


@pytest.fixture(scope="module")
def core_python(tmp_path_factory) -> pathlib.Path:
    out = tmp_path_factory.mktemp("dist")
    _run([sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(out), str(REPO_ROOT)])
    (wheel,) = out.glob("mwkin-*.whl")
    venv = tmp_path_factory.mktemp("core") / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)])
    python = venv / "bin" / "python"
    # The project venv's pip installs into the fresh interpreter, dependencies included.
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--disable-pip-version-check", str(wheel)])
    return python


def test_core_install_has_no_widget_library_or_jupyterlab(core_python):
    probe = (
        "import importlib.util, json, sys; "
        f"print(json.dumps({{m: importlib.util.find_spec(m) is not None for m in {list(NOT_IN_CORE)!r}}}))"
    )
    found = _run([str(core_python), "-c", probe], cwd=core_python.parent).stdout.strip().splitlines()[-1]
    assert "true" not in found, f"installed with the core: {found}"


def test_readme_tour_runs_in_the_core_install(core_python, tmp_path):
    script = tmp_path / "tour.py"
    script.write_text(readme_tour())
    done = _run([str(core_python), str(script)], cwd=tmp_path)
    assert "Oort-constant fit" in done.stdout
    assert (
        str(REPO_ROOT) not in _run([str(core_python), "-c", "import mwkin; print(mwkin.__file__)"], cwd=tmp_path).stdout
    )


def test_widgets_without_the_extra_name_the_extra(core_python, tmp_path):
    done = subprocess.run(
        [str(core_python), "-c", "import mwkin.widgets"], capture_output=True, text=True, cwd=tmp_path, timeout=300
    )
    assert done.returncode != 0
    last = done.stderr.strip().splitlines()[-1]
    assert last.startswith("ImportError: mwkin.widgets needs the 'widgets' extra")
    assert "pip install 'mwkin[widgets]'" in last
