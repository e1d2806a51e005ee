"""Fixtures for the browser tests: one JupyterLab and one chromium per session, a guarded page per test.

- ``lab``: a :class:`labtools.Lab` (``.base_url``, ``.token``, ``.root_dir``, ``.url(path)``);
  kernels a test started are deleted after that test, the server is stopped at the end.
- ``browser``: Debian's chromium through Playwright's sync API.
- ``page``: a new context and page; any request to a host other than 127.0.0.1/localhost is
  aborted and recorded in ``page.outside_requests``, and the test fails if there was one.

Without ``/usr/bin/chromium`` (or Playwright) the browser tests skip with the reason, except when
``CI=true``: there they fail, since CI installs chromium itself.
"""

from __future__ import annotations

import os
import pathlib
import re

import labtools
import pytest


def _missing(reason: str):
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail(f"{reason} (CI=true: the browser tests must run here)", pytrace=False)
    pytest.skip(reason)


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    # Keep each phase's report on the item so the page fixture can screenshot a failed test.
    outcome = yield
    report = outcome.get_result()
    setattr(item, f"_report_{report.when}", report)


@pytest.fixture(scope="session")
def lab():
    """A JupyterLab server for the whole session (see ``labtools.start_lab``)."""
    server = labtools.start_lab()
    try:
        yield server
    finally:
        try:
            labtools.shutdown_kernels(server)
        finally:
            labtools.stop_lab(server)


@pytest.fixture(autouse=True)
def _delete_kernels_after_test(request):
    # Each opened notebook starts a kernel; on a 2-core machine they must not pile up.
    yield
    if "lab" in request.fixturenames:
        labtools.shutdown_kernels(request.getfixturevalue("lab"))


@pytest.fixture(scope="session")
def browser():
    """Headless Debian chromium driven by Playwright's sync API."""
    if not pathlib.Path(labtools.CHROMIUM).exists():
        _missing(
            f"{labtools.CHROMIUM} not found: install Debian's chromium "
            "(apt-get install chromium; `make test` does this as root)"
        )
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _missing("playwright is not installed (pip install -e '.[test]')")
    playwright = sync_playwright().start()
    try:
        chromium = playwright.chromium.launch(
            executable_path=labtools.CHROMIUM, headless=True, args=labtools.CHROMIUM_ARGS
        )
        try:
            yield chromium
        finally:
            chromium.close()
    finally:
        playwright.stop()


@pytest.fixture
def page(browser, request):
    """A fresh page whose context lets through only local addresses."""
    blocked: list[str] = []

    def guard(route):
        url = route.request.url
        if labtools.is_local_url(url):
            route.continue_()
        else:
            blocked.append(url)
            route.abort()

    def watch_websockets(new_page):
        new_page.on("websocket", lambda ws: None if labtools.is_local_url(ws.url) else blocked.append(ws.url))

    context = browser.new_context(viewport={"width": 1280, "height": 1000})
    context.set_default_timeout(60_000)
    context.route(re.compile(".*"), guard)
    context.on("page", watch_websockets)
    new_page = context.new_page()
    # Readable by a test (the guard's own test empties it after checking).
    new_page.outside_requests = blocked
    try:
        yield new_page
        report = getattr(request.node, "_report_call", None)
        if report is not None and report.failed and not new_page.is_closed():
            name = "FAILED-" + re.sub(r"[^A-Za-z0-9_.-]+", "_", request.node.nodeid)
            labtools.screenshot(new_page, name[:150])
    finally:
        context.close()
    if blocked:
        pytest.fail("the page tried to reach outside hosts (aborted): " + ", ".join(blocked[:10]), pytrace=False)
