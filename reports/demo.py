"""The demo reports: once the demonstration scenario is loaded, its test sets are reported.

Connected to ``testing.signals.demo_loaded`` in :class:`reports.apps.ReportsConfig`. The sets'
results are computed here, then the reports go through the same services and roles as real work
(the technician prepares, the checker checks, the approving engineer approves and issues, each
signing with the demo password):

- DS-01 (sand): revision 1 is issued with the sample misdescribed in its remarks; revision 2
  amends it (the change listed with the old value, the new value and the reason) and is issued,
  so revision 1 is superseded. The demo client finds both in the portal, revision 2 current.
- DS-02 (clay): a report checked and awaiting approval, on the engineer's worklist.

Everything in them is invented demo data.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import User
from django.db import transaction

from reports import services
from reports.models import Report, ReportRevision, RevisionState
from testing.models import ComputationRun, DirectShearTest, RunState, Sample
from testing.services import computation
from testing.services.errors import ServiceError

logger = logging.getLogger(__name__)

DEMO_TEST_REFERENCE = "DS-01"  # issued, then amended and issued again
AWAITING_TEST_REFERENCE = "DS-02"  # checked, awaiting approval
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


TITLE = "Direct shear test report"
# Revision 1 misprints the logged description of the sand sample; revision 2 corrects it.
MISPRINTED_DESCRIPTION = "Dense orange-brown fine to medium SAND."
AMENDMENT_REASON = (
    "Sample description in the remarks corrected to the description logged on receipt; "
    "results unchanged."
)


@dataclass(frozen=True)
class DemoReports:
    superseded: ReportRevision  # DS-01 revision 1
    current: ReportRevision  # DS-01 revision 2, issued
    awaiting_approval: ReportRevision  # DS-02 revision 1, checked


def _sample_of(test: DirectShearTest) -> Sample:
    stage = test.stages.select_related("specimen__sample__borehole").order_by("stage_number")[0]
    return stage.specimen.sample


def _remarks(sample: Sample, description: str) -> str:
    return (
        "Demonstration report: invented site, samples and readings.\n"
        f"Material tested: {description} Sample {sample.reference}, borehole "
        f"{sample.borehole.reference}, {sample.depth_top_m}–{sample.depth_base_m} m depth."
    )


def _sign_off_and_issue(
    revision: ReportRevision, *, checker: User, approver: User, password: str
) -> ReportRevision:
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


def demo_reports_create(*, project_reference: str, password: str) -> DemoReports | None:
    """Compute DS-01 and DS-02 of the demo project and report them (see the module docstring).

    Does nothing if the project already has reports (the demo is added once).
    """
    tests = {
        t.reference: t
        for t in DirectShearTest.objects.select_related("project").filter(
            project__reference=project_reference,
            reference__in=[DEMO_TEST_REFERENCE, AWAITING_TEST_REFERENCE],
        )
    }
    issued_set, awaiting_set = tests[DEMO_TEST_REFERENCE], tests[AWAITING_TEST_REFERENCE]
    project = issued_set.project
    if Report.objects.filter(project=project).exists():
        return None
    users = User.objects.in_bulk([PREPARER, CHECKER, APPROVER], field_name="username")
    preparer, checker, approver = users[PREPARER], users[CHECKER], users[APPROVER]
    _compute_results(issued_set, user=preparer)
    _compute_results(awaiting_set, user=preparer)

    sand = _sample_of(issued_set)
    first = services.report_create(
        user=preparer,
        project=project,
        tests=[issued_set],
        title=TITLE,
        remarks=_remarks(sand, MISPRINTED_DESCRIPTION),
    )
    first = _sign_off_and_issue(first, checker=checker, approver=approver, password=password)
    amendment = services.revision_supersede(user=preparer, revision=first, reason=AMENDMENT_REASON)
    amendment = services.revision_update(
        user=preparer,
        revision=amendment,
        remarks=_remarks(sand, sand.description),
        reason=AMENDMENT_REASON,
    )
    current = _sign_off_and_issue(amendment, checker=checker, approver=approver, password=password)
    first.refresh_from_db()

    clay = _sample_of(awaiting_set)
    awaiting = services.report_create(
        user=preparer,
        project=project,
        tests=[awaiting_set],
        title=TITLE,
        remarks=_remarks(clay, clay.description),
    )
    awaiting = services.revision_check(user=checker, revision=awaiting, password=password)
    logger.info("demo report %s checked, awaiting approval", awaiting.label)
    return DemoReports(superseded=first, current=current, awaiting_approval=awaiting)


def on_demo_loaded(sender: Any, *, project_reference: str, password: str, **_: Any) -> None:
    """Receiver of ``testing.signals.demo_loaded`` (sent only when the scenario is new)."""
    demo_reports_create(project_reference=project_reference, password=password)
