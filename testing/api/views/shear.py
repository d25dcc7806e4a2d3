"""Direct shear test sets and stages, the stages' readings, and recompute requests."""

from __future__ import annotations

from typing import Any

from django.db import transaction
from django.db.models import Model, QuerySet
from django.http import HttpResponse
from drf_spectacular.utils import extend_schema, extend_schema_view
from rest_framework import status
from rest_framework.decorators import action
from rest_framework.parsers import JSONParser, MultiPartParser
from rest_framework.request import Request
from rest_framework.response import Response

from testing import selectors
from testing.api import filters, scoping
from testing.api.errors import RowsRejected, Unavailable
from testing.api.permissions import LabAccess, LabStaffOnly
from testing.api.serializers import results as rs
from testing.api.serializers import shear as s
from testing.api.serializers import uploads as up
from testing.api.views import downloads
from testing.api.views.base import CreateViaServiceMixin, RecordViewSet
from testing.exporters.downloads import set_results_download
from testing.models import (
    ConsolidationReading,
    DirectShearTest,
    ImportState,
    ReadingImport,
    ShearStage,
)
from testing.selectors_readings import ShearReadingPages
from testing.services import computation, equipment, imports, readings_entry, shear_setup


@extend_schema_view(create=extend_schema(request=s.TestSetIn, responses={201: s.TestSetOut}))
class TestSetViewSet(CreateViaServiceMixin, RecordViewSet):
    """Direct shear test sets. Clients see a set only once a signed report released it."""

    serializer_class = s.TestSetOut
    input_serializer_class = s.TestSetIn
    filterset_class = filters.TestSetFilter
    ordering_fields = ["reference", "requested_on", "due_on", "released_at", "created_at"]

    def scoped_queryset(self) -> QuerySet[DirectShearTest]:
        return selectors.tests_for_user(user=self.request.user).order_by("project_id", "reference")

    def perform_service(self, data: dict[str, Any]) -> Model:
        return shear_setup.shear_test_create(user=self.acting_user, **data)

    @extend_schema(request=rs.RecomputeIn, responses={202: rs.RecomputeOut})
    @action(detail=True, methods=["post"])
    def recompute(self, request: Request, pk: str | None = None) -> Response:
        """Queue every stage of the set again (envelopes follow). Issued results never change:
        a recompute only adds result rows."""
        test = self.get_object()
        serializer = rs.RecomputeIn(data=request.data)
        serializer.is_valid(raise_exception=True)
        with transaction.atomic():
            runs = computation.test_recompute_request(
                test=test, user=self.acting_user, reason=serializer.validated_data["reason"]
            )
        return Response(rs.RecomputeOut({"runs": runs}).data, status=status.HTTP_202_ACCEPTED)

    @downloads.results_schema
    @action(detail=True, methods=["get"], permission_classes=[LabAccess, LabStaffOnly])
    def results(self, request: Request, pk: str | None = None) -> HttpResponse:
        test = self.get_object()
        file_format = downloads.query(request, "file", "csv")
        return downloads.respond(
            "file",
            lambda: set_results_download(user=self.acting_user, test=test, file_format=file_format),
        )


@extend_schema_view(create=extend_schema(request=s.StageIn, responses={201: s.StageOut}))
class StageViewSet(CreateViaServiceMixin, RecordViewSet):
    """Stages: one specimen of a set under one normal load, with its readings."""

    serializer_class = s.StageOut
    input_serializer_class = s.StageIn
    filterset_class = filters.StageFilter
    ordering_fields = ["stage_number"]

    def scoped_queryset(self) -> QuerySet[ShearStage]:
        return scoping.stages(self.request.user).order_by("test_id", "stage_number")

    def perform_service(self, data: dict[str, Any]) -> Model:
        return shear_setup.stage_create(user=self.acting_user, **data)

    @extend_schema(responses=s.ShearReadingOut(many=True), filters=False)
    @action(detail=True, methods=["get"], serializer_class=s.ShearReadingOut, filter_backends=[])
    def readings(self, request: Request, pk: str | None = None) -> Response:
        """Shear readings in order (traverse, reading number), a page at a time."""
        stage = self.get_object()
        readings: Any = ShearReadingPages(stage.pk)  # a sequence the paginator slices lazily
        page = self.paginate_queryset(readings)
        return self.get_paginated_response(s.ShearReadingOut(page, many=True).data)

    @extend_schema(responses=s.ConsolidationReadingOut(many=True), filters=False)
    @action(
        detail=True,
        methods=["get"],
        url_path="consolidation-readings",
        serializer_class=s.ConsolidationReadingOut,
        filter_backends=[],
    )
    def consolidation_readings(self, request: Request, pk: str | None = None) -> Response:
        """Consolidation readings (time, settlement) in time order, a page at a time."""
        stage = self.get_object()
        queryset = ConsolidationReading.objects.filter(stage=stage).order_by("elapsed_min")
        page = self.paginate_queryset(queryset)
        return self.get_paginated_response(s.ConsolidationReadingOut(page, many=True).data)

    @extend_schema(
        request={"multipart/form-data": up.ReadingsFileIn, "application/json": up.ReadingsRowsIn},
        responses={
            201: up.ReadingsUploadOut,
            200: up.ReadingsUploadOut,
            400: up.READINGS_REJECTED_SCHEMA,
        },
    )
    @action(
        detail=True,
        methods=["post"],
        url_path="readings-upload",
        parser_classes=[JSONParser, MultiPartParser],
    )
    def readings_upload(self, request: Request, pk: str | None = None) -> Response:
        """Send the stage's readings: a logger file (multipart ``file``) or JSON ``rows``.

        The importer's checks and all-or-nothing rule: with any bad row the answer is 400 listing
        every bad row (row, column, value, reason) and nothing is saved; otherwise 201 with the
        counts saved. The phases sent replace the stage's readings of those phases, and the stage
        is reduced again. The same file sent again answers 200 (duplicate) and adds nothing.
        Technicians and the lab manager only; refused once the test set has been reported.
        """
        stage = self.get_object()
        multipart = request.content_type.startswith("multipart/")
        body = (up.ReadingsFileIn if multipart else up.ReadingsRowsIn)(
            data=request.data, context=self.get_serializer_context()
        )
        body.is_valid(raise_exception=True)
        data = body.validated_data
        common: dict[str, Any] = {
            "user": self.acting_user,
            "stage": stage,
            "layout": data.get("layout"),
            "reason": data.get("reason", ""),
        }
        if multipart:
            return _import_answer(imports.stage_readings_import(upload=data["file"], **common))
        stored = readings_entry.stage_readings_rows_import(rows=data["rows"], **common)
        return _upload_answer(
            ImportState.SUCCEEDED,
            consolidation_rows=stored.consolidation_rows,
            shear_rows=stored.shear_rows,
            replaced_rows=stored.replaced_rows,
        )

    @extend_schema(request=s.StageCalibrationIn, responses={200: s.StageCalibrationOut})
    @action(detail=True, methods=["post"], url_path="force-calibration")
    def force_calibration(self, request: Request, pk: str | None = None) -> Response:
        """Link the stage to the force device its readings were taken with: the device's
        certificate in force on the stage's test date is recorded and the stage reduced again.
        An expired certificate is linked all the same and flagged. Technicians and the lab
        manager; refused once the test set has been reported."""
        stage = self.get_object()
        body = s.StageCalibrationIn(data=request.data, context=self.get_serializer_context())
        body.is_valid(raise_exception=True)
        record = equipment.stage_calibration_link(
            user=self.acting_user,
            stage=stage,
            device=body.validated_data["device"],
            on=body.validated_data.get("on"),
        )
        when = body.validated_data.get("on") or equipment.stage_test_date(stage)
        return Response(
            s.StageCalibrationOut(
                {
                    "force_calibration": record.pk,
                    "certificate_number": record.certificate_number,
                    "calibrated_on": record.calibrated_on,
                    "due_on": record.due_on,
                    "valid_on_test_date": when is not None and record.due_on >= when,
                }
            ).data
        )

    @extend_schema(request=rs.StageExclusionIn, responses={204: None})
    @action(detail=True, methods=["post"])
    def exclude(self, request: Request, pk: str | None = None) -> Response:
        """Leave the stage out of one envelope type (a reason is required); the envelope is refitted."""
        stage = self.get_object()
        serializer = rs.StageExclusionIn(data=request.data)
        serializer.is_valid(raise_exception=True)
        computation.stage_exclude(
            stage=stage,
            envelope_type=serializer.validated_data["envelope_type"],
            reason=serializer.validated_data.get("reason", ""),
            user=self.acting_user,
        )
        return Response(status=status.HTTP_204_NO_CONTENT)

    @extend_schema(request=rs.StageExclusionIn, responses={204: None})
    @action(detail=True, methods=["post"])
    def include(self, request: Request, pk: str | None = None) -> Response:
        """Put an excluded stage back into one envelope type; the envelope is refitted."""
        stage = self.get_object()
        serializer = rs.StageExclusionIn(data=request.data)
        serializer.is_valid(raise_exception=True)
        computation.stage_include(
            stage=stage,
            envelope_type=serializer.validated_data["envelope_type"],
            user=self.acting_user,
        )
        return Response(status=status.HTTP_204_NO_CONTENT)


def _import_answer(record: ReadingImport) -> Response:
    """A saved file or a duplicate (see ``_upload_answer``); a rejected file lists its bad rows
    (400) and a database failure part-way is a 503 (nothing saved, safe to send again)."""
    if record.state == ImportState.REJECTED:
        raise RowsRejected(record.reason, list(record.errors))
    if record.state == ImportState.FAILED:
        raise Unavailable(record.reason)
    return _upload_answer(
        record.state,
        reading_import=record.pk,
        duplicate_of=record.duplicate_of_id,
        consolidation_rows=record.consolidation_rows,
        shear_rows=record.shear_rows,
        replaced_rows=record.replaced_rows,
        message=record.reason,
    )


def _upload_answer(state: str, **counts: int | str | None) -> Response:
    """201 when readings were saved, 200 when nothing was added (a duplicate file)."""
    body = {"reading_import": None, "duplicate_of": None, "message": "", **counts, "state": state}
    code = status.HTTP_201_CREATED if state == ImportState.SUCCEEDED else status.HTTP_200_OK
    return Response(up.ReadingsUploadOut(body).data, status=code)
