"""Normal force, force calibrations and gauges."""

from __future__ import annotations

import numpy as np
import pytest

from testing.analysis import (
    STANDARD_GRAVITY_M_S2,
    LinearCalibration,
    PolynomialCalibration,
    gauge_displacement_mm,
    normal_force_n,
)


def test_lever_arm_normal_force() -> None:
    # N = g·[m_direct + r·(m_hanger + m_weights)] + N_beam (standard statics, common practice).
    n = normal_force_n(
        direct_mass_kg=1.5,
        lever_ratio=10.0,
        hanger_mass_kg=2.0,
        weights_mass_kg=6.0,
        beam_offset_n=3.0,
    )
    assert n == pytest.approx(STANDARD_GRAVITY_M_S2 * 81.5 + 3.0)
    assert STANDARD_GRAVITY_M_S2 == 9.80665


def test_bs_form_7a_stress_from_mass() -> None:
    # BS 1377-7 Form 7A: σn = 9810·m/A (kPa, kg, mm²) with g = 9.81.
    m, area = 36.8, 3600.0
    assert normal_force_n(direct_mass_kg=m, g_m_s2=9.81) * 1000 / area == pytest.approx(
        9810 * m / area
    )


def test_linear_calibration_with_zero() -> None:
    ring = LinearCalibration(
        factor_n_per_unit=1.85, zero_reading=3.0, range_min=0.0, range_max=1000.0
    )
    np.testing.assert_allclose(ring.force_n([3.0, 103.0]), [0.0, 185.0])


def test_polynomial_calibration_third_degree() -> None:
    coeffs = (0.5, 1.9, -2e-4, 3e-8)
    cal = PolynomialCalibration(coeffs, range_min=0.0, range_max=1000.0, zero_reading=2.0)
    r = np.array([2.0, 250.0, 999.0])
    d = r - 2.0
    np.testing.assert_allclose(cal.force_n(r), np.polynomial.polynomial.polyval(d, coeffs))


def test_gauge_factor_and_sign() -> None:
    # Vertical dial gauge 0.002 mm/div, reading decreasing as the platen rises (sign −1).
    y = gauge_displacement_mm(
        [500.0, 480.0, 450.0], zero_reading=500.0, factor_mm_per_unit=0.002, sign=-1
    )
    np.testing.assert_allclose(y, [0.0, 0.04, 0.1])
