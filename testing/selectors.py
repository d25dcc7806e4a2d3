"""Reads, scoped to what the user may see (see ``testing.access``)."""

from __future__ import annotations

from datetime import date

from django.db.models import Count, Q, QuerySet
from django.utils import timezone

from testing import access
from testing.access import AnyUser
from testing.models import DirectShearTest, Project, Sample, SampleEvent, SampleStatus
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
