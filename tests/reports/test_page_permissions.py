"""Who reaches each staff report page: lab staff read every page; a client's engineer gets 404 on
all of them (the same as for a page that does not exist: the portal is their side); a visitor who
is not signed in is sent to sign in. Writes are POST only. The revision audit's CSV neutralises
text a spreadsheet would evaluate (OWASP CSV-injection guidance, from memory)."""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.test import Client
from django.urls import reverse

from reports import services
from reports.models import ReportRevision
from tests.conftest import Cast

STAFF = ("technician", "checker", "approver", "manager")
CLIENTS = ("client_a", "client_b")


def _client(user: User | None) -> Client:
    client = Client()
    if user is not None:
        client.force_login(user)
    return client


def _read_pages(revision: ReportRevision) -> list[str]:
    pk = revision.pk
    return [
        reverse("reports:list"),
        reverse("reports:create"),
        reverse("reports:revision", args=[pk]),
        reverse("reports:preview", args=[pk]),
        reverse("reports:pdf", args=[pk]),
        reverse("reports:audit", args=[pk]),
        reverse("reports:audit", args=[pk]) + "?format=csv",
    ]


def _write_pages(revision: ReportRevision) -> list[str]:
    pk = revision.pk
    return [
        reverse("reports:edit", args=[pk]),
        reverse("reports:sign", args=[pk, "check"]),
        reverse("reports:supersede", args=[pk]),
        reverse("reports:withdraw", args=[pk]),
    ]


@pytest.mark.parametrize("persona", STAFF)
def test_lab_staff_read_every_report_page(cast: Cast, issued: ReportRevision, persona: str) -> None:
    client = _client(getattr(cast, persona))
    for url in _read_pages(issued):
        response = client.get(url)
        assert response.status_code == 200, (persona, url, response.status_code)
    for url in _write_pages(issued):
        assert client.get(url).status_code == 405, (persona, url)


@pytest.mark.parametrize("persona", CLIENTS)
def test_clients_get_404_on_every_staff_report_page(
    cast: Cast, issued: ReportRevision, persona: str
) -> None:
    client = _client(getattr(cast, persona))
    for url in _read_pages(issued):
        assert client.get(url).status_code == 404, (persona, url)
    for url in _write_pages(issued):
        response = client.post(url, {"reason": "client attempt", "password": "x"})
        assert response.status_code == 404, (persona, url, response.status_code)
    issued.refresh_from_db()
    assert issued.state == "issued"


def test_a_visitor_is_sent_to_sign_in(issued: ReportRevision) -> None:
    client = _client(None)
    for url in _read_pages(issued) + _write_pages(issued):
        method: Any = client.get if url in _read_pages(issued) else client.post
        response = method(url)
        assert response.status_code == 302, url
        assert "/accounts/login/" in response["Location"], url


def test_the_audit_csv_neutralises_formula_text(cast: Cast, issued: ReportRevision) -> None:
    amendment = services.revision_supersede(
        user=cast.technician, revision=issued, reason='=HYPERLINK("http://x.invalid")'
    )
    response = _client(cast.manager).get(
        reverse("reports:audit", args=[amendment.pk]) + "?format=csv"
    )
    rows = list(csv.reader(io.StringIO(response.content.decode())))
    assert rows[0][:3] == ["at_utc", "actor", "action"]
    cells = [cell for row in rows[1:] for cell in row]
    assert '\'=HYPERLINK("http://x.invalid")' in cells
    assert not [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r")]
