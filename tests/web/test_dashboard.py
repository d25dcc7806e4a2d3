"""The dashboard's figures against the demo scenario, recomputed here row by row in Python.

Percentiles: numpy's default ("linear") method is the same definition as PostgreSQL's
``percentile_cont`` (interpolation between closest ranks; numpy documentation, method "linear").
"""

from __future__ import annotations

from collections import Counter, defaultdict
from datetime import date, timedelta

import numpy as np
import pytest
from django.contrib.auth.models import User
from django.core.management import call_command
from django.test import Client
from django.urls import reverse
from django.utils import timezone

from testing.models import Sample, SampleEvent, SampleStatus
from testing.models.samples import OPEN_STATUSES
from testing.selectors_dashboard import dashboard_for_user, percentile_linear
from testing.services.demo import DEMO_LOGINS


def _monday(day: date) -> date:
    return day - timedelta(days=day.weekday())


@pytest.fixture
def demo(db: None) -> None:
    call_command("loaddemo", stdout=open("/dev/null", "w"))  # noqa: SIM115


@pytest.mark.django_db
def test_dashboard_figures_match_the_demo_counted_by_hand(demo: None) -> None:
    manager = User.objects.get(username="manager")
    today = timezone.localdate()
    d = dashboard_for_user(user=manager, today=today)
    samples = list(Sample.objects.all())
    events = list(SampleEvent.objects.select_related("sample"))
    assert DEMO_LOGINS  # the demo's users exist

    # Weekly received / reported over 12 weeks (Monday start).
    first = _monday(today) - timedelta(weeks=11)
    received = Counter(_monday(s.received_on) for s in samples if first <= s.received_on <= today)
    reported = Counter(
        _monday(timezone.localtime(e.at).date())
        for e in events
        if e.to_status == SampleStatus.REPORTED and timezone.localtime(e.at).date() >= first
    )
    assert [w.week_start for w in d.weeks] == [first + timedelta(weeks=i) for i in range(12)]
    assert {w.week_start: w.received for w in d.weeks if w.received} == dict(received)
    assert {w.week_start: w.reported for w in d.weeks if w.reported} == dict(reported)
    assert sum(w.received for w in d.weeks) == 15  # the demo: 13 + 2 samples, all within 8 weeks
    assert sum(w.reported for w in d.weeks) == 4  # U5, U2, B6 reported and B3 (since disposed)

    # Backlog by state.
    backlog = Counter(s.status for s in samples if s.status in OPEN_STATUSES)
    assert {r.status: r.count for r in d.backlog if r.count} == dict(backlog)

    # Turnaround per month of reporting: receipt date to the "reported" event's date.
    by_month: dict[date, list[int]] = defaultdict(list)
    for e in events:
        if e.to_status != SampleStatus.REPORTED:
            continue
        day = timezone.localtime(e.at).date()
        by_month[day.replace(day=1)].append((day - e.sample.received_on).days)
    assert [r.month for r in d.turnaround] == sorted(by_month)
    for row in d.turnaround:
        values = by_month[row.month]
        assert row.n == len(values)
        assert row.median_days == pytest.approx(float(np.percentile(values, 50)))
        assert row.p90_days == pytest.approx(float(np.percentile(values, 90)))

    # Overdue: open and past the due date.
    overdue = [s for s in samples if s.status in OPEN_STATUSES and s.due_on and s.due_on < today]
    assert d.overdue_total == len(overdue) > 0
    assert {s.sample_id for s in d.overdue_samples} == {s.pk for s in overdue}
    assert [s.days_overdue for s in d.overdue_samples] == sorted(
        ((today - s.due_on).days for s in overdue), reverse=True
    )

    # Work per person over 12 weeks.
    since = today - timedelta(weeks=12)
    moves: dict[str, Counter[str]] = defaultdict(Counter)
    for e in events:
        if timezone.localtime(e.at).date() >= since:
            kind = e.to_status
            if kind == SampleStatus.RECEIVED and e.from_status:
                kind = "other"  # sent back, not logged in
            elif kind not in ("received", "scheduled", "in_test", "tested", "reported"):
                kind = "other"
            moves[e.by.get_full_name() or e.by.username][kind] += 1
    got = {
        r.name: {
            "received": r.received,
            "scheduled": r.scheduled,
            "in_test": r.started,
            "tested": r.tested,
            "reported": r.reported,
            "other": r.other,
        }
        for r in d.technicians
    }
    want = {
        name: {k: c[k] for k in ("received", "scheduled", "in_test", "tested", "reported", "other")}
        for name, c in moves.items()
    }
    assert got == {k: v for k, v in want.items() if sum(v.values())}
    assert len(got) == 2  # the demo's technician and the manager (who put samples on hold)


@pytest.mark.django_db
def test_dashboard_page_shows_the_demo_counts(demo: None) -> None:
    client = Client()
    client.force_login(User.objects.get(username="manager"))
    response = client.get(reverse("dashboard"))
    assert response.status_code == 200
    text = response.content.decode()
    open_samples = Sample.objects.filter(status__in=OPEN_STATUSES).count()
    assert f'<div class="value">{open_samples}</div><div class="label">Open samples' in text
    for chart in ("chart-weekly", "chart-backlog", "chart-turnaround", "chart-technicians"):
        assert f'id="{chart}"' in text
    assert "<table>" in text


def test_percentile_linear_matches_numpy() -> None:
    # numpy's "linear" method (its default) is the percentile_cont definition.
    values = [3.0, 7.0, 8.0, 15.0, 21.0, 22.0, 40.0]
    for q in (0.0, 0.1, 0.5, 0.9, 1.0):
        assert percentile_linear(values, q) == pytest.approx(float(np.percentile(values, 100 * q)))


def test_weekly_chart_ticks_sit_on_the_mondays_that_start_each_week() -> None:
    """Each bar group is a week starting on a Monday (ISO 8601 week); its tick must name that
    Monday, not the Sunday a date axis would choose by default."""
    from testing.selectors_dashboard import WeekRow
    from testing.views.dashboard import weekly_figure

    first = date(2026, 9, 14)
    weeks = [WeekRow(first + timedelta(weeks=i), i, 0) for i in range(12)]
    xaxis = weekly_figure(weeks)["layout"]["xaxis"]
    ticks = [date.fromisoformat(v) for v in xaxis["tickvals"]]
    assert ticks and all(t.isoweekday() == 1 for t in ticks)  # Monday = 1 (ISO 8601)
    assert set(ticks) <= {w.week_start for w in weeks}
    assert xaxis["ticktext"][0] == "14 Sep"


@pytest.mark.parametrize("seed", range(20))
def test_percentile_from_counts_matches_numpy_on_the_expanded_values(seed: int) -> None:
    """Reading a percentile off a histogram gives numpy's "linear" percentile (the percentile_cont
    definition) of the values it stands for."""
    from testing.selectors_dashboard import percentile_from_counts

    rng = np.random.default_rng(seed)
    values = sorted({int(v) for v in rng.integers(0, 90, size=int(rng.integers(1, 12)))})
    counts = [(float(v), int(rng.integers(1, 40))) for v in values]
    expanded = [v for v, n in counts for _ in range(n)]
    for fraction in (0.0, 0.1, 0.5, 0.9, 1.0):
        assert percentile_from_counts(counts, fraction) == pytest.approx(
            float(np.percentile(expanded, 100 * fraction))
        )
