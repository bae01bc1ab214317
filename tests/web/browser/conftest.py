"""Fixtures of the browser tests: Debian's chromium driven by Playwright, the app served by waitress.

The tests skip with a clear reason when chromium or Playwright is absent,
except in CI (``BLOOMLINE_REQUIRE_SERVICES=1``), where that is a failure,
as for PostgreSQL and MQTT (``tests/conftest.py``). Playwright's own browser
builds are never used: the browser is the system's ``chromium``. The app is
served on a free loopback port in a thread, over a store of the demo
scenario with a few days of cycles (``tests/web/demo_store.py``).
Screenshots are written to a temporary folder kept as the tests' artifacts
(its path is printed with ``-s``).
"""

from __future__ import annotations

import os
import shutil
import threading

import pytest

from tests.web.demo_store import build_demo_store

CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]


def _absent(what: str) -> None:
    if os.environ.get("BLOOMLINE_REQUIRE_SERVICES") == "1":
        pytest.fail(f"{what} is not available, and BLOOMLINE_REQUIRE_SERVICES=1 says it must be")
    pytest.skip(f"{what} is not available on this machine")


@pytest.fixture(scope="session")
def chromium_path() -> str:
    path = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)
    if path is None:
        _absent("Debian's chromium (apt-get install chromium)")
    return path


@pytest.fixture(scope="session")
def browser(chromium_path):
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _absent("Playwright's Python package (pip install playwright)")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=chromium_path, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="session")
def demo(tmp_path_factory):
    """(config, now) of the demo store."""
    return build_demo_store(tmp_path_factory.mktemp("demo"))


@pytest.fixture(scope="session")
def site(demo):
    """The base URL of the app served by waitress on a free loopback port."""
    from web import create_app
    from web.serving import make_server

    config, now = demo
    app = create_app(config, clock=lambda: now)
    server = make_server(app)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.effective_port}"
    server.close()
    thread.join(timeout=10)
    app.extensions["bloomline"]["engine"].dispose()


@pytest.fixture(scope="session")
def artifacts(tmp_path_factory):
    folder = tmp_path_factory.mktemp("screenshots")
    print(f"\nbrowser screenshots: {folder}")
    return folder


@pytest.fixture
def page_at(browser):
    """``page_at(width)``: a fresh page with a viewport ``width`` px wide (closed after the test)."""
    opened = []

    def make(width: int, height: int = 900):
        context = browser.new_context(viewport={"width": width, "height": height})
        opened.append(context)
        return context.new_page()

    yield make
    for context in opened:
        context.close()
