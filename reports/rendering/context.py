"""Step 1 of rendering: every query a report needs, done once, into a frozen JSON snapshot.

A revision stores this snapshot (``content``) and the ids of the result rows it used. The HTML and
the PDF are built from the snapshot alone, so a later recomputation never changes a revision.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
from django.conf import settings
from django.db.models import Prefetch

from testing import analysis, selectors
from testing.models import (
    DirectShearTest,
    EnvelopeResult,
    ShearStage,
    StageResult,
)
from testing.services.direct_shear import stage_reduction_compute
from testing.services.errors import ServiceError
from testing.services.stage_inputs import stage_inputs_load

CONTENT_SCHEMA = 1
MAX_CURVE_POINTS = 400


class ResultsNotReady(ServiceError):
    """A test set's results are missing or older than its readings."""


def canonical_json(content: Any) -> bytes:
    return json.dumps(
        content, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    ).encode("utf-8")


def content_sha256(content: Any) -> str:
    return hashlib.sha256(canonical_json(content)).hexdigest()


def _num(value: Any) -> float | None:
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def _thin(*arrays: np.ndarray) -> list[list[float | None]]:
    """At most MAX_CURVE_POINTS evenly spaced readings, always keeping the last."""
    n = len(arrays[0])
    if n > MAX_CURVE_POINTS:
        index = np.unique(np.linspace(0, n - 1, MAX_CURVE_POINTS).round().astype(int))
    else:
        index = np.arange(n)
    return [[_num(v) for v in np.asarray(a, dtype=float)[index]] for a in arrays]


FINAL_STATE_KEYS = ("bulk_density_mg_m3", "dry_density_mg_m3", "void_ratio", "saturation_pct")


def _phase(specimen: Any, stored: dict[str, Any] | None) -> dict[str, Any]:
    """Initial state from the specimen record; final water content when the masses are known;
    the final state as the stage result stored it (``stored`` is ``StageResult.phase``)."""
    final = (stored or {}).get("final") or {}
    out: dict[str, Any] = {
        "particle_density_mg_m3": _num(specimen.particle_density_mg_m3),
        "particle_density_measured": not specimen.particle_density_assumed,
        "initial": None,
        "final_water_content_pct": None,
        "final": {key: _num(final.get(key)) for key in FINAL_STATE_KEYS},
    }
    if specimen.dry_mass_g and specimen.particle_density_mg_m3:
        volume_cm3 = specimen.plan_area_mm2 * specimen.height_mm / 1000.0
        state = analysis.phase_relations(
            wet_mass_g=specimen.initial_mass_g,
            dry_mass_g=specimen.dry_mass_g,
            volume_cm3=volume_cm3,
            particle_density_mg_m3=specimen.particle_density_mg_m3,
            particle_density_measured=not specimen.particle_density_assumed,
        )
        out["initial"] = {
            "water_content_pct": _num(state.water_content_pct),
            "bulk_density_mg_m3": _num(state.bulk_density_mg_m3),
            "dry_density_mg_m3": _num(state.dry_density_mg_m3),
            "void_ratio": _num(state.void_ratio),
            "saturation_pct": _num(state.saturation_pct),
        }
    if specimen.dry_mass_g and specimen.final_mass_g:
        out["final_water_content_pct"] = _num(
            100.0 * (specimen.final_mass_g - specimen.dry_mass_g) / specimen.dry_mass_g
        )
    return out


def _consolidation(inputs: Any) -> dict[str, Any]:
    t = inputs.consolidation_time_min
    s = inputs.consolidation_settlement_mm
    out: dict[str, Any] = {"time_min": [], "settlement_mm": [], "taylor": None}
    if t.size == 0:
        return out
    out["time_min"], out["settlement_mm"] = _thin(t, s)
    try:
        taylor = analysis.taylor_root_time(t, s)
    except analysis.AnalysisError:
        return out
    out["taylor"] = {
        "t90_min": _num(taylor.t90_min),
        "t50_min": _num(taylor.t50_min),
        "d0_mm": _num(taylor.d0_mm),
        "d90_mm": _num(taylor.d90_mm),
        "d100_mm": _num(taylor.d100_mm),
        "slope_mm_per_sqrt_min": _num(taylor.slope_mm_per_sqrt_min),
    }
    return out


def _stage_content(stage: ShearStage, result: StageResult) -> dict[str, Any]:
    inputs = stage_inputs_load(stage)  # 2 queries: shear and consolidation readings
    if inputs.digest() != result.inputs_hash:
        raise ResultsNotReady(
            f"{stage}: the readings or settings changed after the last computation. "
            "Recompute the stage before reporting it."
        )
    reduction = stage_reduction_compute(stage, inputs)
    x, y, tau = _thin(inputs.horizontal_mm, inputs.vertical_mm, reduction.shear_stress_kpa)
    specimen = stage.specimen
    sample = specimen.sample
    return {
        "stage_id": stage.pk,
        "stage_number": stage.stage_number,
        "stage_result_id": result.pk,
        "analysis_version": result.analysis_version,
        "inputs_sha256": result.inputs_hash,
        "specimen": {
            "reference": specimen.reference,
            "description": specimen.description,
            "preparation": specimen.get_preparation_display(),
            "preparation_notes": specimen.preparation_notes,
            "depth_top_m": str(specimen.depth_top_m),
            "shape": specimen.shape,
            "length_mm": _num(specimen.length_mm),
            "width_mm": _num(specimen.width_mm),
            "diameter_mm": _num(specimen.diameter_mm),
            "height_mm": _num(specimen.height_mm),
            "max_particle_size_mm": _num(specimen.max_particle_size_mm),
        },
        "sample": {
            "reference": sample.reference,
            "borehole": sample.borehole.reference,
            "depth_top_m": str(sample.depth_top_m),
            "depth_base_m": str(sample.depth_base_m),
            "type": sample.get_sample_type_display(),
            "description": sample.description,
            "received_on": sample.received_on.isoformat(),
            "condition_on_receipt": sample.condition_on_receipt,
        },
        "phase": _phase(specimen, result.phase),
        "shear_started_at": stage.shear_started_at.isoformat() if stage.shear_started_at else None,
        "normal_stress_kpa": _num(result.initial_normal_stress_kpa),
        "rate_set_mm_per_min": _num(stage.rate_mm_per_min),
        "rate_measured_mm_per_min": _num(result.measured_rate_mm_per_min),
        "rate_max_mm_per_min": _num(result.max_rate_mm_per_min),
        "area_model": result.area_model,
        "failure": {
            "criterion": result.failure_criterion,
            "shear_stress_kpa": _num(result.failure_shear_stress_kpa),
            "normal_stress_kpa": _num(result.failure_normal_stress_kpa),
            "horizontal_mm": _num(result.failure_horizontal_mm),
            "vertical_mm": _num(result.failure_vertical_mm),
            "secant_phi_deg": _num(result.failure_secant_phi_deg),
            "shear_stress_u_kpa": _num(result.shear_stress_u_kpa),
            "normal_stress_u_kpa": _num(result.normal_stress_u_kpa),
        },
        "ultimate_shear_stress_kpa": _num(result.ultimate_shear_stress_kpa),
        "residual_shear_stress_kpa": _num(result.residual_shear_stress_kpa),
        "max_dilation_angle_deg": _num(result.max_dilation_angle_deg),
        "flags": list(result.flags),
        "notes": stage.notes,
        "curves": {"horizontal_mm": x, "vertical_mm": y, "shear_stress_kpa": tau},
        "consolidation": _consolidation(inputs),
    }


def _envelope_content(envelope: EnvelopeResult, test: DirectShearTest) -> dict[str, Any]:
    return {
        "envelope_result_id": envelope.pk,
        "envelope_type": envelope.envelope_type,
        "label": test.envelope_label(envelope.envelope_type),
        "analysis_version": envelope.analysis_version,
        "fit_method": envelope.fit_method,
        "through_origin": envelope.through_origin,
        "n": envelope.n,
        "cohesion_kpa": _num(envelope.cohesion_kpa),
        "friction_angle_deg": _num(envelope.friction_angle_deg),
        "tan_phi": _num(envelope.tan_phi),
        "stderr_cohesion_kpa": _num(envelope.stderr_cohesion_kpa),
        "stderr_tan_phi": _num(envelope.stderr_tan_phi),
        "cohesion_ci95_kpa": [
            _num(envelope.cohesion_ci95_low_kpa),
            _num(envelope.cohesion_ci95_high_kpa),
        ],
        "friction_angle_ci95_deg": [
            _num(envelope.friction_angle_ci95_low_deg),
            _num(envelope.friction_angle_ci95_high_deg),
        ],
        "corr_cohesion_tan_phi": _num(envelope.corr_cohesion_tan_phi),
        "r_squared": _num(envelope.r_squared),
        "normal_stress_range_kpa": [
            _num(envelope.normal_stress_min_kpa),
            _num(envelope.normal_stress_max_kpa),
        ],
        "points": list(envelope.points),
        "warnings": list(envelope.warnings),
        "through_origin_alternative": envelope.through_origin_alternative,
        "characteristic": envelope.characteristic,
    }


def _test_content(test: DirectShearTest) -> tuple[dict[str, Any], list[int], list[int]]:
    results = selectors.latest_stage_results(test=test)  # 1 query
    envelopes = selectors.latest_envelopes(test=test)  # 1 query
    stages = list(test.stages.all())  # prefetched with specimen, sample and borehole
    if not stages:
        raise ResultsNotReady(f"{test} has no stages to report.")
    missing = [s.stage_number for s in stages if s.pk not in results]
    if missing:
        raise ResultsNotReady(
            f"{test}: stage(s) {', '.join(map(str, missing))} have no computed results yet."
        )
    stage_items = [_stage_content(s, results[s.pk]) for s in stages]
    started = sorted(s["shear_started_at"][:10] for s in stage_items if s["shear_started_at"])
    content = {
        "test_id": test.pk,
        "reference": test.reference,
        "method": test.get_method_display(),
        "method_edition": test.method_edition,
        "apparatus": test.apparatus,
        "box_shape": test.get_box_shape_display(),
        "box_length_mm": _num(test.box_length_mm),
        "box_width_mm": _num(test.box_width_mm),
        "condition": test.get_condition_display(),
        "shear_type": test.get_shear_type_display(),
        "area_model": test.get_area_model_display(),
        "requested_on": test.requested_on.isoformat(),
        "instructions": test.instructions,
        "tested_from": started[0] if started else None,
        "tested_to": started[-1] if started else None,
        "stages": stage_items,
        "envelopes": [_envelope_content(e, test) for _, e in sorted(envelopes.items())],
    }
    return (
        content,
        [results[s.pk].pk for s in stages],
        [e.pk for e in envelopes.values()],
    )


def report_tests_load(test_ids: Iterable[int]) -> list[DirectShearTest]:
    """The test sets with everything the snapshot reads, in a fixed number of queries."""
    stages = ShearStage.objects.select_related("specimen__sample__borehole").order_by(
        "stage_number"
    )
    return list(
        DirectShearTest.objects.filter(pk__in=list(test_ids))
        .select_related("project__organisation")
        .prefetch_related(Prefetch("stages", queryset=stages))
        .order_by("reference")
    )


def build_content(
    *,
    tests: Sequence[DirectShearTest],
    report_number: str,
    revision_number: int,
    revision_id: str,
    title: str,
    remarks: str,
    deviations: str,
    replaces: dict[str, Any] | None = None,
) -> tuple[dict[str, Any], list[int], list[int]]:
    """The frozen snapshot of a revision, and the ids of the stage and envelope results it used.

    ``tests`` must come from :func:`report_tests_load` (related rows already loaded).
    """
    if not tests:
        raise ResultsNotReady("Choose at least one test set for the report.")
    project = tests[0].project
    organisation = project.organisation
    test_items: list[dict[str, Any]] = []
    stage_ids: list[int] = []
    envelope_ids: list[int] = []
    for test in tests:
        item, s_ids, e_ids = _test_content(test)
        test_items.append(item)
        stage_ids += s_ids
        envelope_ids += e_ids
    content = {
        "schema": CONTENT_SCHEMA,
        "lab": {"name": settings.TAULINE_LAB_NAME, "address": settings.TAULINE_LAB_ADDRESS},
        "report": {"number": report_number, "title": title},
        "revision": {"number": revision_number, "id": revision_id, "replaces": replaces},
        "client": {
            "name": organisation.name,
            "address": organisation.address,
            "contact_name": organisation.contact_name or project.client_engineer,
            "contact_email": organisation.contact_email,
        },
        "project": {
            "reference": project.reference,
            "name": project.name,
            "client_reference": project.client_reference,
            "site_name": project.site_name,
            "site_location": project.site_location,
        },
        "remarks": remarks,
        "deviations": deviations,
        "tests": test_items,
    }
    return content, stage_ids, envelope_ids


# --- Items compared between revisions -------------------------------------------------------


def _fmt(value: Any, unit: str = "", digits: int = 1) -> str:
    if value is None:
        return "—"
    if isinstance(value, float):
        return f"{value:.{digits}f}{(' ' + unit) if unit else ''}"
    return f"{value}{(' ' + unit) if unit else ''}"


def content_items(content: dict[str, Any]) -> dict[str, str]:
    """Every reported value as printed, keyed by a readable item name (used to list amendments)."""
    items: dict[str, str] = {
        "Title": content["report"]["title"],
        "Remarks": content.get("remarks", ""),
        "Deviations": content.get("deviations", ""),
    }
    for test in content["tests"]:
        for stage in test["stages"]:
            key = f"{test['reference']} stage {stage['stage_number']}"
            failure = stage["failure"]
            items[f"{key}: normal stress"] = _fmt(stage["normal_stress_kpa"], "kPa")
            items[f"{key}: shear stress at failure"] = _fmt(failure["shear_stress_kpa"], "kPa")
            items[f"{key}: horizontal displacement at failure"] = _fmt(
                failure["horizontal_mm"], "mm", 2
            )
            items[f"{key}: vertical displacement at failure"] = _fmt(
                failure["vertical_mm"], "mm", 3
            )
            items[f"{key}: failure criterion"] = str(failure["criterion"])
            initial = stage["phase"].get("initial") or {}
            items[f"{key}: initial water content"] = _fmt(initial.get("water_content_pct"), "%")
            items[f"{key}: initial dry density"] = _fmt(
                initial.get("dry_density_mg_m3"), "Mg/m³", 3
            )
            _other_items(items, key, stage, _STAGE_NAMED)
        for env in test["envelopes"]:
            key = f"{test['reference']} {env['label'].lower()} envelope"
            items[f"{key}: c′"] = _fmt(env["cohesion_kpa"], "kPa")
            items[f"{key}: φ′"] = _fmt(env["friction_angle_deg"], "°")
            items[f"{key}: n"] = _fmt(env["n"])
            _other_items(items, key, env, _ENVELOPE_NAMED)
        rest = {k: v for k, v in test.items() if k not in ("stages", "envelopes")}
        _other_items(items, test["reference"], rest, _NOT_COMPARED)
    top = {k: v for k, v in content.items() if k not in ("tests", "remarks", "deviations")}
    _other_items(items, "Report", top, _NOT_COMPARED | {"report/title"})
    return items


# Every other value is compared too, named by its place in the content. Left out: record ids and
# digests that differ between any two revisions without anything printed changing, and the list
# of changes itself.
_NOT_COMPARED = frozenset(
    {
        "schema",
        "revision",
        "changes",
        "test_id",
        "stage_id",
        "stage_result_id",
        "envelope_result_id",
        "inputs_sha256",
    }
)
_STAGE_NAMED = _NOT_COMPARED | {
    "normal_stress_kpa",
    "failure/shear_stress_kpa",
    "failure/horizontal_mm",
    "failure/vertical_mm",
    "failure/criterion",
    "phase/initial/water_content_pct",
    "phase/initial/dry_density_mg_m3",
}
_ENVELOPE_NAMED = _NOT_COMPARED | {"cohesion_kpa", "friction_angle_deg", "n", "label"}


def _plain(value: Any) -> str:
    """A value as a reader compares it: numbers to 4 significant figures (so a recomputation
    that moves the 10th digit is not an amendment), a list of numbers as its size and digest."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, list) and all(isinstance(v, int | float) or v is None for v in value):
        if len(value) <= 4:
            return ", ".join(_plain(v) for v in value)
        digest = hashlib.sha256(json.dumps(value).encode()).hexdigest()[:12]
        return f"{len(value)} values (sha256 {digest}…)"
    return str(value)


def _other_items(
    items: dict[str, str], key: str, node: dict[str, Any], skip: frozenset[str]
) -> None:
    """Add every leaf of ``node`` not in ``skip`` (paths like "failure/criterion") to ``items``."""

    def walk(value: Any, path: str, label: str) -> None:
        if path in skip or path.split("/")[0] in skip:
            return
        if isinstance(value, dict):
            for k, v in value.items():
                walk(v, f"{path}/{k}" if path else k, f"{label} {k.replace('_', ' ')}".strip())
            return
        if isinstance(value, list) and any(isinstance(v, dict) for v in value):
            for i, v in enumerate(value, start=1):
                walk(v, f"{path}/{i}", f"{label} {i}")
            return
        items[f"{key}: {label}"] = _plain(value)

    walk(node, "", "")


def content_changes(old: dict[str, Any], new: dict[str, Any]) -> list[tuple[str, str, str]]:
    """(item, old value, new value) for every printed value that differs."""
    before, after = content_items(old), content_items(new)
    changes = []
    for item in list(before) + [k for k in after if k not in before]:
        old_value, new_value = before.get(item, "—"), after.get(item, "—")
        if old_value != new_value:
            changes.append((item, old_value, new_value))
    return changes
