"""History pages in the admin: each audited record's "History" button lists every change — who,
when (UTC), what changed from what to what, and why — and the readings change log is listed
read-only. Imported last by testing/admin.py, after every record's admin is registered.

Reverting to an earlier version from the history page is switched off (settings), so every change
still goes through a service's rules.
"""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.db import models
from django.http import HttpRequest
from simple_history.admin import SimpleHistoryAdmin

from testing.models import (
    Apparatus,
    Borehole,
    CalibrationRecord,
    DirectShearTest,
    DisplacementGauge,
    ForceDevice,
    Organisation,
    Project,
    ReadingsChange,
    Sample,
    ShearStage,
    Specimen,
    StageExclusion,
)

AUDITED_MODELS: tuple[type[models.Model], ...] = (
    Organisation,
    Project,
    Borehole,
    Sample,
    Specimen,
    DirectShearTest,
    ShearStage,
    StageExclusion,
    Apparatus,
    ForceDevice,
    CalibrationRecord,
    DisplacementGauge,
)


def with_history(model: type[models.Model], site: admin.AdminSite = admin.site) -> None:
    """Re-register ``model``'s admin with the history pages added, keeping everything else."""
    current = site._registry.get(model)
    base: type[admin.ModelAdmin[Any]] = type(current) if current is not None else admin.ModelAdmin
    if issubclass(base, SimpleHistoryAdmin):
        return
    if current is not None:
        site.unregister(model)
    site.register(model, type(f"{base.__name__}WithHistory", (SimpleHistoryAdmin, base), {}))


for _model in AUDITED_MODELS:
    with_history(_model)


@admin.register(ReadingsChange)
class ReadingsChangeAdmin(admin.ModelAdmin[ReadingsChange]):
    """The append-only log of bulk readings writes."""

    list_display = (
        "at",
        "stage",
        "by",
        "source",
        "consolidation_rows_before",
        "shear_rows_before",
        "consolidation_rows_after",
        "shear_rows_after",
        "reading_import_id",
        "reason",
    )
    list_filter = ("source",)
    search_fields = ("stage__test__reference", "by__username", "reason", "sha256_after")
    list_select_related = ("stage__test__project", "by")
    readonly_fields = [f.name for f in ReadingsChange._meta.fields]

    def has_add_permission(self, request: HttpRequest) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False
