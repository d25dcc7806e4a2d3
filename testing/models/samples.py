"""Samples as received from site, and their throughput lifecycle.

The lifecycle state lives on the sample for fast reads; every change is also written as an
append-only :class:`SampleEvent`, which the dashboard and turnaround statistics read.
"""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.db import models
from django.db.models import F, Q

from testing.models.audit import AuditedHistory


class SampleType(models.TextChoices):
    # Codes as used in AGS4 SAMP_TYPE abbreviations.
    UNDISTURBED = "U", "Undisturbed (driven tube)"
    PISTON = "P", "Piston sample"
    THIN_WALL = "UT", "Thin-wall tube"
    BULK = "B", "Bulk disturbed"
    SMALL_DISTURBED = "D", "Small disturbed"
    BLOCK = "BLK", "Block"
    CORE = "C", "Core"


class SampleStatus(models.TextChoices):
    RECEIVED = "received", "Received"
    SCHEDULED = "scheduled", "Scheduled"
    IN_TEST = "in_test", "In test"
    TESTED = "tested", "Tested"
    REPORTED = "reported", "Reported"
    ON_HOLD = "on_hold", "On hold"
    DISPOSED = "disposed", "Disposed"


# Allowed moves. ON_HOLD may return to any working state; DISPOSED is final.
SAMPLE_TRANSITIONS: dict[str, frozenset[str]] = {
    SampleStatus.RECEIVED: frozenset(
        {SampleStatus.SCHEDULED, SampleStatus.ON_HOLD, SampleStatus.DISPOSED}
    ),
    SampleStatus.SCHEDULED: frozenset(
        {SampleStatus.IN_TEST, SampleStatus.RECEIVED, SampleStatus.ON_HOLD}
    ),
    SampleStatus.IN_TEST: frozenset({SampleStatus.TESTED, SampleStatus.ON_HOLD}),
    SampleStatus.TESTED: frozenset(
        {SampleStatus.REPORTED, SampleStatus.IN_TEST, SampleStatus.ON_HOLD}
    ),
    SampleStatus.REPORTED: frozenset({SampleStatus.DISPOSED}),
    SampleStatus.ON_HOLD: frozenset(
        {
            SampleStatus.RECEIVED,
            SampleStatus.SCHEDULED,
            SampleStatus.IN_TEST,
            SampleStatus.TESTED,
            SampleStatus.DISPOSED,
        }
    ),
    SampleStatus.DISPOSED: frozenset(),
}
# Moves that must carry a reason in the event note.
TRANSITIONS_NEEDING_NOTE = frozenset({SampleStatus.ON_HOLD, SampleStatus.DISPOSED})
OPEN_STATUSES = frozenset(
    {
        SampleStatus.RECEIVED,
        SampleStatus.SCHEDULED,
        SampleStatus.IN_TEST,
        SampleStatus.TESTED,
        SampleStatus.ON_HOLD,
    }
)


class Sample(models.Model):
    borehole = models.ForeignKey(
        "testing.Borehole", on_delete=models.PROTECT, related_name="samples"
    )
    reference = models.CharField(max_length=40, help_text="Sample reference (AGS SAMP_REF).")
    depth_top_m = models.DecimalField(max_digits=7, decimal_places=2, help_text="Depth to top [m].")
    depth_base_m = models.DecimalField(
        max_digits=7, decimal_places=2, help_text="Depth to base [m]."
    )
    sample_type = models.CharField(max_length=4, choices=SampleType.choices)
    description = models.TextField(blank=True, help_text="Soil description as logged.")
    received_on = models.DateField()
    received_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="samples_received"
    )
    condition_on_receipt = models.CharField(max_length=200, blank=True)
    storage_location = models.CharField(max_length=80, blank=True)
    due_on = models.DateField(
        null=True, blank=True, help_text="Date results are due to the client."
    )
    status = models.CharField(
        max_length=12, choices=SampleStatus.choices, default=SampleStatus.RECEIVED, editable=False
    )
    status_changed_at = models.DateTimeField(null=True, blank=True, editable=False)

    # Status moves are recorded as SampleEvent rows by the lifecycle service, not here.
    history = AuditedHistory(excluded_fields=["status", "status_changed_at"])

    class Meta:
        ordering = ["borehole", "depth_top_m", "reference"]
        constraints = [
            models.UniqueConstraint(
                fields=["borehole", "reference"], name="sample_ref_unique_in_borehole"
            ),
            models.CheckConstraint(name="sample_reference_not_blank", condition=~Q(reference="")),
            models.CheckConstraint(
                name="sample_depth_top_nonnegative", condition=Q(depth_top_m__gte=0)
            ),
            models.CheckConstraint(
                name="sample_depth_base_not_above_top",
                condition=Q(depth_base_m__gte=F("depth_top_m")),
            ),
            models.CheckConstraint(
                name="sample_status_valid", condition=Q(status__in=SampleStatus.values)
            ),
            models.CheckConstraint(
                name="sample_due_not_before_receipt",
                condition=Q(due_on__isnull=True) | Q(due_on__gte=F("received_on")),
            ),
        ]
        indexes = [
            models.Index(fields=["status", "due_on"]),
            models.Index(fields=["received_on"], name="sample_received_on_idx"),  # dashboard
        ]

    def __str__(self) -> str:
        return f"{self.borehole}/{self.reference} ({self.depth_top_m}–{self.depth_base_m} m)"


class SampleEvent(models.Model):
    """One lifecycle change. Append-only: never edited, never deleted."""

    sample = models.ForeignKey(Sample, on_delete=models.PROTECT, related_name="events")
    at = models.DateTimeField(db_index=True)
    by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    from_status = models.CharField(max_length=12, choices=SampleStatus.choices, blank=True)
    to_status = models.CharField(max_length=12, choices=SampleStatus.choices)
    note = models.TextField(blank=True)

    class Meta:
        ordering = ["sample", "at", "id"]
        constraints = [
            models.CheckConstraint(
                name="sample_event_moves", condition=~Q(from_status=F("to_status"))
            ),
        ]
        indexes = [
            # The dashboard's "reported per week/month" and turnaround (index-only on PostgreSQL).
            models.Index(
                fields=["to_status", "at"], include=["sample"], name="sample_event_to_at_idx"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.sample}: {self.from_status or '—'} → {self.to_status} at {self.at:%Y-%m-%d %H:%M}"

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self.pk is not None:
            raise ValueError("Sample events are append-only and cannot be changed.")
        super().save(*args, **kwargs)

    def delete(self, *args: Any, **kwargs: Any) -> tuple[int, dict[str, int]]:
        raise ValueError("Sample events are append-only and cannot be deleted.")
