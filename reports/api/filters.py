"""Query filters for the report lists (django-filter): by project, number and revision state.
Every list is scoped to the caller first, so another organisation's ids simply find nothing."""

from __future__ import annotations

import django_filters as df

from reports.models import Report, ReportRevision, RevisionState
from testing.api.filters import IdFilter


class ReportFilter(df.FilterSet):
    project = IdFilter(field_name="project_id")
    number = df.CharFilter(lookup_expr="iexact", max_length=60)

    class Meta:
        model = Report
        fields = ["project", "number"]


class RevisionFilter(df.FilterSet):
    project = IdFilter(field_name="report__project_id")
    report = IdFilter(field_name="report_id")
    state = df.MultipleChoiceFilter(choices=RevisionState.choices)

    class Meta:
        model = ReportRevision
        fields = ["project", "report", "state"]
