"""Reads for the staff record pages (project → borehole → sample → specimen → test set).

Each function takes an object already fetched through ``testing.access`` and returns what its page
shows, with the joins and prefetches that keep the page at a fixed number of queries.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from django.db.models import Count, Prefetch, QuerySet

from testing import access, selectors
from testing.access import AnyUser
from testing.models import (
    Borehole,
    ComputationRun,
    DirectShearTest,
    EnvelopeResult,
    Project,
    RunState,
    Sample,
    SampleEvent,
    ShearStage,
    Specimen,
    StageExclusion,
    StageResult,
)


def boreholes_of(*, user: AnyUser, project: Project) -> QuerySet[Borehole]:
    return (
        Borehole.objects.filter(access.borehole_filter(user), project=project)
        .annotate(sample_count=Count("samples"))
        .order_by("reference")
    )


def tests_of(*, user: AnyUser, project: Project) -> QuerySet[DirectShearTest]:
    return selectors.tests_for_user(user=user).filter(project=project).order_by("reference")


def samples_of(*, user: AnyUser, borehole: Borehole) -> QuerySet[Sample]:
    return (
        Sample.objects.filter(access.sample_filter(user), borehole=borehole)
        .annotate(specimen_count=Count("specimens"))
        .order_by("depth_top_m", "reference")
    )


@dataclass(frozen=True)
class SamplePage:
    events: list[SampleEvent]
    specimens: list[Specimen]


def sample_page(*, user: AnyUser, sample: Sample) -> SamplePage:
    """The sample's lifecycle events (with who) and its specimens (with their stage and test set)."""
    events = list(selectors.sample_events_for_user(user=user, sample=sample).order_by("at", "id"))
    specimens = list(
        Specimen.objects.filter(access.specimen_filter(user), sample=sample)
        .select_related("stage__test")
        .order_by("reference")
    )
    return SamplePage(events=events, specimens=specimens)


def specimen_stage(*, specimen: Specimen) -> ShearStage | None:
    try:
        return ShearStage.objects.select_related("test").get(specimen=specimen)
    except ShearStage.DoesNotExist:
        return None


@dataclass(frozen=True)
class StageRow:
    stage: ShearStage
    result: StageResult | None
    exclusions: dict[str, StageExclusion]
    active_run: ComputationRun | None


@dataclass(frozen=True)
class TestPage:
    test: DirectShearTest
    rows: list[StageRow]
    envelopes: dict[str, EnvelopeResult]
    runs: list[ComputationRun]
    active_runs: list[ComputationRun] = field(default_factory=list)

    @property
    def busy(self) -> bool:
        return bool(self.active_runs)


ACTIVE = (RunState.QUEUED, RunState.RUNNING)


def shear_test_page(*, user: AnyUser, test: DirectShearTest, run_limit: int = 12) -> TestPage:
    """Stages with their specimen, latest result, exclusions and any run in progress; the latest
    envelope of each type; the most recent runs. Five queries whatever the number of stages."""
    stages = list(
        test.stages.select_related("specimen__sample__borehole")
        .prefetch_related(
            Prefetch("exclusions", queryset=StageExclusion.objects.select_related("excluded_by"))
        )
        .order_by("stage_number")
    )
    results = selectors.latest_stage_results(test=test)
    envelopes = selectors.latest_envelopes(test=test)
    runs = list(selectors.runs_for_test(user=user, test=test)[:run_limit])
    active = [run for run in runs if run.state in ACTIVE]
    active_by_stage = {run.stage_id: run for run in active if run.stage_id is not None}
    rows = [
        StageRow(
            stage=stage,
            result=results.get(stage.pk),
            exclusions={e.envelope_type: e for e in stage.exclusions.all()},
            active_run=active_by_stage.get(stage.pk),
        )
        for stage in stages
    ]
    return TestPage(test=test, rows=rows, envelopes=envelopes, runs=runs, active_runs=active)


def run_states(*, user: AnyUser, test: DirectShearTest, limit: int = 12) -> list[dict[str, object]]:
    """The newest runs of a test set as plain data for the progress poll (one query)."""
    return [
        {
            "id": run.pk,
            "kind": run.get_kind_display(),
            "subject": run.subject_key,
            "state": run.state,
            "state_label": run.get_state_display(),
            "progress_pct": run.progress_pct,
            "error": run.error,
        }
        for run in selectors.runs_for_test(user=user, test=test)[:limit]
    ]
