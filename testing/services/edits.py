"""Changing lab records after they were created, each change one history row (actor, UTC time,
the record before and after, the reason).

Rules: nothing about a specimen or stage changes once its test set is released to the client; a
change to a stage's loading or force conversion, or to a specimen's dimensions or masses, needs a
reason once the stage has results (and asks for the stage to be reduced again). A save that
changes nothing writes nothing.
"""

from __future__ import annotations

from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db import models, transaction

from testing import access
from testing.models import (
    Borehole,
    Organisation,
    Project,
    Sample,
    ShearStage,
    Specimen,
    StageResult,
)
from testing.models.audit import acting
from testing.selectors_readings import has_shear_readings
from testing.services.errors import NotAllowed, ServiceError

# Inputs of the stage reduction: changing them once there are results needs a reason.
SPECIMEN_REASON_FIELDS = frozenset(
    {
        "shape",
        "length_mm",
        "width_mm",
        "diameter_mm",
        "height_mm",
        "initial_mass_g",
        "final_mass_g",
        "dry_mass_g",
    }
)
STAGE_REASON_FIELDS = frozenset(
    {
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
        "force_calibration",
    }
)
# What a record hangs from (and the sample's lifecycle) is not changed by an edit.
_FIXED = frozenset(
    {"id", "sample", "test", "specimen", "organisation", "project", "borehole", "received_by"}
)


def _editable_fields(model: type[models.Model]) -> frozenset[str]:
    return frozenset(
        f.name
        for f in model._meta.concrete_fields
        if f.editable and not f.primary_key and f.name not in _FIXED
    )


def _apply(instance: models.Model, fields: dict[str, Any]) -> set[str]:
    """Set the fields that differ; returns their names. Unknown or fixed fields are refused."""
    allowed = _editable_fields(type(instance))
    refused = sorted(set(fields) - allowed)
    if refused:
        raise ServiceError(
            f"These fields of {instance._meta.verbose_name} cannot be changed here: "
            f"{', '.join(refused)}."
        )
    changed = set()
    for name, value in fields.items():
        if getattr(instance, name) != value:
            setattr(instance, name, value)
            changed.add(name)
    return changed


def _save(instance: models.Model, *, user: User, reason: str) -> None:
    try:
        instance.full_clean()
    except ValidationError as exc:
        raise ServiceError("; ".join(exc.messages)) from exc
    with acting(user, reason):
        instance.save()


def _copy_back(target: models.Model, source: models.Model, names: set[str]) -> None:
    for name in names:
        setattr(target, name, getattr(source, name))


def _request_reduction(stage: ShearStage, *, user: User, reason: str) -> None:
    """Reduce the stage again when it has something to reduce."""
    if has_shear_readings(stage.pk):
        from testing.services.computation import stage_reduction_request

        stage_reduction_request(stage=stage, user=user, reason=reason)


def specimen_update(*, specimen: Specimen, user: User, reason: str = "", **fields: Any) -> Specimen:
    if not access.can_receive_samples(user):
        raise NotAllowed("Only technicians and the lab manager can change a specimen.")
    reason = reason.strip()
    with transaction.atomic():
        locked = Specimen.objects.select_for_update().get(pk=specimen.pk)
        stage = ShearStage.objects.select_related("test").filter(specimen=locked).first()
        if stage is not None and stage.test.released_at is not None:
            raise ServiceError("This test set has been reported; its specimens cannot change.")
        changed = _apply(locked, fields)
        if not changed:
            return specimen
        inputs = changed & SPECIMEN_REASON_FIELDS
        if (
            inputs
            and stage is not None
            and not reason
            and StageResult.objects.filter(stage=stage).exists()
        ):
            raise ServiceError(
                f"Give the reason for changing the dimensions or masses of specimen "
                f"{locked.reference}: stage {stage.stage_number} already has results."
            )
        _save(locked, user=user, reason=reason)
        if inputs and stage is not None:
            _request_reduction(stage, user=user, reason=f"specimen changed: {reason or 'edited'}")
    _copy_back(specimen, locked, changed)
    return specimen


def stage_update(*, stage: ShearStage, user: User, reason: str = "", **fields: Any) -> ShearStage:
    if not access.can_enter_readings(user):
        raise NotAllowed("Only technicians and the lab manager can change a stage.")
    reason = reason.strip()
    with transaction.atomic():
        locked = ShearStage.objects.select_for_update().select_related("test").get(pk=stage.pk)
        if locked.test.released_at is not None:
            raise ServiceError("This test set has been reported; its stages cannot change.")
        changed = _apply(locked, fields)
        if not changed:
            return stage
        inputs = changed & STAGE_REASON_FIELDS
        if inputs and not reason and StageResult.objects.filter(stage=locked).exists():
            raise ServiceError(
                f"Give the reason for changing the loading or force conversion of stage "
                f"{locked.stage_number}: it already has results."
            )
        _save(locked, user=user, reason=reason)
        if inputs:
            _request_reduction(locked, user=user, reason=f"stage changed: {reason or 'edited'}")
    _copy_back(stage, locked, changed)
    return stage


_RECORD_ROLES = {
    Organisation: (access.can_manage, "Only the lab manager can change a client organisation."),
    Project: (access.can_manage, "Only the lab manager can change a project."),
    Borehole: (
        access.can_receive_samples,
        "Only technicians and the lab manager can change a borehole.",
    ),
    Sample: (
        access.can_receive_samples,
        "Only technicians and the lab manager can change a sample.",
    ),
}


def record_update(
    *,
    record: Organisation | Project | Borehole | Sample,
    user: User,
    reason: str = "",
    **fields: Any,
) -> Organisation | Project | Borehole | Sample:
    """Change an organisation's, project's, borehole's or sample's details (a sample's status
    moves only through the lifecycle service)."""
    allowed, refusal = _RECORD_ROLES[type(record)]
    if not allowed(user):
        raise NotAllowed(refusal)
    with transaction.atomic():
        locked = type(record)._default_manager.select_for_update().get(pk=record.pk)
        changed = _apply(locked, fields)
        if not changed:
            return record
        _save(locked, user=user, reason=reason.strip())
    _copy_back(record, locked, changed)
    return record
