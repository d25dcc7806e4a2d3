"""A new certificate for a force device moves every unreported stage tested with that device onto
the certificate in force on its test date and reduces it again; a reported set stays as issued.
The API links a stage to the device its readings were taken with."""

from __future__ import annotations

from datetime import UTC, date, datetime
from typing import Any

import pytest
from rest_framework.test import APIClient

from testing.models import ComputationRun, DirectShearTest, ShearStage
from testing.services.equipment import calibration_record_create, stage_calibration_link
from tests.conftest import Cast, Records
from tests.equipment.test_equipment import _ring
from tests.importers.conftest import make_stage

pytestmark = pytest.mark.django_db


def _stage_tested_on(cast: Cast, records: Records, number: int, day: date) -> ShearStage:
    return make_stage(
        cast, records, number, force_unit="div",
        shear_started_at=datetime(day.year, day.month, day.day, 9, tzinfo=UTC),
    )  # fmt: skip


def _new_certificate(cast: Cast, ring: Any) -> Any:
    return calibration_record_create(
        user=cast.manager, device=ring, certificate_number="C-2026", issuing_lab="Invented Cal Lab",
        calibrated_on=date(2026, 3, 2), due_on=date(2027, 3, 2), model="linear",
        coefficients=[1.50], zero_reading=2.0, range_min=0.0, range_max=750.0,
    )  # fmt: skip


def test_a_new_certificate_relinks_open_stages_and_reduces_them_again(
    cast: Cast, records_a: Records
) -> None:
    ring = _ring(cast)  # certificates C-2024 and C-2025 (due 2026-03-03)
    stage = _stage_tested_on(cast, records_a, 1, date(2026, 5, 1))
    stage_calibration_link(user=cast.technician, stage=stage, device=ring)
    stage.refresh_from_db()
    assert stage.force_calibration.certificate_number == "C-2025"  # type: ignore[union-attr]  # expired
    ComputationRun.objects.filter(stage=stage).update(state="succeeded")  # the worker did them
    runs_before = ComputationRun.objects.filter(stage=stage).count()

    _new_certificate(cast, ring)
    stage.refresh_from_db()
    assert stage.force_calibration.certificate_number == "C-2026"  # type: ignore[union-attr]
    runs = ComputationRun.objects.filter(stage=stage).order_by("id")
    assert runs.count() == runs_before + 1
    assert "C-2026" in runs.last().reason  # type: ignore[union-attr]


def test_a_stage_tested_outside_the_new_dates_keeps_its_certificate(
    cast: Cast, records_a: Records
) -> None:
    ring = _ring(cast)
    earlier = _stage_tested_on(cast, records_a, 1, date(2025, 6, 1))
    stage_calibration_link(user=cast.technician, stage=earlier, device=ring)
    _new_certificate(cast, ring)  # covers 2026-03-02 to 2027-03-02 only
    earlier.refresh_from_db()
    assert earlier.force_calibration.certificate_number == "C-2025"  # type: ignore[union-attr]


def test_a_reported_set_keeps_the_certificate_it_was_issued_with(
    cast: Cast, records_a: Records
) -> None:
    ring = _ring(cast)
    reported = _stage_tested_on(cast, records_a, 1, date(2026, 5, 1))
    stage_calibration_link(user=cast.technician, stage=reported, device=ring)
    DirectShearTest.objects.filter(pk=reported.test_id).update(released_at=datetime.now(UTC))
    _new_certificate(cast, ring)
    reported.refresh_from_db()
    assert reported.force_calibration.certificate_number == "C-2025"  # type: ignore[union-attr]


def test_the_api_links_a_stage_to_its_force_device(cast: Cast, records_a: Records) -> None:
    ring = _ring(cast)
    stage = _stage_tested_on(cast, records_a, 1, date(2026, 5, 1))
    technician, checker = APIClient(), APIClient()
    technician.force_authenticate(cast.technician)
    checker.force_authenticate(cast.checker)
    url = f"/api/v1/stages/{stage.pk}/force-calibration/"
    answer = technician.post(url, {"device": ring.pk}, format="json")
    assert answer.status_code == 200, answer.content
    body = answer.json()
    assert body["certificate_number"] == "C-2025"
    assert body["valid_on_test_date"] is False  # expired on 2026-03-03: flagged, blocks approval
    on_time = technician.post(url, {"device": ring.pk, "on": "2025-06-01"}, format="json")
    assert on_time.json()["valid_on_test_date"] is True
    assert checker.post(url, {"device": ring.pk}, format="json").status_code == 403
    missing = technician.post(url, {"device": 987654}, format="json")
    assert missing.status_code == 400 and "device" in missing.json()["errors"]
