"""``manage.py loaddemo`` adds the demo reports: DS-01 issued, amended and issued again (revision 1
superseded), which only the demo client sees, and DS-02 checked and awaiting approval."""

from __future__ import annotations

import socket
from collections.abc import Callable
from io import StringIO
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.core.management import call_command

from reports.demo import AMENDMENT_REASON, MISPRINTED_DESCRIPTION
from reports.models import (
    AuditEvent,
    Report,
    ReportRevision,
    RevisionChange,
    RevisionState,
    SigningCertificate,
    SignOff,
)
from reports.selectors import revisions_for_user
from reports.verification import verify_pdf_bytes
from testing.models import ComputationRun, DirectShearTest, OutboxMessage, RunState, Sample
from testing.services import computation

DEMO_PASSWORD = "demo-pass-for-test"


def _client_revisions(username: str) -> list[ReportRevision]:
    """The issued revisions the user may see (the portal's list), newest revision first."""
    user = User.objects.get(username=username)
    return list(revisions_for_user(user=user).filter(issued_at__isnull=False))


def _counts() -> dict[str, int]:
    return {
        model.__name__: model.objects.count()
        for model in (
            Report,
            ReportRevision,
            SignOff,
            RevisionChange,
            AuditEvent,
            SigningCertificate,
            ComputationRun,
        )
    }


def _states() -> list[tuple[str, int, str, str]]:
    return list(
        ReportRevision.objects.order_by("pk").values_list(
            "report__number", "number", "state", "content_sha256"
        )
    )


@pytest.mark.django_db
def test_loaddemo_issues_an_amended_report_and_leaves_one_awaiting_approval(
    settings: Any, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    settings.TAULINE_DEMO_PASSWORD = DEMO_PASSWORD
    # The command runs without an outer transaction; here the test's transaction holds it, so the
    # work queued for "after commit" (computations, the demo_loaded signal) is run explicitly.
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())

    # The demo client sees DS-01's report in both revisions: 2 current, 1 superseded by it.
    current, superseded = _client_revisions("client-a")
    assert (current.number, current.state) == (2, RevisionState.ISSUED)
    assert (superseded.number, superseded.state) == (1, RevisionState.SUPERSEDED)
    assert current.report_id == superseded.report_id and current.replaces_id == superseded.pk
    assert current.report.project.reference == "TL-2026-014"
    assert [t.reference for t in current.report.tests.all()] == ["DS-01"]
    assert _client_revisions("client-b") == []

    # The amendment lists its one change: the sample description in the remarks, corrected to
    # the description logged when the sample was received, with the reason.
    sand = Sample.objects.get(borehole__project__reference="TL-2026-014", reference="B7")
    [change] = RevisionChange.objects.filter(revision=current)
    assert change.item == "Remarks"
    assert MISPRINTED_DESCRIPTION in change.old_value and sand.description not in change.old_value
    assert sand.description in change.new_value and MISPRINTED_DESCRIPTION not in change.new_value
    assert change.reason == current.amendment_reason == AMENDMENT_REASON
    assert current.content["remarks"] == change.new_value
    assert superseded.content["remarks"] == change.old_value
    # Results are not part of the amendment: both revisions froze the same result rows.
    assert set(current.stage_results.values_list("pk", flat=True)) == set(
        superseded.stage_results.values_list("pk", flat=True)
    )

    for revision, status in ((superseded, "superseded"), (current, "current")):
        # Signed off by three different people in their roles, each bound to the content signed.
        signoffs = {s.meaning: s for s in revision.signoffs.select_related("user")}
        assert {m: s.user.username for m, s in signoffs.items()} == {
            "checked": "checker",
            "approved": "engineer",
            "issued": "engineer",
        }
        assert {s.content_sha256 for s in signoffs.values()} == {revision.content_sha256}
        # The stored PDF carries an intact lab signature (checked by pyHanko), is this revision,
        # and says whether it is current.
        with revision.pdf.open("rb") as handle:
            verdict = verify_pdf_bytes(handle.read())
        assert verdict.authentic and verdict.revision is not None, verdict.message
        assert verdict.revision.pk == revision.pk
        assert verdict.status == status
    # DS-01's results were computed: the report froze one result per stage, and nothing is left
    # waiting in the queue for it.
    assert current.stage_results.count() == current.report.tests.get().stages.count() == 3
    assert current.envelope_results.exists()

    # DS-02's report is checked and waits for the approving engineer; it releases nothing.
    awaiting = ReportRevision.objects.get(report__tests__reference="DS-02")
    assert (awaiting.number, awaiting.state) == (1, RevisionState.CHECKED)
    assert awaiting.checked_by is not None and awaiting.checked_by.username == "checker"
    assert awaiting.approved_by is None and not awaiting.pdf
    assert [(s.meaning, s.content_sha256) for s in awaiting.signoffs.all()] == [
        ("checked", awaiting.content_sha256)
    ]
    assert awaiting.stage_results.count() == 3
    assert not DirectShearTest.objects.get(reference="DS-02").released_at
    assert not ComputationRun.objects.filter(
        test__reference__in=["DS-01", "DS-02"], state__in=[RunState.QUEUED, RunState.RUNNING]
    ).exists()

    # The whole record is consistent: PDFs, signatures, sign-offs and audit trails.
    out = StringIO()
    call_command("verify_integrity", stdout=out, stderr=StringIO())
    assert out.getvalue().startswith("ok: 2 issued revision(s) of 3 checked"), out.getvalue()

    # Loading again adds nothing: no report, revision, sign-off, change, audit event, signing
    # certificate or computation, and the same revisions in the same states.
    before = _counts()
    states = _states()
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())
    assert _counts() == before
    assert _states() == states
    assert [r.pk for r in _client_revisions("client-a")] == [current.pk, superseded.pk]


@pytest.mark.django_db
def test_with_a_broker_but_no_worker_loaddemo_still_computes_and_issues(
    settings: Any,
    monkeypatch: pytest.MonkeyPatch,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    """REDIS_URL set, nothing listening: no run is handed over, so the receiver carries out DS-01's
    queued runs itself (the same service a worker calls) before reporting."""
    with socket.socket() as probe:  # a loopback port with nobody listening
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    settings.TAULINE_DEMO_PASSWORD = DEMO_PASSWORD
    settings.CELERY_TASK_ALWAYS_EAGER = False
    settings.REDIS_URL = f"redis://127.0.0.1:{port}/0"
    monkeypatch.setattr(computation, "_broker_down_until", 0.0)
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())

    assert not OutboxMessage.objects.filter(published_at__isnull=False).exists()
    revisions = _client_revisions("client-a")
    assert [r.state for r in revisions] == [RevisionState.ISSUED, RevisionState.SUPERSEDED]
    assert revisions[0].stage_results.count() == 3
    assert ReportRevision.objects.get(report__tests__reference="DS-02").state == "checked"
    ds01 = ComputationRun.objects.filter(test__reference="DS-01")
    assert ds01.filter(state=RunState.SUCCEEDED).exists()
    assert not ds01.filter(state__in=[RunState.QUEUED, RunState.RUNNING]).exists()
