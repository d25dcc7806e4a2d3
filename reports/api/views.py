"""Reports and their revisions over the API. Thin: scoping by selector, every write through a
service.

A report is created (lab staff who prepare reports: technicians and the lab manager) for test sets
of one project; its first revision is a draft holding the latest results, which then goes through
check, approve and issue. Reports and revisions are never edited or deleted over the API: a
draft's text changes on the lab's pages, an issued revision only by a superseding amendment.

Sign-off actions (check, approve, issue) need the password again in the body; a race answers
409 and leaves one result; a missing or wrong password answers 403 and signs nothing.
As everywhere in the API, client accounts are read-only: any write is refused (403) before a
record is looked up, so their own organisation's revisions and another's answer alike.
"""

from __future__ import annotations

from typing import Any

from django.contrib.auth.models import User
from django.db.models import Prefetch, QuerySet
from django.http import FileResponse, Http404
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import extend_schema, extend_schema_view
from rest_framework import exceptions, mixins, serializers, status, viewsets
from rest_framework.decorators import action
from rest_framework.request import Request
from rest_framework.response import Response

from reports import selectors, services
from reports.api.filters import ReportFilter, RevisionFilter
from reports.models import Report, ReportRevision
from testing import access
from testing.api.fields import ScopedRelatedField
from testing.api.permissions import LabAccess, LabStaffOnly
from testing.models import DirectShearTest, Project

MAX_TESTS_PER_REPORT = 50


class RevisionSerializer(serializers.ModelSerializer[ReportRevision]):
    report_number = serializers.CharField(source="report.number", read_only=True)
    project = serializers.CharField(source="report.project.reference", read_only=True)
    replaces = serializers.UUIDField(source="replaces.public_id", read_only=True, allow_null=True)

    class Meta:
        model = ReportRevision
        fields = [
            "id",
            "public_id",
            "report_number",
            "number",
            "project",
            "state",
            "title",
            "content_sha256",
            "pdf_sha256",
            "issued_at",
            "replaces",
            "amendment_reason",
            "withdrawn_reason",
        ]
        read_only_fields = fields


class RevisionSummary(serializers.ModelSerializer[ReportRevision]):
    class Meta:
        model = ReportRevision
        fields = ["id", "number", "state"]
        read_only_fields = fields


class ReportOut(serializers.ModelSerializer[Report]):
    project_reference = serializers.CharField(source="project.reference", read_only=True)
    revisions = RevisionSummary(many=True, read_only=True)

    class Meta:
        model = Report
        fields = [
            "id",
            "number",
            "project",
            "project_reference",
            "tests",
            "created_at",
            "revisions",
        ]
        read_only_fields = fields


class ReportIn(serializers.Serializer[Any]):
    project = ScopedRelatedField(model=Project, scope=access.project_filter)
    tests = ScopedRelatedField(
        model=DirectShearTest,
        scope=access.test_filter,
        many=True,
        allow_empty=False,
        help_text="Test sets of the project to report (their latest results are frozen).",
    )
    title = serializers.CharField(max_length=200, required=False)
    remarks = serializers.CharField(max_length=5000, required=False, allow_blank=True)
    deviations = serializers.CharField(
        max_length=5000,
        required=False,
        allow_blank=True,
        help_text="Deviations from the test method, as the report should state them.",
    )

    def validate_tests(self, value: list[DirectShearTest]) -> list[DirectShearTest]:
        if len(value) > MAX_TESTS_PER_REPORT:
            raise serializers.ValidationError(
                f"A report covers at most {MAX_TESTS_PER_REPORT} test sets."
            )
        return value


class PasswordSerializer(serializers.Serializer[Any]):
    password = serializers.CharField(required=False, allow_blank=True, write_only=True)
    content_sha256 = serializers.CharField(required=False, allow_blank=True)


class ReasonSerializer(serializers.Serializer[Any]):
    reason = serializers.CharField(max_length=2000)


class ConflictError(exceptions.APIException):
    status_code = status.HTTP_409_CONFLICT
    default_detail = "The revision changed meanwhile; reload and try again."
    default_code = "conflict"


def _call(fn: Any, **kwargs: Any) -> ReportRevision:
    try:
        return fn(**kwargs)
    except services.Conflict as exc:
        raise ConflictError(str(exc)) from exc
    except services.SignatureRefused as exc:
        raise exceptions.PermissionDenied(str(exc)) from exc


class ReportRevisionViewSet(
    mixins.ListModelMixin, mixins.RetrieveModelMixin, viewsets.GenericViewSet[ReportRevision]
):
    serializer_class = RevisionSerializer
    permission_classes = [LabAccess]
    filterset_class = RevisionFilter
    ordering_fields = ["number", "issued_at", "id"]

    def get_queryset(self) -> QuerySet[ReportRevision]:
        return selectors.revisions_for_user(user=self.request.user).order_by("-id")

    def _staff(self) -> User:
        user = self.request.user
        if not access.is_lab_staff(user):
            raise Http404
        assert isinstance(user, User)
        return user

    @extend_schema(responses={(200, "application/pdf"): OpenApiTypes.BINARY})
    @action(detail=True, methods=["get"])
    def pdf(self, request: Request, pk: str | None = None) -> FileResponse:
        revision = self.get_object()
        if not revision.pdf:
            raise Http404
        return FileResponse(
            revision.pdf.open("rb"),
            content_type="application/pdf",
            as_attachment=True,
            filename=f"{revision.report.number}-rev{revision.number}.pdf",
        )

    def _sign(self, request: Request, fn: Any, **extra: Any) -> Response:
        user = self._staff()
        revision = self.get_object()
        body = PasswordSerializer(data=request.data)
        body.is_valid(raise_exception=True)
        kwargs: dict[str, Any] = {
            "user": user,
            "revision": revision,
            "password": body.validated_data.get("password") or None,
        }
        if fn is not services.revision_issue:
            kwargs["expected_content_sha256"] = body.validated_data.get("content_sha256") or None
        result = _call(fn, **kwargs)
        result.refresh_from_db()
        return Response(RevisionSerializer(result).data, status=status.HTTP_200_OK)

    @action(detail=True, methods=["post"], serializer_class=PasswordSerializer)
    def check(self, request: Request, pk: str | None = None) -> Response:
        return self._sign(request, services.revision_check)

    @action(detail=True, methods=["post"], serializer_class=PasswordSerializer)
    def approve(self, request: Request, pk: str | None = None) -> Response:
        return self._sign(request, services.revision_approve)

    @action(detail=True, methods=["post"], serializer_class=PasswordSerializer)
    def issue(self, request: Request, pk: str | None = None) -> Response:
        return self._sign(request, services.revision_issue)

    @action(detail=True, methods=["post"], serializer_class=ReasonSerializer)
    def supersede(self, request: Request, pk: str | None = None) -> Response:
        user = self._staff()
        body = ReasonSerializer(data=request.data)
        body.is_valid(raise_exception=True)
        new = _call(
            services.revision_supersede,
            user=user,
            revision=self.get_object(),
            reason=body.validated_data["reason"],
        )
        return Response(RevisionSerializer(new).data, status=status.HTTP_201_CREATED)


@extend_schema_view(create=extend_schema(request=ReportIn, responses={201: ReportOut}))
class ReportViewSet(
    mixins.ListModelMixin, mixins.RetrieveModelMixin, viewsets.GenericViewSet[Report]
):
    """Reports (lab staff): their number, project, test sets and revisions. ``POST`` creates a
    report and its draft first revision."""

    serializer_class = ReportOut
    permission_classes = [LabAccess, LabStaffOnly]
    filterset_class = ReportFilter
    ordering_fields = ["number", "created_at", "id"]
    lookup_value_regex = r"[0-9]{1,18}"

    def get_queryset(self) -> QuerySet[Report]:
        revisions = Prefetch("revisions", queryset=ReportRevision.objects.order_by("number"))
        return (
            selectors.reports_for_user(user=self.request.user)
            .prefetch_related(revisions)
            .order_by("-created_at", "-id")
        )

    def create(self, request: Request, *args: Any, **kwargs: Any) -> Response:
        user = request.user
        assert isinstance(user, User)  # LabStaffOnly let only lab staff through
        body = ReportIn(data=request.data, context=self.get_serializer_context())
        body.is_valid(raise_exception=True)
        data = body.validated_data
        revision = services.report_create(
            user=user,
            project=data["project"],
            tests=data["tests"],
            **{k: data[k] for k in ("title", "remarks", "deviations") if k in data},
        )
        report = self.get_queryset().get(pk=revision.report_id)
        return Response(ReportOut(report).data, status=status.HTTP_201_CREATED)
