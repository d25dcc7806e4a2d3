"""Reads for the lab manager's dashboard: throughput, backlog, turnaround, overdue work, work per person.

Every figure is an aggregate the database computes (counts, truncation to weeks and months), so the
dashboard costs a handful of queries whatever the number of samples. Turnaround days are whole days,
so the database returns each month's histogram (days → count, a few dozen rows) and the median and
90th percentile are read off it in Python with PostgreSQL's ``percentile_cont`` definition — no sort
of every reported sample, and the same code on SQLite, which has no percentile aggregate.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta
from typing import Any

from django.conf import settings
from django.contrib.auth.models import User
from django.core.cache import cache
from django.db import connection
from django.db.models import (
    Count,
    DateField,
    F,
    Func,
    IntegerField,
    Max,
    Min,
    Q,
    QuerySet,
)
from django.db.models.functions import TruncDate, TruncMonth, TruncWeek
from django.utils import timezone

from testing import access
from testing.access import AnyUser
from testing.models import (
    Sample,
    SampleEvent,
    SampleStatus,
)
from testing.models.samples import OPEN_STATUSES

_OPEN = sorted(OPEN_STATUSES)

# --- Database helpers ------------------------------------------------------------------------------


class DaysBetween(Func):
    """Whole days from ``start`` to ``end`` (both dates): PostgreSQL ``end - start``."""

    output_field = IntegerField()
    arg_joiner = " - "
    template = "(%(expressions)s)"

    def __init__(self, end: Any, start: Any) -> None:
        super().__init__(end, start)

    def as_sqlite(self, compiler: Any, conn: Any, **extra: Any) -> Any:  # type: ignore[override]
        return self.as_sql(
            compiler,
            conn,
            template="CAST(julianday(%(expressions)s) AS INTEGER)",
            arg_joiner=") - julianday(",
            **extra,
        )


def percentile_linear(sorted_values: Sequence[float], fraction: float) -> float:
    """The ``percentile_cont`` definition: linear interpolation between closest ranks."""
    if not sorted_values:
        raise ValueError("No values.")
    position = fraction * (len(sorted_values) - 1)
    low = int(position)
    high = min(low + 1, len(sorted_values) - 1)
    return float(sorted_values[low] + (sorted_values[high] - sorted_values[low]) * (position - low))


def percentile_from_counts(counts: Sequence[tuple[float, int]], fraction: float) -> float:
    """:func:`percentile_linear` of the values a histogram stands for, without expanding it:
    ``counts`` is (value, how many) in increasing value order."""
    total = sum(n for _, n in counts)
    if total <= 0:
        raise ValueError("No values.")
    position = fraction * (total - 1)
    low_rank = int(position)
    high_rank = min(low_rank + 1, total - 1)
    low = high = None
    seen = 0
    for value, n in counts:
        seen += n
        if low is None and low_rank < seen:
            low = value
        if high_rank < seen:
            high = value
            break
    assert low is not None and high is not None
    return float(low + (high - low) * (position - low_rank))


def _start_of_day(day: date) -> datetime:
    return timezone.make_aware(datetime.combine(day, time.min))


def _monday(day: date) -> date:
    return day - timedelta(days=day.weekday())


def _month_start(day: date, months_back: int) -> date:
    index = day.year * 12 + (day.month - 1) - months_back
    return date(index // 12, index % 12 + 1, 1)


def _as_date(value: date | datetime | None) -> date | None:
    if value is None:
        return None
    if isinstance(value, datetime):
        return timezone.localtime(value).date() if timezone.is_aware(value) else value.date()
    return value


def _staff_events(user: AnyUser) -> QuerySet[SampleEvent]:
    """Lifecycle events are the lab's internal record: staff see them all, anyone else none."""
    if access.is_lab_staff(user):
        # No default ordering: ordering by sample would join borehole and project into every
        # aggregate (the default ordering of Sample) for nothing.
        return SampleEvent.objects.order_by()
    return SampleEvent.objects.none()


def _staff_samples(user: AnyUser) -> QuerySet[Sample]:
    if access.is_lab_staff(user):
        return Sample.objects.order_by()
    return Sample.objects.none()


# --- Dashboard ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class WeekRow:
    week_start: date
    received: int
    reported: int


@dataclass(frozen=True)
class BacklogRow:
    status: str
    label: str
    count: int


@dataclass(frozen=True)
class TurnaroundRow:
    month: date
    n: int
    median_days: float
    p90_days: float


@dataclass(frozen=True)
class ProjectOverdueRow:
    project_id: int
    reference: str
    name: str
    organisation: str
    open: int
    overdue: int
    oldest_due_on: date | None


@dataclass(frozen=True)
class OverdueSample:
    sample_id: int
    label: str
    status_label: str
    due_on: date
    days_overdue: int
    project_id: int
    project_reference: str
    project_name: str
    agreed_turnaround_days: int | None
    """The project's agreed turnaround; None when it has none and the lab's default applies."""
    turnaround_days: int
    """The turnaround that applies: the agreed one, else the lab's default."""


@dataclass(frozen=True)
class TechnicianRow:
    user_id: int
    name: str
    received: int
    scheduled: int
    started: int
    tested: int
    reported: int
    other: int
    """Holds, disposals and moves back to an earlier state."""

    @property
    def total(self) -> int:
        return (
            self.received + self.scheduled + self.started + self.tested + self.reported + self.other
        )


@dataclass(frozen=True)
class Dashboard:
    today: date
    weeks: list[WeekRow]
    backlog: list[BacklogRow]
    turnaround: list[TurnaroundRow]
    overdue_total: int
    overdue_by_project: list[ProjectOverdueRow]
    overdue_samples: list[OverdueSample]
    technicians: list[TechnicianRow]
    technician_weeks: int
    as_of: datetime | None = None
    """When the figures were computed (they may come from the cache)."""


def weekly_throughput(*, user: AnyUser, today: date, weeks: int = 12) -> list[WeekRow]:
    """Samples received and reported per week (Monday start), oldest first, ``weeks`` weeks to today.

    Two queries: received dates come from the sample; "reported" is the lifecycle event.
    """
    first = _monday(today) - timedelta(weeks=weeks - 1)
    received = dict(
        _staff_samples(user)
        .filter(received_on__gte=first, received_on__lte=today)
        .annotate(week=TruncWeek("received_on", output_field=DateField()))
        .values_list("week")
        .annotate(n=Count("pk"))
        .values_list("week", "n")
    )
    reported = dict(
        _staff_events(user)
        .filter(to_status=SampleStatus.REPORTED, at__gte=_start_of_day(first))
        .annotate(week=TruncWeek("at", output_field=DateField()))
        .values_list("week")
        .annotate(n=Count("pk"))
        .values_list("week", "n")
    )
    received = {_as_date(k): v for k, v in received.items()}
    reported = {_as_date(k): v for k, v in reported.items()}
    rows = []
    for i in range(weeks):
        start = first + timedelta(weeks=i)
        rows.append(WeekRow(start, received.get(start, 0), reported.get(start, 0)))
    return rows


def backlog_by_state(*, user: AnyUser) -> list[BacklogRow]:
    """Open samples per lifecycle state, in lifecycle order (one query)."""
    counts = dict(
        _staff_samples(user)
        .filter(status__in=_OPEN)
        .values_list("status")
        .annotate(n=Count("pk"))
        .values_list("status", "n")
    )
    return [
        BacklogRow(status.value, status.label, counts.get(status.value, 0))
        for status in SampleStatus
        if status in OPEN_STATUSES
    ]


def turnaround_by_month(*, user: AnyUser, today: date, months: int = 12) -> list[TurnaroundRow]:
    """Turnaround (calendar days from receipt to the "reported" event) per month of reporting:
    count, median and 90th percentile. Months with no report are left out. One grouped query:
    (month, days) → count."""
    first = _month_start(today, months - 1)
    histogram = (
        _staff_events(user)
        .filter(to_status=SampleStatus.REPORTED, at__gte=_start_of_day(first))
        .annotate(
            month=TruncMonth("at", output_field=DateField()),
            days=DaysBetween(TruncDate("at"), F("sample__received_on")),
        )
        .values_list("month", "days")
        .annotate(n=Count("pk"))
        .values_list("month", "days", "n")
    )
    by_month: dict[date, list[tuple[float, int]]] = {}
    for month, days, n in histogram:
        key = _as_date(month)
        assert key is not None
        by_month.setdefault(key, []).append((float(days), int(n)))
    rows = []
    for month, counts in sorted(by_month.items()):
        counts.sort()
        rows.append(
            TurnaroundRow(
                month,
                sum(n for _, n in counts),
                percentile_from_counts(counts, 0.5),
                percentile_from_counts(counts, 0.9),
            )
        )
    return rows


def overdue_by_project(*, user: AnyUser, today: date) -> list[ProjectOverdueRow]:
    """Per project with open samples: how many are open, how many are past their due date."""
    overdue = Q(status__in=_OPEN, due_on__lt=today)
    rows = (
        _staff_samples(user)
        .filter(status__in=_OPEN)
        .values(
            "borehole__project_id",
            "borehole__project__reference",
            "borehole__project__name",
            "borehole__project__organisation__name",
        )
        .annotate(
            open=Count("pk"),
            overdue=Count("pk", filter=overdue),
            oldest_due_on=Min("due_on", filter=overdue),
        )
        .order_by("-overdue", "borehole__project__reference")
    )
    return [
        ProjectOverdueRow(
            project_id=r["borehole__project_id"],
            reference=r["borehole__project__reference"],
            name=r["borehole__project__name"],
            organisation=r["borehole__project__organisation__name"],
            open=r["open"],
            overdue=r["overdue"],
            oldest_due_on=r["oldest_due_on"],
        )
        for r in rows
    ]


def overdue_samples(*, user: AnyUser, today: date, limit: int = 20) -> list[OverdueSample]:
    """The open samples furthest past their due date (oldest due first), each with its project
    and the turnaround agreed on it (one query: the project is already joined for its reference)."""
    default_days = int(settings.TAULINE_DEFAULT_TURNAROUND_DAYS)
    rows = (
        _staff_samples(user)
        .filter(status__in=_OPEN, due_on__lt=today)
        .order_by("due_on", "pk")
        .values_list(
            "pk",
            "borehole__project__reference",
            "borehole__reference",
            "reference",
            "status",
            "due_on",
            "borehole__project_id",
            "borehole__project__name",
            "borehole__project__agreed_turnaround_days",
        )[:limit]
    )
    return [
        OverdueSample(
            sample_id=pk,
            label=f"{project}/{borehole}/{reference}",
            status_label=SampleStatus(status).label,
            due_on=due_on,
            days_overdue=(today - due_on).days,
            project_id=project_id,
            project_reference=project,
            project_name=project_name,
            agreed_turnaround_days=agreed,
            turnaround_days=default_days if agreed is None else agreed,
        )
        for (
            pk,
            project,
            borehole,
            reference,
            status,
            due_on,
            project_id,
            project_name,
            agreed,
        ) in rows
        if due_on is not None
    ]


def work_per_technician(*, user: AnyUser, today: date, weeks: int = 12) -> list[TechnicianRow]:
    """Lifecycle moves made by each person over the last ``weeks`` weeks: one grouped query over
    the events (grouped by person id alone) and one for the few people's names.

    "Received" counts samples logged in; a sample sent back to "received" counts under ``other``,
    with holds and disposals."""
    since = _start_of_day(today - timedelta(weeks=weeks))

    def moves(status: SampleStatus) -> Count:
        return Count("pk", filter=Q(to_status=status))

    grouped = (
        _staff_events(user)
        .filter(at__gte=since)
        .values("by_id")
        .annotate(
            received=Count("pk", filter=Q(to_status=SampleStatus.RECEIVED, from_status="")),
            moves_total=Count("pk"),
            scheduled=moves(SampleStatus.SCHEDULED),
            started=moves(SampleStatus.IN_TEST),
            tested=moves(SampleStatus.TESTED),
            reported=moves(SampleStatus.REPORTED),
        )
    )
    rows: list[dict[str, Any]] = list(grouped)
    names = {
        pk: f"{first} {last}".strip() or username
        for pk, username, first, last in User.objects.filter(
            pk__in=[r["by_id"] for r in rows]
        ).values_list("pk", "username", "first_name", "last_name")
    }
    result = [
        TechnicianRow(
            user_id=r["by_id"],
            name=names.get(r["by_id"], str(r["by_id"])),
            received=r["received"],
            scheduled=r["scheduled"],
            started=r["started"],
            tested=r["tested"],
            reported=r["reported"],
            other=r["moves_total"]
            - r["received"]
            - r["scheduled"]
            - r["started"]
            - r["tested"]
            - r["reported"],
        )
        for r in rows
    ]
    return sorted((row for row in result if row.total), key=lambda row: (-row.total, row.name))


def dashboard_for_user(*, user: AnyUser, today: date | None = None) -> Dashboard:
    """Every figure on the manager's dashboard (eight queries whatever the data volume)."""
    today = today or timezone.localdate()
    by_project = overdue_by_project(user=user, today=today)
    return Dashboard(
        today=today,
        weeks=weekly_throughput(user=user, today=today),
        backlog=backlog_by_state(user=user),
        turnaround=turnaround_by_month(user=user, today=today),
        overdue_total=sum(row.overdue for row in by_project),
        overdue_by_project=by_project,
        overdue_samples=overdue_samples(user=user, today=today),
        technicians=work_per_technician(user=user, today=today),
        technician_weeks=12,
        as_of=timezone.now(),
    )


def _data_mark() -> tuple[int, int]:
    """Changes whenever a sample is received, edited or moved: the newest lifecycle event and the
    newest sample history row (two indexed maxima, well under a millisecond)."""
    events = SampleEvent.objects.aggregate(m=Max("pk"))["m"] or 0
    edits = Sample.history.aggregate(m=Max("history_id"))["m"] or 0
    return int(events), int(edits)


def dashboard_cached(*, user: AnyUser, today: date | None = None) -> Dashboard:
    """The dashboard as :func:`dashboard_for_user`, shared by all staff through the cache for
    ``TAULINE_DASHBOARD_CACHE_SECONDS``. The key carries the newest event and sample-history ids,
    so a new, edited or moved sample shows at once; only renamed projects, clients or people, and
    changed turnaround agreements, wait for the time-out. The page says when the figures were
    computed."""
    ttl = settings.TAULINE_DASHBOARD_CACHE_SECONDS
    if ttl <= 0 or not access.is_lab_staff(user):
        return dashboard_for_user(user=user, today=today)
    today = today or timezone.localdate()
    events, edits = _data_mark()
    # v2: overdue samples carry their project and its turnaround (v1 entries lack them).
    key = (
        f"tauline:dashboard:v2:{connection.settings_dict['NAME']}:{today.isoformat()}:"
        f"{events}:{edits}"
    )
    found = cache.get(key)
    if isinstance(found, Dashboard):
        return found
    figures = dashboard_for_user(user=user, today=today)
    cache.set(key, figures, ttl)
    return figures
