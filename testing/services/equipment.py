"""The equipment register: create records, link a stage to the calibration in force, and the two
functions the computation adapter calls — the stage's force calibration and its calibration flags."""

from __future__ import annotations

import datetime as dt
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db import transaction

from testing import access
from testing.analysis import (
    AnalysisError,
    Flag,
    LinearCalibration,
    PolynomialCalibration,
    check_calibration_valid,
)
from testing.models import (
    Apparatus,
    CalibrationRecord,
    DisplacementGauge,
    ForceDevice,
    ForceUnit,
    ShearStage,
)
from testing.models.audit import acting
from testing.selectors_readings import shear_force_span
from testing.services.errors import NotAllowed, ServiceError


def _require_manager(user: User) -> None:
    if not access.can_manage(user):
        raise NotAllowed("Only the lab manager can change the equipment register.")


def _save(obj: Any, user: User) -> None:
    try:
        obj.full_clean()
    except ValidationError as exc:
        raise ServiceError("; ".join(exc.messages)) from exc
    with acting(user):
        obj.save()


def apparatus_create(*, user: User, reference: str, **fields: Any) -> Apparatus:
    _require_manager(user)
    apparatus = Apparatus(reference=reference, **fields)
    _save(apparatus, user)
    return apparatus


def force_device_create(*, user: User, reference: str, kind: str, **fields: Any) -> ForceDevice:
    _require_manager(user)
    device = ForceDevice(reference=reference, kind=kind, **fields)
    _save(device, user)
    return device


def gauge_create(*, user: User, reference: str, **fields: Any) -> DisplacementGauge:
    _require_manager(user)
    gauge = DisplacementGauge(reference=reference, **fields)
    _save(gauge, user)
    return gauge


def calibration_record_create(
    *, user: User, device: ForceDevice, certificate_number: str, **fields: Any
) -> CalibrationRecord:
    """Add a calibration certificate; the model and coefficients must make a usable calibration."""
    _require_manager(user)
    record = CalibrationRecord(
        device=device, certificate_number=certificate_number, created_by=user, **fields
    )
    if record.calibrated_on and record.due_on and record.due_on < record.calibrated_on:
        raise ServiceError("The due date is before the calibration date.")
    try:
        record.as_analysis()
    except (AnalysisError, TypeError, ValueError) as exc:
        raise ServiceError(f"Calibration {certificate_number}: {exc}") from exc
    with transaction.atomic():
        _save(record, user)
        stages_relink(user=user, device=device)
    return record


def stages_relink(*, user: User, device: ForceDevice) -> list[ShearStage]:
    """Point every stage of an unreported test set that uses ``device`` at the certificate in
    force on its test date, now that a certificate was added; each stage whose certificate
    changes is reduced again. Returns those stages."""
    from testing.services.imports import request_stage_reduction

    changed = []
    stages = ShearStage.objects.filter(
        force_calibration__device=device, test__released_at__isnull=True
    ).select_related("force_calibration", "test")
    for stage in stages:
        when = stage_test_date(stage)
        record = calibration_in_force(device=device, on=when) if when is not None else None
        if record is None or record.pk == stage.force_calibration_id:
            continue
        with acting(user, f"force calibration {record.certificate_number}"):
            stage.force_calibration = record
            stage.save(update_fields=["force_calibration"])
        request_stage_reduction(
            stage=stage, user=user, reason=f"force calibration {record.certificate_number} added"
        )
        changed.append(stage)
    return changed


def calibration_in_force(*, device: ForceDevice, on: dt.date) -> CalibrationRecord | None:
    """The certificate covering ``on`` (the latest if several); else the latest issued before
    ``on`` — expired, which the stage's flags then report; None if none was issued before it."""
    issued = CalibrationRecord.objects.filter(device=device, calibrated_on__lte=on).order_by(
        "-calibrated_on", "-id"
    )
    return issued.filter(due_on__gte=on).first() or issued.first()


def stage_test_date(stage: ShearStage) -> dt.date | None:
    """The day the stage was tested: shearing start, else consolidation start."""
    moment = stage.shear_started_at or stage.consolidation_started_at
    return moment.date() if moment is not None else None


def stage_calibration_link(
    *, user: User, stage: ShearStage, device: ForceDevice, on: dt.date | None = None
) -> CalibrationRecord:
    """Point the stage at ``device``'s calibration in force on its test date (``on`` overrides).

    An expired calibration is linked all the same — the readings were taken with it — and the
    stage then carries an error flag that blocks approval.
    """
    if not access.can_enter_readings(user):
        raise NotAllowed("Only technicians and the lab manager can set up stages.")
    if stage.test.released_at is not None:
        raise ServiceError("This test set has been reported; its stages cannot change.")
    when = on or stage_test_date(stage)
    if when is None:
        raise ServiceError(
            "The stage has no test date yet: record when shearing started, or give the date."
        )
    record = calibration_in_force(device=device, on=when)
    if record is None:
        raise ServiceError(
            f"{device.reference} has no calibration dated on or before {when.isoformat()}."
        )
    with transaction.atomic(), acting(user, f"force calibration {record.certificate_number}"):
        stage.force_calibration = record
        stage.save(update_fields=["force_calibration"])
        from testing.services.imports import request_stage_reduction

        request_stage_reduction(stage=stage, user=user, reason="force calibration changed")
    return record


def stage_force_calibration(stage: ShearStage) -> LinearCalibration | PolynomialCalibration:
    """How the stage's stored force readings become newtons.

    With a calibration record: the certificate's model, zero and calibrated range (a reading
    outside the range makes ``force_n`` raise ``CalibrationRangeError``; the stage's flags also
    report it). Without one: the stage's own factor and zero reading, with no range limit.
    """
    record = stage.force_calibration
    if record is not None:
        return record.as_analysis()
    in_newtons = stage.force_unit == ForceUnit.NEWTON
    return LinearCalibration(
        factor_n_per_unit=stage.force_factor_n_per_unit,
        zero_reading=stage.force_zero_reading,
        unit="N" if in_newtons else "div",
        device="load cell" if in_newtons else "ring",
    )


def stage_calibration_flags(stage: ShearStage, test_date: dt.date | None) -> list[Flag]:
    """QA flags from the equipment register: expired or not-yet-valid calibration, readings
    outside the calibrated range, a device reading in other units than the stage, and an
    apparatus past its verification date. Every error-severity flag blocks approval."""
    flags: list[Flag] = []
    record = stage.force_calibration
    if record is not None:
        device = f"{record.device.get_kind_display().lower()} {record.device.reference} (certificate {record.certificate_number})"
        if test_date is not None:
            flag = check_calibration_valid(
                test_date, calibrated_on=record.calibrated_on, due_date=record.due_on, device=device
            )
            if flag is not None:
                flags.append(flag)
        span = shear_force_span(stage.pk)
        low, high = span if span is not None else (None, None)
        if (
            low is not None
            and high is not None
            and (low < record.range_min or high > record.range_max)
        ):
            unit = record.device.reading_unit
            flags.append(
                Flag(
                    "CALIBRATION_OUT_OF_RANGE",
                    "error",
                    f"Force readings run from {low:g} to {high:g} {unit}, outside the calibrated "
                    f"range {record.range_min:g}–{record.range_max:g} {unit} of {device}",
                    {
                        "reading_min": float(low),
                        "reading_max": float(high),
                        "range_min": float(record.range_min),
                        "range_max": float(record.range_max),
                    },
                )
            )
        stage_unit = "div" if stage.force_unit == ForceUnit.DIVISIONS else "N"
        if record.device.reading_unit != stage_unit:
            flags.append(
                Flag(
                    "CALIBRATION_UNIT_MISMATCH",
                    "error",
                    f"The stage records force in {stage_unit} but {device} reads in "
                    f"{record.device.reading_unit}",
                )
            )
    apparatus = stage.test.apparatus_record
    if (
        apparatus is not None
        and test_date is not None
        and apparatus.verified_on is not None
        and apparatus.verification_due_on is not None
    ):
        flag = check_calibration_valid(
            test_date,
            calibrated_on=apparatus.verified_on,
            due_date=apparatus.verification_due_on,
            device=f"apparatus {apparatus.reference} (lever ratio and masses)",
        )
        if flag is not None:
            flags.append(flag)
    return flags


def calibrations_due(*, on: dt.date, within_days: int = 30) -> list[CalibrationRecord]:
    """Each active device's latest certificate that has expired or expires within the window."""
    latest: list[CalibrationRecord] = []
    for device in ForceDevice.objects.filter(is_active=True):
        record = device.calibrations.order_by("-calibrated_on", "-id").first()
        if record is not None and record.due_on <= on + dt.timedelta(days=within_days):
            latest.append(record)
    return latest


__all__ = [
    "apparatus_create",
    "calibration_in_force",
    "calibration_record_create",
    "calibrations_due",
    "force_device_create",
    "gauge_create",
    "stage_calibration_flags",
    "stage_calibration_link",
    "stage_force_calibration",
    "stage_test_date",
]
