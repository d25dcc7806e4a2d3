"""What every browser test shares: Debian's Chromium (never a downloaded browser), its flags, and
where screenshots go for a person to look at."""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from django.conf import settings

# Playwright's sync API runs an event loop in the test's thread; the ORM calls the tests make
# between page actions are ordinary blocking calls, not made from a coroutine.
os.environ.setdefault("DJANGO_ALLOW_ASYNC_UNSAFE", "true")

CHROMIUM = Path("/usr/bin/chromium")
SHOTS = Path(settings.BASE_DIR) / "var" / "screenshots"
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def launch_chromium() -> Iterator[Any]:
    """Debian's Chromium under Playwright for one test module; skips where it is missing.

    Assertions wait up to 15 s for the page (Playwright's default is 5 s), the same bound as the
    sessions' actions: on a busy 2-core machine a page with charts can take longer than 5 s."""
    sync_api = pytest.importorskip("playwright.sync_api")
    sync_api.expect.set_options(timeout=15_000)
    if not CHROMIUM.exists():
        pytest.skip("Debian's chromium is not installed")
    with sync_api.sync_playwright() as p:
        chromium = p.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()
