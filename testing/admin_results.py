"""Admin for computation runs and results: read-only, because results are only ever added by runs."""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.http import HttpRequest

from testing.models import (
    ComputationRun,
    EnvelopeResult,
    OutboxMessage,
    StageExclusion,
    StageResult,
)


class ReadOnlyAdmin(admin.ModelAdmin[Any]):
    def has_add_permission(self, request: HttpRequest) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


@admin.register(ComputationRun)
class ComputationRunAdmin(ReadOnlyAdmin):
    list_display = (
        "id",
        "kind",
        "subject_key",
        "state",
        "attempts",
        "progress_pct",
        "requested_at",
        "finished_at",
    )
    list_filter = ("kind", "state", "analysis_version")
    search_fields = ("subject_key", "reason", "error", "inputs_hash")
    date_hierarchy = "requested_at"


@admin.register(OutboxMessage)
class OutboxMessageAdmin(ReadOnlyAdmin):
    list_display = ("id", "run", "created_at", "published_at", "publish_attempts")
    list_filter = (("published_at", admin.EmptyFieldListFilter),)
    search_fields = ("last_error",)
    list_select_related = ("run",)


@admin.register(StageExclusion)
class StageExclusionAdmin(ReadOnlyAdmin):
    list_display = ("stage", "envelope_type", "reason", "excluded_by", "excluded_at")
    list_filter = ("envelope_type",)
    search_fields = ("reason", "stage__test__reference")
    list_select_related = ("stage__test__project", "excluded_by")


@admin.register(StageResult)
class StageResultAdmin(ReadOnlyAdmin):
    list_display = (
        "stage",
        "failure_criterion",
        "failure_normal_stress_kpa",
        "failure_shear_stress_kpa",
        "max_dilation_angle_deg",
        "analysis_version",
        "created_at",
    )
    list_filter = ("failure_criterion", "area_model", "analysis_version")
    search_fields = ("stage__test__reference", "stage__test__project__reference", "inputs_hash")
    list_select_related = ("stage__test__project",)


@admin.register(EnvelopeResult)
class EnvelopeResultAdmin(ReadOnlyAdmin):
    list_display = (
        "test",
        "envelope_type",
        "n",
        "cohesion_kpa",
        "friction_angle_deg",
        "r_squared",
        "analysis_version",
        "created_at",
    )
    list_filter = ("envelope_type", "through_origin", "analysis_version")
    search_fields = ("test__reference", "test__project__reference", "inputs_hash")
    list_select_related = ("test__project",)
