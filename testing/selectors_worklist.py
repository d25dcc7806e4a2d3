"""The lab's worklist: samples waiting, scheduled and in test; test sets awaiting check, approval
and issue.

The sign-off columns read the reports app's revision states through the ORM's reverse relation
(``DirectShearTest.reports``) when that app is installed; ``testing`` never imports it.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from django.db.models import Count, Exists, Max, OuterRef, Q, QuerySet
from django.utils import timezone

from testing import access
from testing.access import AnyUser
from testing.models import DirectShearTest, Sample, SampleStatus, StageResult

WORKLIST_LIMIT = 50


def _staff_samples(user: AnyUser) -> QuerySet[Sample]:
    if access.is_lab_staff(user):
        return Sample.objects.all()
    return Sample.objects.none()


def _reports_installed() -> bool:
    return any(f.name == "reports" for f in DirectShearTest._meta.get_fields())


@dataclass(frozen=True)
class WorklistColumn:
    key: str
    title: str
    hint: str
    total: int
    samples: list[Sample]
    tests: list[DirectShearTest]


def worklist_for_user(*, user: AnyUser, today: date | None = None) -> list[WorklistColumn]:
    """The lab's work by state: samples waiting, scheduled and in test; test sets awaiting check,
    approval and issue. Staff only (anyone else gets empty columns). At most
    :data:`WORKLIST_LIMIT` items per column; ``total`` gives the full count.

    Queries: one count per sample state group, one list per sample column, one per test column.
    """
    today = today or timezone.localdate()
    samples = _staff_samples(user).select_related("borehole__project__organisation")
    columns: list[WorklistColumn] = []
    for status, title, hint in (
        (SampleStatus.RECEIVED, "Received", "Logged in; waiting to be scheduled."),
        (SampleStatus.SCHEDULED, "Scheduled", "Planned for testing."),
        (SampleStatus.IN_TEST, "In test", "Specimens in the box."),
    ):
        rows = list(samples.filter(status=status).order_by("due_on", "pk")[: WORKLIST_LIMIT + 1])
        total = len(rows)
        if total > WORKLIST_LIMIT:
            total = samples.filter(status=status).count()
        columns.append(WorklistColumn(status.value, title, hint, total, rows[:WORKLIST_LIMIT], []))

    tests = (
        DirectShearTest.objects.filter(access.test_filter(user))
        .select_related("project__organisation")
        .annotate(stage_count=Count("stages", distinct=True))
        .order_by("due_on", "pk")
    )
    if not access.is_lab_staff(user):
        tests = tests.none()
    has_results = Exists(StageResult.objects.filter(stage__test=OuterRef("pk")))
    unreleased = tests.filter(released_at__isnull=True).filter(has_results)
    test_columns: list[tuple[str, str, str, QuerySet[DirectShearTest]]]
    if _reports_installed():
        # A test set under a report revision in flight; the revision id links to its page.
        def at_state(*states: str) -> QuerySet[DirectShearTest]:
            in_state = Q(reports__revisions__state__in=states)
            return tests.filter(in_state).annotate(
                revision_id=Max("reports__revisions__id", filter=in_state)
            )

        test_columns = [
            (
                "awaiting_check",
                "Awaiting check",
                "Results computed; no report checked yet.",
                unreleased.exclude(
                    reports__revisions__state__in=["checked", "approved", "issuing", "issued"]
                ).annotate(
                    revision_id=Max(
                        "reports__revisions__id", filter=Q(reports__revisions__state="draft")
                    )
                ),
            ),
            (
                "awaiting_approval",
                "Awaiting approval",
                "Report checked; waiting for the approving engineer.",
                at_state("checked"),
            ),
            (
                "ready_to_issue",
                "Ready to issue",
                "Report approved; ready to be signed and issued.",
                at_state("approved", "issuing"),
            ),
        ]
    else:
        test_columns = [
            (
                "awaiting_check",
                "Awaiting check",
                "Results computed; not yet reported.",
                unreleased,
            ),
        ]
    for key, title, hint, queryset in test_columns:
        rows_t = list(queryset[: WORKLIST_LIMIT + 1])
        total = len(rows_t)
        if total > WORKLIST_LIMIT:
            total = queryset.count()
        columns.append(WorklistColumn(key, title, hint, total, [], rows_t[:WORKLIST_LIMIT]))
    return columns
