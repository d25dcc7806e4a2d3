"""The equipment register (lab staff read; the lab manager adds records through the services).

Records change only through ``testing.services.equipment`` (audited); there is no update or delete.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from django.db.models import Model, QuerySet
from drf_spectacular.utils import extend_schema, extend_schema_view

from testing.api import filters, scoping
from testing.api.permissions import LabAccess, LabStaffOnly
from testing.api.serializers import equipment as s
from testing.api.views.base import CreateViaServiceMixin, RecordViewSet
from testing.models import Apparatus, CalibrationRecord, DisplacementGauge, ForceDevice
from testing.services import equipment


class _EquipmentViewSet(CreateViaServiceMixin, RecordViewSet):
    """Lists ``model`` for lab staff in ``order``; ``POST`` calls ``create_service``."""

    permission_classes = [LabAccess, LabStaffOnly]
    ordering_fields = ["reference"]
    model: type[Model]
    order: tuple[str, ...] = ("reference", "id")
    create_service: Callable[..., Model]

    def scoped_queryset(self) -> QuerySet[Any]:
        return scoping.equipment(self.request.user, self.model).order_by(*self.order)

    def perform_service(self, data: dict[str, Any]) -> Model:
        return type(self).create_service(user=self.acting_user, **data)


@extend_schema_view(create=extend_schema(request=s.ApparatusIn, responses={201: s.ApparatusOut}))
class ApparatusViewSet(_EquipmentViewSet):
    """Shear machines: box size, lever and hanger, verification dates."""

    model = Apparatus
    create_service = staticmethod(equipment.apparatus_create)
    serializer_class = s.ApparatusOut
    input_serializer_class = s.ApparatusIn
    filterset_class = filters.ApparatusFilter


@extend_schema_view(
    create=extend_schema(request=s.ForceDeviceIn, responses={201: s.ForceDeviceOut})
)
class ForceDeviceViewSet(_EquipmentViewSet):
    """Proving rings and load cells; their calibrations turn readings into force."""

    model = ForceDevice
    create_service = staticmethod(equipment.force_device_create)
    serializer_class = s.ForceDeviceOut
    input_serializer_class = s.ForceDeviceIn
    filterset_class = filters.ForceDeviceFilter


@extend_schema_view(
    create=extend_schema(request=s.CalibrationIn, responses={201: s.CalibrationOut})
)
class CalibrationViewSet(_EquipmentViewSet):
    """Calibration certificates of force devices, newest first per device."""

    model = CalibrationRecord
    order = ("device__reference", "-calibrated_on", "-id")
    create_service = staticmethod(equipment.calibration_record_create)
    serializer_class = s.CalibrationOut
    input_serializer_class = s.CalibrationIn
    filterset_class = filters.CalibrationFilter
    ordering_fields = ["calibrated_on", "due_on"]

    def scoped_queryset(self) -> QuerySet[Any]:
        return super().scoped_queryset().select_related("device")


@extend_schema_view(create=extend_schema(request=s.GaugeIn, responses={201: s.GaugeOut}))
class GaugeViewSet(_EquipmentViewSet):
    """Dial gauges and displacement transducers with their factors and calibration dates."""

    model = DisplacementGauge
    create_service = staticmethod(equipment.gauge_create)
    serializer_class = s.GaugeOut
    input_serializer_class = s.GaugeIn
    filterset_class = filters.GaugeFilter
