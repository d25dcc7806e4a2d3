"""API downloads for lab staff: a project's AGS4 file and the results tables of a project or test
set; a format or version not offered is a 400 naming the query parameter; clients are refused."""

from __future__ import annotations

import csv
import io

import pytest
from openpyxl import load_workbook
from rest_framework.test import APIClient

from tests.api.conftest import World

pytestmark = pytest.mark.django_db


def test_a_technician_downloads_the_ags_file_and_the_results_tables(
    plain_world: World, clients: dict[str, APIClient]
) -> None:
    api = clients["technician"]
    project, test = plain_world.a.project, plain_world.a.test

    ags = api.get(f"/api/v1/projects/{project.pk}/ags/", {"version": "4.2"})
    assert ags.status_code == 200
    assert ags["Content-Type"].startswith("text/plain")
    assert ags["Content-Disposition"].endswith('-ags42.ags"')
    text = ags.content.decode("ascii")
    assert text.startswith('"GROUP","PROJ"')
    assert '"GROUP","SHBG"' in text and '"GROUP","SHBT"' in text

    table = api.get(f"/api/v1/projects/{project.pk}/results/")
    assert table.status_code == 200 and table["Content-Type"].startswith("text/csv")
    rows = list(csv.reader(io.StringIO(table.content.decode("utf-8-sig"))))
    assert "Peak shear stress [kPa]" in rows[0]
    peak = rows[0].index("Peak shear stress [kPa]")
    stored = plain_world.a.result.failure_shear_stress_kpa
    assert any(r[1] == test.reference and float(r[peak]) == stored for r in rows[1:] if r[peak])

    book = api.get(f"/api/v1/test-sets/{test.pk}/results/", {"file": "xlsx"})
    assert book.status_code == 200
    assert load_workbook(io.BytesIO(book.content)).sheetnames == ["Stage results", "Envelopes"]


@pytest.mark.parametrize(
    ("url", "query", "field"),
    [
        ("projects/{project}/ags/", {"version": "3.1"}, "version"),
        ("projects/{project}/results/", {"file": "pdf"}, "file"),
        ("test-sets/{test}/results/", {"file": "ods"}, "file"),
    ],
)
def test_a_format_not_offered_is_a_field_error(
    plain_world: World, clients: dict[str, APIClient], url: str, query: dict[str, str], field: str
) -> None:
    path = "/api/v1/" + url.format(project=plain_world.a.project.pk, test=plain_world.a.test.pk)
    response = clients["manager"].get(path, query)
    assert response.status_code == 400
    body = response.json()
    assert set(body) == {"detail", "errors"} and list(body["errors"]) == [field]


def test_clients_are_refused_the_staff_downloads(
    plain_world: World, clients: dict[str, APIClient]
) -> None:
    own = plain_world.a
    for path in (
        f"/api/v1/projects/{own.project.pk}/ags/",
        f"/api/v1/projects/{own.project.pk}/results/",
        f"/api/v1/test-sets/{own.test.pk}/results/",
    ):
        assert clients["client_a"].get(path).status_code == 403
