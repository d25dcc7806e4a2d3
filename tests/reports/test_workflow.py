"""The sign-off workflow: separation of duties, password re-entry, one issued revision, races."""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import Any

import pytest
from django.db import IntegrityError, connection, transaction

from reports import services
from reports.models import AuditEvent, ReportRevision, SignOff
from tests.conftest import PASSWORD, Cast
from tests.reports.conftest import issue


def test_preparer_cannot_check_and_checker_cannot_approve(
    cast: Cast, draft: ReportRevision
) -> None:
    with pytest.raises(services.NotAllowed):
        services.revision_check(user=cast.technician, revision=draft, password=PASSWORD)
    with pytest.raises(services.NotAllowed):  # an approver without the checker role
        services.revision_check(user=cast.approver, revision=draft, password=PASSWORD)
    checked = services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    with pytest.raises(services.NotAllowed):
        services.revision_approve(user=cast.checker, revision=checked, password=PASSWORD)
    approved = services.revision_approve(user=cast.approver, revision=checked, password=PASSWORD)
    assert approved.state == "approved"
    signoffs = list(SignOff.objects.filter(revision=draft).order_by("signed_at"))
    assert [(s.meaning, s.user_id) for s in signoffs] == [
        ("checked", cast.checker.pk),
        ("approved", cast.approver.pk),
    ]
    assert all(s.content_sha256 == draft.content_sha256 for s in signoffs)
    assert signoffs[0].role == "Checker" and signoffs[1].role == "Approving engineer"


def test_database_refuses_checker_equal_to_preparer(cast: Cast, draft: ReportRevision) -> None:
    with pytest.raises(IntegrityError), transaction.atomic():
        ReportRevision.objects.filter(pk=draft.pk).update(
            state="checked", checked_by=cast.technician
        )


def test_database_refuses_approver_equal_to_checker(cast: Cast, draft: ReportRevision) -> None:
    with pytest.raises(IntegrityError), transaction.atomic():
        ReportRevision.objects.filter(pk=draft.pk).update(
            state="approved", checked_by=cast.checker, approved_by=cast.checker
        )


@pytest.mark.parametrize("password", [None, "", "not-the-password"])
def test_signing_without_the_password_signs_nothing_and_is_audited(
    cast: Cast, draft: ReportRevision, password: str | None
) -> None:
    with pytest.raises(services.SignatureRefused):
        services.revision_check(user=cast.checker, revision=draft, password=password)
    draft.refresh_from_db()
    assert draft.state == "draft"
    assert SignOff.objects.count() == 0
    refused = AuditEvent.objects.filter(action="signature_refused", actor=cast.checker)
    assert refused.count() == 1
    assert refused.get().subject == f"revision:{draft.pk}"


def test_wrong_password_on_issue_signs_nothing(
    cast: Cast, draft: ReportRevision, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    with pytest.raises(services.SignatureRefused):
        issue(draft, cast.approver, django_capture_on_commit_callbacks, password="wrong")
    draft.refresh_from_db()
    assert draft.state == "approved"
    assert not SignOff.objects.filter(meaning="issued").exists()
    assert AuditEvent.objects.filter(action="signature_refused").count() == 1


def test_issued_revision_cannot_be_edited(cast: Cast, issued: ReportRevision) -> None:
    assert issued.state == "issued", issued.render_error
    with pytest.raises(services.Conflict):
        services.revision_update(user=cast.technician, revision=issued, remarks="changed")
    issued.remarks = "changed"
    with pytest.raises(ValueError, match="has been issued"):
        issued.save()
    # The database refuses it too, even past the model.
    with pytest.raises(Exception, match="cannot be edited"), transaction.atomic():
        ReportRevision.objects.filter(pk=issued.pk).update(remarks="changed")
    with pytest.raises(Exception, match="cannot be edited"), transaction.atomic():
        ReportRevision.objects.filter(pk=issued.pk).update(pdf_sha256="0" * 64)


def test_issue_signoff_binds_the_pdf(issued: ReportRevision) -> None:
    signoff = SignOff.objects.get(revision=issued, meaning="issued")
    assert signoff.pdf_sha256 == issued.pdf_sha256
    with issued.pdf.open("rb") as fh:
        import hashlib

        assert hashlib.sha256(fh.read()).hexdigest() == issued.pdf_sha256
    assert issued.report.tests.get().released_at is not None


def test_fifty_issue_requests_on_one_revision_issue_once_sequential_race(
    cast: Cast, draft: ReportRevision
) -> None:
    """SQLite or PostgreSQL: 50 requests that each loaded the revision while it was approved."""
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    stale = [ReportRevision.objects.get(pk=draft.pk) for _ in range(50)]
    outcomes = []
    for copy in stale:
        try:
            services.revision_issue(user=cast.approver, revision=copy, password=PASSWORD)
            outcomes.append("claimed")
        except services.Conflict:
            outcomes.append("conflict")
    assert outcomes.count("claimed") == 1 and outcomes.count("conflict") == 49
    services.revision_issue_complete(revision_id=draft.pk)
    services.revision_issue_complete(revision_id=draft.pk)  # a second delivery does nothing
    assert ReportRevision.objects.filter(report=draft.report, state="issued").count() == 1
    assert SignOff.objects.filter(revision=draft, meaning="issued").count() == 1


@pytest.mark.skipif(connection.vendor != "postgresql", reason="threads need PostgreSQL")
@pytest.mark.django_db(transaction=True)
def test_fifty_parallel_issue_requests_issue_once(cast: Cast, draft: ReportRevision) -> None:
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    barrier = threading.Barrier(50)
    outcomes: list[str] = []
    lock = threading.Lock()

    def attempt() -> None:
        from django.db import connections

        try:
            copy = ReportRevision.objects.get(pk=draft.pk)
            barrier.wait(timeout=30)
            try:
                services.revision_issue(user=cast.approver, revision=copy, password=PASSWORD)
                result = "claimed"
            except services.Conflict:
                result = "conflict"
            with lock:
                outcomes.append(result)
        finally:
            connections.close_all()

    threads = [threading.Thread(target=attempt) for _ in range(50)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert outcomes.count("claimed") == 1, outcomes
    assert outcomes.count("conflict") == 49
    assert (
        ReportRevision.objects.filter(report=draft.report, state__in=["issuing", "issued"]).count()
        == 1
    )


def test_the_page_offers_the_next_sign_off_only_to_who_may_give_it(
    cast: Cast, draft: ReportRevision
) -> None:
    """The revision page shows the sign form to a person the service would accept and, to anyone
    else, the service's own reason instead of a form that would be refused."""
    from django.test import Client
    from django.urls import reverse

    def page(user: Any) -> str:
        client = Client()
        client.force_login(user)
        response = client.get(reverse("reports:revision", args=[draft.pk]))
        assert response.status_code == 200
        return response.content.decode()

    check_url = reverse("reports:sign", args=[draft.pk, "check"])
    approve_url = reverse("reports:sign", args=[draft.pk, "approve"])
    assert check_url in page(cast.checker)
    technician_page = page(cast.technician)
    assert check_url not in technician_page
    assert "Only a checker can check a report." in technician_page
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    checker_page = page(cast.checker)
    assert approve_url not in checker_page
    assert "Only an approving engineer can approve a report." in checker_page
    assert approve_url in page(cast.approver)
