"""The equipment register: shear machines, force devices, their calibration certificates and
displacement gauges (lab staff only; the lab manager adds records)."""

from __future__ import annotations

from rest_framework import serializers

from testing.api.fields import ScopedRelatedField, lab_wide
from testing.api.serializers.base import InputSerializer, OutputSerializer
from testing.models import Apparatus, CalibrationRecord, DisplacementGauge, ForceDevice

APPARATUS_FIELDS = [
    "reference",
    "description",
    "serial_number",
    "box_shape",
    "box_length_mm",
    "box_width_mm",
    "lever_ratio",
    "hanger_mass_kg",
    "beam_offset_force_n",
    "mass_tolerance_pct",
    "lever_ratio_tolerance",
    "box_dimension_tolerance_mm",
    "verified_on",
    "verification_due_on",
    "is_active",
]
FORCE_DEVICE_FIELDS = [
    "reference",
    "kind",
    "serial_number",
    "capacity_n",
    "reading_unit",
    "resolution",
    "apparatus",
    "is_active",
]
CALIBRATION_FIELDS = [
    "device",
    "certificate_number",
    "issuing_lab",
    "accreditation",
    "calibrated_on",
    "due_on",
    "model",
    "coefficients",
    "zero_reading",
    "range_min",
    "range_max",
    "expanded_uncertainty_n",
    "coverage_factor_k",
    "notes",
]
GAUGE_FIELDS = [
    "reference",
    "kind",
    "axis",
    "serial_number",
    "factor_mm_per_unit",
    "range_mm",
    "apparatus",
    "calibrated_on",
    "due_on",
    "certificate_number",
    "is_active",
]


class ApparatusOut(OutputSerializer):
    class Meta:
        model = Apparatus
        fields = ["id", *APPARATUS_FIELDS]


class ApparatusIn(InputSerializer):
    class Meta:
        model = Apparatus
        fields = APPARATUS_FIELDS


class ForceDeviceOut(OutputSerializer):
    class Meta:
        model = ForceDevice
        fields = ["id", *FORCE_DEVICE_FIELDS]


class _OnApparatusIn(InputSerializer):
    """A device that may be fitted to one of the lab's shear machines."""

    apparatus = ScopedRelatedField(model=Apparatus, scope=lab_wide, required=False, allow_null=True)


class ForceDeviceIn(_OnApparatusIn):
    class Meta:
        model = ForceDevice
        fields = FORCE_DEVICE_FIELDS


class CalibrationOut(OutputSerializer):
    device_reference = serializers.CharField(source="device.reference", read_only=True)

    class Meta:
        model = CalibrationRecord
        fields = ["id", *CALIBRATION_FIELDS, "device_reference", "created_at"]


class CalibrationIn(InputSerializer):
    """A calibration certificate. Coefficients: linear [K] in N per reading unit; polynomial
    [a0, a1, a2(, a3)] ascending, in N, N/unit, N/unit², N/unit³."""

    device = ScopedRelatedField(model=ForceDevice, scope=lab_wide)
    coefficients = serializers.ListField(
        child=serializers.FloatField(min_value=-1e12, max_value=1e12),
        min_length=1,
        max_length=4,
        help_text="Linear: [K] [N/unit]. Polynomial: [a0, a1, a2(, a3)] [N, N/unit, N/unit², …].",
    )

    class Meta:
        model = CalibrationRecord
        fields = CALIBRATION_FIELDS


class GaugeOut(OutputSerializer):
    class Meta:
        model = DisplacementGauge
        fields = ["id", *GAUGE_FIELDS]


class GaugeIn(_OnApparatusIn):
    class Meta:
        model = DisplacementGauge
        fields = GAUGE_FIELDS
