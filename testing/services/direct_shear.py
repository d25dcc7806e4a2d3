"""The one adapter between direct shear records and the pure core.

It turns a stage's rows into arrays, calls ``testing.analysis``, and turns the frozen results into
result rows stamped with ``ANALYSIS_VERSION`` and the inputs' fingerprint. It never decides *when* to
compute — that is ``testing.services.computation``'s job.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from testing import analysis
from testing.models import (
    ComputationRun,
    DirectShearTest,
    EnvelopeResult,
    EnvelopeType,
    ShearStage,
    StageExclusion,
    StageResult,
)
from testing.services.stage_context import StageContext, stage_context_build
from testing.services.stage_inputs import StageInputs, box_geometry, stage_inputs_load

# Which failure point of a stage result feeds each envelope type.
_ENVELOPE_POINT_FIELDS: dict[str, tuple[str, str]] = {
    EnvelopeType.PEAK: ("failure_normal_stress_kpa", "failure_shear_stress_kpa"),
    EnvelopeType.ULTIMATE: ("ultimate_normal_stress_kpa", "ultimate_shear_stress_kpa"),
    EnvelopeType.RESIDUAL: ("residual_normal_stress_kpa", "residual_shear_stress_kpa"),
}


def _finite_or_none(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _flag_dict(flag: analysis.Flag) -> dict[str, Any]:
    return {
        "code": flag.code,
        "severity": flag.severity,
        "message": flag.message,
        "values": {k: _finite_or_none(float(v)) for k, v in flag.values.items()},
    }


# --- Stage reduction ---------------------------------------------------------------------------


def stage_reduction_compute(
    stage: ShearStage, inputs: StageInputs | None = None, context: StageContext | None = None
) -> analysis.StageReduction:
    """Reduce a stage in-process (used by runs, and by pages that draw the per-reading curves)."""
    inputs = inputs or stage_inputs_load(stage)
    context = context or stage_context_build(stage, inputs)
    if inputs.time_min.size < 2:
        raise analysis.InsufficientDataError(
            f"Stage {stage.stage_number} has {inputs.time_min.size} shear reading(s); at least 2 are needed."
        )
    force_n = inputs.calibration.force_n(inputs.force_reading)
    return analysis.reduce_stage(
        time_min=inputs.time_min,
        horizontal_mm=inputs.horizontal_mm,
        vertical_mm=inputs.vertical_mm,
        shear_force_n=force_n,
        normal_force_n=inputs.settings["normal_force_n"],
        box=box_geometry(stage.test),
        area_model=inputs.settings["area_model"],
        criteria=analysis.StageCriteria(
            stated_displacement_mm=inputs.settings.get("stated_displacement_mm")
        ),
        max_rate_mm_per_min=context.max_rate_mm_per_min,
    )


def failure_point(reduction: analysis.StageReduction, criterion: str) -> analysis.FailurePoint:
    """The stage's failure point under the test set's criterion. A stated displacement the stage
    never reached is an error a person can act on, not a silently different point."""
    if criterion == "at_displacement":
        if reduction.at_displacement is None:
            reached = float(reduction.end_of_travel.horizontal_mm)
            raise analysis.AnalysisError(
                f"The stage never reached the stated displacement (largest horizontal "
                f"displacement {reached:.2f} mm): give a smaller stated displacement or choose "
                "another failure criterion for the test set."
            )
        return reduction.at_displacement
    points = {
        "peak": reduction.peak,
        "peak_ratio": reduction.peak_ratio,
        "end_of_travel": reduction.end_of_travel,
    }
    if criterion not in points:
        raise analysis.AnalysisError(f"Unknown failure criterion {criterion!r}.")
    return points[criterion]


def failure_shear_stress_u_kpa(
    reduction: analysis.StageReduction,
    inputs: StageInputs,
    box: analysis.BoxGeometry,
    failure: analysis.FailurePoint | None = None,
) -> float | None:
    """Expanded uncertainty U (k = 2) of τ at failure [kPa], or None when the force calibration
    gives no uncertainty (no calibration record, or a certificate without U) or the failure force
    is not positive.

    Inputs used (``analysis.shear_stress_uncertainty``):
    - u(F): the certificate's expanded uncertainty U [N] over its own coverage factor k
      (``inputs.settings["force_uncertainty"]``, so it is part of the inputs fingerprint);
    - F: the shear force at failure, τf·Af (area at the failure reading under the stage's area
      model);
    - L, W and the box shape: the test's nominal box dimensions;
    - u(L) = u(W) = a/√3 from the ± tolerance of the box dimensions on the test set's apparatus
      record (``inputs.settings["box_tolerance_mm"]``); 0 when none is recorded, so that term is
      left out of the budget rather than guessed (it is usually far smaller than the force term).
    The core computes τ = F/A on the nominal area; its relative uncertainty is applied to the
    stored τf, which on the corrected area is F/Af (∂τ/∂F = 1/Af).
    """
    certificate = inputs.settings.get("force_uncertainty")
    if certificate is None:
        return None
    box_tolerance = inputs.settings.get("box_tolerance_mm")
    u_box = analysis.standard_from_rectangular(box_tolerance) if box_tolerance else 0.0
    failure = failure or reduction.peak
    force_n = failure.shear_stress_kpa * float(reduction.area_mm2[failure.index]) / 1000.0
    if not force_n > 0.0:
        return None
    u = analysis.shear_stress_uncertainty(
        force_n=force_n,
        u_force_n=analysis.standard_from_expanded(
            certificate["expanded_n"], certificate["coverage_factor_k"]
        ),
        length_mm=box.length_mm,
        u_length_mm=u_box,
        width_mm=box.width_mm,
        u_width_mm=u_box,
        shape=box.shape,
        coverage_factor=2.0,  # the field promises k = 2, whatever k the certificate quotes
    )
    return _finite_or_none(u.expanded_uncertainty_kpa / u.value_kpa * failure.shear_stress_kpa)


def failure_normal_stress_u_kpa(
    inputs: StageInputs, box: analysis.BoxGeometry, failure: analysis.FailurePoint
) -> float | None:
    """Expanded uncertainty U (k = 2) of σn at failure [kPa], or None when the stage is loaded by a
    frame or its apparatus record does not give the mass, lever-ratio and box tolerances.

    Inputs used (``analysis.normal_stress_uncertainty``, standard uncertainties):
    - u(m) = (tolerance % × m)/√3 for the direct mass, the hanger and the slotted weights, and
      u(r) = tolerance/√3 for the lever ratio (each tolerance read as a rectangular distribution);
    - u(L) = u(W) = tolerance/√3 for the box dimensions;
    - the beam offset force is taken as exact.
    The core gives each input's contribution on the nominal area A. At failure σn = N/Af, so the
    mass and lever contributions scale by A/Af, and the area's relative contribution applies to the
    stored σn at failure.
    """
    loading = inputs.settings.get("loading_uncertainty")
    normal_force_n = float(inputs.settings["normal_force_n"])
    if loading is None or not normal_force_n > 0.0:
        return None
    mass_pct = loading["mass_tolerance_pct"] / 100.0
    u_box = analysis.standard_from_rectangular(loading["box_dimension_tolerance_mm"])

    def u_mass(mass_kg: float) -> float:
        return analysis.standard_from_rectangular(mass_pct * mass_kg)

    u = analysis.normal_stress_uncertainty(
        direct_mass_kg=loading["direct_mass_kg"],
        u_direct_mass_kg=u_mass(loading["direct_mass_kg"]),
        lever_ratio=loading["lever_ratio"],
        u_lever_ratio=analysis.standard_from_rectangular(loading["lever_ratio_tolerance"]),
        hanger_mass_kg=loading["hanger_mass_kg"],
        u_hanger_mass_kg=u_mass(loading["hanger_mass_kg"]),
        weights_mass_kg=loading["weights_mass_kg"],
        u_weights_mass_kg=u_mass(loading["weights_mass_kg"]),
        length_mm=box.length_mm,
        u_length_mm=u_box,
        width_mm=box.width_mm,
        u_width_mm=u_box,
        shape=box.shape,
        coverage_factor=2.0,
    )
    sigma_f = failure.normal_stress_kpa
    area_ratio = sigma_f * box.plan_area_mm2 / (normal_force_n * 1000.0)  # A/Af
    relative_area = u.budget_kpa["area"] / u.value_kpa if u.value_kpa else 0.0
    load_terms = [c * area_ratio for name, c in u.budget_kpa.items() if name != "area"]
    combined = math.sqrt(sum(c * c for c in load_terms) + (sigma_f * relative_area) ** 2)
    return _finite_or_none(2.0 * combined)


def stage_result_store(
    *,
    run: ComputationRun,
    stage: ShearStage,
    inputs_hash: str,
    reduction: analysis.StageReduction,
    inputs: StageInputs,
    context: StageContext,
) -> StageResult:
    """Write the result row of one successful stage reduction."""
    failure = failure_point(reduction, inputs.settings.get("failure_criterion") or "peak")
    ultimate = reduction.ultimate
    residual = reduction.residual.point if reduction.residual is not None else None
    box = box_geometry(stage.test)
    return StageResult.objects.create(
        run=run,
        stage=stage,
        analysis_version=reduction.analysis_version,
        inputs_hash=inputs_hash,
        area_model=reduction.area_model,
        n_readings=reduction.n_readings,
        normal_force_n=inputs.settings["normal_force_n"],
        initial_normal_stress_kpa=inputs.settings["normal_force_n"] / box.plan_area_mm2 * 1000.0,
        failure_criterion=failure.criterion,
        failure_shear_stress_kpa=failure.shear_stress_kpa,
        failure_normal_stress_kpa=failure.normal_stress_kpa,
        failure_horizontal_mm=failure.horizontal_mm,
        failure_vertical_mm=failure.vertical_mm,
        failure_secant_phi_deg=math.degrees(
            math.atan2(failure.shear_stress_kpa, failure.normal_stress_kpa)
        ),
        ultimate_shear_stress_kpa=ultimate.shear_stress_kpa if ultimate else None,
        ultimate_normal_stress_kpa=ultimate.normal_stress_kpa if ultimate else None,
        ultimate_horizontal_mm=ultimate.horizontal_mm if ultimate else None,
        residual_shear_stress_kpa=residual.shear_stress_kpa if residual else None,
        residual_normal_stress_kpa=residual.normal_stress_kpa if residual else None,
        residual_horizontal_mm=residual.cumulative_horizontal_mm if residual else None,
        residual_vertical_mm=residual.vertical_mm if residual else None,
        max_dilation_angle_deg=_finite_or_none(reduction.max_dilation_angle_deg),
        max_dilation_horizontal_mm=_finite_or_none(reduction.max_dilation_horizontal_mm),
        measured_rate_mm_per_min=_finite_or_none(reduction.measured_rate_mm_per_min),
        max_rate_mm_per_min=_finite_or_none(reduction.max_rate_mm_per_min),
        phase=context.details,
        shear_stress_u_kpa=failure_shear_stress_u_kpa(reduction, inputs, box, failure),
        normal_stress_u_kpa=failure_normal_stress_u_kpa(inputs, box, failure),
        flags=[_flag_dict(f) for f in (*context.flags, *reduction.flags)],
    )


# --- Envelopes -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class EnvelopeInputs:
    """The points of one envelope: latest stage results plus the stage exclusions for this type."""

    test_id: int
    envelope_type: str
    points: list[dict[str, Any]]

    def digest(self) -> str:
        payload = {"test": self.test_id, "type": self.envelope_type, "points": self.points}
        return hashlib.sha256(
            json.dumps(payload, sort_keys=True, separators=(",", ":")).encode()
        ).hexdigest()

    @property
    def usable(self) -> list[dict[str, Any]]:
        return [p for p in self.points if p["normal_stress_kpa"] is not None]


def envelope_inputs_load(
    test: DirectShearTest, envelope_type: str, results: Mapping[int, StageResult]
) -> EnvelopeInputs:
    """Points for one envelope type from the given latest result per stage id."""
    sigma_field, tau_field = _ENVELOPE_POINT_FIELDS[envelope_type]
    exclusions = dict(
        StageExclusion.objects.filter(stage__test=test, envelope_type=envelope_type).values_list(
            "stage_id", "reason"
        )
    )
    points = []
    for stage in test.stages.order_by("stage_number"):
        result = results.get(stage.pk)
        if result is None:
            continue
        points.append(
            {
                "stage_number": stage.stage_number,
                "stage_result_id": result.pk,
                "normal_stress_kpa": getattr(result, sigma_field),
                "shear_stress_kpa": getattr(result, tau_field),
                "included": stage.pk not in exclusions,
                "reason": exclusions.get(stage.pk, ""),
            }
        )
    return EnvelopeInputs(test_id=test.pk, envelope_type=envelope_type, points=points)


def envelope_fit_compute(inputs: EnvelopeInputs) -> analysis.EnvelopeFit:
    usable = inputs.usable
    exclude = {i: p["reason"] for i, p in enumerate(usable) if not p["included"]}
    return analysis.fit_envelope(
        [p["normal_stress_kpa"] for p in usable],
        [p["shear_stress_kpa"] for p in usable],
        exclude=exclude or None,
    )


def envelope_set_flags(
    test: DirectShearTest, inputs: EnvelopeInputs, results: Mapping[int, StageResult]
) -> list[analysis.Flag]:
    """Checks on the set of stages an envelope uses: normal stresses clearly apart, and the
    initial dry densities of prepared (not undisturbed) specimens within the method's spread limit
    (read from each point's stage result). An undisturbed sample's density varies as the ground
    does, so it is not flagged."""
    from testing.services.stage_context import PROFILE_FOR_METHOD

    used = [p for p in inputs.usable if p["included"]]
    by_id = {r.pk: r for r in results.values()}
    found: list[analysis.Flag | None] = [
        analysis.check_normal_stresses_distinct([p["normal_stress_kpa"] for p in used])
    ]
    preparation = dict(test.stages.values_list("stage_number", "specimen__preparation"))
    densities = [
        (by_id[p["stage_result_id"]].phase or {}).get("initial", {}).get("dry_density_mg_m3")
        for p in used
        if p["stage_result_id"] in by_id and preparation.get(p["stage_number"]) != "undisturbed"
    ]
    densities = [d for d in densities if d is not None]
    limit = PROFILE_FOR_METHOD[test.method].dry_density_spread_pct
    if limit is not None and len(densities) >= 2:
        found.append(analysis.check_dry_density_spread(densities, limit_pct=limit))
    return [f for f in found if f is not None]


def _fit_summary(fit: analysis.EnvelopeFit) -> dict[str, Any]:
    return {
        "cohesion_kpa": fit.cohesion_kpa,
        "friction_angle_deg": fit.friction_angle_deg,
        "tan_phi": fit.tan_phi,
        "stderr_tan_phi": _finite_or_none(fit.stderr_tan_phi),
        "r_squared": _finite_or_none(fit.r_squared),
        "r_squared_kind": fit.r_squared_kind,
        "method": fit.method,
    }


CHARACTERISTIC_CONFIDENCE = 0.95


def envelope_characteristic(fit: analysis.EnvelopeFit) -> dict[str, Any] | None:
    """A characteristic line under the fit, as an interpretation (not a test result), or None
    when the fit cannot give one (through the origin, or fewer than 3 stages).

    ``analysis.regression_lower_band`` (the core's function for one pooled regression) gives the
    lower one-sided 95 % confidence band of the mean line at the lowest and highest tested normal
    stress; the characteristic line is the chord through those two band points. The band is
    concave, so the chord lies under it over the whole tested range. Whether this line, the
    prediction band (local failure) or another line suits a design is the engineer's choice.
    """
    if fit.through_origin:
        return None
    low, high = fit.normal_stress_range_kpa
    try:
        band = analysis.regression_lower_band(
            fit, [low, high], kind="mean", confidence=CHARACTERISTIC_CONFIDENCE
        )
    except analysis.InsufficientDataError:
        return None
    band_low, band_high = (float(v) for v in band.lower_kpa)
    tan_phi = (band_high - band_low) / (high - low)
    return {
        "method": (
            "line through the lower one-sided 95 % confidence band of the mean regression line "
            "at the lowest and highest tested normal stress"
        ),
        "band_kind": band.kind,
        "confidence": band.confidence,
        "t_value": band.t_value,
        "normal_stress_min_kpa": low,
        "normal_stress_max_kpa": high,
        "band_at_min_kpa": band_low,
        "band_at_max_kpa": band_high,
        "cohesion_kpa": band_low - tan_phi * low,
        "tan_phi": tan_phi,
        "friction_angle_deg": math.degrees(math.atan(tan_phi)),
        "note": band.note,
    }


def envelope_result_store(
    *,
    run: ComputationRun,
    test: DirectShearTest,
    inputs: EnvelopeInputs,
    inputs_hash: str,
    fit: analysis.EnvelopeFit,
    set_flags: Sequence[analysis.Flag] = (),
) -> EnvelopeResult:
    """Write the result row of one successful envelope fit, with the set's flags beside the
    fit's own warnings."""
    low_c, high_c = fit.cohesion_ci95_kpa
    low_phi, high_phi = fit.friction_angle_ci95_deg
    points = [{**p, "residual_kpa": None} for p in inputs.points]
    usable_numbers = [p["stage_number"] for p in inputs.usable]
    for index, residual in zip(fit.included_indices, fit.residuals_kpa, strict=True):
        number = usable_numbers[index]
        for p in points:
            if p["stage_number"] == number:
                p["residual_kpa"] = float(residual)
    return EnvelopeResult.objects.create(
        run=run,
        test=test,
        envelope_type=inputs.envelope_type,
        analysis_version=analysis.ANALYSIS_VERSION,
        inputs_hash=inputs_hash,
        fit_method=fit.method,
        through_origin=fit.through_origin,
        points=points,
        n=fit.n,
        cohesion_kpa=fit.cohesion_kpa,
        friction_angle_deg=fit.friction_angle_deg,
        tan_phi=fit.tan_phi,
        stderr_cohesion_kpa=_finite_or_none(fit.stderr_cohesion_kpa),
        stderr_tan_phi=_finite_or_none(fit.stderr_tan_phi),
        cohesion_ci95_low_kpa=_finite_or_none(low_c),
        cohesion_ci95_high_kpa=_finite_or_none(high_c),
        friction_angle_ci95_low_deg=_finite_or_none(low_phi),
        friction_angle_ci95_high_deg=_finite_or_none(high_phi),
        corr_cohesion_tan_phi=_finite_or_none(fit.corr_cohesion_tan_phi),
        r_squared=_finite_or_none(fit.r_squared),
        r_squared_kind=fit.r_squared_kind,
        normal_stress_min_kpa=fit.normal_stress_range_kpa[0],
        normal_stress_max_kpa=fit.normal_stress_range_kpa[1],
        through_origin_alternative=(
            _fit_summary(fit.through_origin_alternative)
            if fit.through_origin_alternative is not None
            else None
        ),
        warnings=[_flag_dict(w) for w in (*fit.warnings, *set_flags)],
        characteristic=envelope_characteristic(fit),
    )


def stress_arrays(reduction: analysis.StageReduction) -> dict[str, list[float]]:
    """Per-reading curves for charts, as plain lists (x, y, τ, σn)."""
    return {
        "shear_stress_kpa": np.asarray(reduction.shear_stress_kpa).tolist(),
        "normal_stress_kpa": np.asarray(reduction.normal_stress_kpa).tolist(),
        "stress_ratio": np.asarray(reduction.stress_ratio).tolist(),
    }
