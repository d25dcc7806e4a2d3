"""Setting up a direct shear test set, its stages, and storing a stage's readings."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from django.contrib.auth.models import User
from django.db import transaction

from testing import access
from testing.models import (
    ConsolidationReading,
    DirectShearTest,
    Project,
    ShearReadingBlock,
    ShearStage,
    Specimen,
)
from testing.models.audit import ReadingsSource, acting
from testing.models.direct_shear import DEFAULT_EDITIONS, MethodProfile
from testing.selectors_readings import ShearColumns
from testing.services.errors import NotAllowed, ServiceError
from testing.services.readings_audit import readings_change_record, readings_state, rows_state
from testing.services.readings_store import write_shear_columns


def _require_technician(user: User) -> None:
    if not access.can_enter_readings(user):
        raise NotAllowed(
            "Only technicians and the lab manager can set up tests and enter readings."
        )


def shear_test_create(
    *, user: User, project: Project, reference: str, method: str, **fields: Any
) -> DirectShearTest:
    _require_technician(user)
    fields.setdefault("method_edition", DEFAULT_EDITIONS[MethodProfile(method)])
    test = DirectShearTest(
        project=project, reference=reference, method=method, created_by=user, **fields
    )
    test.full_clean()
    with acting(user):
        test.save()
    return test


def stage_create(
    *,
    user: User,
    test: DirectShearTest,
    specimen: Specimen,
    stage_number: int,
    **fields: Any,
) -> ShearStage:
    _require_technician(user)
    if specimen.sample.borehole.project_id != test.project_id:
        raise ServiceError("The specimen comes from another project than the test set.")
    if test.released_at is not None:
        raise ServiceError("This test set has been reported; its stages cannot change.")
    stage = ShearStage(test=test, specimen=specimen, stage_number=stage_number, **fields)
    stage.full_clean()
    with acting(user):
        stage.save()
    return stage


def stage_readings_store(
    *,
    user: User,
    stage: ShearStage,
    consolidation: Sequence[tuple[float, float]] = (),
    shear: Sequence[tuple[int, int, float, float, float, float]] = (),
    reason: str = "",
) -> tuple[int, int]:
    """Replace a stage's readings in one transaction, with one audit row (counts and digests
    before and after, ``reason``).

    ``consolidation`` rows are (elapsed_min, settlement_mm); ``shear`` rows are
    (traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading). Returns the counts saved.
    """
    _require_technician(user)
    if stage.test.released_at is not None:
        raise ServiceError("This test set has been reported; its readings cannot change.")
    with transaction.atomic():
        before = readings_state(stage.pk)
        ConsolidationReading.objects.filter(stage=stage).delete()
        ShearReadingBlock.objects.filter(stage=stage).delete()
        ConsolidationReading.objects.bulk_create(
            [
                ConsolidationReading(stage=stage, elapsed_min=t, settlement_mm=s)
                for t, s in consolidation
            ],
            batch_size=2000,
        )
        if shear:
            table = np.asarray(shear, dtype=np.float64).reshape(len(shear), 6)
            write_shear_columns(
                stage.pk,
                ShearColumns(
                    table[:, 0].astype(np.int64),
                    table[:, 1].astype(np.int64),
                    *(table[:, k] for k in range(2, 6)),
                ),
            )
        readings_change_record(
            stage=stage,
            user=user,
            source=ReadingsSource.STORED,
            before=before,
            after=rows_state(consolidation, shear),
            reason=reason,
        )
    return len(consolidation), len(shear)
