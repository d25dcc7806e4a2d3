"""The pages in a real browser: Debian's Chromium driven by Playwright against a live server.

Each persona signs in; a technician previews and imports a logger file and sees the results; the
dashboard shows the demo's counts; a client cannot reach staff pages or another organisation's
records. A screenshot of every main page goes to ``var/screenshots/`` for a person to look at.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.core.management import call_command

from testing.models import DirectShearTest, Sample, StageResult
from testing.models.samples import OPEN_STATUSES
from testing.selectors_readings import shear_columns
from testing.services import computation
from tests.web.browser_support import SHOTS

pytestmark = [pytest.mark.browser, pytest.mark.timeout(240)]


@pytest.fixture
def demo(transactional_db: None, settings: Any) -> None:
    settings.TAULINE_DEMO_PASSWORD = "browser-demo-pass"
    with open(os.devnull, "w") as sink:
        call_command("loaddemo", stdout=sink)
    technician = User.objects.get(username="technician")
    for test in DirectShearTest.objects.all():
        # Runs execute in-process when the transaction commits (no broker configured).
        computation.test_recompute_request(test=test, user=technician, reason="browser test set-up")
    for reference in ("DS-01", "DS-02"):
        stages = DirectShearTest.objects.get(reference=reference).stages.all()
        assert all(StageResult.objects.filter(stage=stage).exists() for stage in stages)


class Session:
    """One signed-in browser context, with the console errors it saw."""

    def __init__(self, browser: Any, base_url: str) -> None:
        self.context = browser.new_context(viewport={"width": 1280, "height": 900})
        self.context.set_default_timeout(15_000)
        self.page = self.context.new_page()
        self.base_url = base_url
        self.errors: list[str] = []
        self.page.on("console", self._console)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))

    def _console(self, message: Any) -> None:
        if message.type == "error":
            self.errors.append(f"{self.page.url}: {message.text} at {message.location}")

    def go(self, path: str) -> Any:
        return self.page.goto(self.base_url + path)

    def sign_in(self, username: str, password: str = "browser-demo-pass") -> None:
        self.go("/accounts/login/")
        self.page.get_by_label("User name").fill(username)
        self.page.get_by_label("Password").fill(password)
        self.page.get_by_role("button", name="Sign in").click()
        self.page.wait_for_load_state()

    def shot(self, name: str) -> None:
        SHOTS.mkdir(parents=True, exist_ok=True)
        self.page.screenshot(path=str(SHOTS / f"{name}.png"), full_page=True)

    def close(self) -> None:
        self.context.close()


@pytest.fixture
def session(browser: Any, live_server: Any, demo: None) -> Iterator[Any]:
    opened: list[Session] = []

    def make() -> Session:
        s = Session(browser, live_server.url)
        opened.append(s)
        return s

    yield make
    for s in opened:
        s.close()


def _csp_errors(errors: list[str]) -> list[str]:
    return [e for e in errors if "Content Security Policy" in e or "Refused" in e]


def test_each_persona_signs_in_and_staff_see_every_main_page(session: Any) -> None:
    sand = DirectShearTest.objects.get(reference="DS-01")
    stage = sand.stages.order_by("stage_number").first()
    assert stage is not None
    sample = Sample.objects.get(reference="U4")

    anon = session()
    anon.go("/accounts/login/")
    anon.shot("login")

    staff = session()
    staff.sign_in("manager")
    assert staff.page.get_by_role("link", name="Dashboard").is_visible()
    pages = {
        "worklist": "/worklist/",
        "dashboard": "/dashboard/",
        "projects": "/projects/",
        "project": f"/projects/{sand.project_id}/",
        "borehole": f"/boreholes/{sample.borehole_id}/",
        "sample": f"/samples/{sample.pk}/",
        "specimen": f"/specimens/{stage.specimen_id}/",
        "tests": "/tests/",
        "test-set": f"/tests/{sand.pk}/",
        "stage": f"/stages/{stage.pk}/",
    }
    for name, path in pages.items():
        response = staff.go(path)
        assert response.status == 200, path
        if name in ("dashboard", "test-set"):
            # Plotly drew the charts: it loaded from our own server under the CSP.
            staff.page.wait_for_selector(".chart .main-svg")
        staff.shot(name)
    assert _csp_errors(staff.errors) == [], staff.errors
    assert staff.errors == []

    # The test-set page at tablet width.
    staff.page.set_viewport_size({"width": 800, "height": 1000})
    staff.go(pages["test-set"])
    staff.page.wait_for_selector(".chart .main-svg")
    staff.shot("test-set-tablet")

    for username, landmark in (
        ("technician", "Worklist"),
        ("checker", "Worklist"),
        ("engineer", "Worklist"),
    ):
        s = session()
        s.sign_in(username)
        assert s.page.get_by_role("link", name=landmark, exact=True).is_visible()
        assert s.page.get_by_role("link", name="Dashboard").count() == 0
    for username in ("client-a", "client-b"):
        s = session()
        s.sign_in(username)
        assert s.page.get_by_role("link", name="Worklist", exact=True).count() == 0
        s.shot(f"home-{username}")


def test_technician_previews_and_imports_a_logger_file_and_sees_the_results(
    session: Any, tmp_path: Path
) -> None:
    clay = DirectShearTest.objects.get(reference="DS-02")
    stage = clay.stages.get(stage_number=2)
    readings = shear_columns(stage.pk).rows()
    # The load-cell stage's own readings, written as a logger would: seconds, mm, N.
    lines = ["time_s,horizontal_displacement_mm,vertical_displacement_mm,shear_force_n,phase"]
    for r in readings:
        lines.append(
            f"{r.elapsed_min * 60:.1f},{r.horizontal_mm:.4f},{r.vertical_mm:.4f},"
            f"{r.force_reading:.3f},shear"
        )
    good = tmp_path / "logger-ds02-stage2.csv"
    good.write_text("\n".join(lines) + "\n")
    bad = tmp_path / "logger-bad.csv"
    bad.write_text(lines[0] + "\n0,0,0,0,shear\n12,oops,0.01,15,shear\n24,0.2,0.01,,shear\n")
    before = StageResult.objects.filter(stage=stage).count()

    s = session()
    s.sign_in("technician")
    s.go(f"/stages/{stage.pk}/")
    s.page.get_by_label("Logger file (CSV or XLSX)").set_input_files(str(bad))
    s.page.get_by_role("button", name="Import").click()
    s.page.wait_for_selector("text=Nothing was saved")
    rows = s.page.locator("table:has(caption:has-text('Every row with a problem')) tbody tr")
    assert rows.count() >= 2  # every bad row listed, not just the first
    s.shot("stage-import-rejected")
    assert StageResult.objects.filter(stage=stage).count() == before

    s.page.get_by_label("Logger file (CSV or XLSX)").set_input_files(str(good))
    s.page.get_by_role("button", name="Preview").click()
    s.page.wait_for_selector("text=Preview — nothing saved yet")
    assert s.page.locator("#preview-slot table tbody tr").count() == 10
    s.shot("stage-import-preview")
    s.page.get_by_role("button", name="Import", exact=True).click()
    s.page.wait_for_url(f"**/tests/{clay.pk}/")
    assert s.page.get_by_text("Imported logger-ds02-stage2.csv").is_visible()
    s.page.wait_for_selector(".chart .main-svg")
    s.shot("test-set-after-import")
    assert StageResult.objects.filter(stage=stage).count() == before + 1
    latest = StageResult.objects.filter(stage=stage).latest("created_at")
    assert s.page.get_by_text(f"{latest.failure_shear_stress_kpa:.1f}").first.is_visible()


def test_dashboard_shows_the_demo_counts(session: Any) -> None:
    s = session()
    s.sign_in("manager")
    s.go("/dashboard/")
    open_samples = Sample.objects.filter(status__in=OPEN_STATUSES).count()
    tile = s.page.locator(".tile", has_text="Open samples").locator(".value")
    assert tile.inner_text() == str(open_samples)
    received = s.page.locator(".tile", has_text="Received in the last 12 weeks").locator(".value")
    assert received.inner_text() == str(Sample.objects.count())


def test_client_cannot_reach_staff_pages_or_another_organisations_records(session: Any) -> None:
    theirs = Sample.objects.get(reference="U4")  # Fenwick Brae's sample
    test = DirectShearTest.objects.get(reference="DS-01")
    s = session()
    s.sign_in("client-b")
    for path in (
        "/worklist/",
        "/dashboard/",
        f"/samples/{theirs.pk}/",
        f"/tests/{test.pk}/",
        f"/projects/{test.project_id}/",
    ):
        response = s.go(path)
        assert response.status == 404, path
        assert s.page.get_by_role("heading", name="Nothing here").is_visible()
        assert "Fenwick" not in s.page.content()
    s.shot("client-not-found")
