"""Gather one stage's inputs from the database as arrays, and fingerprint them.

The fingerprint (sha256 of a canonical encoding of every number and setting that feeds the
computation) lets a run recognise that an identical computation already exists, and lets every
stored result say exactly which inputs made it.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from testing import analysis
from testing.models import (
    ConsolidationReading,
    DirectShearTest,
    NormalLoading,
    ShearStage,
)
from testing.models.direct_shear import AreaModel, BoxShape
from testing.selectors_readings import shear_columns
from testing.services.equipment import stage_force_calibration

Calibration = analysis.LinearCalibration | analysis.PolynomialCalibration


@dataclass(frozen=True)
class StageInputs:
    """Everything a stage reduction reads. Arrays are float64, one value per reading."""

    stage_id: int
    settings: dict[str, Any]
    time_min: NDArray[np.float64]
    horizontal_mm: NDArray[np.float64]
    vertical_mm: NDArray[np.float64]
    force_reading: NDArray[np.float64]
    consolidation_time_min: NDArray[np.float64]
    consolidation_settlement_mm: NDArray[np.float64]
    calibration: Calibration = field(repr=False)

    def digest(self) -> str:
        """sha256 over the canonical settings JSON and the raw bytes of every array."""
        h = hashlib.sha256()
        h.update(json.dumps(self.settings, sort_keys=True, separators=(",", ":")).encode())
        for array in (
            self.time_min,
            self.horizontal_mm,
            self.vertical_mm,
            self.force_reading,
            self.consolidation_time_min,
            self.consolidation_settlement_mm,
        ):
            h.update(np.ascontiguousarray(array, dtype="<f8").tobytes())
            h.update(b"|")
        return h.hexdigest()


def box_geometry(test: DirectShearTest) -> analysis.BoxGeometry:
    if test.box_shape == BoxShape.CIRCULAR:
        return analysis.BoxGeometry.circular(test.box_length_mm)
    assert test.box_width_mm is not None
    return analysis.BoxGeometry.rectangular(test.box_length_mm, test.box_width_mm)


def stage_normal_force_n(stage: ShearStage, box: analysis.BoxGeometry) -> float:
    """Applied normal force [N]: built up from the masses and lever, or from a load frame's stress."""
    if stage.loading == NormalLoading.FRAME:
        assert stage.applied_normal_stress_kpa is not None
        return stage.applied_normal_stress_kpa * box.plan_area_mm2 / 1000.0
    return analysis.normal_force_n(
        direct_mass_kg=stage.direct_mass_kg or 0.0,
        lever_ratio=stage.lever_ratio or 1.0,
        hanger_mass_kg=stage.hanger_mass_kg or 0.0,
        weights_mass_kg=stage.weights_mass_kg or 0.0,
        beam_offset_n=stage.beam_offset_force_n,
    )


def stage_test_date(stage: ShearStage) -> dt.date:
    """The date the stage was tested (shearing start), else consolidation start, else the request date."""
    moment = stage.shear_started_at or stage.consolidation_started_at
    return moment.date() if moment is not None else stage.test.requested_on


def _calibration_fingerprint(calibration: Calibration) -> dict[str, Any]:
    fields = dataclasses.asdict(calibration)
    return {
        "type": type(calibration).__name__,
        **{k: v for k, v in fields.items() if k not in ("unit", "device")},
    }


def _force_uncertainty(stage: ShearStage) -> dict[str, float] | None:
    """The force calibration certificate's expanded uncertainty U [N] and its coverage factor k,
    or None when the stage has no calibration record or the record gives no U."""
    record = stage.force_calibration
    if record is None or record.expanded_uncertainty_n is None:
        return None
    return {
        "expanded_n": float(record.expanded_uncertainty_n),
        "coverage_factor_k": float(record.coverage_factor_k),
    }


def _loading_uncertainty(stage: ShearStage) -> dict[str, float] | None:
    """What the normal stress's uncertainty is built from: the stage's masses and lever ratio and the
    tolerances its test set's apparatus records (± half-widths). None when the stage is loaded by a
    frame, or no apparatus record gives all three tolerances."""
    apparatus = stage.test.apparatus_record
    if stage.loading == NormalLoading.FRAME or apparatus is None:
        return None
    tolerances = {
        "mass_tolerance_pct": apparatus.mass_tolerance_pct,
        "lever_ratio_tolerance": apparatus.lever_ratio_tolerance,
        "box_dimension_tolerance_mm": apparatus.box_dimension_tolerance_mm,
    }
    if any(value is None for value in tolerances.values()):
        return None
    return {
        "direct_mass_kg": float(stage.direct_mass_kg or 0.0),
        "hanger_mass_kg": float(stage.hanger_mass_kg or 0.0),
        "weights_mass_kg": float(stage.weights_mass_kg or 0.0),
        "lever_ratio": float(stage.lever_ratio or 1.0),
        **{key: float(value) for key, value in tolerances.items() if value is not None},
    }


def _box_tolerance_mm(stage: ShearStage) -> float | None:
    """± tolerance of each box dimension from the test set's apparatus record, if it gives one."""
    apparatus = stage.test.apparatus_record
    if apparatus is None or apparatus.box_dimension_tolerance_mm is None:
        return None
    return float(apparatus.box_dimension_tolerance_mm)


def stage_inputs_load(stage: ShearStage) -> StageInputs:
    """Read a stage's readings (two queries) and settings into :class:`StageInputs`."""
    test = stage.test
    specimen = stage.specimen
    box = box_geometry(test)
    calibration = stage_force_calibration(stage)
    shear = shear_columns(stage.pk)
    cons = np.array(
        ConsolidationReading.objects.filter(stage=stage)
        .order_by("elapsed_min")
        .values_list("elapsed_min", "settlement_mm"),
        dtype=np.float64,
    ).reshape(-1, 2)
    settings = {
        "box": {"shape": box.shape, "length_mm": box.length_mm, "width_mm": box.width_mm},
        "area_model": "corrected" if test.area_model == AreaModel.CORRECTED else "nominal",
        "failure_criterion": test.failure_criterion,
        "stated_displacement_mm": test.stated_displacement_mm,
        "expected_failure_displacement_mm": test.expected_failure_displacement_mm,
        "fine_grained": test.fine_grained,
        "method": test.method,
        "method_edition": test.method_edition,
        "normal_force_n": stage_normal_force_n(stage, box),
        "calibration": _calibration_fingerprint(calibration),
        "calibration_record_id": stage.force_calibration_id,
        "force_uncertainty": _force_uncertainty(stage),
        "box_tolerance_mm": _box_tolerance_mm(stage),
        "loading_uncertainty": _loading_uncertainty(stage),
        "test_date": stage_test_date(stage).isoformat(),
        "specimen": {
            "height_mm": specimen.height_mm,
            "initial_mass_g": specimen.initial_mass_g,
            "final_mass_g": specimen.final_mass_g,
            "dry_mass_g": specimen.dry_mass_g,
            "particle_density_mg_m3": specimen.particle_density_mg_m3,
            "particle_density_assumed": specimen.particle_density_assumed,
            "max_particle_size_mm": specimen.max_particle_size_mm,
        },
        "rate_set_mm_per_min": stage.rate_mm_per_min,
    }
    return StageInputs(
        stage_id=stage.pk,
        settings=settings,
        time_min=shear.elapsed_min,
        horizontal_mm=shear.horizontal_mm,
        vertical_mm=shear.vertical_mm,
        force_reading=shear.force_reading,
        consolidation_time_min=cons[:, 0].copy(),
        consolidation_settlement_mm=cons[:, 1].copy(),
        calibration=calibration,
    )
