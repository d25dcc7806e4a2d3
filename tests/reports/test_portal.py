"""The client portal: each organisation sees only its own issued revisions."""

from __future__ import annotations

import re
import uuid
from collections.abc import Callable
from typing import Any

from django.test import Client
from django.urls import reverse

from reports import services
from reports.models import ReportRevision
from tests.conftest import PASSWORD, Cast
from tests.reports.conftest import issue


def _normalised(body: bytes) -> bytes:
    """Per-response values (CSP nonce, CSRF token) differ on every response, so blank them."""
    body = re.sub(rb'nonce="[^"]*"', b'nonce=""', body)
    return re.sub(rb'name="csrfmiddlewaretoken" value="[^"]*"', b"", body)


def _client(user: Any) -> Client:
    c = Client()
    c.force_login(user)
    return c


def test_client_a_sees_own_issued_revision_and_pdf(cast: Cast, issued: ReportRevision) -> None:
    a = _client(cast.client_a)
    home = a.get(reverse("portal:home"))
    assert issued.label in home.content.decode()
    assert a.get(reverse("portal:revision", args=[issued.public_id])).status_code == 200
    pdf = a.get(reverse("portal:pdf", args=[issued.public_id]))
    assert pdf.status_code == 200
    assert b"".join(pdf.streaming_content).startswith(b"%PDF")  # type: ignore[attr-defined]


def test_client_b_gets_the_same_404_as_a_random_id(cast: Cast, issued: ReportRevision) -> None:
    b = _client(cast.client_b)
    assert issued.label not in b.get(reverse("portal:home")).content.decode()
    for name in ("portal:revision", "portal:pdf", "portal:verify"):
        theirs = b.get(reverse(name, args=[issued.public_id]))
        random = b.get(reverse(name, args=[uuid.uuid4()]))
        assert theirs.status_code == random.status_code == 404
        assert _normalised(theirs.content) == _normalised(random.content)


def test_drafts_are_invisible_to_clients(cast: Cast, draft: ReportRevision) -> None:
    a = _client(cast.client_a)
    assert a.get(reverse("portal:revision", args=[draft.public_id])).status_code == 404
    assert draft.label not in a.get(reverse("portal:home")).content.decode()


def test_superseded_revision_is_marked_and_links_to_replacement(
    cast: Cast, issued: ReportRevision, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    new = services.revision_supersede(
        user=cast.technician, revision=issued, reason="Typo in remarks"
    )
    services.revision_update(user=cast.technician, revision=new, remarks="Corrected remarks.")
    services.revision_check(user=cast.checker, revision=new, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=new, password=PASSWORD)
    new = issue(new, cast.approver, django_capture_on_commit_callbacks)
    page = _client(cast.client_a).get(reverse("portal:revision", args=[issued.public_id]))
    body = page.content.decode()
    assert page.status_code == 200
    assert "Superseded" in body
    assert reverse("portal:revision", args=[new.public_id]) in body


def test_portal_verification_page_checks_an_upload(cast: Cast, issued: ReportRevision) -> None:
    a = _client(cast.client_a)
    with issued.pdf.open("rb") as fh:
        data = fh.read()
    from django.core.files.uploadedfile import SimpleUploadedFile

    ok = a.post(
        reverse("portal:verify", args=[issued.public_id]),
        {"file": SimpleUploadedFile("r.pdf", data, "application/pdf")},
    )
    assert "Valid." in ok.content.decode()
    bad = bytearray(data)
    bad[1000] ^= 1
    nok = a.post(
        reverse("portal:verify", args=[issued.public_id]),
        {"file": SimpleUploadedFile("r.pdf", bytes(bad), "application/pdf")},
    )
    assert "Not this report." in nok.content.decode()
    public = Client().post(
        reverse("reports:verify"), {"file": SimpleUploadedFile("r.pdf", data, "application/pdf")}
    )
    assert "valid: authentic" in public.content.decode()
