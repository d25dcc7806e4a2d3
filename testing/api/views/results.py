"""Computation runs (lab staff), stage results, envelopes and throughput counts."""

from __future__ import annotations

from typing import Any

from django.db.models import QuerySet
from drf_spectacular.utils import extend_schema
from rest_framework import status, viewsets
from rest_framework.decorators import action
from rest_framework.request import Request
from rest_framework.response import Response

from testing import selectors
from testing.api import filters, scoping
from testing.api.permissions import LabAccess, LabStaffOnly
from testing.api.serializers import results as s
from testing.api.views.base import RecordViewSet
from testing.models import ComputationRun, EnvelopeResult, StageResult
from testing.services import computation


class ComputationRunViewSet(RecordViewSet):
    """Background computation runs and their state (lab staff only)."""

    permission_classes = [LabAccess, LabStaffOnly]
    serializer_class = s.ComputationRunOut
    filterset_class = filters.RunFilter
    ordering_fields = ["requested_at", "finished_at"]

    def scoped_queryset(self) -> QuerySet[ComputationRun]:
        return scoping.runs(self.request.user).order_by("-requested_at", "-id")


class StageResultViewSet(RecordViewSet):
    """Stage results. Every reduction adds a row; ``?latest=true`` keeps each stage's newest."""

    serializer_class = s.StageResultOut
    filterset_class = filters.StageResultFilter
    ordering_fields = ["created_at", "failure_normal_stress_kpa"]

    def scoped_queryset(self) -> QuerySet[StageResult]:
        return (
            scoping.stage_results(self.request.user)
            .select_related("stage__test", "stage__specimen")
            .order_by("stage__test_id", "stage__stage_number", "-id")
        )

    def list(self, request: Request, *args: Any, **kwargs: Any) -> Response:
        # values() rows, not model instances: building 800 instances was most of this list's time.
        queryset = self.filter_queryset(self.get_queryset()).values(*s.ROW_COLUMNS)
        page = self.paginate_queryset(queryset)
        return self.get_paginated_response(self.get_serializer(page, many=True).data)


class EnvelopeViewSet(RecordViewSet):
    """Envelope fits (c′, φ′ with their statistics). ``?latest=true`` keeps the newest per type.

    Results apply only to the specimens tested; the parameters are for a qualified geotechnical
    engineer to judge under local codes and licensed practice.
    """

    serializer_class = s.EnvelopeResultOut
    filterset_class = filters.EnvelopeFilter
    ordering_fields = ["created_at", "envelope_type"]

    def scoped_queryset(self) -> QuerySet[EnvelopeResult]:
        return (
            scoping.envelopes(self.request.user)
            .select_related("test")
            .order_by("test_id", "envelope_type", "-id")
        )

    @extend_schema(request=s.RecomputeIn, responses={202: s.ComputationRunOut})
    @action(detail=True, methods=["post"], permission_classes=[LabAccess, LabStaffOnly])
    def recompute(self, request: Request, pk: str | None = None) -> Response:
        """Queue a new fit of this envelope type for its test set (lab staff)."""
        envelope = self.get_object()
        serializer = s.RecomputeIn(data=request.data)
        serializer.is_valid(raise_exception=True)
        run = computation.envelope_fit_request(
            test=envelope.test,
            envelope_type=envelope.envelope_type,
            user=self.acting_user,
            reason=serializer.validated_data["reason"],
        )
        return Response(s.ComputationRunOut(run).data, status=status.HTTP_202_ACCEPTED)


class ThroughputViewSet(viewsets.ViewSet):
    """Sample counts per lifecycle state and overdue, over the samples the caller may see."""

    permission_classes = [LabAccess]

    @extend_schema(responses=s.ThroughputOut)
    def list(self, request: Request) -> Response:
        counts = selectors.sample_status_counts(user=request.user)
        overdue = counts.pop("overdue")
        body = {"counts": counts, "overdue": overdue, "total": sum(counts.values())}
        return Response(s.ThroughputOut(body).data)
