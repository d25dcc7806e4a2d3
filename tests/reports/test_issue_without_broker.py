"""Issuing while the broker is down: the request neither waits on it nor fails; the revision stays
"being issued" and the relay hands its rendering to a worker once the broker answers again."""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta
from typing import Any

import pytest
from django.utils import timezone

from reports import services
from reports.models import ReportRevision
from testing.services import computation
from tests.conftest import PASSWORD, Cast
from tests.support.processes import free_port


@pytest.fixture
def approved(cast: Cast, draft: ReportRevision) -> ReportRevision:
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    return services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)


@pytest.fixture
def broker_down(settings: Any) -> None:
    """A broker URL on a loopback port nothing listens on, and tasks no longer in-process."""
    settings.CELERY_TASK_ALWAYS_EAGER = False
    settings.REDIS_URL = f"redis://127.0.0.1:{free_port()}/0"
    computation._broker_down_until = 0.0  # forget what an earlier test learnt about its broker


def test_issuing_while_the_broker_is_down_keeps_the_revision_waiting_then_issues_it(
    cast: Cast,
    approved: ReportRevision,
    broker_down: None,
    settings: Any,
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    with django_capture_on_commit_callbacks(execute=True):
        services.revision_issue(user=cast.approver, revision=approved, password=PASSWORD)
    approved.refresh_from_db()
    assert approved.state == "issuing"
    assert approved.render_published_at is None  # never handed over
    assert not approved.pdf

    # The relay's pass while the broker is still down hands nothing over and loses nothing.
    counts = computation.relay_once()
    assert counts["report_renders_republished"] == 0
    approved.refresh_from_db()
    assert approved.state == "issuing"

    # The broker is back (here: tasks run in-process again): the next relay pass renders it.
    settings.CELERY_TASK_ALWAYS_EAGER = True
    counts = computation.relay_once()
    assert counts["report_renders_republished"] == 1
    approved.refresh_from_db()
    assert approved.state == "issued"
    assert approved.pdf and len(approved.pdf_sha256) == 64


def test_a_revision_handed_over_recently_is_not_handed_over_again(
    cast: Cast, approved: ReportRevision, settings: Any
) -> None:
    settings.TAULINE_RUN_REPUBLISH_SECONDS = 120
    now = timezone.now()
    ReportRevision.objects.filter(pk=approved.pk).update(
        state="issuing",
        issued_by=cast.approver,
        issue_requested_at=now,
        render_published_at=now - timedelta(seconds=30),
    )
    assert services.revisions_render_republish(now=now) == {"report_renders_republished": 0}
    approved.refresh_from_db()
    assert approved.state == "issuing"
    # Two minutes on and still not issued: the message or its worker was lost; hand it over again.
    later = now + timedelta(seconds=121)
    assert services.revisions_render_republish(now=later) == {"report_renders_republished": 1}
    approved.refresh_from_db()
    assert approved.state == "issued"
