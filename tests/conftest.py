"""Shared test basics for the whole suite.

Nothing here changes global configuration at import time (no hypothesis profile loading, no
warning filters, no astropy configuration), so every test file sees the same defaults it would see
when run on its own. Besides fixtures there is one collection hook: tests that drive a browser run
after all others (see :func:`pytest_collection_modifyitems`).
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest

REPO_ROOT = pathlib.Path(__file__).resolve().parents[1]


BROWSER_FIXTURES = {"browser", "page", "lab"}


def pytest_collection_modifyitems(session, config, items):
    """Run the tests that use the browser fixtures last, keeping the order otherwise.

    Playwright's sync API keeps an asyncio loop marked as running for as long as the
    session-scoped browser lives, and ``asyncio.run`` refuses to start under it; putting the
    browser tests at the end means no other test ever runs beside it. It also puts the quick
    tests first.
    """
    items.sort(key=lambda item: bool(BROWSER_FIXTURES & set(getattr(item, "fixturenames", ()))))


@pytest.fixture
def rng() -> np.random.Generator:
    """A fresh numpy Generator with a fixed seed, so each test draws the same numbers every run."""
    return np.random.default_rng(20240607)


@pytest.fixture(scope="session")
def repo_root() -> pathlib.Path:
    """The repository's top folder (where pyproject.toml lives)."""
    return REPO_ROOT
