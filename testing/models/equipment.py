"""The equipment register: shear machines, force devices with dated calibrations, displacement gauges.

A stage points at the force calibration in force on its test date. An expired calibration, or a
reading outside the calibrated range, is a QA flag (see ``testing.services.equipment``) that
blocks approval; the stage's own ``force_factor_n_per_unit`` stays as the fallback for stages
set up without a calibration record.
"""

from __future__ import annotations

from django.conf import settings
from django.core.validators import MinValueValidator
from django.db import models
from django.db.models import F, Q

from testing.analysis import LinearCalibration, PolynomialCalibration
from testing.models.audit import AuditedHistory


class ApparatusBoxShape(models.TextChoices):
    SQUARE = "square", "Square / rectangular"
    CIRCULAR = "circular", "Circular"


class Apparatus(models.Model):
    """A shear machine with one box size, its lever and hanger, verified on a date."""

    reference = models.CharField(
        max_length=40, unique=True, help_text="Lab's machine id, e.g. SB-2."
    )
    description = models.CharField(max_length=200, blank=True, help_text="Make, model, notes.")
    serial_number = models.CharField(max_length=80, blank=True)
    box_shape = models.CharField(
        max_length=8, choices=ApparatusBoxShape.choices, default=ApparatusBoxShape.SQUARE
    )
    box_length_mm = models.FloatField(
        help_text="Box length in the shear direction, or diameter [mm]."
    )
    box_width_mm = models.FloatField(null=True, blank=True, help_text="Box width [mm] (square).")
    lever_ratio = models.FloatField(default=1.0, help_text="Lever ratio [–] (1 = direct loading).")
    hanger_mass_kg = models.FloatField(default=0.0, help_text="Hanger mass [kg].")
    beam_offset_force_n = models.FloatField(
        default=0.0, help_text="Net force from an unbalanced beam [N]."
    )
    # Tolerances, as ± half-widths (each read as a rectangular distribution, u = a/√3). All three
    # recorded: the normal stress at failure gets its expanded uncertainty; blank: it stays unknown.
    mass_tolerance_pct = models.FloatField(
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0)],
        help_text="Tolerance of each applied mass (direct, hanger, slotted weights) [± % of the mass].",
    )
    lever_ratio_tolerance = models.FloatField(
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0)],
        help_text="Tolerance of the verified lever ratio [± –].",
    )
    box_dimension_tolerance_mm = models.FloatField(
        null=True,
        blank=True,
        validators=[MinValueValidator(0.0)],
        help_text="Tolerance of each box dimension (length, width or diameter) [± mm].",
    )
    verified_on = models.DateField(
        null=True, blank=True, help_text="Date the lever ratio and masses were last verified."
    )
    verification_due_on = models.DateField(null=True, blank=True)
    is_active = models.BooleanField(default=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["reference"]
        verbose_name_plural = "apparatus"
        constraints = [
            models.CheckConstraint(
                name="apparatus_reference_not_blank", condition=~Q(reference="")
            ),
            models.CheckConstraint(
                name="apparatus_box_length_positive", condition=Q(box_length_mm__gt=0)
            ),
            models.CheckConstraint(
                name="apparatus_box_width",
                condition=(
                    Q(box_shape=ApparatusBoxShape.SQUARE)
                    & Q(box_width_mm__isnull=False, box_width_mm__gt=0)
                )
                | (Q(box_shape=ApparatusBoxShape.CIRCULAR) & Q(box_width_mm__isnull=True)),
            ),
            models.CheckConstraint(name="apparatus_lever_positive", condition=Q(lever_ratio__gt=0)),
            models.CheckConstraint(
                name="apparatus_hanger_nonnegative", condition=Q(hanger_mass_kg__gte=0)
            ),
            models.CheckConstraint(
                name="apparatus_tolerances_nonnegative",
                condition=(Q(mass_tolerance_pct__isnull=True) | Q(mass_tolerance_pct__gte=0))
                & (Q(lever_ratio_tolerance__isnull=True) | Q(lever_ratio_tolerance__gte=0))
                & (
                    Q(box_dimension_tolerance_mm__isnull=True)
                    | Q(box_dimension_tolerance_mm__gte=0)
                ),
            ),
            models.CheckConstraint(
                name="apparatus_verification_dates",
                condition=Q(verified_on__isnull=True)
                | Q(verification_due_on__isnull=True)
                | Q(verification_due_on__gte=F("verified_on")),
            ),
        ]

    def __str__(self) -> str:
        return self.reference


class ForceDeviceKind(models.TextChoices):
    PROVING_RING = "ring", "Proving ring"
    LOAD_CELL = "load_cell", "Load cell"


class ForceDevice(models.Model):
    """A proving ring or load cell; its calibrations turn readings into force."""

    reference = models.CharField(
        max_length=40, unique=True, help_text="Lab's device id, e.g. PR-07."
    )
    kind = models.CharField(max_length=10, choices=ForceDeviceKind.choices)
    serial_number = models.CharField(max_length=80, blank=True)
    capacity_n = models.FloatField(help_text="Rated capacity [N].")
    reading_unit = models.CharField(
        max_length=10,
        default="div",
        help_text="Unit of the device's readings: div, N, mV/V, counts.",
    )
    resolution = models.FloatField(
        null=True, blank=True, help_text="Smallest reading step [reading unit]."
    )
    apparatus = models.ForeignKey(
        Apparatus, on_delete=models.SET_NULL, null=True, blank=True, related_name="force_devices"
    )
    is_active = models.BooleanField(default=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["reference"]
        constraints = [
            models.CheckConstraint(
                name="force_device_reference_not_blank", condition=~Q(reference="")
            ),
            models.CheckConstraint(
                name="force_device_capacity_positive", condition=Q(capacity_n__gt=0)
            ),
        ]

    def __str__(self) -> str:
        return f"{self.reference} ({self.get_kind_display()})"


class CalibrationModel(models.TextChoices):
    LINEAR = "linear", "Linear: F = K·(R − R0)"
    POLYNOMIAL = "polynomial", "Polynomial: F = a0 + a1·d + a2·d² + a3·d³, d = R − R0"


class CalibrationRecord(models.Model):
    """One calibration certificate of a force device: the model, its range and its uncertainty."""

    device = models.ForeignKey(ForceDevice, on_delete=models.PROTECT, related_name="calibrations")
    certificate_number = models.CharField(max_length=80)
    issuing_lab = models.CharField(max_length=200)
    accreditation = models.CharField(
        max_length=120, blank=True, help_text="Accreditation body and number of the issuing lab."
    )
    calibrated_on = models.DateField()
    due_on = models.DateField(help_text="Date the calibration stops being valid.")
    model = models.CharField(max_length=10, choices=CalibrationModel.choices)
    coefficients = models.JSONField(
        help_text="Linear: [K] in N per reading unit. Polynomial: [a0, a1, a2, a3] ascending, "
        "2–4 values [N, N/unit, N/unit², N/unit³]."
    )
    zero_reading = models.FloatField(default=0.0, help_text="Reading at zero force, R0.")
    range_min = models.FloatField(help_text="Lowest calibrated reading [reading unit].")
    range_max = models.FloatField(help_text="Highest calibrated reading [reading unit].")
    expanded_uncertainty_n = models.FloatField(
        null=True, blank=True, help_text="Expanded uncertainty U of the force [N]."
    )
    coverage_factor_k = models.FloatField(default=2.0, help_text="Coverage factor k of U [–].")
    notes = models.TextField(blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["device", "-calibrated_on", "-id"]
        constraints = [
            models.UniqueConstraint(
                fields=["device", "certificate_number"], name="calibration_certificate_unique"
            ),
            models.CheckConstraint(
                name="calibration_certificate_not_blank", condition=~Q(certificate_number="")
            ),
            models.CheckConstraint(
                name="calibration_due_after_date", condition=Q(due_on__gte=F("calibrated_on"))
            ),
            models.CheckConstraint(
                name="calibration_range_ordered", condition=Q(range_max__gt=F("range_min"))
            ),
            models.CheckConstraint(
                name="calibration_k_positive", condition=Q(coverage_factor_k__gt=0)
            ),
            models.CheckConstraint(
                name="calibration_uncertainty_nonnegative",
                condition=Q(expanded_uncertainty_n__isnull=True) | Q(expanded_uncertainty_n__gte=0),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.device.reference} cert. {self.certificate_number} (due {self.due_on})"

    def as_analysis(self) -> LinearCalibration | PolynomialCalibration:
        """The core's calibration object; raises ``AnalysisError`` for an unusable record."""
        coefficients = tuple(float(c) for c in self.coefficients)
        device = f"{self.device.get_kind_display().lower()} {self.device.reference}"
        unit = self.device.reading_unit or "div"
        if self.model == CalibrationModel.LINEAR:
            (factor,) = coefficients[:1] or (float("nan"),)
            return LinearCalibration(
                factor_n_per_unit=factor,
                zero_reading=self.zero_reading,
                range_min=self.range_min,
                range_max=self.range_max,
                unit=unit,
                device=device,
            )
        return PolynomialCalibration(
            coefficients=coefficients,
            range_min=self.range_min,
            range_max=self.range_max,
            zero_reading=self.zero_reading,
            unit=unit,
            device=device,
        )


class GaugeKind(models.TextChoices):
    DIAL = "dial", "Dial gauge"
    LVDT = "lvdt", "LVDT / displacement transducer"


class GaugeAxis(models.TextChoices):
    HORIZONTAL = "horizontal", "Horizontal (shear displacement)"
    VERTICAL = "vertical", "Vertical (height change)"


class DisplacementGauge(models.Model):
    """A dial gauge or LVDT with its factor and calibration dates."""

    reference = models.CharField(max_length=40, unique=True)
    kind = models.CharField(max_length=6, choices=GaugeKind.choices)
    axis = models.CharField(max_length=10, choices=GaugeAxis.choices)
    serial_number = models.CharField(max_length=80, blank=True)
    factor_mm_per_unit = models.FloatField(help_text="Gauge factor [mm/div] (1 for an LVDT in mm).")
    range_mm = models.FloatField(null=True, blank=True, help_text="Travel [mm].")
    apparatus = models.ForeignKey(
        Apparatus, on_delete=models.SET_NULL, null=True, blank=True, related_name="gauges"
    )
    calibrated_on = models.DateField(null=True, blank=True)
    due_on = models.DateField(null=True, blank=True)
    certificate_number = models.CharField(max_length=80, blank=True)
    is_active = models.BooleanField(default=True)

    history = AuditedHistory()

    class Meta:
        ordering = ["reference"]
        constraints = [
            models.CheckConstraint(name="gauge_reference_not_blank", condition=~Q(reference="")),
            models.CheckConstraint(
                name="gauge_factor_positive", condition=Q(factor_mm_per_unit__gt=0)
            ),
            models.CheckConstraint(
                name="gauge_due_after_date",
                condition=Q(calibrated_on__isnull=True)
                | Q(due_on__isnull=True)
                | Q(due_on__gte=F("calibrated_on")),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.reference} ({self.get_kind_display()}, {self.axis})"
