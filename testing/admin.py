"""Admin for every lab record: list filters and search where a lab looks things up.

Lifecycle state and events are read-only here: they change only through the lifecycle service,
which writes the append-only event. Specimens, stages and readings are read-only too: a change to
them may need a reason and a new computation once there are results, and readings changes are
logged in bulk, so they change only through the staff pages and their services
(``testing.services.edits``, ``shear_setup``), never around them.
"""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.http import HttpRequest

from testing.admin_results import ReadOnlyAdmin
from testing.models import (
    Borehole,
    ConsolidationReading,
    DirectShearTest,
    LabProfile,
    Organisation,
    Project,
    Sample,
    SampleEvent,
    ShearStage,
    Specimen,
)


@admin.register(LabProfile)
class LabProfileAdmin(admin.ModelAdmin[LabProfile]):
    list_display = (
        "user",
        "is_technician",
        "is_checker",
        "is_approver",
        "is_manager",
        "organisation",
    )
    list_filter = ("is_technician", "is_checker", "is_approver", "is_manager", "organisation")
    search_fields = ("user__username", "user__first_name", "user__last_name", "organisation__name")
    autocomplete_fields = ("organisation",)


@admin.register(Organisation)
class OrganisationAdmin(admin.ModelAdmin[Organisation]):
    list_display = ("name", "code", "contact_name", "is_active")
    list_filter = ("is_active",)
    search_fields = ("name", "code", "contact_name", "contact_email")


@admin.register(Project)
class ProjectAdmin(admin.ModelAdmin[Project]):
    list_display = (
        "reference",
        "name",
        "organisation",
        "site_name",
        "agreed_turnaround_days",
        "created_at",
    )
    list_filter = ("organisation",)
    search_fields = ("reference", "name", "client_reference", "site_name")
    list_select_related = ("organisation",)


@admin.register(Borehole)
class BoreholeAdmin(admin.ModelAdmin[Borehole]):
    list_display = ("reference", "project", "final_depth_m", "drilled_on")
    list_filter = ("project__organisation", "project")
    search_fields = ("reference", "project__reference")
    list_select_related = ("project",)


class SampleEventInline(admin.TabularInline[SampleEvent, Sample]):
    model = SampleEvent
    extra = 0
    can_delete = False
    readonly_fields = ("at", "by", "from_status", "to_status", "note")

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


@admin.register(Sample)
class SampleAdmin(admin.ModelAdmin[Sample]):
    list_display = (
        "reference",
        "borehole",
        "depth_top_m",
        "depth_base_m",
        "sample_type",
        "status",
        "received_on",
        "due_on",
    )
    list_filter = ("status", "sample_type", "borehole__project__organisation", "received_on")
    search_fields = (
        "reference",
        "borehole__reference",
        "borehole__project__reference",
        "description",
    )
    readonly_fields = ("status", "status_changed_at")
    date_hierarchy = "received_on"
    list_select_related = ("borehole__project",)
    inlines = [SampleEventInline]


@admin.register(SampleEvent)
class SampleEventAdmin(admin.ModelAdmin[SampleEvent]):
    list_display = ("sample", "at", "by", "from_status", "to_status")
    list_filter = ("to_status", "from_status")
    search_fields = ("sample__reference", "note", "by__username")
    list_select_related = ("sample__borehole__project", "by")

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_add_permission(self, request: HttpRequest) -> bool:
        return False


@admin.register(Specimen)
class SpecimenAdmin(ReadOnlyAdmin):
    list_display = ("reference", "sample", "preparation", "shape", "height_mm", "initial_mass_g")
    list_filter = ("preparation", "shape", "particle_density_assumed")
    search_fields = ("reference", "sample__reference", "description")
    list_select_related = ("sample__borehole__project",)


class ShearStageInline(admin.TabularInline[ShearStage, DirectShearTest]):
    model = ShearStage
    extra = 0
    fields = (
        "stage_number",
        "specimen",
        "loading",
        "hanger_mass_kg",
        "weights_mass_kg",
        "lever_ratio",
        "rate_mm_per_min",
    )
    raw_id_fields = ("specimen",)
    readonly_fields = fields
    can_delete = False

    def has_add_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj: Any = None) -> bool:
        return False


@admin.register(DirectShearTest)
class DirectShearTestAdmin(admin.ModelAdmin[DirectShearTest]):
    list_display = (
        "reference",
        "project",
        "method",
        "method_edition",
        "box_shape",
        "box_length_mm",
        "requested_on",
        "due_on",
        "released_at",
    )
    list_filter = ("method", "box_shape", "condition", "shear_type", "area_model")
    search_fields = ("reference", "project__reference", "apparatus")
    list_select_related = ("project",)
    readonly_fields = ("released_at",)
    inlines = [ShearStageInline]


@admin.register(ShearStage)
class ShearStageAdmin(ReadOnlyAdmin):
    list_display = ("test", "stage_number", "specimen", "loading", "rate_mm_per_min", "traverses")
    list_filter = ("loading", "force_unit", "test__method")
    search_fields = ("test__reference", "specimen__reference", "test__project__reference")
    list_select_related = ("test__project", "specimen__sample__borehole__project")
    raw_id_fields = ("specimen",)


@admin.register(ConsolidationReading)
class ConsolidationReadingAdmin(ReadOnlyAdmin):
    list_display = ("stage", "elapsed_min", "settlement_mm")
    list_filter = ("stage__test",)
    search_fields = ("stage__test__reference",)
    list_select_related = ("stage__test__project",)


# Imported for their registrations: the equipment register and imports (runs and results, read-only,
# are registered by the import of ReadOnlyAdmin above).
from testing import admin_equipment  # noqa: E402, F401

# isort: split
# Last: adds the history pages to the admins registered above.
from testing import admin_history  # noqa: E402, F401
