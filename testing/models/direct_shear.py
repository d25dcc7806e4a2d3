"""A direct shear test set, its stages (one specimen under one normal load) and their readings."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import F, Q
from django.db.models.functions import Length
from django.db.models.lookups import Exact

from testing.models.audit import AuditedHistory


class MethodProfile(models.TextChoices):
    ASTM_D3080 = "astm-d3080", "ASTM D3080/D3080M"
    BS_1377_7 = "bs-1377-7", "BS 1377-7"
    ISO_17892_10 = "iso-17892-10", "BS EN ISO 17892-10"
    AASHTO_T236 = "aashto-t236", "AASHTO T 236"


def method_title(label: str, edition: str) -> str:
    """A method and its edition written as the standard is cited: "BS 1377-7:1990",
    "BS EN ISO 17892-10:2018", "ASTM D3080/D3080M-23" (the edition already repeats the designation),
    "AASHTO T 236" (the edition adds nothing)."""
    edition = edition.strip()
    if not edition or edition in label:
        return label
    body, _, designation = label.partition(" ")
    if designation and edition.startswith(designation):
        return f"{body} {edition}"
    return f"{label}:{edition}"


DEFAULT_EDITIONS = {
    MethodProfile.ASTM_D3080: "D3080/D3080M-23",
    MethodProfile.BS_1377_7: "1990",
    MethodProfile.ISO_17892_10: "2018",
    MethodProfile.AASHTO_T236: "T 236",
}


class BoxShape(models.TextChoices):
    SQUARE = "square", "Square / rectangular"
    CIRCULAR = "circular", "Circular"


class TestCondition(models.TextChoices):
    SUBMERGED = "submerged", "Submerged (inundated)"
    DRY = "dry", "Dry / as received"


class AreaModel(models.TextChoices):
    NOMINAL = "nominal", "Nominal (initial) area"
    CORRECTED = "corrected", "Corrected for relative displacement"


class ShearType(models.TextChoices):
    SINGLE = "single", "Single traverse"
    REVERSALS = "reversals", "Multiple reversals (residual)"


class FailureChoice(models.TextChoices):
    """Which point of each stage is taken as failure (the points the analysis can pick)."""

    PEAK = "peak", "Peak shear stress"
    PEAK_RATIO = "peak_ratio", "Peak stress ratio τ/σn"
    AT_DISPLACEMENT = "at_displacement", "Shear stress at a stated displacement"
    END_OF_TRAVEL = "end_of_travel", "Shear stress at the end of travel"


class DirectShearTest(models.Model):
    """A set of specimens tested together under one method profile, apparatus and box."""

    project = models.ForeignKey(
        "testing.Project", on_delete=models.PROTECT, related_name="shear_tests"
    )
    reference = models.CharField(
        max_length=40, help_text="Test set reference, unique in the project."
    )
    method = models.CharField(max_length=20, choices=MethodProfile.choices)
    method_edition = models.CharField(max_length=40)
    apparatus = models.CharField(max_length=80, blank=True, help_text="Apparatus id.")
    box_shape = models.CharField(max_length=8, choices=BoxShape.choices, default=BoxShape.SQUARE)
    box_length_mm = models.FloatField(
        help_text="Box length in the shear direction, or diameter [mm]."
    )
    box_width_mm = models.FloatField(
        null=True, blank=True, help_text="Box width [mm] (square boxes)."
    )
    condition = models.CharField(
        max_length=10, choices=TestCondition.choices, default=TestCondition.SUBMERGED
    )
    shear_type = models.CharField(
        max_length=10, choices=ShearType.choices, default=ShearType.SINGLE
    )
    area_model = models.CharField(
        max_length=10, choices=AreaModel.choices, default=AreaModel.NOMINAL
    )
    failure_criterion = models.CharField(
        max_length=16,
        choices=FailureChoice.choices,
        default=FailureChoice.PEAK,
        help_text="Which point of each stage is failure (the client's instruction or the method's).",
    )
    stated_displacement_mm = models.FloatField(
        null=True,
        blank=True,
        help_text="For failure at a stated displacement: the horizontal displacement [mm]; "
        "blank: 10 % of the box length.",
    )
    expected_failure_displacement_mm = models.FloatField(
        null=True,
        blank=True,
        help_text="Horizontal displacement expected at failure, for the permitted rate [mm]; "
        "blank: the method's value.",
    )
    fine_grained = models.BooleanField(
        default=False,
        help_text="Fine-grained, normally or lightly overconsolidated soil: the method's larger "
        "displacement at failure applies (where the method has one).",
    )
    requested_on = models.DateField()
    due_on = models.DateField(null=True, blank=True)
    instructions = models.TextField(blank=True, help_text="Client's test instructions.")
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    released_at = models.DateTimeField(
        null=True,
        blank=True,
        editable=False,
        help_text="When a signed report first released these results to the client.",
    )
    apparatus_record = models.ForeignKey(
        "testing.Apparatus",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="shear_tests",
        help_text="The machine from the equipment register (the text id above stays as typed).",
    )

    history = AuditedHistory()

    class Meta:
        ordering = ["project", "reference"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "reference"], name="shear_test_ref_unique_in_project"
            ),
            models.CheckConstraint(
                name="shear_test_reference_not_blank", condition=~Q(reference="")
            ),
            models.CheckConstraint(
                name="shear_test_box_length_positive", condition=Q(box_length_mm__gt=0)
            ),
            models.CheckConstraint(
                name="shear_test_failure_displacement_positive",
                condition=Q(expected_failure_displacement_mm__isnull=True)
                | Q(expected_failure_displacement_mm__gt=0),
            ),
            models.CheckConstraint(
                name="shear_test_stated_displacement_positive",
                condition=Q(stated_displacement_mm__isnull=True) | Q(stated_displacement_mm__gt=0),
            ),
            models.CheckConstraint(
                name="shear_test_box_width",
                condition=(
                    Q(box_shape=BoxShape.SQUARE) & Q(box_width_mm__isnull=False, box_width_mm__gt=0)
                )
                | (Q(box_shape=BoxShape.CIRCULAR) & Q(box_width_mm__isnull=True)),
            ),
            models.CheckConstraint(
                name="shear_test_due_after_request",
                condition=Q(due_on__isnull=True) | Q(due_on__gte=models.F("requested_on")),
            ),
        ]

    def __str__(self) -> str:
        return f"{self.project.reference}/{self.reference}"

    def envelope_label(self, envelope_type: str) -> str:
        """An envelope's name on pages and reports: the failure envelope is called "Peak" only
        when failure is the peak shear stress."""
        from testing.models.results import EnvelopeType

        label = str(EnvelopeType(envelope_type).label)
        if envelope_type == EnvelopeType.PEAK and self.failure_criterion != FailureChoice.PEAK:
            return f"Failure ({FailureChoice(self.failure_criterion).label.lower()})"
        return label

    @property
    def method_title(self) -> str:
        """The method as a standard is cited: see :func:`method_title`."""
        return method_title(self.get_method_display(), self.method_edition)


class NormalLoading(models.TextChoices):
    LEVER = "lever", "Hanger masses on a lever arm"
    FRAME = "frame", "Load frame (applied stress)"


class ForceUnit(models.TextChoices):
    DIVISIONS = "div", "Proving-ring dial divisions"
    NEWTON = "N", "Load cell [N]"


class ShearStage(models.Model):
    """One specimen of the set under one normal load: its consolidation and shear phases."""

    test = models.ForeignKey(DirectShearTest, on_delete=models.CASCADE, related_name="stages")
    stage_number = models.PositiveSmallIntegerField()
    specimen = models.OneToOneField(
        "testing.Specimen", on_delete=models.PROTECT, related_name="stage"
    )
    loading = models.CharField(
        max_length=6, choices=NormalLoading.choices, default=NormalLoading.LEVER
    )
    direct_mass_kg = models.FloatField(
        null=True,
        blank=True,
        help_text="Mass bearing directly on the specimen: cap, plates, yoke [kg].",
    )
    hanger_mass_kg = models.FloatField(null=True, blank=True, help_text="Hanger mass [kg].")
    weights_mass_kg = models.FloatField(
        null=True, blank=True, help_text="Slotted weights on the hanger [kg]."
    )
    lever_ratio = models.FloatField(
        null=True, blank=True, help_text="Lever ratio [–] (1 for direct loading)."
    )
    beam_offset_force_n = models.FloatField(
        default=0.0,
        help_text="Net force from an unbalanced beam, from the machine's calibration [N].",
    )
    applied_normal_stress_kpa = models.FloatField(
        null=True, blank=True, help_text="Applied normal stress from a load frame [kPa]."
    )
    force_unit = models.CharField(
        max_length=4, choices=ForceUnit.choices, default=ForceUnit.DIVISIONS
    )
    force_factor_n_per_unit = models.FloatField(
        default=1.0, help_text="Ring constant [N/div], or 1 for a load cell reading in N."
    )
    force_zero_reading = models.FloatField(
        default=0.0, help_text="Force reading at zero load [div or N]."
    )
    rate_mm_per_min = models.FloatField(
        null=True, blank=True, help_text="Displacement rate set [mm/min]."
    )
    consolidation_started_at = models.DateTimeField(null=True, blank=True)
    shear_started_at = models.DateTimeField(null=True, blank=True)
    traverses = models.PositiveSmallIntegerField(default=1, help_text="Number of shear traverses.")
    notes = models.TextField(blank=True)
    force_calibration = models.ForeignKey(
        "testing.CalibrationRecord",
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="stages",
        help_text="Force calibration in force on the test date; without one the factor and zero "
        "reading above apply.",
    )

    history = AuditedHistory()

    class Meta:
        ordering = ["test", "stage_number"]
        constraints = [
            models.UniqueConstraint(
                fields=["test", "stage_number"], name="stage_number_unique_in_test"
            ),
            models.CheckConstraint(name="stage_number_positive", condition=Q(stage_number__gte=1)),
            models.CheckConstraint(
                name="stage_lever_loading_complete",
                condition=~Q(loading=NormalLoading.LEVER)
                | Q(
                    direct_mass_kg__isnull=False,
                    hanger_mass_kg__isnull=False,
                    weights_mass_kg__isnull=False,
                    lever_ratio__isnull=False,
                    direct_mass_kg__gte=0,
                    hanger_mass_kg__gte=0,
                    weights_mass_kg__gte=0,
                    lever_ratio__gt=0,
                    applied_normal_stress_kpa__isnull=True,
                ),
            ),
            models.CheckConstraint(
                name="stage_frame_loading_complete",
                condition=~Q(loading=NormalLoading.FRAME)
                | Q(applied_normal_stress_kpa__isnull=False, applied_normal_stress_kpa__gt=0),
            ),
            models.CheckConstraint(
                name="stage_force_factor_positive", condition=Q(force_factor_n_per_unit__gt=0)
            ),
            models.CheckConstraint(
                name="stage_rate_positive",
                condition=Q(rate_mm_per_min__isnull=True) | Q(rate_mm_per_min__gt=0),
            ),
            models.CheckConstraint(name="stage_traverses_positive", condition=Q(traverses__gte=1)),
        ]

    def __str__(self) -> str:
        return f"{self.test} stage {self.stage_number}"


class ConsolidationReading(models.Model):
    # No index of its own: the unique (stage, elapsed_min) index serves lookups by stage.
    stage = models.ForeignKey(
        ShearStage, on_delete=models.CASCADE, related_name="consolidation_readings", db_index=False
    )
    elapsed_min = models.FloatField(help_text="Time since the normal load was applied [min].")
    settlement_mm = models.FloatField(
        help_text="Settlement since load applied, compression positive [mm]."
    )

    class Meta:
        ordering = ["stage", "elapsed_min"]
        constraints = [
            models.UniqueConstraint(
                fields=["stage", "elapsed_min"], name="consolidation_time_unique"
            ),
            models.CheckConstraint(
                name="consolidation_time_nonnegative", condition=Q(elapsed_min__gte=0)
            ),
        ]

    def __str__(self) -> str:
        return f"{self.elapsed_min:g} min: {self.settlement_mm:.3f} mm"


class ShearReadingBlock(models.Model):
    """A run of consecutive shear readings of one traverse, stored column by column.

    Readings ``first_seq`` … ``first_seq + count − 1`` of the traverse (reading numbers count from 1
    in time order). Each column holds ``count`` little-endian IEEE-754 doubles: elapsed time [min],
    horizontal displacement [mm], vertical displacement (dilation upward positive) [mm] and the
    force device reading [div or N, see the stage]. A logger's million readings are then a few
    dozen rows: no per-reading index or key check to maintain, and a stage's readings come back
    in one query. Read them through :mod:`testing.selectors_readings`; write them through
    :mod:`testing.services.readings_store`, which checks every value first."""

    # No index of its own: the unique (stage, traverse, first_seq) index serves lookups by stage.
    stage = models.ForeignKey(
        ShearStage, on_delete=models.CASCADE, related_name="shear_blocks", db_index=False
    )
    traverse = models.PositiveSmallIntegerField(default=1)
    first_seq = models.PositiveIntegerField(
        help_text="Reading number (within the traverse) of the block's first reading."
    )
    count = models.PositiveIntegerField(help_text="Readings in the block.")
    elapsed_min = models.BinaryField(help_text="Time since shearing started [min], float64 LE.")
    horizontal_mm = models.BinaryField(
        help_text="Relative horizontal displacement [mm], float64 LE."
    )
    vertical_mm = models.BinaryField(
        help_text="Vertical displacement, dilation (upward) positive [mm], float64 LE."
    )
    force_reading = models.BinaryField(
        help_text="Force device reading [div or N, see the stage], float64 LE."
    )

    COLUMNS = ("elapsed_min", "horizontal_mm", "vertical_mm", "force_reading")

    class Meta:
        ordering = ["stage", "traverse", "first_seq"]
        constraints = [
            models.UniqueConstraint(
                fields=["stage", "traverse", "first_seq"], name="shear_block_unique"
            ),
            models.CheckConstraint(
                name="shear_block_traverse_positive", condition=Q(traverse__gte=1)
            ),
            models.CheckConstraint(
                name="shear_block_first_seq_positive", condition=Q(first_seq__gte=1)
            ),
            models.CheckConstraint(name="shear_block_not_empty", condition=Q(count__gte=1)),
            *(
                models.CheckConstraint(
                    name=f"shear_block_{column}_length",
                    condition=Exact(Length(column), F("count") * 8),
                )
                for column in ("elapsed_min", "horizontal_mm", "vertical_mm", "force_reading")
            ),
        ]

    def __str__(self) -> str:
        last = self.first_seq + self.count - 1
        return f"traverse {self.traverse} readings {self.first_seq}–{last}"
