"""The querysets the API lists from, each filtered through ``testing.access`` or a selector.

Clients see results only as released: rows of a released test set written at or before its
release. A recompute after release adds rows a client does not see until a report issues them.
"""

from __future__ import annotations

from typing import TypeVar

from django.db.models import F, Model, QuerySet

from testing import access
from testing.access import AnyUser
from testing.models import (
    Borehole,
    ComputationRun,
    DirectShearTest,
    EnvelopeResult,
    Organisation,
    ShearStage,
    Specimen,
    StageResult,
)

EquipmentModel = TypeVar("EquipmentModel", bound=Model)


def organisations(user: AnyUser) -> QuerySet[Organisation]:
    if not access.is_lab_staff(user):
        return Organisation.objects.none()
    return Organisation.objects.order_by("name", "id")


def boreholes(user: AnyUser) -> QuerySet[Borehole]:
    return Borehole.objects.filter(access.borehole_filter(user)).select_related("project")


def specimens(user: AnyUser) -> QuerySet[Specimen]:
    return Specimen.objects.filter(access.specimen_filter(user))


def stages(user: AnyUser) -> QuerySet[ShearStage]:
    return ShearStage.objects.filter(access.stage_filter(user))


def runs(user: AnyUser) -> QuerySet[ComputationRun]:
    if not access.is_lab_staff(user):
        return ComputationRun.objects.none()
    return ComputationRun.objects.all()


def stage_results(user: AnyUser) -> QuerySet[StageResult]:
    queryset = StageResult.objects.filter(stage__in=stages(user))
    if not access.is_lab_staff(user):
        queryset = queryset.filter(created_at__lte=F("stage__test__released_at"))
    return queryset


def envelopes(user: AnyUser) -> QuerySet[EnvelopeResult]:
    queryset = EnvelopeResult.objects.filter(
        test__in=DirectShearTest.objects.filter(access.test_filter(user))
    )
    if not access.is_lab_staff(user):
        queryset = queryset.filter(created_at__lte=F("test__released_at"))
    return queryset


def equipment(user: AnyUser, model: type[EquipmentModel]) -> QuerySet[EquipmentModel]:
    """The equipment register is lab staff's; clients see none of it."""
    if not access.is_lab_staff(user):
        return model._default_manager.none()
    return model._default_manager.all()
