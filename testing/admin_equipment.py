"""Admin pages for the equipment register and reading imports (imported by testing/admin.py)."""

from __future__ import annotations

from django.contrib import admin

from testing.models import (
    Apparatus,
    CalibrationRecord,
    DisplacementGauge,
    ForceDevice,
    ImportedShearTest,
    ImportLayout,
    ReadingImport,
)


class CalibrationInline(admin.TabularInline[CalibrationRecord, ForceDevice]):
    model = CalibrationRecord
    extra = 0
    fields = (
        "certificate_number", "issuing_lab", "calibrated_on", "due_on", "model",
        "coefficients", "zero_reading", "range_min", "range_max", "expanded_uncertainty_n",
        "coverage_factor_k",
    )  # fmt: skip


@admin.register(Apparatus)
class ApparatusAdmin(admin.ModelAdmin[Apparatus]):
    list_display = (
        "reference",
        "box_shape",
        "box_length_mm",
        "lever_ratio",
        "verification_due_on",
        "is_active",
    )
    search_fields = ("reference", "serial_number")


@admin.register(ForceDevice)
class ForceDeviceAdmin(admin.ModelAdmin[ForceDevice]):
    list_display = ("reference", "kind", "capacity_n", "reading_unit", "apparatus", "is_active")
    list_filter = ("kind", "is_active")
    inlines = [CalibrationInline]


@admin.register(CalibrationRecord)
class CalibrationRecordAdmin(admin.ModelAdmin[CalibrationRecord]):
    list_display = ("device", "certificate_number", "calibrated_on", "due_on", "model")
    list_filter = ("model",)
    search_fields = ("certificate_number", "device__reference")


@admin.register(DisplacementGauge)
class DisplacementGaugeAdmin(admin.ModelAdmin[DisplacementGauge]):
    list_display = ("reference", "kind", "axis", "factor_mm_per_unit", "due_on")


@admin.register(ImportLayout)
class ImportLayoutAdmin(admin.ModelAdmin[ImportLayout]):
    list_display = ("name", "delimiter", "header_row", "vertical_sign", "rebase_each_phase")


@admin.register(ReadingImport)
class ReadingImportAdmin(admin.ModelAdmin[ReadingImport]):
    """Read-only: an import is a record of what arrived and what became of it."""

    list_display = (
        "id",
        "stage",
        "original_name",
        "state",
        "shear_rows",
        "uploaded_by",
        "uploaded_at",
    )
    list_filter = ("state",)
    search_fields = ("original_name", "sha256")

    def has_add_permission(self, request: object) -> bool:
        return False

    def has_change_permission(self, request: object, obj: object = None) -> bool:
        return False

    def has_delete_permission(self, request: object, obj: object = None) -> bool:
        return False


@admin.register(ImportedShearTest)
class ImportedShearTestAdmin(admin.ModelAdmin[ImportedShearTest]):
    list_display = (
        "sample",
        "specimen_reference",
        "source_lab",
        "peak_friction_angle_deg",
        "imported_at",
    )
    search_fields = ("source_lab", "specimen_reference")
