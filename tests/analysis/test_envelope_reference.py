"""Envelope fits against published worked examples."""

from __future__ import annotations

import math

import numpy as np
import pytest

from testing.analysis import LinearCalibration, fit_envelope, normal_force_n


def test_lever_loaded_60mm_box_with_proving_ring() -> None:
    # Worked example: 60 mm box, masses 36.8–146.9 kg on the specimen, proving ring 20 N/div,
    # readings 17, 26, 35, 44 div at failure. Expected values computed from σn = 9.81·m/A
    # (BS 1377-7 Form 7A formula) and τ = K·R/A (BS 1377-7 Form 7C "stress factor").
    masses_kg = [36.8, 73.5, 110.2, 146.9]
    area_mm2 = 60.0 * 60.0
    normal_kpa = (
        np.array([normal_force_n(direct_mass_kg=m, g_m_s2=9.81) for m in masses_kg])
        * 1000.0
        / area_mm2
    )
    ring = LinearCalibration(factor_n_per_unit=20.0, range_min=0.0, range_max=750.0)
    shear_kpa = ring.force_n([17, 26, 35, 44]) * 1000.0 / area_mm2

    np.testing.assert_allclose(normal_kpa, [100.3, 200.3, 300.3, 400.3], atol=0.05)
    np.testing.assert_allclose(shear_kpa, [94.4, 144.4, 194.4, 244.4], atol=0.05)
    fit = fit_envelope(normal_kpa, shear_kpa)
    assert fit.cohesion_kpa == pytest.approx(44.3, abs=0.05)
    assert fit.tan_phi == pytest.approx(0.500, abs=0.0005)
    assert fit.friction_angle_deg == pytest.approx(26.6, abs=0.05)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-6)
    assert fit.n == 4
    assert fit.r_squared_kind == "centred"


# Whitlow, *Basic Soil Mechanics*, Worked example 7.2 (peak and ultimate loads on a compacted
# sand; inputs as quoted second-hand, textbook answer not seen). Expected values computed from
# the least-squares formulas. Loads in N: the area cancels when c′ = 0, so loads stand in for
# stresses.
WHITLOW_NORMAL = [110.0, 216.0, 324.0, 432.0]
WHITLOW_PEAK = [85.0, 170.0, 253.0, 340.0]
WHITLOW_ULTIMATE = [66.0, 131.0, 195.0, 261.0]


def test_whitlow_peak_through_origin() -> None:
    fit = fit_envelope(WHITLOW_NORMAL, WHITLOW_PEAK, through_origin=True)
    assert fit.tan_phi == pytest.approx(0.7847, abs=5e-5)
    assert fit.friction_angle_deg == pytest.approx(38.1, abs=0.05)
    assert fit.cohesion_kpa == 0.0
    assert fit.r_squared_kind == "uncentred"
    assert fit.dof == 3
    assert "origin" in fit.method


def test_whitlow_peak_free_fit_keeps_negative_intercept_and_offers_origin_fit() -> None:
    fit = fit_envelope(WHITLOW_NORMAL, WHITLOW_PEAK)
    assert fit.cohesion_kpa == pytest.approx(-1.6, abs=0.05)  # never clipped
    assert fit.friction_angle_deg == pytest.approx(38.3, abs=0.05)
    codes = [w.code for w in fit.warnings]
    assert "NEGATIVE_COHESION" in codes
    alt = fit.through_origin_alternative
    assert alt is not None
    assert alt.friction_angle_deg == pytest.approx(38.1, abs=0.05)


def test_whitlow_separate_ultimate_envelope() -> None:
    peak = fit_envelope(WHITLOW_NORMAL, WHITLOW_PEAK, through_origin=True)
    ult = fit_envelope(WHITLOW_NORMAL, WHITLOW_ULTIMATE, through_origin=True)
    assert ult.tan_phi == pytest.approx(0.6036, abs=5e-5)
    assert ult.friction_angle_deg == pytest.approx(31.1, abs=0.05)
    # The crude ψ ≈ φ′p − φ′u of the example is about 7°.
    assert peak.friction_angle_deg - ult.friction_angle_deg == pytest.approx(7.0, abs=0.2)


def test_three_stage_warning_and_exclusion_with_reason() -> None:
    fit = fit_envelope(
        [50.0, 100.0, 200.0, 400.0],
        [40.0, 70.0, 131.0, 150.0],
        exclude={3: "specimen extruded under the box halves"},
    )
    assert fit.n == 3
    assert fit.included_indices == (0, 1, 2)
    assert fit.excluded[0].reason == "specimen extruded under the box halves"
    assert fit.excluded[0].normal_stress_kpa == 400.0
    assert "THREE_STAGES_ONLY" in [w.code for w in fit.warnings]
    # dof = 1, t(0.975, 1) = 12.706: the interval on c′ is very wide.
    lo, hi = fit.cohesion_ci95_kpa
    assert hi - lo == pytest.approx(2 * 12.7062 * fit.stderr_cohesion_kpa, rel=1e-4)


def test_outside_tested_range_is_a_warning_not_an_error() -> None:
    fit = fit_envelope([100.0, 200.0, 300.0], [80.0, 150.0, 215.0])
    inside = fit.evaluate(150.0)
    outside = fit.evaluate(600.0)
    assert inside.inside_tested_range
    assert inside.flags == ()
    assert not outside.inside_tested_range
    assert outside.flags[0].code == "OUTSIDE_TESTED_RANGE"
    assert outside.shear_stress_kpa == pytest.approx(fit.cohesion_kpa + 600.0 * fit.tan_phi)
    assert fit.normal_stress_range_kpa == (100.0, 300.0)


def test_correlation_of_c_and_tan_phi_is_strongly_negative() -> None:
    # Formula corr = −σ̄/√(Sxx/n + σ̄²) (standard OLS covariance of the estimates).
    fit = fit_envelope([100.0, 200.0, 300.0], [80.0, 150.0, 215.0])
    s = np.array([100.0, 200.0, 300.0])
    expected = -s.mean() / math.sqrt(((s - s.mean()) ** 2).sum() / 3 + s.mean() ** 2)
    assert fit.corr_cohesion_tan_phi == pytest.approx(expected, rel=1e-12)
    assert fit.corr_cohesion_tan_phi < -0.9
