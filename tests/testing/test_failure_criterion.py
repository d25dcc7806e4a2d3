"""The test set's failure criterion decides which point of each stage is stored as failure (and
so feeds the envelope): peak τ, peak τ/σn, τ at a stated displacement, or τ at the end of travel.
Each stored point is checked against the stage's own per-reading stresses with numpy."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
from rest_framework.test import APIClient

from testing.models import ComputationRun, DirectShearTest, StageResult
from testing.selectors import latest_stage_results
from testing.selectors_readings import shear_columns
from testing.services import computation
from testing.services.direct_shear import stage_reduction_compute
from tests.conftest import Cast, Records
from tests.reports.conftest import build_test_set, compute

pytestmark = pytest.mark.django_db


def _results(
    cast: Cast,
    records: Records,
    capture: Callable[..., Any],
    criterion: str,
    stated_mm: float | None = None,
) -> tuple[DirectShearTest, dict[int, StageResult]]:
    test = build_test_set(user=cast.technician, project=records.project, sample=records.sample)
    DirectShearTest.objects.filter(pk=test.pk).update(
        failure_criterion=criterion, stated_displacement_mm=stated_mm
    )
    test.refresh_from_db()
    compute(test, cast.technician, capture)
    return test, latest_stage_results(test=test)


def test_end_of_travel_and_peak_ratio_are_the_points_chosen(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test, results = _results(cast, records_a, django_capture_on_commit_callbacks, "end_of_travel")
    for stage in test.stages.all():
        r = results[stage.pk]
        curves = stage_reduction_compute(stage)
        last = curves.first_traverse_stop - 1  # the last reading of the forward traverse
        readings = shear_columns(stage.pk)
        farthest = readings.row(int(np.argmax(readings.horizontal_mm))) if len(readings) else None
        assert farthest is not None
        assert r.failure_criterion == "end_of_travel"
        assert r.failure_horizontal_mm == pytest.approx(farthest.horizontal_mm)
        assert r.failure_shear_stress_kpa == pytest.approx(float(curves.shear_stress_kpa[last]))
        assert r.failure_shear_stress_kpa < float(np.max(curves.shear_stress_kpa))  # sand softens


def test_peak_stress_ratio_is_the_largest_tau_over_sigma(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test, results = _results(cast, records_a, django_capture_on_commit_callbacks, "peak_ratio")
    for stage in test.stages.all():
        r = results[stage.pk]
        curves = stage_reduction_compute(stage)
        ratio = np.asarray(curves.shear_stress_kpa) / np.asarray(curves.normal_stress_kpa)
        assert r.failure_criterion == "peak_ratio"
        assert r.failure_shear_stress_kpa / r.failure_normal_stress_kpa == pytest.approx(
            float(np.max(ratio))
        )


def test_a_stated_displacement_is_met_and_one_never_reached_fails_the_run_plainly(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test, results = _results(
        cast, records_a, django_capture_on_commit_callbacks, "at_displacement", 3.0
    )
    for stage in test.stages.all():
        r = results[stage.pk]
        assert r.failure_criterion == "at_displacement"
        assert r.failure_horizontal_mm == pytest.approx(3.0, abs=0.06)  # readings 0.05 mm apart

    DirectShearTest.objects.filter(pk=test.pk).update(stated_displacement_mm=50.0)
    with django_capture_on_commit_callbacks(execute=True):
        computation.test_recompute_request(test=test, user=cast.technician, reason="50 mm")
    failed = ComputationRun.objects.filter(
        test=test, state="failed"
    ) | ComputationRun.objects.filter(stage__test=test, state="failed")
    assert failed.exists()
    assert all("never reached the stated displacement" in run.error for run in failed)


def test_the_api_takes_the_criterion_and_refuses_a_non_positive_displacement(
    cast: Cast, records_a: Records
) -> None:
    api = APIClient()
    api.force_authenticate(cast.technician)
    body = {
        "project": records_a.project.pk, "reference": "DS-C1", "method": "bs-1377-7",
        "box_length_mm": 60.0, "box_width_mm": 60.0, "requested_on": "2026-11-20",
        "failure_criterion": "at_displacement", "stated_displacement_mm": 4.0,
    }  # fmt: skip
    created = api.post("/api/v1/test-sets/", body, format="json")
    assert created.status_code == 201, created.content
    assert created.json()["failure_criterion"] == "at_displacement"
    refused = api.post(
        "/api/v1/test-sets/", {**body, "reference": "DS-C2", "stated_displacement_mm": 0},
        format="json",
    )  # fmt: skip
    assert refused.status_code == 400


def test_the_failure_envelope_is_named_after_the_criterion(cast: Cast, records_a: Records) -> None:
    test = build_test_set(user=cast.technician, project=records_a.project, sample=records_a.sample)
    assert test.envelope_label("peak") == "Peak"
    test.failure_criterion = "end_of_travel"
    assert test.envelope_label("peak") == "Failure (shear stress at the end of travel)"
    assert test.envelope_label("ultimate") == "Ultimate (constant volume)"
