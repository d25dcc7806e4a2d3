"""Specimens prepared from a sample for testing."""

from __future__ import annotations

from django.db import models
from django.db.models import Q

from testing.models.audit import AuditedHistory


class Preparation(models.TextChoices):
    UNDISTURBED = "undisturbed", "Undisturbed (trimmed)"
    REMOULDED = "remoulded", "Remoulded"
    RECOMPACTED = "recompacted", "Recompacted to a target density"


class SpecimenShape(models.TextChoices):
    SQUARE = "square", "Square / rectangular"
    CIRCULAR = "circular", "Circular"


class Specimen(models.Model):
    """A specimen cut or formed from a sample; dimensions are as set up in the box."""

    sample = models.ForeignKey("testing.Sample", on_delete=models.PROTECT, related_name="specimens")
    reference = models.CharField(max_length=40, help_text="Specimen reference (AGS SPEC_REF).")
    depth_top_m = models.DecimalField(
        max_digits=7, decimal_places=2, help_text="Depth to top of specimen [m] (AGS SPEC_DPTH)."
    )
    description = models.TextField(blank=True)
    preparation = models.CharField(max_length=12, choices=Preparation.choices)
    preparation_notes = models.TextField(blank=True)
    target_dry_density_mg_m3 = models.DecimalField(
        max_digits=5,
        decimal_places=3,
        null=True,
        blank=True,
        help_text="Target dry density [Mg/m³].",
    )
    shape = models.CharField(
        max_length=8, choices=SpecimenShape.choices, default=SpecimenShape.SQUARE
    )
    length_mm = models.FloatField(
        null=True, blank=True, help_text="Length in the shear direction [mm]."
    )
    width_mm = models.FloatField(
        null=True, blank=True, help_text="Width across the shear direction [mm]."
    )
    diameter_mm = models.FloatField(null=True, blank=True, help_text="Diameter [mm].")
    height_mm = models.FloatField(help_text="Initial height [mm].")
    initial_mass_g = models.FloatField(help_text="Initial wet mass [g].")
    final_mass_g = models.FloatField(null=True, blank=True, help_text="Wet mass after test [g].")
    dry_mass_g = models.FloatField(null=True, blank=True, help_text="Oven-dry mass [g].")
    max_particle_size_mm = models.FloatField(
        null=True, blank=True, help_text="Largest particle size in the specimen [mm]."
    )
    particle_density_mg_m3 = models.FloatField(
        null=True, blank=True, help_text="Particle density [Mg/m³]."
    )
    particle_density_assumed = models.BooleanField(
        default=True, help_text="True when the particle density is assumed rather than measured."
    )

    history = AuditedHistory()

    class Meta:
        ordering = ["sample", "reference"]
        constraints = [
            models.UniqueConstraint(
                fields=["sample", "reference"], name="specimen_ref_unique_in_sample"
            ),
            models.CheckConstraint(name="specimen_reference_not_blank", condition=~Q(reference="")),
            models.CheckConstraint(name="specimen_height_positive", condition=Q(height_mm__gt=0)),
            models.CheckConstraint(
                name="specimen_initial_mass_positive", condition=Q(initial_mass_g__gt=0)
            ),
            models.CheckConstraint(
                name="specimen_final_mass_positive",
                condition=Q(final_mass_g__isnull=True) | Q(final_mass_g__gt=0),
            ),
            models.CheckConstraint(
                name="specimen_dry_mass_positive",
                condition=Q(dry_mass_g__isnull=True) | Q(dry_mass_g__gt=0),
            ),
            models.CheckConstraint(
                name="specimen_particle_size_positive",
                condition=Q(max_particle_size_mm__isnull=True) | Q(max_particle_size_mm__gt=0),
            ),
            models.CheckConstraint(
                name="specimen_particle_density_plausible",
                condition=Q(particle_density_mg_m3__isnull=True)
                | Q(particle_density_mg_m3__gt=1, particle_density_mg_m3__lt=6),
            ),
            models.CheckConstraint(
                name="specimen_square_dimensions",
                condition=~Q(shape=SpecimenShape.SQUARE)
                | Q(
                    length_mm__isnull=False,
                    width_mm__isnull=False,
                    length_mm__gt=0,
                    width_mm__gt=0,
                    diameter_mm__isnull=True,
                ),
            ),
            models.CheckConstraint(
                name="specimen_circular_dimensions",
                condition=~Q(shape=SpecimenShape.CIRCULAR)
                | Q(
                    diameter_mm__isnull=False,
                    diameter_mm__gt=0,
                    length_mm__isnull=True,
                    width_mm__isnull=True,
                ),
            ),
            models.CheckConstraint(
                name="specimen_recompacted_has_target",
                condition=~Q(preparation=Preparation.RECOMPACTED)
                | Q(target_dry_density_mg_m3__isnull=False, target_dry_density_mg_m3__gt=0),
            ),
        ]
        # NULL makes a CHECK pass in SQL, so each "must be set" condition says isnull=False explicitly.

    def __str__(self) -> str:
        return f"{self.sample}/{self.reference}"

    @property
    def plan_area_mm2(self) -> float:
        """Initial plan area [mm²]."""
        if self.shape == SpecimenShape.CIRCULAR:
            assert self.diameter_mm is not None
            return 3.141592653589793 * self.diameter_mm**2 / 4.0
        assert self.length_mm is not None
        assert self.width_mm is not None
        return self.length_mm * self.width_mm
