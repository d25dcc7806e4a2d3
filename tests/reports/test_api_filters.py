"""Report lists filter by project, number and revision state; another project's id finds
nothing; a state that does not exist is a field error."""

from __future__ import annotations

from rest_framework.test import APIClient

from reports import services
from reports.models import ReportRevision
from tests.conftest import Cast


def _api(user: object) -> APIClient:
    client = APIClient()
    client.force_authenticate(user)  # type: ignore[arg-type]
    return client


def test_revisions_filter_by_state_and_project(cast: Cast, issued: ReportRevision) -> None:
    amendment = services.revision_supersede(
        user=cast.technician, revision=issued, reason="filter test"
    )
    api = _api(cast.manager)
    project = issued.report.project_id

    def ids(**query: object) -> list[int]:
        response = api.get("/api/v1/report-revisions/", query)
        assert response.status_code == 200, response.content
        return sorted(row["id"] for row in response.json()["results"])

    assert ids() == sorted([issued.pk, amendment.pk])
    assert ids(state="issued") == [issued.pk]
    assert ids(state=["issued", "draft"]) == sorted([issued.pk, amendment.pk])
    assert ids(project=project, state="draft") == [amendment.pk]
    assert ids(project=project + 1000) == []
    refused = api.get("/api/v1/report-revisions/", {"state": "published"})
    assert refused.status_code == 400 and "state" in refused.json()["errors"]


def test_reports_filter_by_number(cast: Cast, issued: ReportRevision) -> None:
    api = _api(cast.manager)
    number = issued.report.number
    found = api.get("/api/v1/reports/", {"number": number.lower()}).json()["results"]
    assert [row["number"] for row in found] == [number]
    assert api.get("/api/v1/reports/", {"number": "NO-SUCH"}).json()["results"] == []
