"""The demo report: once the demonstration scenario is loaded, its sand set DS-01 is reported.

Connected to ``testing.signals.demo_loaded`` in :class:`reports.apps.ReportsConfig`. The set's
results are computed here, then a report goes through the same services and roles as real work:
the technician prepares it, the checker checks it, the approving engineer approves and issues it,
each signing with the demo password. The client of the demo project then finds one issued report
in the portal. Everything in it is invented demo data.
"""

from __future__ import annotations

import logging
import time
from typing import Any

from django.contrib.auth.models import User
from django.db import transaction

from reports import services
from reports.models import ReportRevision, RevisionState
from testing.models import ComputationRun, DirectShearTest, RunState
from testing.services import computation
from testing.services.errors import ServiceError

logger = logging.getLogger(__name__)

DEMO_TEST_REFERENCE = "DS-01"
PREPARER, CHECKER, APPROVER = "technician", "checker", "engineer"
# How long to wait for runs a worker has claimed but not finished.
RUNS_WAIT_S = 120.0


def _compute_results(test: DirectShearTest, *, user: User) -> None:
    """Every stage reduced and the envelopes fitted, before the report freezes them.

    Requests go through the normal path (queued runs, handed over on commit). Without a broker
    they run right away, in-process. With one, a worker may not be running: whatever is still
    queued is carried out here, through the same service a worker calls (a run claimed twice is
    carried out once). Runs a worker already holds are waited for, within RUNS_WAIT_S.
    """
    with transaction.atomic():
        computation.test_recompute_request(test=test, user=user, reason="demo report")
    deadline = time.monotonic() + RUNS_WAIT_S
    while True:
        queued = list(
            ComputationRun.objects.filter(test=test, state=RunState.QUEUED)
            .order_by("pk")
            .values_list("pk", flat=True)
        )
        for run_id in queued:  # stage reductions first; their envelope fits are queued after
            computation.run_execute(run_id=run_id)
        if queued:
            continue
        if not ComputationRun.objects.filter(test=test, state=RunState.RUNNING).exists():
            return
        if time.monotonic() > deadline:
            raise ServiceError(f"{test}: a worker has not finished its computations; try later.")
        time.sleep(0.2)


def demo_report_create(*, project_reference: str, password: str) -> ReportRevision:
    """Compute DS-01 of the demo project and take a report of it from draft to issued."""
    test = DirectShearTest.objects.select_related("project").get(
        project__reference=project_reference, reference=DEMO_TEST_REFERENCE
    )
    users = User.objects.in_bulk([PREPARER, CHECKER, APPROVER], field_name="username")
    preparer, checker, approver = users[PREPARER], users[CHECKER], users[APPROVER]
    _compute_results(test, user=preparer)
    revision = services.report_create(
        user=preparer,
        project=test.project,
        tests=[test],
        title="Direct shear test report",
        remarks="Demonstration report: invented site, samples and readings.",
    )
    services.revision_check(user=checker, revision=revision, password=password)
    services.revision_approve(user=approver, revision=revision, password=password)
    services.revision_issue(user=approver, revision=revision, password=password)
    # Issuing hands rendering to a background task. Without a broker it has already run; with one,
    # render and sign here so the demo does not depend on a worker (a second run does nothing).
    services.revision_issue_complete(revision_id=revision.pk)
    revision.refresh_from_db()
    if revision.state != RevisionState.ISSUED:
        raise ServiceError(
            f"The demo report {revision.label} was not issued: {revision.render_error}"
        )
    logger.info("demo report %s issued", revision.label)
    return revision


def on_demo_loaded(sender: Any, *, project_reference: str, password: str, **_: Any) -> None:
    """Receiver of ``testing.signals.demo_loaded`` (sent only when the scenario is new)."""
    demo_report_create(project_reference=project_reference, password=password)
