"""Reads, scoped to what the user may see (see ``testing.access``)."""

from __future__ import annotations

from datetime import date

from django.db.models import Count, Q, QuerySet
from django.utils import timezone

from testing import access
from testing.access import AnyUser
from testing.models import (
    ComputationRun,
    DirectShearTest,
    EnvelopeResult,
    Project,
    Sample,
    SampleEvent,
    SampleStatus,
    ShearStage,
    StageResult,
)
from testing.models.samples import OPEN_STATUSES


def projects_for_user(*, user: AnyUser) -> QuerySet[Project]:
    return (
        Project.objects.filter(access.project_filter(user))
        .select_related("organisation")
        .annotate(sample_count=Count("boreholes__samples", distinct=True))
        .order_by("reference")
    )


def samples_for_user(*, user: AnyUser) -> QuerySet[Sample]:
    return Sample.objects.filter(access.sample_filter(user)).select_related(
        "borehole__project__organisation"
    )


def tests_for_user(*, user: AnyUser) -> QuerySet[DirectShearTest]:
    return (
        DirectShearTest.objects.filter(access.test_filter(user))
        .select_related("project__organisation")
        .annotate(stage_count=Count("stages"))
    )


def sample_status_counts(*, user: AnyUser, today: date | None = None) -> dict[str, int]:
    """Sample counts per lifecycle state, plus ``overdue`` (open and past its due date), in one query."""
    today = today or timezone.localdate()
    aggregates = {
        status.value: Count("pk", filter=Q(status=status.value)) for status in SampleStatus
    }
    aggregates["overdue"] = Count("pk", filter=Q(status__in=OPEN_STATUSES, due_on__lt=today))
    return samples_for_user(user=user).aggregate(**aggregates)


def sample_events_for_user(*, user: AnyUser, sample: Sample) -> QuerySet[SampleEvent]:
    return SampleEvent.objects.filter(
        sample=sample, sample__in=samples_for_user(user=user)
    ).select_related("by")


# --- Computation runs and results ------------------------------------------------------------


def latest_stage_result(*, stage: ShearStage) -> StageResult | None:
    """The stage's most recent result row (runs that reused a result add no row)."""
    return StageResult.objects.filter(stage=stage).order_by("-created_at", "-id").first()


def latest_stage_results(*, test: DirectShearTest) -> dict[int, StageResult]:
    """Latest result per stage id of a test set, in one query."""
    latest: dict[int, StageResult] = {}
    for result in StageResult.objects.filter(stage__test=test).order_by(
        "stage_id", "-created_at", "-id"
    ):
        latest.setdefault(result.stage_id, result)
    return latest


def latest_envelopes(*, test: DirectShearTest) -> dict[str, EnvelopeResult]:
    """Latest fit per envelope type of a test set, in one query."""
    latest: dict[str, EnvelopeResult] = {}
    for envelope in EnvelopeResult.objects.filter(test=test).order_by(
        "envelope_type", "-created_at", "-id"
    ):
        latest.setdefault(envelope.envelope_type, envelope)
    return latest


def runs_for_test(*, user: AnyUser, test: DirectShearTest) -> QuerySet[ComputationRun]:
    """Runs of a test set and its stages, newest first; staff only (clients see results, not runs)."""
    if not access.is_lab_staff(user):
        return ComputationRun.objects.none()
    return (
        ComputationRun.objects.filter(test=test)
        .select_related("stage", "requested_by")
        .order_by("-requested_at", "-id")
    )
