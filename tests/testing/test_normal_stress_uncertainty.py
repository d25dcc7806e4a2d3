"""U (k = 2) of the normal stress at failure, from the tolerances an apparatus record gives.

Checked against the law of propagation of uncertainty for uncorrelated inputs, u_c²(y) = Σ
(∂f/∂x_i)²·u²(x_i) (JCGM 100:2008, the GUM, eq. 10), with a ± a tolerance read as a rectangular
distribution, u = a/√3 (GUM 4.3.7), and the partial derivatives taken numerically here (central
differences) from σn = g·[m_d + r·(m_h + m_w)]/(L·W), not from the project's code.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import pytest
from django.test import Client
from django.urls import reverse

from testing.models import DirectShearTest, ShearStage, StageResult
from testing.services.equipment import apparatus_create
from tests.conftest import Cast, Records
from tests.reports.conftest import BOX_MM, build_test_set, compute

pytestmark = pytest.mark.django_db

G = 9.80665  # standard gravity [m/s²] (CGPM 1901)
MASS_PCT, LEVER_TOL, BOX_TOL_MM = 0.5, 0.05, 0.1


def _sigma_kpa(m_d: float, m_h: float, m_w: float, r: float, length: float, width: float) -> float:
    return G * (m_d + r * (m_h + m_w)) / (length * width) * 1000.0


def _gum_expanded_u(stage: ShearStage) -> float:
    """2·u_c of σn on the nominal area, by numerical partial derivatives."""
    x = [
        stage.direct_mass_kg or 0.0,
        stage.hanger_mass_kg or 0.0,
        stage.weights_mass_kg or 0.0,
        stage.lever_ratio or 1.0,
        BOX_MM,
        BOX_MM,
    ]
    rect = 1.0 / math.sqrt(3.0)
    u = [
        MASS_PCT / 100.0 * x[0] * rect,
        MASS_PCT / 100.0 * x[1] * rect,
        MASS_PCT / 100.0 * x[2] * rect,
        LEVER_TOL * rect,
        BOX_TOL_MM * rect,
        BOX_TOL_MM * rect,
    ]
    total = 0.0
    for i, (xi, ui) in enumerate(zip(x, u, strict=True)):
        h = 1e-6 * max(abs(xi), 1.0)
        up, down = list(x), list(x)
        up[i], down[i] = xi + h, xi - h
        derivative = (_sigma_kpa(*up) - _sigma_kpa(*down)) / (2.0 * h)
        total += (derivative * ui) ** 2
    return 2.0 * math.sqrt(total)


def _set_on_apparatus(
    cast: Cast,
    records: Records,
    capture: Callable[..., Any],
    *,
    area_model: str = "nominal",
    **tolerances: float | None,
) -> DirectShearTest:
    machine = apparatus_create(
        user=cast.manager, reference="SB-9", box_length_mm=BOX_MM, box_width_mm=BOX_MM,
        lever_ratio=10.0, hanger_mass_kg=1.0, **tolerances,
    )  # fmt: skip
    test = build_test_set(user=cast.technician, project=records.project, sample=records.sample)
    DirectShearTest.objects.filter(pk=test.pk).update(
        apparatus_record=machine, area_model=area_model
    )
    test.refresh_from_db()
    compute(test, cast.technician, capture)
    return test


def _nominal_sigma_kpa(stage: ShearStage) -> float:
    return _sigma_kpa(
        stage.direct_mass_kg or 0.0, stage.hanger_mass_kg or 0.0, stage.weights_mass_kg or 0.0,
        stage.lever_ratio or 1.0, BOX_MM, BOX_MM,
    )  # fmt: skip


def _results(test: DirectShearTest) -> list[StageResult]:
    return [
        StageResult.objects.filter(stage__test=test, stage__stage_number=n).latest("id")
        for n in (1, 2, 3)
    ]


def test_u_of_the_normal_stress_follows_the_law_of_propagation(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = _set_on_apparatus(
        cast, records_a, django_capture_on_commit_callbacks, mass_tolerance_pct=MASS_PCT,
        lever_ratio_tolerance=LEVER_TOL, box_dimension_tolerance_mm=BOX_TOL_MM,
    )  # fmt: skip
    assert test.area_model == "nominal"
    for result in _results(test):
        stage = result.stage
        expected = _gum_expanded_u(stage)
        # No beam offset on these stages, so σn at failure is exactly the masses' stress.
        assert stage.beam_offset_force_n == 0.0
        assert result.failure_normal_stress_kpa == pytest.approx(
            _nominal_sigma_kpa(stage), rel=1e-9
        )
        assert result.normal_stress_u_kpa == pytest.approx(expected, rel=1e-6)
        # Of the order a lab would expect: about 0.3-0.6 % of σn for these tolerances.
        assert 0.002 < result.normal_stress_u_kpa / result.failure_normal_stress_kpa < 0.01

    client = Client()
    client.force_login(cast.technician)
    text = client.get(reverse("test-detail", args=[test.pk])).content.decode()
    first = _results(test)[0]
    assert f"± {first.normal_stress_u_kpa:.2f} kPa" in text


def test_a_missing_tolerance_leaves_u_of_the_normal_stress_unknown(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    test = _set_on_apparatus(
        cast, records_a, django_capture_on_commit_callbacks, mass_tolerance_pct=MASS_PCT,
        lever_ratio_tolerance=None, box_dimension_tolerance_mm=BOX_TOL_MM,
    )  # fmt: skip
    assert all(r.normal_stress_u_kpa is None for r in _results(test))


def test_an_apparatus_tolerance_change_is_a_new_input(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    """The tolerances are part of the inputs fingerprint: a stored result says which made it."""
    test = _set_on_apparatus(
        cast, records_a, django_capture_on_commit_callbacks, mass_tolerance_pct=MASS_PCT,
        lever_ratio_tolerance=LEVER_TOL, box_dimension_tolerance_mm=BOX_TOL_MM,
    )  # fmt: skip
    before = _results(test)[0]
    assert test.apparatus_record is not None
    type(test.apparatus_record).objects.filter(pk=test.apparatus_record.pk).update(
        lever_ratio_tolerance=2 * LEVER_TOL
    )
    compute(test, cast.technician, django_capture_on_commit_callbacks)
    after = _results(test)[0]
    assert after.inputs_hash != before.inputs_hash
    assert after.normal_stress_u_kpa is not None and before.normal_stress_u_kpa is not None
    assert after.normal_stress_u_kpa > before.normal_stress_u_kpa


def test_on_the_corrected_area_u_scales_with_the_normal_stress_at_failure(
    cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Callable[..., Any]
) -> None:
    """σn = N/Af with Af the contact area at failure: ∂σn/∂x_i = (A/Af)·∂σ_nominal/∂x_i for every
    input, so the relative uncertainty is the nominal one while U grows with σn."""
    test = _set_on_apparatus(
        cast, records_a, django_capture_on_commit_callbacks, area_model="corrected",
        mass_tolerance_pct=MASS_PCT, lever_ratio_tolerance=LEVER_TOL,
        box_dimension_tolerance_mm=BOX_TOL_MM,
    )  # fmt: skip
    for result in _results(test):
        assert result.area_model == "corrected"
        stage = result.stage
        nominal = _nominal_sigma_kpa(stage)
        assert result.failure_normal_stress_kpa > nominal * 1.01  # the area has shrunk
        assert result.normal_stress_u_kpa == pytest.approx(
            _gum_expanded_u(stage) * result.failure_normal_stress_kpa / nominal, rel=1e-6
        )
