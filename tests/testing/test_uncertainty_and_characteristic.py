"""Stored measurement uncertainty of the failure stresses and the characteristic line of an
envelope: each equals the core function called again on the stored inputs, is None where an
input is not recorded, and the test-set page shows it with its unit."""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta
from typing import Any

import numpy as np
import pytest
from django.test import Client
from django.urls import reverse
from django.utils import timezone

from testing import analysis
from testing.models import DirectShearTest, EnvelopeResult, ShearStage, StageResult
from testing.services.computation import stage_exclude
from testing.services.equipment import (
    calibration_record_create,
    force_device_create,
    stage_calibration_link,
)
from testing.services.stage_inputs import box_geometry
from tests.conftest import Cast, Records
from tests.reports.conftest import RING_N_PER_DIV, build_test_set, compute

pytestmark = pytest.mark.django_db

# A certificate quoting U at k = 2.5, so the stored k = 2 value differs from a plain copy of it.
CERT_U_N, CERT_K = 3.0, 2.5


def _ring(cast: Cast, reference: str, expanded_u_n: float | None) -> Any:
    ring = force_device_create(
        user=cast.manager, reference=reference, kind="ring", capacity_n=4500.0, reading_unit="div"
    )
    today = timezone.now().date()
    calibration_record_create(
        user=cast.manager, device=ring, certificate_number=f"C-{reference}",
        issuing_lab="Invented Cal Lab", calibrated_on=today - timedelta(days=100),
        due_on=today + timedelta(days=200), model="linear", coefficients=[RING_N_PER_DIV],
        zero_reading=0.0, range_min=0.0, range_max=2000.0,
        expanded_uncertainty_n=expanded_u_n, coverage_factor_k=CERT_K,
    )  # fmt: skip
    return ring


def _set_with_calibrations(
    cast: Cast, records: Records, capture: Callable[..., Any], *, area_model: str = "nominal"
) -> DirectShearTest:
    """Stage 1 on a certificate with U, stage 2 on one without U, stage 3 on its own factor."""
    test = build_test_set(user=cast.technician, project=records.project, sample=records.sample)
    DirectShearTest.objects.filter(pk=test.pk).update(area_model=area_model)
    test.refresh_from_db()
    stages = {s.stage_number: s for s in ShearStage.objects.filter(test=test)}
    rings = {1: _ring(cast, "PR-1", CERT_U_N), 2: _ring(cast, "PR-2", None)}
    for number, ring in rings.items():
        with capture(execute=True):  # the link asks for the stage to be reduced again
            stage_calibration_link(user=cast.technician, stage=stages[number], device=ring)
    compute(test, cast.technician, capture)
    return test


def _latest(test: DirectShearTest, number: int) -> StageResult:
    return StageResult.objects.filter(stage__test=test, stage__stage_number=number).latest("id")


def _expected_u_tau(test: DirectShearTest, result: StageResult) -> float:
    """U (k = 2) of τf from the core, from the stored failure point, box and certificate."""
    box = box_geometry(test)
    area = float(
        analysis.area_mm2(box, np.array([result.failure_horizontal_mm]), result.area_model)[0]
    )
    force_n = result.failure_shear_stress_kpa * area / 1000.0
    u = analysis.shear_stress_uncertainty(
        force_n=force_n,
        u_force_n=CERT_U_N / CERT_K,
        length_mm=box.length_mm,
        u_length_mm=0.0,
        width_mm=box.width_mm,
        u_width_mm=0.0,
        shape=box.shape,
        coverage_factor=2.0,
    )
    # The core divides by the nominal area; on the corrected area τf = F/Af, so U scales with τ.
    return u.expanded_uncertainty_kpa * result.failure_shear_stress_kpa / u.value_kpa


def _expected_characteristic(envelope: EnvelopeResult) -> dict[str, float]:
    used = [p for p in envelope.points if p["included"] and p["normal_stress_kpa"] is not None]
    fit = analysis.fit_envelope(
        [p["normal_stress_kpa"] for p in used], [p["shear_stress_kpa"] for p in used]
    )
    low, high = min(p["normal_stress_kpa"] for p in used), max(p["normal_stress_kpa"] for p in used)
    band = analysis.regression_lower_band(fit, [low, high], kind="mean", confidence=0.95)
    tan_phi = (band.lower_kpa[1] - band.lower_kpa[0]) / (high - low)
    return {
        "confidence": 0.95,
        "t_value": band.t_value,
        "normal_stress_min_kpa": low,
        "normal_stress_max_kpa": high,
        "band_at_min_kpa": float(band.lower_kpa[0]),
        "band_at_max_kpa": float(band.lower_kpa[1]),
        "cohesion_kpa": float(band.lower_kpa[0] - tan_phi * low),
        "tan_phi": float(tan_phi),
        "friction_angle_deg": float(np.degrees(np.arctan(tan_phi))),
    }


def test_stored_u_and_characteristic_equal_the_core_and_show_on_the_page(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = _set_with_calibrations(cast, records_a, django_capture_on_commit_callbacks)
    first = _latest(test, 1)
    assert first.analysis_version == analysis.ANALYSIS_VERSION
    assert first.shear_stress_u_kpa is not None
    assert first.shear_stress_u_kpa == pytest.approx(_expected_u_tau(test, first), rel=1e-12)
    # Not the certificate's U copied at its own k: converted to the k = 2 the field promises.
    assert first.shear_stress_u_kpa != pytest.approx(
        _expected_u_tau(test, first) * CERT_K / 2.0, rel=1e-6
    )
    # A certificate without U, and a stage on its own ring factor: no uncertainty is made up.
    assert _latest(test, 2).shear_stress_u_kpa is None
    assert _latest(test, 3).shear_stress_u_kpa is None
    # The set has no apparatus record, so no mass, lever or box tolerances: U(σn) stays unknown.
    assert all(_latest(test, n).normal_stress_u_kpa is None for n in (1, 2, 3))

    envelope = EnvelopeResult.objects.filter(test=test, envelope_type="peak").latest("id")
    assert envelope.n == 3
    stored = envelope.characteristic
    assert stored is not None
    expected = _expected_characteristic(envelope)
    assert {k: stored[k] for k in expected} == pytest.approx(expected, rel=1e-12)
    assert stored["band_kind"] == "mean"
    assert "not a test result" in stored["note"]
    # The characteristic line lies under the fitted one over the tested range.
    assert (
        stored["band_at_min_kpa"]
        < envelope.cohesion_kpa + envelope.tan_phi * (stored["normal_stress_min_kpa"])
    )

    client = Client()
    client.force_login(cast.technician)
    text = client.get(reverse("test-detail", args=[test.pk])).content.decode()
    assert f"± {first.shear_stress_u_kpa:.2f} kPa" in text
    assert text.count(" kPa</span>") == 1  # only stage 1 has a U to show
    assert "Characteristic (95 % lower band, mean line) c′ / φ′" in text
    assert f"{stored['cohesion_kpa']:.1f} kPa / {stored['friction_angle_deg']:.1f}°" in text
    assert "selecting design values is for a qualified geotechnical engineer" in text


def test_u_on_the_corrected_area_scales_with_the_stored_shear_stress(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = _set_with_calibrations(
        cast, records_a, django_capture_on_commit_callbacks, area_model="corrected"
    )
    first = _latest(test, 1)
    assert first.area_model == "corrected"
    assert first.shear_stress_u_kpa == pytest.approx(_expected_u_tau(test, first), rel=1e-12)
    nominal_area = box_geometry(test).plan_area_mm2
    # On the smaller corrected area the same force uncertainty is a larger stress uncertainty.
    assert first.shear_stress_u_kpa > 2.0 * (CERT_U_N / CERT_K) * 1000.0 / nominal_area


def test_no_characteristic_from_two_stages(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = _set_with_calibrations(cast, records_a, django_capture_on_commit_callbacks)
    stage = ShearStage.objects.get(test=test, stage_number=3)
    with django_capture_on_commit_callbacks(execute=True):
        stage_exclude(
            stage=stage, envelope_type="peak", reason="Specimen tilted", user=cast.checker
        )
    envelope = EnvelopeResult.objects.filter(test=test, envelope_type="peak").latest("id")
    assert envelope.n == 2
    assert envelope.characteristic is None
    # The ultimate envelope still has all three stages, and so its characteristic line.
    ultimate = EnvelopeResult.objects.filter(test=test, envelope_type="ultimate").latest("id")
    assert ultimate.n == 3
    assert ultimate.characteristic is not None
    client = Client()
    client.force_login(cast.technician)
    text = client.get(reverse("test-detail", args=[test.pk])).content.decode()
    peak_panel = text.split('id="env-peak"', 1)[1].split("</section>", 1)[0]
    assert "Stages used" in peak_panel
    assert "Characteristic (" not in peak_panel
