"""The client portal in a real browser: Debian's Chromium driven by Playwright against a live server.

Client A signs in, finds the project and the issued report, opens the strength page of the demo's
released test set and sees the Plotly charts drawn under the CSP. Screenshots (desktop and tablet
width) go to ``var/screenshots/`` with the other browser tests' for a person to look at.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from django.core.management import call_command

from testing.models import DirectShearTest
from tests.web.browser_support import SHOTS

pytestmark = [pytest.mark.browser, pytest.mark.timeout(240)]
PASSWORD = "browser-demo-pass"


@pytest.fixture
def demo(transactional_db: None, settings: Any, tmp_path: Path) -> None:
    """The demo scenario; loading it issues the demo report of DS-01 (released to client A)."""
    settings.TAULINE_DEMO_PASSWORD = PASSWORD
    settings.MEDIA_ROOT = str(tmp_path / "media")
    with open(os.devnull, "w") as sink:
        call_command("loaddemo", stdout=sink)
    assert DirectShearTest.objects.get(reference="DS-01").released_at is not None


@pytest.fixture
def page(browser: Any, live_server: Any, demo: None) -> Iterator[Any]:
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    context.set_default_timeout(15_000)
    tab = context.new_page()
    errors: list[str] = []
    tab.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    tab.on("pageerror", lambda e: errors.append(str(e)))
    tab.errors = errors
    tab.base_url = live_server.url
    yield tab
    context.close()


def _shot(tab: Any, name: str) -> None:
    SHOTS.mkdir(parents=True, exist_ok=True)
    tab.screenshot(path=str(SHOTS / f"{name}.png"), full_page=True)


def test_client_a_opens_the_strength_page_and_sees_the_charts(page: Any) -> None:
    sand = DirectShearTest.objects.get(reference="DS-01")
    page.goto(page.base_url + "/accounts/login/")
    page.get_by_label("User name").fill("client-a")
    page.get_by_label("Password").fill(PASSWORD)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_load_state()

    page.goto(page.base_url + "/portal/")
    assert page.get_by_role("heading", name="Your projects and reports").is_visible()
    assert page.get_by_text("Signature intact").first.is_visible()
    _shot(page, "portal-home")

    page.get_by_role("link", name=sand.project.reference).first.click()
    page.wait_for_load_state()
    _shot(page, "portal-project")
    page.get_by_role("link", name="Test set DS-01: strength results").first.click()
    page.wait_for_load_state()
    assert page.url.endswith(f"/portal/tests/{sand.pk}/")
    # Plotly drew both charts: the bundle loaded from our own server under the CSP nonce.
    page.wait_for_selector("[data-chart='chart-envelope'] .main-svg")
    page.wait_for_selector("[data-chart='chart-shear'] .main-svg")
    assert page.locator(".js-plotly-plot").count() == 2
    assert page.get_by_role("heading", name="Strength envelopes").is_visible()
    _shot(page, "portal-strength")

    page.set_viewport_size({"width": 800, "height": 1000})
    page.reload()
    page.wait_for_selector("[data-chart='chart-envelope'] .main-svg")
    _shot(page, "portal-strength-tablet")
    assert page.errors == []
