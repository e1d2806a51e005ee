"""Every docstring example in the core runs and gives what it shows.

The examples pin documented defaults (the default solar frame, the parallax signal-to-noise cut, the
Oort fit's distance range, the orbit-parameter method, ...), so a changed default fails here as
well as in the docs. Expected values are the documented ones (each module's docstring names its
source); common practice (no source) for the mechanism.
"""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import mwkin

CORE_MODULES = sorted(
    info.name
    for info in pkgutil.walk_packages(mwkin.__path__, prefix="mwkin.")
    if not info.name.startswith("mwkin.widgets") and info.name != "mwkin.__main__"
)


@pytest.mark.parametrize("name", CORE_MODULES)
def test_docstring_examples_run(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples in {name} failed"


def test_documented_defaults_are_pinned_by_examples():
    # The modules that hold a user-facing default each show it in an example.
    pinned = {
        "mwkin.frames": "SolarFrame()",
        "mwkin.distances": "InverseParallax()",
        "mwkin.oort.fit": "distance_range",
        "mwkin.orbits.parameters": "method",
        "mwkin.kinematics.table": "sigma_",
    }
    for name, text in pinned.items():
        module = importlib.import_module(name)
        examples = [ex.source for test in doctest.DocTestFinder().find(module) for ex in test.examples]
        assert any(text in source for source in examples), f"{name}: no example shows {text}"
