"""The built wheel is complete: it installs into a fresh venv and carries the JS modules.

The fresh venv gets only the mwkin wheel (``--no-deps``); its dependencies come from the project
venv through a ``.pth`` file, which appends the project venv's site-packages *after* the fresh
venv's own. The repository is never on the path, so ``mwkin`` can only come from the wheel.
"""

from __future__ import annotations

import json
import pathlib
import subprocess
import sys
import sysconfig
import zipfile

import pytest

REPO_ROOT = pathlib.Path(__file__).resolve().parents[1]
JS_DIR = REPO_ROOT / "js"

pytestmark = pytest.mark.slow


def _run(cmd, **kwargs):
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=600, **kwargs)
    assert done.returncode == 0, f"{cmd} failed:\n{done.stdout[-2000:]}\n{done.stderr[-4000:]}"
    return done


def _js_files() -> list[str]:
    if not JS_DIR.is_dir():
        return []
    skip = {"node_modules"}
    return sorted(
        p.relative_to(JS_DIR).as_posix()
        for p in JS_DIR.rglob("*")
        if p.is_file() and not skip & set(p.relative_to(JS_DIR).parts)
    )


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> pathlib.Path:
    out = tmp_path_factory.mktemp("dist")
    # --no-isolation: hatchling is already in the project venv; no download needed.
    _run([sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(out), str(REPO_ROOT)])
    (path,) = out.glob("mwkin-*.whl")
    return path


@pytest.fixture(scope="module")
def fresh_python(wheel, tmp_path_factory) -> pathlib.Path:
    venv = tmp_path_factory.mktemp("fresh") / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)])
    python = venv / "bin" / "python"
    # The project venv's pip installs into the fresh interpreter (pip >= 22.3 has --python).
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps", "--no-index", str(wheel)])
    fresh_site = pathlib.Path(
        _run([str(python), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"]).stdout.strip()
    )
    deps = {sysconfig.get_paths()["purelib"], sysconfig.get_paths()["platlib"]}
    (fresh_site / "zz_project_venv_dependencies.pth").write_text("\n".join(sorted(deps)) + "\n")
    return python


def test_wheel_contains_package_and_js(wheel):
    names = set(zipfile.ZipFile(wheel).namelist())
    assert "mwkin/__init__.py" in names
    missing = [f"mwkin/_js/{rel}" for rel in _js_files() if f"mwkin/_js/{rel}" not in names]
    assert missing == [], f"JS files not packaged: {missing}"
    assert not any(n.startswith(("tests/", "js/", "benchmarks/")) for n in names)


_PROBE = """
import importlib.resources, json, pathlib, sys
import mwkin
entries = json.loads(sys.argv[1])
pkg = pathlib.Path(mwkin.__file__).resolve().parent
js = pathlib.Path(str(importlib.resources.files("mwkin") / "_js"))
report = {
    "package": str(pkg),
    "js": sorted(p.relative_to(js).as_posix() for p in js.rglob("*") if p.is_file())
          if js.is_dir() else [],
    "js_dir": None,
    "bundled": {},
}
try:
    from mwkin.widgets import _assets
except ModuleNotFoundError:
    pass
else:
    report["js_dir"] = str(_assets.js_dir().resolve())
    report["bundled"] = {name: len(_assets.bundle(name)) for name in entries}
print(json.dumps(report))
"""


def _entry_modules() -> list[str]:
    # The views' entry modules: top-level files of js/ with a default export.
    return sorted(p.name for p in JS_DIR.glob("*.js") if "export default" in p.read_text())


def test_installed_wheel_imports_from_fresh_venv(fresh_python, tmp_path):
    entries = _entry_modules()
    done = _run([str(fresh_python), "-c", _PROBE, json.dumps(entries)], cwd=tmp_path)
    report = json.loads(done.stdout.strip().splitlines()[-1])
    venv_root = fresh_python.parent.parent.resolve()

    pkg = pathlib.Path(report["package"])
    assert venv_root in pkg.parents, f"mwkin imported from {pkg}, not from the fresh venv"
    missing = sorted(set(_js_files()) - set(report["js"]))
    assert missing == [], f"JS files missing from the installed package: {missing}"

    if (REPO_ROOT / "mwkin" / "widgets" / "_assets.py").exists():
        # The widgets find their ES modules inside the installed package and can bundle each view.
        assert report["js_dir"] == str(pkg / "_js")
        assert entries, "no entry module (top-level js/*.js with `export default`) found"
        assert set(report["bundled"]) == set(entries)
        assert all(size > 0 for size in report["bundled"].values()), report["bundled"]
