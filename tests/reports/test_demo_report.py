"""``manage.py loaddemo`` adds one issued, signed report of DS-01 that only the demo client sees."""

from __future__ import annotations

import socket
from collections.abc import Callable
from io import StringIO
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.core.management import call_command
from django.test import Client
from django.urls import reverse

from reports.models import Report, ReportRevision, RevisionState, SignOff
from reports.verification import verify_pdf_bytes
from testing.models import ComputationRun, OutboxMessage, RunState
from testing.services import computation

DEMO_PASSWORD = "demo-pass-for-test"


def _portal_revisions(username: str) -> list[ReportRevision]:
    client = Client()
    client.force_login(User.objects.get(username=username))
    response = client.get(reverse("portal:home"))
    assert response.status_code == 200
    return list(response.context["revisions"])


def _counts() -> dict[str, int]:
    return {
        "reports": Report.objects.count(),
        "revisions": ReportRevision.objects.count(),
        "sign-offs": SignOff.objects.count(),
        "runs": ComputationRun.objects.count(),
    }


@pytest.mark.django_db
def test_loaddemo_issues_one_report_for_client_a_and_none_for_client_b(
    settings: Any, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    settings.TAULINE_DEMO_PASSWORD = DEMO_PASSWORD
    # The command runs without an outer transaction; here the test's transaction holds it, so the
    # work queued for "after commit" (computations, the demo_loaded signal) is run explicitly.
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())

    mine = _portal_revisions("client-a")
    assert len(mine) == 1
    revision = mine[0]
    assert revision.state == RevisionState.ISSUED
    assert revision.report.project.reference == "TL-2026-014"
    assert [t.reference for t in revision.report.tests.all()] == ["DS-01"]
    assert _portal_revisions("client-b") == []

    # Signed off by three different people in their roles, each bound to the content signed.
    signoffs = {s.meaning: s for s in revision.signoffs.select_related("user")}
    assert {m: s.user.username for m, s in signoffs.items()} == {
        "checked": "checker",
        "approved": "engineer",
        "issued": "engineer",
    }
    assert {s.content_sha256 for s in signoffs.values()} == {revision.content_sha256}
    # The stored PDF carries an intact lab signature (checked by pyHanko) and is this revision.
    with revision.pdf.open("rb") as handle:
        verdict = verify_pdf_bytes(handle.read())
    assert verdict.authentic and verdict.revision is not None
    assert verdict.revision.pk == revision.pk
    # DS-01's results were computed: the report froze one result per stage, and nothing is left
    # waiting in the queue for it.
    assert revision.stage_results.count() == revision.report.tests.get().stages.count() == 3
    assert revision.envelope_results.exists()
    assert not ComputationRun.objects.filter(
        test__reference="DS-01", state__in=[RunState.QUEUED, RunState.RUNNING]
    ).exists()

    # Loading again adds nothing: no second report, revision, sign-off or computation.
    before = _counts()
    with django_capture_on_commit_callbacks(execute=True):
        call_command("loaddemo", stdout=StringIO())
    assert _counts() == before
    assert [r.pk for r in _portal_revisions("client-a")] == [revision.pk]


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
    revisions = _portal_revisions("client-a")
    assert [r.state for r in revisions] == [RevisionState.ISSUED]
    assert revisions[0].stage_results.count() == 3
    ds01 = ComputationRun.objects.filter(test__reference="DS-01")
    assert ds01.filter(state=RunState.SUCCEEDED).exists()
    assert not ds01.filter(state__in=[RunState.QUEUED, RunState.RUNNING]).exists()
