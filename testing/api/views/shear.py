"""Direct shear test sets and stages, the stages' readings, and recompute requests."""

from __future__ import annotations

from typing import Any

from django.db import transaction
from django.db.models import Model, QuerySet
from drf_spectacular.utils import extend_schema, extend_schema_view
from rest_framework import status
from rest_framework.decorators import action
from rest_framework.request import Request
from rest_framework.response import Response

from testing import selectors
from testing.api import filters, scoping
from testing.api.serializers import results as rs
from testing.api.serializers import shear as s
from testing.api.views.base import CreateViaServiceMixin, RecordViewSet
from testing.models import ConsolidationReading, DirectShearTest, ShearReading, ShearStage
from testing.services import computation, shear_setup


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
        queryset = ShearReading.objects.filter(stage=stage).order_by("traverse", "seq")
        page = self.paginate_queryset(queryset)
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
