"""The manual-entry grid in a real browser (Debian's Chromium through Playwright, headless): a
technician types a row and sees the reduced force appear, pastes five lines from a spreadsheet,
adds rows and saves. The screenshot goes to ``var/screenshots/stage-entry-grid.png``.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest

from testing.models import ConsolidationReading, ShearStage
from testing.selectors_readings import shear_columns, shear_reading_count
from tests.conftest import PASSWORD, Cast, Records
from tests.web.browser_support import SHOTS
from tests.web.test_browser import Session
from tests.web.test_entry_grid import make_ring_stage

expect = pytest.importorskip("playwright.sync_api").expect
pytestmark = [pytest.mark.browser, pytest.mark.timeout(240)]


PASTED = "1.0\t0.5\t0.004\t61\n1.5\t0.75\t0.006\t78.5\n2.0\t1.0\t0.008\t90\n2.5\t1.25\t0.009\t96\n3.0\t1.5\t0.010\t99\n"


@pytest.fixture
def ring(transactional_db: None, cast: Cast, records_a: Records) -> ShearStage:
    return make_ring_stage(cast, records_a)


@pytest.fixture
def technician(browser: Any, live_server: Any, ring: ShearStage) -> Iterator[Session]:
    s = Session(browser, live_server.url)
    s.sign_in("tech", PASSWORD)
    yield s
    s.close()


def _out(s: Session, row: int, key: str) -> Any:
    return s.page.locator(f'tbody[data-grid="shear"] tr[data-row="{row}"] [data-out="{key}"]')


def test_a_technician_types_and_pastes_readings_sees_the_force_and_saves(
    technician: Session, ring: ShearStage
) -> None:
    s = technician
    s.go(f"/stages/{ring.pk}/")
    page = s.page
    page.get_by_label("Consolidation row 1: time since loading, min").fill("0")
    page.get_by_label("Consolidation row 1: settlement, mm, compression positive").fill("0")
    page.get_by_label("Consolidation row 2: time since loading, min").fill("4")
    page.get_by_label("Consolidation row 2: settlement, mm, compression positive").fill("0.12")
    for number, values in ((1, ("0", "0", "0", "0")), (2, ("0.5", "0.25", "0.002", "40"))):
        cells = (
            "time since shearing started, min",
            "horizontal, mm",
            "vertical, mm, dilation positive",
            "force reading, proving-ring divisions",
        )
        for label, value in zip(cells, values, strict=True):
            page.get_by_label(f"Shear row {number}: {label}").fill(value)
    # BS 1377-7 / ASTM D3080 reduction of readings: 40 div × 1.52 N/div = 60.8 N;
    # τ = 1000 × 60.8 N / 3600 mm² = 16.9 kPa.
    expect(_out(s, 2, "force_n")).to_have_text("60.8")
    assert _out(s, 2, "shear_stress_kpa").inner_text() == "16.9"

    # Five lines copied from a spreadsheet, pasted into shear row 3's time cell.
    page.get_by_label("Shear row 3: time since shearing started, min").evaluate(
        """(el, text) => {
            const data = new DataTransfer();
            data.setData('text/plain', text);
            el.dispatchEvent(new ClipboardEvent('paste', {clipboardData: data, bubbles: true,
                                                          cancelable: true}));
        }""",
        PASTED,
    )
    assert page.get_by_label(
        "Shear row 7: force reading, proving-ring divisions"
    ).input_value() == ("99")
    assert page.get_by_label("Shear row 5: horizontal, mm").input_value() == "1.0"
    # 99 div × 1.52 N/div = 150.48 N, shown to one decimal (BS 1377-7 / ASTM D3080).
    expect(_out(s, 7, "force_n")).to_have_text("150.5")

    page.locator('[data-add-rows="shear"]').click()
    assert page.locator('tbody[data-grid="shear"] tr[data-row]').count() == 35
    assert page.get_by_label("Shear row 35: horizontal, mm").input_value() == ""

    page.locator("#entry-grid").scroll_into_view_if_needed()
    s.shot("stage-entry-grid")
    assert s.errors == []

    page.get_by_role("button", name="Save readings", exact=True).last.click()
    page.wait_for_load_state()
    assert "Saved 2 consolidation and 7 shear readings" in page.content()
    forces = shear_columns(ring.pk).force_reading.tolist()
    assert forces == [0.0, 40.0, 61.0, 78.5, 90.0, 96.0, 99.0]  # divisions, stored raw
    settlements = list(
        ConsolidationReading.objects.filter(stage=ring)
        .order_by("elapsed_min")
        .values_list("settlement_mm", flat=True)
    )
    assert settlements == [0.0, 0.12]  # compression positive, as read from the dial

    # A bad cell: nothing saved, the grid comes back as typed with the row marked.
    s.go(f"/stages/{ring.pk}/")
    page.get_by_label("Shear row 1: time since shearing started, min").fill("0")
    page.get_by_label("Shear row 1: horizontal, mm").fill("0")
    page.get_by_label("Shear row 1: vertical, mm, dilation positive").fill("0")
    page.get_by_label("Shear row 1: force reading, proving-ring divisions").fill("4o")
    page.get_by_role("button", name="Save readings", exact=True).last.click()
    page.wait_for_load_state()
    assert "nothing was saved" in page.content()
    bad = page.get_by_label("Shear row 1: force reading, proving-ring divisions")
    assert bad.input_value() == "4o"
    assert bad.get_attribute("aria-invalid") == "true"
    page.locator('section[aria-labelledby="manual-h"]').screenshot(
        path=str(SHOTS / "stage-entry-grid-rejected.png")
    )
    assert shear_reading_count(ring.pk) == 7
