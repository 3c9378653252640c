"""Fixtures for the report tests: invented inputs and a real headless Chromium.

The browser is Debian's ``chromium`` (``.ci/run`` installs it and exports
WALKCOMFORT_CHROMIUM) driven by Playwright's Python package; Playwright's own browser
download is never used. Pages are served from a loopback-only HTTP server that stops by
itself; every request that is not to that server is either answered from the packaged
Leaflet files (the CDN URLs the linked map uses) or aborted and recorded.
"""

from __future__ import annotations

import functools
import http.server
import os
import shutil
import sys
import threading
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

CHROMIUM_FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic",
                  "--disable-extensions", "--disable-default-apps"]
SERVER_LIFETIME_S = 300.0  # the test server shuts itself down after this, whatever happens


def chromium_path() -> str:
    path = os.environ.get("WALKCOMFORT_CHROMIUM", "/usr/bin/chromium")
    if not (path and Path(path).exists()) and shutil.which(path or "") is None:
        # the browser tests must run in CI, so a missing browser is a failure, not a skip
        pytest.fail(f"Chromium not found at {path!r}: apt-get install chromium "
                    "(or set WALKCOMFORT_CHROMIUM)", pytrace=False)
    return path


class _QuietHandler(http.server.SimpleHTTPRequestHandler):
    def log_message(self, fmt, *args):  # keep test output clean
        pass


class LocalServer:
    """A loopback-only static file server in a thread (bounded lifetime)."""

    def __init__(self, root: Path):
        handler = functools.partial(_QuietHandler, directory=str(root))
        self.httpd = http.server.ThreadingHTTPServer(("127.0.0.1", 0), handler)
        self.httpd.daemon_threads = True
        self.port = self.httpd.server_address[1]
        self.origin = f"http://127.0.0.1:{self.port}"
        self.thread = threading.Thread(target=self.httpd.serve_forever, kwargs={"poll_interval": 0.1},
                                       daemon=True)
        self.timer = threading.Timer(SERVER_LIFETIME_S, self.stop)
        self.timer.daemon = True

    def start(self) -> LocalServer:
        self.thread.start()
        self.timer.start()
        return self

    def stop(self) -> None:
        self.timer.cancel()
        self.httpd.shutdown()
        self.httpd.server_close()

    def url(self, name: str) -> str:
        return f"{self.origin}/{name}"


@pytest.fixture
def served(tmp_path):
    srv = LocalServer(tmp_path).start()
    try:
        yield srv
    finally:
        srv.stop()


@pytest.fixture(scope="session")
def playwright_driver():
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:  # pragma: no cover
        pytest.fail("playwright is not installed: pip install -e '.[test]'", pytrace=False)
    with sync_playwright() as pw:
        yield pw


class BrowserSession:
    """One fresh Chromium profile; records console errors, page errors, dialogs and blocked requests."""

    def __init__(self, context, allowed_origin: str | None):
        self.context = context
        self.allowed_origin = allowed_origin
        self.console_errors: list[str] = []
        self.console_warnings: list[str] = []
        self.page_errors: list[str] = []
        self.dialogs: list[str] = []
        self.blocked: list[str] = []
        self.served_assets: list[str] = []
        self.requests: list[str] = []

    def route(self, route):
        from walkcomfort.report.offline import local_asset

        url = route.request.url
        if self.allowed_origin and url.startswith(self.allowed_origin + "/"):
            route.continue_()
            return
        if url.startswith(("data:", "file:")):
            route.continue_()
            return
        asset = local_asset(url)
        if asset is not None:
            body, kind = asset
            self.served_assets.append(url)
            route.fulfill(status=200, body=body, content_type=kind,
                          headers={"Access-Control-Allow-Origin": "*"})
            return
        self.blocked.append(url)
        route.abort()

    def new_page(self, width=1280, height=860):
        page = self.context.new_page()
        page.set_viewport_size({"width": width, "height": height})
        page.on("console", lambda m: self.console_errors.append(m.text) if m.type == "error" else
                (self.console_warnings.append(m.text) if m.type == "warning" else None))
        page.on("pageerror", lambda e: self.page_errors.append(str(e)))
        page.on("request", lambda r: self.requests.append(r.url))

        def on_dialog(d):
            self.dialogs.append(d.message)
            d.dismiss()

        page.on("dialog", on_dialog)
        return page


@pytest.fixture
def browser(playwright_driver, tmp_path_factory, request):
    """A fresh headless Chromium profile; pass the served origin with ``browser.allow(origin)``."""
    profile = tmp_path_factory.mktemp("chromium-profile")
    context = playwright_driver.chromium.launch_persistent_context(
        str(profile), executable_path=chromium_path(), headless=True, args=CHROMIUM_FLAGS,
        service_workers="block")
    session = BrowserSession(context, None)
    context.route("**/*", session.route)
    try:
        yield session
    finally:
        context.close()
