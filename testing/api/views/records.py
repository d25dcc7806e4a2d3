"""Organisations, projects, boreholes, samples (lifecycle) and specimens."""

from __future__ import annotations

from typing import Any

from django.db.models import Model, QuerySet
from django.http import HttpResponse
from drf_spectacular.utils import extend_schema, extend_schema_view
from rest_framework.decorators import action
from rest_framework.request import Request
from rest_framework.response import Response

from testing import selectors
from testing.api import filters, scoping
from testing.api.permissions import LabAccess, LabStaffOnly
from testing.api.serializers import records as s
from testing.api.views import downloads
from testing.api.views.base import CreateViaServiceMixin, RecordViewSet
from testing.exporters.downloads import project_ags_download, project_results_download
from testing.models import Borehole, Organisation, Project, Sample, Specimen
from testing.services import lifecycle, records


@extend_schema_view(
    create=extend_schema(request=s.OrganisationIn, responses={201: s.OrganisationOut})
)
class OrganisationViewSet(CreateViaServiceMixin, RecordViewSet):
    """Client organisations (lab staff only; the lab manager registers new ones)."""

    permission_classes = [LabAccess, LabStaffOnly]
    serializer_class = s.OrganisationOut
    input_serializer_class = s.OrganisationIn
    filterset_class = filters.OrganisationFilter
    ordering_fields = ["name", "code", "created_at"]

    def scoped_queryset(self) -> QuerySet[Organisation]:
        return scoping.organisations(self.request.user)

    def perform_service(self, data: dict[str, Any]) -> Model:
        return records.organisation_create(user=self.acting_user, **data)


@extend_schema_view(create=extend_schema(request=s.ProjectIn, responses={201: s.ProjectOut}))
class ProjectViewSet(CreateViaServiceMixin, RecordViewSet):
    """Projects: clients see their own organisation's; the lab manager opens new ones."""

    serializer_class = s.ProjectOut
    input_serializer_class = s.ProjectIn
    filterset_class = filters.ProjectFilter
    ordering_fields = ["reference", "name", "created_at"]

    def scoped_queryset(self) -> QuerySet[Project]:
        return selectors.projects_for_user(user=self.request.user)

    def perform_service(self, data: dict[str, Any]) -> Model:
        return records.project_create(user=self.acting_user, **data)

    @downloads.ags_schema
    @action(detail=True, methods=["get"], permission_classes=[LabAccess, LabStaffOnly])
    def ags(self, request: Request, pk: str | None = None) -> HttpResponse:
        project = self.get_object()
        version = downloads.query(request, "version", "4.1.1")
        return downloads.respond(
            "version",
            lambda: project_ags_download(user=self.acting_user, project=project, version=version),
        )

    @downloads.results_schema
    @action(detail=True, methods=["get"], permission_classes=[LabAccess, LabStaffOnly])
    def results(self, request: Request, pk: str | None = None) -> HttpResponse:
        project = self.get_object()
        file_format = downloads.query(request, "file", "csv")
        return downloads.respond(
            "file",
            lambda: project_results_download(
                user=self.acting_user, project=project, file_format=file_format
            ),
        )


@extend_schema_view(create=extend_schema(request=s.BoreholeIn, responses={201: s.BoreholeOut}))
class BoreholeViewSet(CreateViaServiceMixin, RecordViewSet):
    serializer_class = s.BoreholeOut
    input_serializer_class = s.BoreholeIn
    filterset_class = filters.BoreholeFilter
    ordering_fields = ["reference", "final_depth_m", "drilled_on"]

    def scoped_queryset(self) -> QuerySet[Borehole]:
        return scoping.boreholes(self.request.user).order_by("project_id", "reference", "id")

    def perform_service(self, data: dict[str, Any]) -> Model:
        return records.borehole_create(user=self.acting_user, **data)


@extend_schema_view(create=extend_schema(request=s.SampleIn, responses={201: s.SampleOut}))
class SampleViewSet(CreateViaServiceMixin, RecordViewSet):
    """Samples. The state moves only through ``transition``, which writes a lifecycle event."""

    serializer_class = s.SampleOut
    input_serializer_class = s.SampleIn
    filterset_class = filters.SampleFilter
    ordering_fields = ["reference", "received_on", "due_on", "status", "depth_top_m"]

    def scoped_queryset(self) -> QuerySet[Sample]:
        return selectors.samples_for_user(user=self.request.user).order_by(
            "borehole_id", "depth_top_m", "reference", "id"
        )

    def perform_service(self, data: dict[str, Any]) -> Model:
        return records.sample_receive(user=self.acting_user, **data)

    @extend_schema(request=s.SampleTransitionIn, responses={200: s.SampleEventOut})
    @action(detail=True, methods=["post"])
    def transition(self, request: Request, pk: str | None = None) -> Response:
        """Move the sample to another lifecycle state; hold and disposal need a note."""
        sample = self.get_object()
        serializer = s.SampleTransitionIn(data=request.data)
        serializer.is_valid(raise_exception=True)
        event = lifecycle.sample_transition(
            sample=sample,
            to_status=serializer.validated_data["to_status"],
            note=serializer.validated_data.get("note", ""),
            user=self.acting_user,
        )
        return Response(s.SampleEventOut(event).data)

    @extend_schema(responses=s.SampleEventOut(many=True), filters=False)
    @action(
        detail=True,
        methods=["get"],
        serializer_class=s.SampleEventOut,
        filter_backends=[],
    )
    def events(self, request: Request, pk: str | None = None) -> Response:
        """The sample's lifecycle events, oldest first (append-only)."""
        sample = self.get_object()
        queryset = selectors.sample_events_for_user(user=request.user, sample=sample).order_by(
            "at", "id"
        )
        page = self.paginate_queryset(queryset)
        return self.get_paginated_response(s.SampleEventOut(page, many=True).data)


@extend_schema_view(create=extend_schema(request=s.SpecimenIn, responses={201: s.SpecimenOut}))
class SpecimenViewSet(CreateViaServiceMixin, RecordViewSet):
    serializer_class = s.SpecimenOut
    input_serializer_class = s.SpecimenIn
    filterset_class = filters.SpecimenFilter
    ordering_fields = ["reference", "depth_top_m"]

    def scoped_queryset(self) -> QuerySet[Specimen]:
        return scoping.specimens(self.request.user).order_by("sample_id", "reference", "id")

    def perform_service(self, data: dict[str, Any]) -> Model:
        return records.specimen_create(user=self.acting_user, **data)
