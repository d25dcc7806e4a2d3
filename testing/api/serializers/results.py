"""Computation runs, stage results, envelopes and throughput counts (all read-only)."""

from __future__ import annotations

from typing import Any

from drf_spectacular.utils import extend_schema_serializer
from rest_framework import serializers

from testing.api.serializers.base import OutputSerializer
from testing.models import ComputationRun, EnvelopeResult, EnvelopeType, SampleStatus, StageResult


class ComputationRunOut(OutputSerializer):
    envelope_type = serializers.CharField(
        read_only=True, help_text="peak, ultimate or residual for an envelope fit; blank otherwise."
    )

    class Meta:
        model = ComputationRun
        fields = [
            "id",
            "kind",
            "subject_key",
            "test",
            "stage",
            "envelope_type",
            "state",
            "reason",
            "requested_at",
            "analysis_version",
            "inputs_hash",
            "attempts",
            "started_at",
            "finished_at",
            "progress_pct",
            "error",
            "reused_from",
        ]


class RecordRefOut(serializers.Serializer):
    id = serializers.IntegerField(read_only=True)
    reference = serializers.CharField(read_only=True)


STAGE_RESULT_FIELDS = [
    "id",
    "run",
    "stage",
    "analysis_version",
    "inputs_hash",
    "created_at",
    "area_model",
    "n_readings",
    "normal_force_n",
    "initial_normal_stress_kpa",
    "failure_criterion",
    "failure_shear_stress_kpa",
    "failure_normal_stress_kpa",
    "failure_horizontal_mm",
    "failure_vertical_mm",
    "failure_secant_phi_deg",
    "ultimate_shear_stress_kpa",
    "ultimate_normal_stress_kpa",
    "ultimate_horizontal_mm",
    "residual_shear_stress_kpa",
    "residual_normal_stress_kpa",
    "residual_horizontal_mm",
    "residual_vertical_mm",
    "max_dilation_angle_deg",
    "max_dilation_horizontal_mm",
    "measured_rate_mm_per_min",
    "max_rate_mm_per_min",
    "phase",
    "shear_stress_u_kpa",
    "normal_stress_u_kpa",
    "flags",
]


_DATETIME = serializers.DateTimeField()


class StageResultOut(OutputSerializer):
    """One stage reduction's result row, with the stage's number, test set and specimen."""

    stage_number = serializers.IntegerField(source="stage.stage_number", read_only=True)
    test = RecordRefOut(source="stage.test", read_only=True)
    specimen = RecordRefOut(source="stage.specimen", read_only=True)

    class Meta:
        model = StageResult
        fields = [*STAGE_RESULT_FIELDS, "stage_number", "test", "specimen"]

    def to_representation(self, instance: StageResult | dict[str, Any]) -> dict[str, Any]:
        # Result lists are the API's heaviest read (up to 200 rows of ~35 fields joined to three
        # tables). The list reads ``values()`` rows (see ``ROW_COLUMNS``) and this builds the same
        # output as the declared fields give, without one field object per value
        # (tests/api/test_representations.py checks the three paths agree).
        if isinstance(instance, dict):
            row = instance
            data = {name: row[name] for name in STAGE_RESULT_FIELDS}
            data["created_at"] = _DATETIME.to_representation(row["created_at"])
            data["stage_number"] = row["stage__stage_number"]
            data["test"] = {"id": row["stage__test_id"], "reference": row["stage__test__reference"]}
            data["specimen"] = {
                "id": row["stage__specimen_id"],
                "reference": row["stage__specimen__reference"],
            }
            return data
        data = {}
        for name in STAGE_RESULT_FIELDS:
            if name in _ID_FIELDS:
                data[name] = getattr(instance, f"{name}_id")
            elif name == "created_at":
                data[name] = _DATETIME.to_representation(instance.created_at)
            else:
                data[name] = getattr(instance, name)
        stage = instance.stage
        data["stage_number"] = stage.stage_number
        data["test"] = {"id": stage.test_id, "reference": stage.test.reference}
        data["specimen"] = {"id": stage.specimen_id, "reference": stage.specimen.reference}
        return data


# The columns a result list reads with values(): the result's own fields and the related ones.
ROW_COLUMNS = [
    *STAGE_RESULT_FIELDS,
    "stage__stage_number",
    "stage__test_id",
    "stage__test__reference",
    "stage__specimen_id",
    "stage__specimen__reference",
]
_ID_FIELDS = frozenset({"run", "stage"})


class EnvelopeResultOut(OutputSerializer):
    """One envelope fit of a test set. Interpretation (``characteristic``) is labelled as such."""

    project = serializers.IntegerField(source="test.project_id", read_only=True)
    test_reference = serializers.CharField(source="test.reference", read_only=True)

    class Meta:
        model = EnvelopeResult
        fields = [
            "id",
            "run",
            "test",
            "test_reference",
            "project",
            "envelope_type",
            "analysis_version",
            "inputs_hash",
            "created_at",
            "fit_method",
            "through_origin",
            "points",
            "n",
            "cohesion_kpa",
            "friction_angle_deg",
            "tan_phi",
            "stderr_cohesion_kpa",
            "stderr_tan_phi",
            "cohesion_ci95_low_kpa",
            "cohesion_ci95_high_kpa",
            "friction_angle_ci95_low_deg",
            "friction_angle_ci95_high_deg",
            "corr_cohesion_tan_phi",
            "r_squared",
            "r_squared_kind",
            "normal_stress_min_kpa",
            "normal_stress_max_kpa",
            "through_origin_alternative",
            "warnings",
            "characteristic",
        ]


class RecomputeIn(serializers.Serializer):
    reason = serializers.CharField(max_length=200, help_text="Why the results are recomputed.")


class RecomputeOut(serializers.Serializer):
    runs = ComputationRunOut(many=True, read_only=True, help_text="The runs queued, one per stage.")


class StageExclusionIn(serializers.Serializer):
    envelope_type = serializers.ChoiceField(choices=EnvelopeType.choices)
    reason = serializers.CharField(max_length=2000, required=False, allow_blank=True)


@extend_schema_serializer(many=False)
class ThroughputOut(serializers.Serializer):
    """Samples the caller may see, per lifecycle state, plus those open and past their due date."""

    counts = serializers.DictField(
        child=serializers.IntegerField(),
        help_text="Samples per state: " + ", ".join(SampleStatus.values) + ".",
    )
    overdue = serializers.IntegerField(help_text="Open samples past their due date.")
    total = serializers.IntegerField()
