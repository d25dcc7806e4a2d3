"""Reading imports: saved column layouts, every uploaded logger file with its sha256 and outcome,
and shear box results brought in from another laboratory's AGS4 file."""

from __future__ import annotations

import uuid
from datetime import date
from pathlib import PurePosixPath
from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import Q


class ImportLayout(models.Model):
    """A reusable column mapping for one logger's export, saved for the whole lab.

    ``columns`` maps each quantity to a file column and its unit::

        {"time": {"column": "time_s", "unit": "s"},
         "horizontal": {"column": "horizontal_displacement_mm", "unit": "mm"},
         "vertical": {"column": "vertical_displacement_mm", "unit": "mm"},
         "force": {"column": "shear_force_n", "unit": "N"},
         "phase": {"column": "phase"}}                    # optional; "traverse" likewise

    See ``testing.importers.layout`` for the units and options understood.
    """

    name = models.CharField(max_length=80, unique=True)
    description = models.TextField(blank=True)
    delimiter = models.CharField(max_length=1, default=",", help_text="CSV field separator.")
    decimal_comma = models.BooleanField(default=False, help_text="Numbers written as 1,25.")
    header_row = models.PositiveSmallIntegerField(
        default=1, help_text="Row holding the column names (1 = first row)."
    )
    sheet_name = models.CharField(
        max_length=80, blank=True, help_text="XLSX sheet (blank = first)."
    )
    columns = models.JSONField()
    phase_values = models.JSONField(
        default=dict,
        blank=True,
        help_text='Codes in the phase column, e.g. {"C": "consolidation", "S": "shear"}.',
    )
    vertical_sign = models.SmallIntegerField(
        default=1, help_text="+1 if the logger writes upward (dilation) positive, −1 if downward."
    )
    rebase_each_phase = models.BooleanField(
        default=False,
        help_text="Subtract each phase's first time and displacements (logger runs continuously).",
    )
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["name"]
        constraints = [
            models.CheckConstraint(name="layout_name_not_blank", condition=~Q(name="")),
            models.CheckConstraint(
                name="layout_vertical_sign", condition=Q(vertical_sign__in=[1, -1])
            ),
            models.CheckConstraint(
                name="layout_header_row_positive", condition=Q(header_row__gte=1)
            ),
        ]

    def __str__(self) -> str:
        return self.name


class ImportState(models.TextChoices):
    RECEIVED = "received", "Received"
    REJECTED = "rejected", "Rejected (bad rows, nothing saved)"
    FAILED = "failed", "Failed (nothing saved)"
    SUCCEEDED = "succeeded", "Imported"
    SUPERSEDED = "superseded", "Replaced by a later import"
    DUPLICATE = "duplicate", "Duplicate of an earlier import (nothing added)"


_SAFE_SUFFIXES = frozenset({".csv", ".txt", ".xlsx", ".ags"})


def upload_storage_name(instance: Any, filename: str) -> str:
    """A generated storage name: the user's file name never reaches the file system."""
    suffix = PurePosixPath(filename.replace("\\", "/")).suffix.lower()
    if suffix not in _SAFE_SUFFIXES:
        suffix = ".bin"
    today = date.today()
    return f"imports/{today:%Y/%m}/{uuid.uuid4().hex}{suffix}"


class ReadingImport(models.Model):
    """One uploaded logger file for one stage, kept as received, with what became of it."""

    stage = models.ForeignKey(
        "testing.ShearStage", on_delete=models.PROTECT, related_name="reading_imports"
    )
    layout = models.ForeignKey(
        ImportLayout, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    layout_snapshot = models.JSONField(
        default=dict, blank=True, help_text="The mapping as used, in case the layout changes later."
    )
    original_file = models.FileField(upload_to=upload_storage_name, max_length=200)
    original_name = models.CharField(
        max_length=200, help_text="File name as uploaded (display only)."
    )
    size_bytes = models.PositiveBigIntegerField()
    sha256 = models.CharField(max_length=64, db_index=True)
    state = models.CharField(
        max_length=10, choices=ImportState.choices, default=ImportState.RECEIVED
    )
    reason = models.TextField(blank=True, help_text="Why the import was rejected or failed.")
    errors = models.JSONField(
        default=list, blank=True, help_text="Bad rows: row, column, value, reason."
    )
    duplicate_of = models.ForeignKey(
        "self", on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    consolidation_rows = models.PositiveIntegerField(default=0)
    shear_rows = models.PositiveIntegerField(default=0)
    replaced_rows = models.PositiveIntegerField(
        default=0, help_text="Readings of the same phases that this import replaced."
    )
    uploaded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    uploaded_at = models.DateTimeField(auto_now_add=True)
    finished_at = models.DateTimeField(null=True, blank=True)

    class Meta:
        ordering = ["stage", "-uploaded_at", "-id"]
        indexes = [models.Index(fields=["stage", "sha256", "state"])]
        constraints = [
            models.CheckConstraint(
                name="import_failed_has_reason",
                condition=~Q(state__in=["rejected", "failed"]) | ~Q(reason=""),
            ),
            models.CheckConstraint(
                name="import_duplicate_names_original",
                condition=~Q(state="duplicate") | Q(duplicate_of__isnull=False),
            ),
        ]

    def __str__(self) -> str:
        return f"import #{self.pk} {self.original_name} → {self.stage} [{self.state}]"


class ImportedShearTest(models.Model):
    """Shear box results from another laboratory's AGS4 file (SHBG + its SHBT rows), kept apart
    from this lab's own tests and always shown as imported."""

    sample = models.ForeignKey(
        "testing.Sample", on_delete=models.PROTECT, related_name="imported_shear_tests"
    )
    specimen_reference = models.CharField(max_length=40, help_text="AGS SPEC_REF.")
    specimen_depth_m = models.DecimalField(
        max_digits=7, decimal_places=2, help_text="AGS SPEC_DPTH [m]."
    )
    source_lab = models.CharField(max_length=200, blank=True, help_text="AGS SHBG_LAB.")
    source_file_name = models.CharField(max_length=200)
    source_sha256 = models.CharField(max_length=64)
    method = models.CharField(max_length=200, blank=True, help_text="AGS SHBG_METH.")
    test_type = models.CharField(max_length=40, blank=True, help_text="AGS SHBG_TYPE.")
    condition = models.CharField(max_length=40, blank=True, help_text="AGS SHBG_COND.")
    peak_cohesion_kpa = models.FloatField(null=True, blank=True)
    peak_friction_angle_deg = models.FloatField(null=True, blank=True)
    residual_cohesion_kpa = models.FloatField(null=True, blank=True)
    residual_friction_angle_deg = models.FloatField(null=True, blank=True)
    remarks = models.TextField(blank=True)
    # One dict per SHBT row, keys carrying units: stage, normal_stress_kpa, peak_shear_stress_kpa, ...
    stages = models.JSONField(default=list)
    imported_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    imported_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["sample", "specimen_reference"]
        constraints = [
            models.UniqueConstraint(
                fields=["sample", "specimen_reference", "specimen_depth_m", "source_lab"],
                name="imported_shear_test_unique",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.sample} {self.specimen_reference} (imported from {self.source_lab or 'another lab'})"
