"""Downloads from the staff pages: the project's AGS4 file (checked by python-ags4, the AGS Data
Format Working Group's validator, against the dictionaries it ships: 0 errors), and the results
tables as CSV and XLSX whose values are the stored results."""

from __future__ import annotations

import csv
import io
from io import StringIO
from pathlib import Path
from typing import Any

import pytest
from django.contrib.auth import get_user_model
from django.core.management import call_command
from django.test import Client
from django.urls import reverse
from openpyxl import load_workbook
from python_ags4 import AGS4

from testing.exporters.downloads import safe_name
from testing.models import Project
from testing.selectors import latest_stage_results

pytestmark = pytest.mark.django_db


@pytest.fixture
def demo(django_capture_on_commit_callbacks: Any, settings: Any, tmp_path: Path) -> Project:
    settings.MEDIA_ROOT = tmp_path / "media"
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())
    return Project.objects.get(reference="TL-2026-014")


def _as(username: str) -> Client:
    client = Client()
    client.force_login(get_user_model().objects.get(username=username))
    return client


def _attachment_name(response: Any) -> str:
    disposition = response["Content-Disposition"]
    assert disposition.startswith("attachment; filename=")
    return str(disposition.split("filename=", 1)[1].strip('"'))


def test_staff_download_the_project_ags_file_and_results_tables(
    demo: Project, tmp_path: Path
) -> None:
    technician = _as("technician")
    page = technician.get(reverse("project-detail", args=[demo.pk]))
    assert reverse("project-ags", args=[demo.pk]).encode() in page.content

    for version in ("4.1.1", "4.2"):
        response = technician.get(reverse("project-ags", args=[demo.pk]), {"version": version})
        assert response.status_code == 200
        name = _attachment_name(response)
        assert name == f"TL-2026-014-ags{version.replace('.', '')}.ags"
        path = tmp_path / name
        path.write_bytes(response.content)
        errors = AGS4.check_file(str(path), standard_AGS4_dictionary=version)
        assert AGS4.count_errors(errors)[0] == 0, errors
        tables, _ = AGS4.AGS4_to_dataframe(str(path))
        assert {"PROJ", "LOCA", "SAMP", "SHBG", "SHBT"} <= set(tables)
    refused = technician.get(reverse("project-ags", args=[demo.pk]), {"version": "3.1"})
    assert refused.status_code == 400 and b"4.1.1, 4.2" in refused.content

    # CSV: one row per stage of every test set, the peak as stored, units in the header.
    response = technician.get(reverse("project-results", args=[demo.pk, "csv"]))
    assert response.status_code == 200 and response["Content-Type"].startswith("text/csv")
    assert _attachment_name(response) == "TL-2026-014-results.csv"
    rows = list(csv.reader(io.StringIO(response.content.decode("utf-8-sig"))))
    header, body = rows[0], [r for r in rows[1:] if r[1]]
    peak = header.index("Peak shear stress [kPa]")
    stored = {}
    for test in demo.shear_tests.all():
        for stage in test.stages.all():
            result = latest_stage_results(test=test)[stage.pk]
            stored[(test.reference, stage.stage_number)] = result.failure_shear_stress_kpa
    assert len(body) == len(stored) >= 6
    for r in body:
        expected = stored[(r[1], int(r[header.index("Stage")]))]
        assert float(r[peak]) == pytest.approx(expected, rel=1e-9)

    # XLSX of one test set: the stage sheet and the envelope sheet, numbers as numbers.
    test = demo.shear_tests.get(reference="DS-01")
    response = technician.get(reverse("test-results", args=[test.pk, "xlsx"]))
    assert response.status_code == 200
    assert _attachment_name(response) == "TL-2026-014-DS-01-results.xlsx"
    book = load_workbook(io.BytesIO(response.content))
    assert book.sheetnames == ["Stage results", "Envelopes"]
    sheet = book["Stage results"]
    column = [c.value for c in sheet[1]].index("Peak shear stress [kPa]") + 1
    values = [sheet.cell(row=i, column=column).value for i in range(2, 5)]
    assert all(isinstance(v, float) for v in values)
    assert technician.get(reverse("test-results", args=[test.pk, "pdf"])).status_code == 404


def test_clients_do_not_reach_the_staff_downloads(demo: Project) -> None:
    """A client's engineer downloads the signed report from the portal; these files carry the
    newest computed values and stay on the staff side (404, as for any staff page)."""
    client = _as("client-a")
    test = demo.shear_tests.get(reference="DS-01")
    for url in (
        reverse("project-ags", args=[demo.pk]),
        reverse("project-results", args=[demo.pk, "csv"]),
        reverse("test-results", args=[test.pk, "xlsx"]),
    ):
        assert client.get(url).status_code == 404


def test_download_names_keep_only_safe_characters() -> None:
    assert safe_name("TL-2026/014 «x»") == "TL-2026_014__x_"
    assert safe_name('a"b\r\nc') == "a_b__c"
    assert safe_name("") == "export"
