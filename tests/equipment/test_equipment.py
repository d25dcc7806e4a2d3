"""Equipment register: the calibration in force, force from a certificate, and the QA flags that
block approval (expired, not yet valid, out of range); plus the demo's logger files."""

from __future__ import annotations

from datetime import UTC, date, datetime
from io import StringIO
from typing import Any

import numpy as np
import pytest
from django.core.management import call_command

from testing.models import (
    CalibrationRecord,
    ConsolidationReading,
    ImportState,
    ReadingImport,
    ShearStage,
)
from testing.selectors_readings import ShearColumns, shear_columns, shear_reading_count
from testing.services.direct_shear import stage_reduction_compute
from testing.services.equipment import (
    calibration_in_force,
    calibration_record_create,
    force_device_create,
    stage_calibration_flags,
    stage_calibration_link,
    stage_force_calibration,
)
from testing.services.errors import NotAllowed, ServiceError
from testing.services.readings_store import write_shear_columns
from tests.conftest import Cast, Records
from tests.importers.conftest import make_stage

pytestmark = pytest.mark.django_db


def _ring(cast: Cast) -> Any:
    ring = force_device_create(
        user=cast.manager, reference="PR-07", kind="ring", capacity_n=4500.0, reading_unit="div"
    )
    for number, on, due, k in (
        ("C-2024", date(2024, 3, 1), date(2025, 3, 1), 1.49),
        ("C-2025", date(2025, 3, 3), date(2026, 3, 3), 1.52),
    ):
        calibration_record_create(
            user=cast.manager, device=ring, certificate_number=number, issuing_lab="Invented Cal Lab",
            calibrated_on=on, due_on=due, model="linear", coefficients=[k], zero_reading=2.0,
            range_min=0.0, range_max=750.0,
        )  # fmt: skip
    return ring


def test_the_calibration_in_force_is_the_one_covering_the_date(cast: Cast) -> None:
    ring = _ring(cast)
    assert calibration_in_force(device=ring, on=date(2024, 6, 1)).certificate_number == "C-2024"  # type: ignore[union-attr]
    assert calibration_in_force(device=ring, on=date(2025, 6, 1)).certificate_number == "C-2025"  # type: ignore[union-attr]
    # After the last due date the latest (expired) one is returned, for the flag to report.
    assert calibration_in_force(device=ring, on=date(2026, 6, 1)).certificate_number == "C-2025"  # type: ignore[union-attr]
    assert calibration_in_force(device=ring, on=date(2023, 1, 1)) is None


def test_linear_certificate_gives_f_equals_k_times_r_minus_r0(
    cast: Cast, records_a: Records
) -> None:
    ring = _ring(cast)
    stage = make_stage(
        cast, records_a, 1, force_unit="div", force_factor_n_per_unit=9.9,
        shear_started_at=datetime(2025, 6, 2, 9, tzinfo=UTC),
    )  # fmt: skip
    stage_calibration_link(user=cast.technician, stage=stage, device=ring)
    stage.refresh_from_db()
    # F = K·(R − R0) (proving-ring "mean calibration"; BS 1377-7 data-sheet form, from memory).
    force = stage_force_calibration(stage).force_n([2.0, 102.0, 502.0])
    np.testing.assert_allclose(force, [0.0, 152.0, 760.0])
    assert stage_calibration_flags(stage, date(2025, 6, 2)) == []


def test_stage_without_a_record_falls_back_to_its_own_factor(
    cast: Cast, records_a: Records
) -> None:
    stage = make_stage(
        cast, records_a, 1, force_unit="div", force_factor_n_per_unit=1.5, force_zero_reading=4.0
    )
    np.testing.assert_allclose(stage_force_calibration(stage).force_n([104.0]), [150.0])
    assert stage_calibration_flags(stage, date(2025, 1, 1)) == []


def test_expired_and_out_of_range_calibrations_are_error_flags(
    cast: Cast, records_a: Records
) -> None:
    ring = _ring(cast)
    stage = make_stage(cast, records_a, 1, force_unit="div")
    stage_calibration_link(user=cast.technician, stage=stage, device=ring, on=date(2026, 5, 1))
    stage.refresh_from_db()
    write_shear_columns(
        stage.pk,
        ShearColumns(
            traverse=np.array([1, 1], dtype=np.int64),
            seq=np.array([1, 2], dtype=np.int64),
            elapsed_min=np.array([0.0, 1.0]),
            horizontal_mm=np.array([0.0, 0.1]),
            vertical_mm=np.array([0.0, 0.0]),
            force_reading=np.array([10.0, 800.0]),
        ),
    )
    flags = {f.code: f for f in stage_calibration_flags(stage, date(2026, 5, 1))}
    assert set(flags) == {"CALIBRATION_EXPIRED", "CALIBRATION_OUT_OF_RANGE"}
    assert all(f.severity == "error" for f in flags.values())
    assert "expired on 2026-03-03" in flags["CALIBRATION_EXPIRED"].message
    assert flags["CALIBRATION_EXPIRED"].values["days_overdue"] == 59.0
    assert "800" in flags["CALIBRATION_OUT_OF_RANGE"].message
    # A load-cell stage linked to a ring reading divisions is flagged too.
    stage.force_unit = "N"
    stage.save(update_fields=["force_unit"])
    assert "CALIBRATION_UNIT_MISMATCH" in {
        f.code for f in stage_calibration_flags(stage, date(2025, 6, 1))
    }


def test_only_the_manager_keeps_the_register_and_bad_certificates_are_refused(cast: Cast) -> None:
    with pytest.raises(NotAllowed):
        force_device_create(user=cast.technician, reference="X", kind="ring", capacity_n=1.0)
    ring = _ring(cast)
    with pytest.raises(ServiceError, match="2 to 4 coefficients"):
        calibration_record_create(
            user=cast.manager, device=ring, certificate_number="BAD", issuing_lab="L",
            calibrated_on=date(2025, 1, 1), due_on=date(2026, 1, 1), model="polynomial",
            coefficients=[1.0], range_min=0.0, range_max=10.0,
        )  # fmt: skip
    with pytest.raises(ServiceError, match="due date"):
        calibration_record_create(
            user=cast.manager, device=ring, certificate_number="BAD2", issuing_lab="L",
            calibrated_on=date(2025, 1, 1), due_on=date(2024, 1, 1), model="linear",
            coefficients=[1.0], range_min=0.0, range_max=10.0,
        )  # fmt: skip
    assert CalibrationRecord.objects.count() == 2


def test_demo_logger_files_import_in_two_layouts_and_show_the_expired_flag(
    settings: Any, tmp_path: Any
) -> None:
    settings.MEDIA_ROOT = tmp_path / "media"
    call_command("loaddemo", stdout=StringIO())
    stages = ShearStage.objects.filter(test__reference="DS-03").order_by("stage_number")
    assert stages.count() == 3
    imports = ReadingImport.objects.filter(stage__test__reference="DS-03")
    assert imports.filter(state=ImportState.SUCCEEDED).count() == 3
    assert {i.layout.name if i.layout else "canonical" for i in imports} == {
        "canonical",
        "Bench logger export (semicolon; min, in, kN)",
    }
    for stage in stages:
        assert shear_reading_count(stage.pk) >= 100
        assert stage.consolidation_readings.count() >= 10
        flags = stage_calibration_flags(stage, stage.shear_started_at.date())  # type: ignore[union-attr]
        assert [f.code for f in flags] == ["CALIBRATION_EXPIRED"]
        # Sheared slowly enough for drained conditions: the rate check passes.
        reduction = stage_reduction_compute(stage)
        assert reduction.max_rate_mm_per_min is not None
        assert reduction.measured_rate_mm_per_min <= reduction.max_rate_mm_per_min
        assert "RATE_TOO_FAST" not in [f.code for f in reduction.flags]
    # The second layout (inches, kN, downward positive, continuous clock) lands in the same units
    # as the canonical one: 1 in = 25.4 mm and 1 kN = 1000 N exactly (NIST SP 811).
    third = stages[2]
    third_shear = shear_columns(third.pk)
    first_shear = third_shear.row(0) if len(third_shear) else None
    assert (
        first_shear is not None
        and first_shear.elapsed_min == 0.0
        and first_shear.horizontal_mm == 0.0
    )
    last = third_shear.row(len(third_shear) - 1) if len(third_shear) else None
    assert (
        last is not None and 5.0 < last.horizontal_mm < 20.0 and 50.0 < last.force_reading < 1000.0
    )
    first_cons = ConsolidationReading.objects.filter(stage=third).order_by("elapsed_min").first()
    assert first_cons is not None and first_cons.elapsed_min == 0.0
