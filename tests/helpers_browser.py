"""What every browser test shares: Debian's chromium through Playwright, and a real waitress server.

Import ``pytestmark``-ready markers, the module-scoped ``browser`` fixture and :func:`serve`::

    from tests.helpers_browser import BROWSER_MARKS, WAIT, browser, expect, serve  # noqa: F401
    pytestmark = BROWSER_MARKS
"""

from __future__ import annotations

import os
import threading
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

import pytest

CHROMIUM = "/usr/bin/chromium"
# Flags for a root sandbox with no network beyond loopback (background fetches would be refused).
ARGS = ["--headless=new", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
WAIT = 8000   # ms: the bound on every wait
SHOTS = Path(__file__).resolve().parent.parent / "artifacts" / "screenshots"

BROWSER_MARKS = [pytest.mark.browser,
                 pytest.mark.skipif(not os.path.exists(CHROMIUM),
                                    reason=f"Debian's chromium is not installed at {CHROMIUM} "
                                           "(make test installs it with apt-get)")]

sync_api = pytest.importorskip("playwright.sync_api", reason="playwright is not installed")
expect = sync_api.expect


@contextmanager
def serve(app, *, threads: int = 4) -> Iterator[str]:
    """Serve ``app`` with waitress on 127.0.0.1 (a free port) in a daemon thread; yields the base URL."""
    import waitress

    server = waitress.create_server(app, host="127.0.0.1", port=0, threads=threads)
    stopping = threading.Event()

    def run() -> None:
        try:
            server.run()
        except (OSError, ValueError):   # the listening socket closed under select() while stopping
            if not stopping.is_set():
                raise

    thread = threading.Thread(target=run, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.effective_port}"
    finally:
        stopping.set()
        server.close()
        thread.join(timeout=10)


@pytest.fixture(scope="module")
def browser():
    """One headless chromium per test module."""
    with sync_api.sync_playwright() as p:
        br = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, timeout=30000)
        yield br
        br.close()
