"""Every bad input gives the domain error with a message a technician understands."""

from __future__ import annotations

import math

import numpy as np
import pytest

from testing.analysis import (
    AnalysisError,
    BoxGeometry,
    CalibrationRangeError,
    GeometryError,
    InsufficientDataError,
    LinearCalibration,
    PolynomialCalibration,
    fit_envelope,
    reduce_stage,
)


def _stage(**over: object) -> dict[str, object]:
    x = np.linspace(0.0, 5.0, 11)
    base: dict[str, object] = {
        "time_min": x * 10,
        "horizontal_mm": x,
        "vertical_mm": np.zeros(11),
        "shear_force_n": np.linspace(0, 200, 11),
        "normal_force_n": 360.0,
        "box": BoxGeometry.square(60.0),
    }
    base.update(over)
    return base


def test_domain_error_is_a_value_error() -> None:
    assert issubclass(AnalysisError, ValueError)


def test_nan_in_envelope_input() -> None:
    with pytest.raises(
        AnalysisError,
        match=r"Normal stress \[kPa\] has 1 missing or non-numeric value .*position 2",
    ):
        fit_envelope([100.0, math.nan, 300.0], [80.0, 150.0, 215.0])


def test_nan_in_readings() -> None:
    f = np.linspace(0, 200, 11)
    f[4] = np.nan
    with pytest.raises(AnalysisError, match=r"Shear force \[N\] .*position 5"):
        reduce_stage(**_stage(shear_force_n=f))  # type: ignore[arg-type]


def test_fewer_than_two_points() -> None:
    with pytest.raises(InsufficientDataError, match="at least 2 stages; 1 is included"):
        fit_envelope([100.0], [80.0])
    with pytest.raises(InsufficientDataError, match="at least 2 stages; 1 is included"):
        fit_envelope([100.0, 200.0], [80.0, 150.0], exclude={1: "disturbed"})


def test_equal_normal_stresses() -> None:
    with pytest.raises(InsufficientDataError, match=r"All normal stresses are equal \(150 kPa\)"):
        fit_envelope([150.0, 150.0, 150.0], [90.0, 95.0, 100.0])


def test_exclusion_needs_a_reason() -> None:
    with pytest.raises(AnalysisError, match="Give a reason for excluding stage 2"):
        fit_envelope([100.0, 200.0, 300.0], [1.0, 2.0, 3.0], exclude={1: " "})


def test_zero_area() -> None:
    with pytest.raises(GeometryError, match="Box length must be greater than zero"):
        BoxGeometry.square(0.0)


def test_displacement_not_less_than_box_length() -> None:
    x = np.linspace(0.0, 61.0, 11)
    with pytest.raises(
        GeometryError,
        match=r"Horizontal displacement 61\.0 mm is not less than the box length 60\.0 mm",
    ):
        reduce_stage(**_stage(horizontal_mm=x, area_model="corrected"))  # type: ignore[arg-type]
    with pytest.raises(GeometryError, match="not less than the box length"):
        reduce_stage(**_stage(horizontal_mm=x))  # type: ignore[arg-type]


def test_calibration_out_of_range() -> None:
    ring = LinearCalibration(factor_n_per_unit=2.0, range_min=0.0, range_max=750.0)
    with pytest.raises(
        CalibrationRangeError,
        match="Force reading 812 div is outside the calibrated range 0–750 div of the ring",
    ):
        ring.force_n([10.0, 812.0])
    poly = PolynomialCalibration(
        (0.0, 2.0, 1e-4), range_min=5.0, range_max=500.0, device="load cell"
    )
    with pytest.raises(
        CalibrationRangeError,
        match="Force reading 2 div is outside the calibrated range 5–500 div of the load cell",
    ):
        poly.force_n([2.0, 100.0])


def test_time_going_backwards_and_unequal_lengths() -> None:
    t = np.linspace(0, 50, 11)
    t[6] = 1.0
    with pytest.raises(AnalysisError, match="Elapsed time goes backwards at reading 7"):
        reduce_stage(**_stage(time_min=t))  # type: ignore[arg-type]
    with pytest.raises(AnalysisError, match="lengths differ"):
        reduce_stage(**_stage(vertical_mm=np.zeros(10)))  # type: ignore[arg-type]


def test_non_positive_normal_force() -> None:
    with pytest.raises(AnalysisError, match="Normal force must be greater than zero"):
        reduce_stage(**_stage(normal_force_n=0.0))  # type: ignore[arg-type]


def test_polynomial_degree_limit() -> None:
    with pytest.raises(AnalysisError, match="1st to 3rd degree"):
        PolynomialCalibration((0.0, 1.0, 0.0, 0.0, 1e-9), range_min=0.0, range_max=10.0)
