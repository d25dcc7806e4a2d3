"""The issued PDF holds every ISO/IEC 17025:2017 §7.8.2.1 item and the method's report items."""

from __future__ import annotations

import io
import subprocess
import tempfile
from pathlib import Path

import pytest
from pypdf import PdfReader

from reports.models import ReportRevision
from reports.rendering.context import build_content, report_tests_load
from testing.models import DirectShearTest


def _pdf(revision: ReportRevision) -> bytes:
    with revision.pdf.open("rb") as fh:
        return fh.read()


def test_every_required_item_is_in_the_text(issued: ReportRevision) -> None:
    data = _pdf(issued)
    reader = PdfReader(io.BytesIO(data))
    # poppler's text (pypdf splits some kerned words, e.g. "T auline"); pages end with a form feed
    poppler = subprocess.run(["pdftotext", "-", "-"], input=data, capture_output=True, check=True)
    pages = [" ".join(p.split()) for p in poppler.stdout.decode().split("\f")[: len(reader.pages)]]
    text = " ".join(pages)
    assert "Direct shear test report" in (reader.pages[0].extract_text() or "")
    label = issued.label
    required = {
        # ISO/IEC 17025:2017 §7.8.2.1 a)–p)
        "a title": "Direct shear test report",
        "b lab name": "Tauline demonstration laboratory",
        "b lab address": "Example Business Park",
        "c place": "permanent premises",
        "e client": "Client A Consulting",
        "f method": "BS 1377-7, edition 1990",
        "g item": "Dense brown sand",
        "h received": "2026-11-02",
        "i tested": "Dates of testing",
        "j issue date": "Date of issue",
        "k sampling": "sampling plan",
        "l only items tested": "results relate only to the items tested",
        "m units": "τ failure [kPa]",
        "n deviations": "Deviations from the method",
        "o authorised": "Issued (authorised)",
        "p external": "external provider",
        "reproduction": "not be reproduced except in full",
        # The method's items (ASTM D3080 §11 / BS 1377-7 / ISO 17892-10 test report lists, from memory)
        "initial state": "ρd [Mg/m³]",
        "particle density": "(assumed)",
        "normal stress": "σn [kPa]",
        "rate": "Rate set / measured [mm/min]",
        "criterion": "Criterion",
        "tau-x plot": "shear stress against horizontal displacement",
        "y-x plot": "vertical against horizontal displacement",
        "consolidation": "root-time",
        "envelope": "shear strength envelope",
        "envelope SE": "SE(c′) [kPa]",
        "envelope range": "σn range [kPa]",
        "caution design": "qualified geotechnical engineer",
        "end mark": f"End of report {issued.report.number} rev {issued.number}",
    }
    missing = [k for k, v in required.items() if v not in text]
    assert not missing, missing
    # d) the report id and "page N of M" on every page
    for n, page in enumerate(pages, start=1):
        assert f"Report {label}" in page, n
        assert f"Page {n} of {len(pages)}" in page, n
    assert reader.trailer["/Root"].get("/Names", {}).get("/EmbeddedFiles") is None


def test_poppler_text_and_page_one_renders(issued: ReportRevision) -> None:
    data = _pdf(issued)
    text = subprocess.run(
        ["pdftotext", "-", "-"], input=data, capture_output=True, check=True
    ).stdout.decode()
    assert issued.report.number in text and "Page 1 of" in text
    with tempfile.TemporaryDirectory() as folder:
        src = Path(folder) / "r.pdf"
        src.write_bytes(data)
        subprocess.run(
            ["pdftoppm", "-png", "-r", "60", "-f", "1", "-l", "1", str(src), f"{folder}/page"],
            check=True,
            timeout=60,
        )
        png = next(Path(folder).glob("page*.png"))
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert png.stat().st_size > 10_000  # a blank A4 page at 60 dpi is far smaller


@pytest.mark.django_db
def test_content_snapshot_query_count(
    computed_set: DirectShearTest, django_assert_num_queries: object
) -> None:
    """Building a one-set, three-stage snapshot costs a fixed number of queries."""
    with django_assert_num_queries(10):  # type: ignore[operator]
        # 1 test sets with project and organisation; 1 their stages with specimen, sample,
        # borehole (prefetch); 1 latest stage results; 1 latest envelopes; 2 per stage
        # (shear and consolidation readings) = 6.
        tests = report_tests_load([computed_set.pk])
        build_content(
            tests=tests,
            report_number="TR-X",
            revision_number=1,
            revision_id="x",
            title="t",
            remarks="",
            deviations="",
        )
