"""The demo scenario loads completely, covers every lifecycle state, and loads idempotently."""

from __future__ import annotations

from collections.abc import Callable
from io import StringIO
from typing import Any

import pytest
from django.core.management import call_command
from django.db.models import Count, Max, Min, Sum
from django.utils import timezone

from testing import access
from testing.models import (
    ConsolidationReading,
    DirectShearTest,
    Organisation,
    Project,
    Sample,
    SampleEvent,
    SampleStatus,
    ShearReadingBlock,
    ShearStage,
    Specimen,
    StageResult,
)
from testing.selectors_readings import shear_reading_count

COUNTED = (
    Organisation,
    Project,
    Sample,
    SampleEvent,
    Specimen,
    DirectShearTest,
    ShearStage,
    ConsolidationReading,
)


def _counts() -> dict[str, int]:
    counts = {model.__name__: model.objects.count() for model in COUNTED}
    # Shear readings are stored in blocks: count the readings, not the block rows.
    counts["ShearReading"] = ShearReadingBlock.objects.aggregate(n=Sum("count"))["n"] or 0
    return counts


@pytest.mark.django_db
def test_loaddemo_twice_gives_the_same_counts_and_prints_demo_logins(settings: Any) -> None:
    settings.TAULINE_DEMO_PASSWORD = "demo-pass-for-test"
    out = StringIO()
    call_command("loaddemo", stdout=out)
    first = _counts()
    call_command("loaddemo", stdout=out)
    assert _counts() == first
    text = out.getvalue()
    assert "DEMO ONLY" in text
    assert "demo-pass-for-test" in text
    for username in ("manager", "technician", "checker", "engineer", "client-a", "client-b"):
        assert f"  {username} " in text


@pytest.mark.django_db
def test_demo_covers_the_lab_workload() -> None:
    call_command("loaddemo", stdout=StringIO())
    demo_samples = Sample.objects.filter(borehole__project__reference="TL-2026-014")
    assert demo_samples.count() >= 12
    assert set(demo_samples.values_list("status", flat=True)) == set(SampleStatus.values)
    span = demo_samples.aggregate(first=Min("received_on"), last=Max("received_on"))
    assert 42 <= (span["last"] - span["first"]).days <= 56  # spread over the past eight weeks
    assert span["last"] <= timezone.localdate()
    # Every sample's stored state is the target of its latest event.
    for sample in demo_samples:
        assert sample.events.order_by("-at", "-id").first().to_status == sample.status  # type: ignore[union-attr]

    tests = DirectShearTest.objects.annotate(n=Count("stages", distinct=True))
    assert tests.count() >= 2
    assert all(t.n >= 3 for t in tests)
    assert ShearStage.objects.count() >= 6
    for stage in ShearStage.objects.annotate(cons=Count("consolidation_readings")):
        assert shear_reading_count(stage.pk) >= 100
        assert stage.cons >= 10


@pytest.mark.django_db
def test_demo_specimens_are_physically_possible(
    django_capture_on_commit_callbacks: Callable[..., Any],
) -> None:
    """Degree of saturation S = w·Gs/e cannot exceed 100 % (phase relations, common practice):
    the invented masses, densities and particle densities must agree, before and after shearing."""
    with django_capture_on_commit_callbacks(execute=True):  # the reductions loaddemo requests
        call_command("loaddemo", stdout=StringIO())
    results = StageResult.objects.select_related("stage__test")
    assert results.count() >= 9
    for result in results:
        for state in ("initial", "final"):
            saturation = result.phase[state]["saturation_pct"]
            assert 0.0 < saturation <= 100.0, (result.stage, state, saturation)
        assert "SATURATION_OVER_100" not in {f["code"] for f in result.flags}, result.stage


@pytest.mark.django_db
def test_demo_stages_are_tested_in_a_possible_order() -> None:
    """Each stage is consolidated after its sample arrived and the set was requested, and sheared
    after it was consolidated: a report's "dates of testing" come from these times."""
    call_command("loaddemo", stdout=StringIO())
    stages = ShearStage.objects.select_related("test", "specimen__sample")
    assert stages.count() >= 9
    for stage in stages:
        assert stage.consolidation_started_at is not None, stage
        assert stage.shear_started_at is not None, stage
        day = stage.consolidation_started_at.date()
        assert day >= stage.specimen.sample.received_on, stage
        assert day >= stage.test.requested_on, stage
        assert stage.shear_started_at > stage.consolidation_started_at, stage
        assert stage.shear_started_at <= timezone.now(), stage


@pytest.mark.django_db
def test_demo_clients_see_only_their_own_projects() -> None:
    call_command("loaddemo", stdout=StringIO())
    from django.contrib.auth import get_user_model

    users = get_user_model().objects
    for username, reference in (("client-a", "TL-2026-014"), ("client-b", "TL-2026-019")):
        visible = Project.objects.filter(access.project_filter(users.get(username=username)))
        assert list(visible.values_list("reference", flat=True)) == [reference]
