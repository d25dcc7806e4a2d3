"""Direct shear test sets, their stages, and the stages' readings."""

from __future__ import annotations

from typing import Any

from django.db.models import Q
from rest_framework import serializers

from testing import access
from testing.api.fields import LabDateField, ScopedRelatedField, lab_wide
from testing.api.serializers.base import InputSerializer, OutputSerializer
from testing.models import (
    ConsolidationReading,
    DirectShearTest,
    ForceDevice,
    Project,
    ShearStage,
    Specimen,
)

TEST_FIELDS = [
    "reference",
    "method",
    "method_edition",
    "apparatus",
    "box_shape",
    "box_length_mm",
    "box_width_mm",
    "condition",
    "shear_type",
    "area_model",
    "failure_criterion",
    "stated_displacement_mm",
    "expected_failure_displacement_mm",
    "fine_grained",
    "requested_on",
    "due_on",
    "instructions",
]


class TestSetOut(OutputSerializer):
    stage_count = serializers.IntegerField(read_only=True)

    class Meta:
        model = DirectShearTest
        fields = ["id", "project", *TEST_FIELDS, "created_at", "released_at", "stage_count"]


class TestSetIn(InputSerializer):
    """A new test set. ``created_by`` is the caller; ``released_at`` is set only by a signed report."""

    project = ScopedRelatedField(model=Project, scope=access.project_filter)

    class Meta:
        model = DirectShearTest
        fields = ["project", *TEST_FIELDS]
        extra_kwargs = {"method_edition": {"required": False}}


STAGE_FIELDS = [
    "stage_number",
    "loading",
    "direct_mass_kg",
    "hanger_mass_kg",
    "weights_mass_kg",
    "lever_ratio",
    "beam_offset_force_n",
    "applied_normal_stress_kpa",
    "force_unit",
    "force_factor_n_per_unit",
    "force_zero_reading",
    "rate_mm_per_min",
    "consolidation_started_at",
    "shear_started_at",
    "traverses",
    "notes",
]


class StageOut(OutputSerializer):
    class Meta:
        model = ShearStage
        fields = ["id", "test", "specimen", *STAGE_FIELDS]


def _unreleased_tests(user: access.AnyUser) -> Q:
    # Staff see every test set; a reported set's stages cannot change, so it is not offered.
    return access.test_filter(user) & Q(released_at__isnull=True)


class StageIn(InputSerializer):
    test = ScopedRelatedField(model=DirectShearTest, scope=_unreleased_tests)
    specimen = ScopedRelatedField(model=Specimen, scope=access.specimen_filter)

    class Meta:
        model = ShearStage
        fields = ["test", "specimen", *STAGE_FIELDS]


class StageCalibrationIn(serializers.Serializer):
    """The force device the stage's readings were taken with; the stage is linked to that
    device's certificate in force on the stage's test date (or on ``on``)."""

    device = ScopedRelatedField(model=ForceDevice, scope=lab_wide)
    on = LabDateField(
        required=False, help_text="Test date to look the certificate up on (default: the stage's)."
    )


class StageCalibrationOut(serializers.Serializer):
    force_calibration = serializers.IntegerField(help_text="Calibration record id.")
    certificate_number = serializers.CharField()
    calibrated_on = serializers.DateField()
    due_on = serializers.DateField()
    valid_on_test_date = serializers.BooleanField(
        help_text="False: the certificate had expired; the stage carries a flag that blocks approval."
    )


class ShearReadingOut(serializers.Serializer[Any]):
    """One shear reading (stored in column blocks; see ``testing.selectors_readings``)."""

    traverse = serializers.IntegerField(read_only=True)
    seq = serializers.IntegerField(read_only=True, help_text="Reading number within the traverse.")
    elapsed_min = serializers.FloatField(
        read_only=True, help_text="Time since shearing started [min]."
    )
    horizontal_mm = serializers.FloatField(
        read_only=True, help_text="Relative horizontal displacement [mm]."
    )
    vertical_mm = serializers.FloatField(
        read_only=True, help_text="Vertical displacement, dilation (upward) positive [mm]."
    )
    force_reading = serializers.FloatField(
        read_only=True, help_text="Force device reading [div or N, see the stage]."
    )


class ConsolidationReadingOut(OutputSerializer):
    class Meta:
        model = ConsolidationReading
        fields = ["elapsed_min", "settlement_mm"]
