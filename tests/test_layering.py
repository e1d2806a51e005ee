"""The core never pulls in a widget library (DESIGN.md section 1: imports only ever point downward).

Two checks: at run time, importing the core in a fresh interpreter leaves ipywidgets, bqplot and
anywidget out of ``sys.modules``; in the source, no core module imports any widget library or
traitlets. traitlets itself cannot be checked at run time, because galpy's orbit module imports
IPython, which imports traitlets (seen with galpy 1.12.1); the source check covers our own code.
"""

from __future__ import annotations

import ast
import json
import pathlib
import subprocess
import sys

import pytest

REPO_ROOT = pathlib.Path(__file__).resolve().parents[1]

CORE_MODULES = [
    "mwkin",
    "mwkin.units",
    "mwkin.coords",
    "mwkin.frames",
    "mwkin.catalog",
    "mwkin.kinematics",
    "mwkin.potentials",
    "mwkin.orbits",
    "mwkin.oort",
    "mwkin.demo",
]
WIDGET_LIBRARIES = ("ipywidgets", "bqplot", "anywidget")
FORBIDDEN_IN_CORE_SOURCE = WIDGET_LIBRARIES + ("traitlets",)

# Imports each module in turn and reports which widget libraries each one brought in.
_PROBE = """
import importlib, json, sys
watched = {watched!r}
report = {{}}
for name in {modules!r}:
    before = {{m for m in watched if m in sys.modules}}
    importlib.import_module(name)
    report[name] = sorted(m for m in watched if m in sys.modules and m not in before)
print(json.dumps(report))
"""


def _imported_widget_libraries(modules: list[str]) -> dict[str, list[str]]:
    code = _PROBE.format(watched=WIDGET_LIBRARIES, modules=modules)
    done = subprocess.run([sys.executable, "-c", code], cwd=REPO_ROOT, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, f"importing {modules} failed:\n{done.stderr[-3000:]}"
    return json.loads(done.stdout.strip().splitlines()[-1])


def _core_source_files() -> list[pathlib.Path]:
    package = REPO_ROOT / "mwkin"
    return sorted(p for p in package.rglob("*.py") if "widgets" not in p.relative_to(package).parts)


def _module_name(path: pathlib.Path) -> str:
    parts = path.relative_to(REPO_ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _top_level_imports(path: pathlib.Path) -> set[str]:
    # Every import statement, including those inside functions: a lazy import counts too.
    names = set()
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module.split(".")[0])
    return names


def test_core_imports_no_widget_library():
    # The listed core modules must exist; any other module outside mwkin/widgets (the cli and
    # scale fronts, private adapters) is checked as well.
    others = sorted({_module_name(p) for p in _core_source_files()} - set(CORE_MODULES))
    report = _imported_widget_libraries(CORE_MODULES + others)
    offenders = {name: libs for name, libs in report.items() if libs}
    assert offenders == {}, f"modules outside mwkin.widgets that import widget libraries: {offenders}"


def test_probe_detects_a_widget_import():
    # The probe must be able to fail: a module that imports ipywidgets is reported.
    report = _imported_widget_libraries(["json", "ipywidgets"])
    assert report["json"] == []
    assert "ipywidgets" in report["ipywidgets"]


@pytest.mark.parametrize("path", _core_source_files(), ids=lambda p: p.name)
def test_core_source_never_imports_widget_code(path):
    bad = _top_level_imports(path) & set(FORBIDDEN_IN_CORE_SOURCE)
    assert bad == set(), f"{path.relative_to(REPO_ROOT)} imports {sorted(bad)}"
