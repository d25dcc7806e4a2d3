"""Client organisations, their projects and the boreholes on each project's site."""

from __future__ import annotations

from django.conf import settings
from django.core.validators import MinValueValidator
from django.db import models
from django.db.models import Q
from django.db.models.functions import Lower

from testing.models.audit import AuditedHistory


class Organisation(models.Model):
    """A client organisation. Its users see their own organisation's issued work and nothing else."""

    name = models.CharField(max_length=200)
    code = models.SlugField(max_length=40, unique=True, help_text="Short code used in references.")
    address = models.TextField(blank=True)
    contact_name = models.CharField(max_length=120, blank=True)
    contact_email = models.EmailField(blank=True)
    is_active = models.BooleanField(default=True)
    created_at = models.DateTimeField(auto_now_add=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["name"]
        constraints = [
            models.UniqueConstraint(Lower("name"), name="organisation_name_unique_ci"),
        ]

    def __str__(self) -> str:
        return self.name


class Project(models.Model):
    organisation = models.ForeignKey(
        Organisation, on_delete=models.PROTECT, related_name="projects"
    )
    reference = models.CharField(max_length=40, unique=True, help_text="Lab's project reference.")
    client_reference = models.CharField(max_length=80, blank=True)
    name = models.CharField(max_length=200)
    site_name = models.CharField(max_length=200, blank=True)
    site_location = models.CharField(max_length=200, blank=True)
    client_engineer = models.CharField(max_length=120, blank=True)
    agreed_turnaround_days = models.PositiveSmallIntegerField(
        null=True,
        blank=True,
        validators=[MinValueValidator(1)],
        help_text=(
            "Working turnaround agreed with the client, in calendar days from receipt; "
            "blank: the lab's default (TAULINE_DEFAULT_TURNAROUND_DAYS)."
        ),
    )
    created_at = models.DateTimeField(auto_now_add=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["-created_at", "reference"]
        constraints = [
            models.CheckConstraint(name="project_reference_not_blank", condition=~Q(reference="")),
            models.CheckConstraint(
                name="project_agreed_turnaround_positive",
                condition=Q(agreed_turnaround_days__isnull=True) | Q(agreed_turnaround_days__gte=1),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.reference} {self.name}"

    @property
    def turnaround_days(self) -> int:
        """Calendar days from receipt to a sample's due date: the agreed turnaround, else the lab's
        default."""
        if self.agreed_turnaround_days is not None:
            return self.agreed_turnaround_days
        return int(settings.TAULINE_DEFAULT_TURNAROUND_DAYS)


class Borehole(models.Model):
    project = models.ForeignKey(Project, on_delete=models.PROTECT, related_name="boreholes")
    reference = models.CharField(max_length=40, help_text="Location id, e.g. BH01 (AGS LOCA_ID).")
    ground_level_m = models.DecimalField(
        max_digits=8, decimal_places=2, null=True, blank=True, help_text="Ground level [m OD]."
    )
    easting_m = models.DecimalField(max_digits=12, decimal_places=2, null=True, blank=True)
    northing_m = models.DecimalField(max_digits=12, decimal_places=2, null=True, blank=True)
    final_depth_m = models.DecimalField(
        max_digits=7, decimal_places=2, null=True, blank=True, help_text="Final depth [m]."
    )
    drilled_on = models.DateField(null=True, blank=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["project", "reference"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "reference"], name="borehole_ref_unique_in_project"
            ),
            models.CheckConstraint(name="borehole_reference_not_blank", condition=~Q(reference="")),
            models.CheckConstraint(
                name="borehole_final_depth_positive",
                condition=Q(final_depth_m__isnull=True) | Q(final_depth_m__gt=0),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.project.reference}/{self.reference}"
