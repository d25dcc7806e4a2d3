"""Per-stage context the reduction needs besides the shear readings: method profile, consolidation
(t50, t100 and their constructions), the permitted rate, phase relations and specimen checks.

Each part is computed when its inputs exist; a missing input becomes a plain-words flag, never an
exception, so a stage with incomplete set-up data still gets its stresses reduced.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from testing import analysis
from testing.analysis.consolidation import bs_t100_min, casagrande_log_time, taylor_root_time
from testing.analysis.phase import consolidated_state, phase_relations
from testing.analysis.profiles import (
    AASHTO_T236,
    ASTM_D3080_23,
    BS_1377_7_1990,
    BS_EN_ISO_17892_10_2018,
    MethodProfile,
)
from testing.analysis.rate import max_rate
from testing.models import ShearStage
from testing.models.direct_shear import MethodProfile as MethodChoice
from testing.services.equipment import stage_calibration_flags
from testing.services.stage_inputs import StageInputs, box_geometry, stage_test_date

PROFILE_FOR_METHOD: dict[str, MethodProfile] = {
    MethodChoice.ASTM_D3080: ASTM_D3080_23,
    MethodChoice.AASHTO_T236: AASHTO_T236,
    MethodChoice.BS_1377_7: BS_1377_7_1990,
    MethodChoice.ISO_17892_10: BS_EN_ISO_17892_10_2018,
}


@dataclass
class StageContext:
    profile: MethodProfile
    max_rate_mm_per_min: float | None = None
    details: dict[str, Any] = field(default_factory=dict)
    flags: list[analysis.Flag] = field(default_factory=list)


def _note(code: str, message: str, severity: analysis.Severity = "info") -> analysis.Flag:
    return analysis.Flag(code, severity, message)


def _phase_dict(state: Any) -> dict[str, Any]:
    return {
        "water_content_pct": state.water_content_pct,
        "bulk_density_mg_m3": state.bulk_density_mg_m3,
        "dry_density_mg_m3": state.dry_density_mg_m3,
        "void_ratio": state.void_ratio,
        "porosity": state.porosity,
        "saturation_pct": state.saturation_pct,
        "particle_density": state.particle_density_label,
    }


def stage_context_build(stage: ShearStage, inputs: StageInputs) -> StageContext:
    """Everything around the shear readings, for one stage."""
    test = stage.test
    specimen = stage.specimen
    profile = PROFILE_FOR_METHOD[test.method]
    context = StageContext(profile=profile)
    context.details["profile"] = {
        "code": profile.code,
        "edition": profile.edition,
        "from_memory": list(profile.from_memory),
    }
    _consolidation(context, inputs)
    _phase(context, stage, inputs)
    context.flags.extend(stage_calibration_flags(stage, stage_test_date(stage)))
    if specimen.max_particle_size_mm:
        box = box_geometry(test)
        flag = analysis.check_particle_size(
            specimen.max_particle_size_mm,
            width_mm=box.width_mm,
            thickness_mm=specimen.height_mm,
            min_width_ratio=profile.min_width_to_dmax,
            min_thickness_ratio=profile.min_thickness_to_dmax,
            profile_code=f"{profile.code}:{profile.edition}",
        )
        if flag is not None:
            context.flags.append(flag)
    return context


def _consolidation(context: StageContext, inputs: StageInputs) -> None:
    t, d = inputs.consolidation_time_min, inputs.consolidation_settlement_mm
    if t.size < 4:
        context.flags.append(
            _note(
                "NO_CONSOLIDATION_READINGS",
                "Fewer than 4 consolidation readings: "
                "t50/t100 and the permitted rate were not computed.",
            )
        )
        return
    summary: dict[str, Any] = {"final_settlement_mm": float(d[-1])}
    t50 = t100 = None
    try:
        taylor = taylor_root_time(t, d)
        t50, t100 = taylor.t50_min, bs_t100_min(taylor)
        summary["taylor"] = {
            "t90_min": taylor.t90_min,
            "t50_min": taylor.t50_min,
            "d0_mm": taylor.d0_mm,
            "d90_mm": taylor.d90_mm,
            "d100_mm": taylor.d100_mm,
            "slope_mm_per_sqrt_min": taylor.slope_mm_per_sqrt_min,
            "fit_indices": [int(i) for i in taylor.fit_indices],
        }
        summary["bs_t100_min"] = t100
    except analysis.AnalysisError as exc:
        context.flags.append(
            _note("TAYLOR_NOT_FOUND", f"Root-time construction not possible: {exc}", "warning")
        )
    try:
        cas = casagrande_log_time(t, d)
        summary["casagrande"] = {
            "t50_min": cas.t50_min,
            "t100_min": cas.t100_min,
            "d0_mm": cas.d0_mm,
            "d50_mm": cas.d50_mm,
            "d100_mm": cas.d100_mm,
            "t1_min": cas.t1_min,
            "primary_tangent": list(cas.primary_tangent),
            "secondary_line": list(cas.secondary_line),
        }
    except analysis.AnalysisError as exc:
        summary["casagrande_error"] = str(exc)
    context.details["consolidation"] = summary
    if t50 is None:
        return
    try:
        limit = max_rate(
            context.profile,
            t50_min=t50,
            t100_min=t100,
            displacement_at_failure_mm=inputs.settings.get("expected_failure_displacement_mm"),
            fine_grained=bool(inputs.settings.get("fine_grained")),
        )
    except analysis.AnalysisError as exc:
        context.flags.append(_note("RATE_LIMIT_NOT_SET", f"Permitted rate not computed: {exc}"))
        return
    context.max_rate_mm_per_min = limit.max_rate_mm_per_min
    context.details["rate_limit"] = {
        "max_rate_mm_per_min": limit.max_rate_mm_per_min,
        "time_to_failure_min": limit.time_to_failure_min,
        "basis": limit.basis,
        "basis_time_min": limit.basis_time_min,
        "factor": limit.factor,
        "displacement_at_failure_mm": limit.displacement_at_failure_mm,
        "displacement_source": limit.displacement_source,
    }


def _phase(context: StageContext, stage: ShearStage, inputs: StageInputs) -> None:
    specimen = stage.specimen
    if specimen.dry_mass_g is None or specimen.particle_density_mg_m3 is None:
        context.flags.append(
            _note(
                "PHASE_NOT_COMPUTED",
                "Dry mass or particle density not recorded: "
                "water content, densities and void ratio were not computed.",
            )
        )
        return
    box = box_geometry(stage.test)
    area_cm2 = box.plan_area_mm2 / 100.0
    h0_mm = specimen.height_mm
    common: dict[str, Any] = {
        "dry_mass_g": specimen.dry_mass_g,
        "particle_density_mg_m3": specimen.particle_density_mg_m3,
        "particle_density_measured": not specimen.particle_density_assumed,
    }
    try:
        initial = phase_relations(
            wet_mass_g=specimen.initial_mass_g,
            volume_cm3=area_cm2 * h0_mm / 10.0,
            label="initial",
            **common,
        )
    except analysis.AnalysisError as exc:
        context.flags.append(
            _note("PHASE_INPUT_ERROR", f"Initial phase relations not computed: {exc}", "warning")
        )
        return
    context.details["initial"] = _phase_dict(initial)
    context.flags.extend(initial.flags)
    settlement = (
        float(inputs.consolidation_settlement_mm[-1])
        if inputs.consolidation_settlement_mm.size
        else 0.0
    )
    try:
        consolidated = consolidated_state(
            initial, initial_height_mm=h0_mm, settlement_mm=settlement
        )
        context.details["consolidated"] = {
            "height_mm": consolidated.height_mm,
            "settlement_mm": consolidated.settlement_mm,
            "void_ratio": consolidated.void_ratio,
            "dry_density_mg_m3": consolidated.dry_density_mg_m3,
        }
    except analysis.AnalysisError as exc:
        context.flags.append(_note("CONSOLIDATED_STATE_ERROR", str(exc), "warning"))
        return
    if specimen.final_mass_g is not None:
        final_height = consolidated.height_mm + (
            float(inputs.vertical_mm[-1]) if inputs.vertical_mm.size else 0.0
        )
        try:
            final = phase_relations(
                wet_mass_g=specimen.final_mass_g,
                volume_cm3=area_cm2 * final_height / 10.0,
                label="final",
                **common,
            )
            context.details["final"] = _phase_dict(final)
            context.flags.extend(final.flags)
        except analysis.AnalysisError as exc:
            context.flags.append(
                _note("PHASE_INPUT_ERROR", f"Final phase relations not computed: {exc}", "warning")
            )


def finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else value
