"""The reports API: scoping, password re-entry, and 409 on a second issue."""

from __future__ import annotations

from rest_framework.test import APIClient

from reports import services
from reports.models import ReportRevision
from tests.conftest import PASSWORD, Cast


def _api(user: object) -> APIClient:
    c = APIClient()
    c.force_authenticate(user)  # type: ignore[arg-type]
    return c


def test_issue_over_the_api_twice_answers_409(cast: Cast, draft: ReportRevision) -> None:
    api = _api(cast.checker)
    url = f"/api/v1/report-revisions/{draft.pk}/"
    assert api.post(url + "check/", {"password": "wrong"}).status_code == 403
    assert api.post(url + "check/", {}).status_code == 403  # no password: nothing signed
    assert ReportRevision.objects.get(pk=draft.pk).state == "draft"
    assert api.post(url + "check/", {"password": PASSWORD}).status_code == 200
    assert _api(cast.approver).post(url + "approve/", {"password": PASSWORD}).status_code == 200
    stale = ReportRevision.objects.get(pk=draft.pk)
    services.revision_issue(user=cast.approver, revision=stale, password=PASSWORD)
    again = _api(cast.approver).post(url + "issue/", {"password": PASSWORD})
    assert again.status_code == 409, again.content


def test_clients_see_only_their_issued_revisions(cast: Cast, issued: ReportRevision) -> None:
    mine = _api(cast.client_a).get("/api/v1/report-revisions/")
    assert [r["public_id"] for r in mine.json()["results"]] == [str(issued.public_id)]
    assert _api(cast.client_b).get("/api/v1/report-revisions/").json()["results"] == []
    assert _api(cast.client_b).get(f"/api/v1/report-revisions/{issued.pk}/pdf/").status_code == 404
    assert _api(cast.client_a).get(f"/api/v1/report-revisions/{issued.pk}/pdf/").status_code == 200
    # Clients are read-only: a write is refused before the record is looked up, with the same
    # answer for their own revision and another organisation's (nothing leaks).
    supersede = f"/api/v1/report-revisions/{issued.pk}/supersede/"
    own = _api(cast.client_a).post(supersede, {"reason": "x"})
    other = _api(cast.client_b).post(supersede, {"reason": "x"})
    assert own.status_code == other.status_code == 403
    assert own.content == other.content
