"""Query filters for list endpoints (django-filter). Ids are bounded integers, so an absurd value
is a 400 with a field message, never a database error; filtering by another organisation's id
simply finds nothing, because every list is scoped first."""

from __future__ import annotations

from typing import Any

import django_filters as df
from django import forms
from django.db.models import Exists, OuterRef, QuerySet
from django.utils import timezone

from testing.api import scoping
from testing.api.fields import MAX_ID
from testing.models import (
    Apparatus,
    Borehole,
    CalibrationRecord,
    ComputationRun,
    DirectShearTest,
    DisplacementGauge,
    EnvelopeResult,
    EnvelopeType,
    ForceDevice,
    MethodProfile,
    Organisation,
    Project,
    RunKind,
    RunState,
    Sample,
    SampleStatus,
    ShearStage,
    Specimen,
    StageResult,
)
from testing.models.samples import OPEN_STATUSES


class IdFilter(df.NumberFilter):
    field_class = forms.IntegerField

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        kwargs.setdefault("min_value", 1)
        kwargs.setdefault("max_value", MAX_ID)
        super().__init__(*args, **kwargs)


class OrganisationFilter(df.FilterSet):
    is_active = df.BooleanFilter()

    class Meta:
        model = Organisation
        fields = ["is_active"]


class ProjectFilter(df.FilterSet):
    organisation = IdFilter(field_name="organisation_id")
    reference = df.CharFilter(lookup_expr="iexact", max_length=40)

    class Meta:
        model = Project
        fields = ["organisation", "reference"]


class BoreholeFilter(df.FilterSet):
    project = IdFilter(field_name="project_id")

    class Meta:
        model = Borehole
        fields = ["project"]


class SampleFilter(df.FilterSet):
    project = IdFilter(field_name="borehole__project_id")
    borehole = IdFilter(field_name="borehole_id")
    status = df.ChoiceFilter(choices=SampleStatus.choices)
    due_before = df.DateFilter(field_name="due_on", lookup_expr="lt")
    overdue = df.BooleanFilter(method="filter_overdue", help_text="Open and past its due date.")

    class Meta:
        model = Sample
        fields = ["project", "borehole", "status", "due_before", "overdue"]

    def filter_overdue(
        self, queryset: QuerySet[Sample], name: str, value: bool
    ) -> QuerySet[Sample]:
        overdue = {"status__in": OPEN_STATUSES, "due_on__lt": timezone.localdate()}
        return queryset.filter(**overdue) if value else queryset.exclude(**overdue)


class SpecimenFilter(df.FilterSet):
    sample = IdFilter(field_name="sample_id")
    project = IdFilter(field_name="sample__borehole__project_id")

    class Meta:
        model = Specimen
        fields = ["sample", "project"]


class TestSetFilter(df.FilterSet):
    project = IdFilter(field_name="project_id")
    method = df.ChoiceFilter(choices=MethodProfile.choices)
    released = df.BooleanFilter(field_name="released_at", lookup_expr="isnull", exclude=True)

    class Meta:
        model = DirectShearTest
        fields = ["project", "method", "released"]


class StageFilter(df.FilterSet):
    test = IdFilter(field_name="test_id")

    class Meta:
        model = ShearStage
        fields = ["test"]


class RunFilter(df.FilterSet):
    test = IdFilter(field_name="test_id")
    stage = IdFilter(field_name="stage_id")
    state = df.ChoiceFilter(choices=RunState.choices)
    kind = df.ChoiceFilter(choices=RunKind.choices)

    class Meta:
        model = ComputationRun
        fields = ["test", "stage", "state", "kind"]


class StageResultFilter(df.FilterSet):
    stage = IdFilter(field_name="stage_id")
    test = IdFilter(field_name="stage__test_id")
    project = IdFilter(field_name="stage__test__project_id")
    latest = df.BooleanFilter(
        method="filter_latest", help_text="true: only each stage's most recent result."
    )

    class Meta:
        model = StageResult
        fields = ["stage", "test", "project", "latest"]

    def filter_latest(
        self, queryset: QuerySet[StageResult], name: str, value: bool
    ) -> QuerySet[StageResult]:
        newer = scoping.stage_results(self.request.user).filter(
            stage_id=OuterRef("stage_id"), id__gt=OuterRef("id")
        )
        return queryset.filter(~Exists(newer)) if value else queryset


class EnvelopeFilter(df.FilterSet):
    test = IdFilter(field_name="test_id")
    project = IdFilter(field_name="test__project_id")
    envelope_type = df.ChoiceFilter(choices=EnvelopeType.choices)
    latest = df.BooleanFilter(
        method="filter_latest", help_text="true: only the most recent fit per test set and type."
    )

    class Meta:
        model = EnvelopeResult
        fields = ["test", "project", "envelope_type", "latest"]

    def filter_latest(
        self, queryset: QuerySet[EnvelopeResult], name: str, value: bool
    ) -> QuerySet[EnvelopeResult]:
        newer = scoping.envelopes(self.request.user).filter(
            test_id=OuterRef("test_id"),
            envelope_type=OuterRef("envelope_type"),
            id__gt=OuterRef("id"),
        )
        return queryset.filter(~Exists(newer)) if value else queryset


class ApparatusFilter(df.FilterSet):
    is_active = df.BooleanFilter()

    class Meta:
        model = Apparatus
        fields = ["is_active"]


class ForceDeviceFilter(df.FilterSet):
    apparatus = IdFilter(field_name="apparatus_id")
    is_active = df.BooleanFilter()

    class Meta:
        model = ForceDevice
        fields = ["apparatus", "kind", "is_active"]


class CalibrationFilter(df.FilterSet):
    device = IdFilter(field_name="device_id")
    due_before = df.DateFilter(field_name="due_on", lookup_expr="lt")

    class Meta:
        model = CalibrationRecord
        fields = ["device", "due_before"]


class GaugeFilter(df.FilterSet):
    apparatus = IdFilter(field_name="apparatus_id")
    is_active = df.BooleanFilter()

    class Meta:
        model = DisplacementGauge
        fields = ["apparatus", "axis", "is_active"]
