"""Values of a test set as it was set up, shared by the exports: the box's plan area and the applied
normal stress of a stage (lever loading turned into force by the core's ``normal_force_n``)."""

from __future__ import annotations

import math

from testing.analysis import AnalysisError, normal_force_n
from testing.models import DirectShearTest, ShearStage
from testing.models.direct_shear import NormalLoading


def applied_normal_stress_kpa(stage: ShearStage, area_mm2: float) -> float | None:
    if stage.loading == NormalLoading.FRAME:
        return stage.applied_normal_stress_kpa
    try:
        force = normal_force_n(
            direct_mass_kg=stage.direct_mass_kg or 0.0,
            lever_ratio=stage.lever_ratio or 1.0,
            hanger_mass_kg=stage.hanger_mass_kg or 0.0,
            weights_mass_kg=stage.weights_mass_kg or 0.0,
            beam_offset_n=stage.beam_offset_force_n,
        )
    except AnalysisError:
        return None
    return 1000.0 * force / area_mm2


def box_area_mm2(test: DirectShearTest) -> float:
    if test.box_shape == "circular":
        return math.pi * test.box_length_mm**2 / 4.0
    return test.box_length_mm * (test.box_width_mm or test.box_length_mm)
