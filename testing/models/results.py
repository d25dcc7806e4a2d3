"""Computation runs and the result rows they write.

Results are rows, never overwritten: each successful run adds its own rows, stamped with the
algorithm version and a hash of the exact inputs. A report revision points at the rows it froze,
so recomputing later can never change an issued number.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from testing.models.audit import AuditedHistory


class RunKind(models.TextChoices):
    STAGE_REDUCTION = "stage_reduction", "Stage reduction"
    ENVELOPE_FIT = "envelope_fit", "Envelope fit"
    REPORT_RENDER = "report_render", "Report rendering"


class RunState(models.TextChoices):
    QUEUED = "queued", "Queued"
    RUNNING = "running", "Running"
    SUCCEEDED = "succeeded", "Succeeded"
    FAILED = "failed", "Failed"


class EnvelopeType(models.TextChoices):
    PEAK = "peak", "Peak"
    ULTIMATE = "ultimate", "Ultimate (constant volume)"
    RESIDUAL = "residual", "Residual"


class ComputationRun(models.Model):
    """One request for background work, from queued to succeeded or failed.

    ``subject_key`` names what the run works on (``stage:12``, ``test:3:peak``, ``revision:7``), so one
    queued run per subject and kind can absorb every change made before it starts.
    """

    kind = models.CharField(max_length=20, choices=RunKind.choices)
    subject_key = models.CharField(max_length=60)
    test = models.ForeignKey(
        "testing.DirectShearTest",
        on_delete=models.CASCADE,
        null=True,
        blank=True,
        related_name="runs",
    )
    stage = models.ForeignKey(
        "testing.ShearStage", on_delete=models.CASCADE, null=True, blank=True, related_name="runs"
    )
    envelope_type = models.CharField(max_length=10, choices=EnvelopeType.choices, blank=True)
    state = models.CharField(max_length=10, choices=RunState.choices, default=RunState.QUEUED)
    reason = models.CharField(max_length=200, help_text="What asked for the run.")
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    requested_at = models.DateTimeField(auto_now_add=True)
    analysis_version = models.CharField(max_length=20, blank=True)
    inputs_hash = models.CharField(
        max_length=64, blank=True, help_text="sha256 of the canonical inputs."
    )
    attempts = models.PositiveSmallIntegerField(default=0, help_text="Deliveries claimed so far.")
    claim_token = models.CharField(max_length=32, blank=True)
    lease_expires_at = models.DateTimeField(null=True, blank=True)
    started_at = models.DateTimeField(null=True, blank=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    progress_pct = models.PositiveSmallIntegerField(default=0)
    error = models.TextField(
        blank=True, help_text="Why the run failed, in words a person can act on."
    )
    reused_from = models.ForeignKey(
        "self",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="+",
        help_text="An earlier run with the same inputs and version whose results stand for this one.",
    )

    class Meta:
        ordering = ["-requested_at", "-id"]
        constraints = [
            models.UniqueConstraint(
                fields=["kind", "subject_key"],
                condition=Q(state="queued"),
                name="one_queued_run_per_subject",
            ),
            models.CheckConstraint(name="run_progress_range", condition=Q(progress_pct__lte=100)),
            models.CheckConstraint(
                name="run_failed_has_error", condition=~Q(state="failed") | ~Q(error="")
            ),
        ]
        indexes = [
            models.Index(fields=["kind", "subject_key", "inputs_hash", "analysis_version"]),
            models.Index(fields=["state", "lease_expires_at"]),
        ]

    def __str__(self) -> str:
        return f"{self.get_kind_display()} {self.subject_key} [{self.state}]"


class OutboxMessage(models.Model):
    """A run waiting to be handed to the broker, written in the same transaction as the change.

    If the broker is down when the transaction commits, the row stays unpublished and the relay
    sends it when the broker is back, so no request waits on a dead broker and nothing is lost.
    """

    run = models.ForeignKey(ComputationRun, on_delete=models.CASCADE, related_name="outbox")
    created_at = models.DateTimeField(auto_now_add=True)
    published_at = models.DateTimeField(null=True, blank=True)
    publish_attempts = models.PositiveIntegerField(default=0)
    last_error = models.TextField(blank=True)

    class Meta:
        ordering = ["id"]
        indexes = [models.Index(fields=["published_at", "id"])]

    def __str__(self) -> str:
        return f"outbox #{self.pk} for run {self.run_id}"


class StageExclusion(models.Model):
    """A stage left out of one envelope type of its test set, with the reason."""

    stage = models.ForeignKey(
        "testing.ShearStage", on_delete=models.CASCADE, related_name="exclusions"
    )
    envelope_type = models.CharField(max_length=10, choices=EnvelopeType.choices)
    reason = models.TextField()
    excluded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    excluded_at = models.DateTimeField(auto_now_add=True)

    history = AuditedHistory()

    class Meta:
        constraints = [
            models.UniqueConstraint(
                fields=["stage", "envelope_type"], name="one_exclusion_per_stage_type"
            ),
            models.CheckConstraint(name="exclusion_has_reason", condition=~Q(reason="")),
        ]

    def __str__(self) -> str:
        return f"{self.stage} excluded from {self.envelope_type}: {self.reason}"


class StageResult(models.Model):
    """What one stage reduction produced. Written once, never changed."""

    run = models.OneToOneField(
        ComputationRun, on_delete=models.PROTECT, related_name="stage_result"
    )
    stage = models.ForeignKey(
        "testing.ShearStage", on_delete=models.PROTECT, related_name="results"
    )
    analysis_version = models.CharField(max_length=20)
    inputs_hash = models.CharField(max_length=64)
    created_at = models.DateTimeField(auto_now_add=True)
    area_model = models.CharField(max_length=10)
    n_readings = models.PositiveIntegerField()
    normal_force_n = models.FloatField(help_text="Applied normal force [N].")
    initial_normal_stress_kpa = models.FloatField(
        help_text="Normal stress on the initial area [kPa]."
    )
    # Failure (criterion recorded, as AGS SHBT_CRIT)
    failure_criterion = models.CharField(max_length=20)
    failure_shear_stress_kpa = models.FloatField()
    failure_normal_stress_kpa = models.FloatField()
    failure_horizontal_mm = models.FloatField()
    failure_vertical_mm = models.FloatField()
    failure_secant_phi_deg = models.FloatField()
    ultimate_shear_stress_kpa = models.FloatField(null=True, blank=True)
    ultimate_normal_stress_kpa = models.FloatField(null=True, blank=True)
    ultimate_horizontal_mm = models.FloatField(null=True, blank=True)
    residual_shear_stress_kpa = models.FloatField(null=True, blank=True)
    residual_normal_stress_kpa = models.FloatField(null=True, blank=True)
    residual_horizontal_mm = models.FloatField(null=True, blank=True, help_text="Cumulative [mm].")
    residual_vertical_mm = models.FloatField(null=True, blank=True)
    max_dilation_angle_deg = models.FloatField(null=True, blank=True)
    max_dilation_horizontal_mm = models.FloatField(null=True, blank=True)
    measured_rate_mm_per_min = models.FloatField(null=True, blank=True)
    max_rate_mm_per_min = models.FloatField(null=True, blank=True)
    # Phase relations: {"initial": {...}, "final": {...}} with units in the keys
    phase = models.JSONField(default=dict, blank=True)
    # Expanded uncertainty (k = 2) of the failure stresses
    shear_stress_u_kpa = models.FloatField(null=True, blank=True)
    normal_stress_u_kpa = models.FloatField(null=True, blank=True)
    flags = models.JSONField(
        default=list, blank=True, help_text="QA flags: code, severity, message, values."
    )

    class Meta:
        ordering = ["stage", "-created_at", "-id"]

    def __str__(self) -> str:
        return f"{self.stage}: τ {self.failure_shear_stress_kpa:.1f} kPa at σn {self.failure_normal_stress_kpa:.1f} kPa"


class EnvelopeResult(models.Model):
    """One envelope fit of a test set. Every fit is kept; none is overwritten."""

    run = models.OneToOneField(
        ComputationRun, on_delete=models.PROTECT, related_name="envelope_result"
    )
    test = models.ForeignKey(
        "testing.DirectShearTest", on_delete=models.PROTECT, related_name="envelopes"
    )
    envelope_type = models.CharField(max_length=10, choices=EnvelopeType.choices)
    analysis_version = models.CharField(max_length=20)
    inputs_hash = models.CharField(max_length=64)
    created_at = models.DateTimeField(auto_now_add=True)
    fit_method = models.CharField(max_length=120, help_text="How the line was fitted.")
    through_origin = models.BooleanField(default=False)
    # Stage selection: [{"stage_number", "stage_result_id", "normal_stress_kpa", "shear_stress_kpa",
    #                    "included", "reason"}]
    points = models.JSONField(default=list)
    n = models.PositiveSmallIntegerField()
    cohesion_kpa = models.FloatField()
    friction_angle_deg = models.FloatField()
    tan_phi = models.FloatField()
    stderr_cohesion_kpa = models.FloatField(null=True, blank=True)
    stderr_tan_phi = models.FloatField(null=True, blank=True)
    cohesion_ci95_low_kpa = models.FloatField(null=True, blank=True)
    cohesion_ci95_high_kpa = models.FloatField(null=True, blank=True)
    friction_angle_ci95_low_deg = models.FloatField(null=True, blank=True)
    friction_angle_ci95_high_deg = models.FloatField(null=True, blank=True)
    corr_cohesion_tan_phi = models.FloatField(null=True, blank=True)
    r_squared = models.FloatField(null=True, blank=True)
    r_squared_kind = models.CharField(max_length=12, default="centred")
    normal_stress_min_kpa = models.FloatField()
    normal_stress_max_kpa = models.FloatField()
    through_origin_alternative = models.JSONField(null=True, blank=True)
    warnings = models.JSONField(default=list, blank=True)
    characteristic = models.JSONField(
        null=True, blank=True, help_text="Interpretation, labelled as such."
    )

    class Meta:
        ordering = ["test", "envelope_type", "-created_at", "-id"]

    def __str__(self) -> str:
        return f"{self.test} {self.envelope_type}: c′ {self.cohesion_kpa:.1f} kPa, φ′ {self.friction_angle_deg:.1f}°"
