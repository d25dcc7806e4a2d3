"""Plan areas: nominal and corrected, square and circular."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from testing.analysis import BoxGeometry, GeometryError, corrected_area_mm2

# Circular-segment geometry; tabulated factors common in lab manuals, reproduced by the formula
# A_c/A0 = (2/π)·[arccos(x/D) − (x/D)·√(1 − (x/D)²)].
CIRCULAR_TABLE = [
    (0.00, 1.000),
    (0.02, 0.975),
    (0.04, 0.949),
    (0.06, 0.924),
    (0.08, 0.898),
    (0.10, 0.873),
    (0.12, 0.848),
    (0.14, 0.822),
    (0.16, 0.797),
    (0.18, 0.772),
    (0.20, 0.747),
]


@pytest.mark.parametrize(("x_over_d", "factor"), CIRCULAR_TABLE)
def test_circular_area_factor_table_to_3dp(x_over_d: float, factor: float) -> None:
    d = 63.5
    a0 = math.pi * d * d / 4.0
    area = corrected_area_mm2(shape="circular", size_mm=d, displacement_mm=x_over_d * d)
    assert isinstance(area, float)
    assert round(area / a0, 3) == factor


def test_circular_area_accepts_arrays() -> None:
    d = 50.0
    x = np.array([r for r, _ in CIRCULAR_TABLE]) * d
    area = corrected_area_mm2(shape="circular", size_mm=d, displacement_mm=x)
    assert isinstance(area, np.ndarray)
    np.testing.assert_allclose(
        area / (math.pi * d * d / 4), [f for _, f in CIRCULAR_TABLE], atol=5e-4
    )


@pytest.mark.parametrize(("x_mm", "ratio"), [(2.0, 0.967), (5.0, 0.917), (6.0, 0.900)])
def test_square_60mm_corrected_area(x_mm: float, ratio: float) -> None:
    # Computed from A_c = W·(L − x) (rectangular overlap), 60 mm box.
    area = corrected_area_mm2(shape="square", size_mm=60.0, displacement_mm=x_mm)
    assert area == pytest.approx(60.0 * (60.0 - x_mm))
    assert round(area / 3600.0, 3) == ratio


def test_rectangular_uses_width() -> None:
    area = corrected_area_mm2(
        shape="rectangular", size_mm=100.0, width_mm=60.0, displacement_mm=[0, 10]
    )
    np.testing.assert_allclose(area, [6000.0, 5400.0])


@settings(max_examples=50, deadline=None)
@given(d=st.floats(10.0, 300.0), r=st.floats(0.0, 0.99))
def test_circular_area_matches_two_segment_formula(d: float, r: float) -> None:
    # Independent form: overlap of two circles of radius R at centre distance x is
    # 2R²·arccos(x/2R) − (x/2)·√(4R² − x²).
    x = r * d
    big_r = d / 2
    lens = 2 * big_r**2 * math.acos(x / (2 * big_r)) - (x / 2) * math.sqrt(4 * big_r**2 - x * x)
    assert corrected_area_mm2(shape="circular", size_mm=d, displacement_mm=x) == pytest.approx(
        lens, rel=1e-9, abs=1e-9 * d * d
    )


def test_displacement_not_less_than_box_length_is_refused() -> None:
    with pytest.raises(
        GeometryError,
        match=r"Horizontal displacement 61\.0 mm is not less than the box length 60\.0 mm",
    ):
        corrected_area_mm2(shape="square", size_mm=60.0, displacement_mm=[1.0, 61.0])


def test_zero_box_size_is_refused() -> None:
    with pytest.raises(GeometryError, match="Box length must be greater than zero"):
        corrected_area_mm2(shape="square", size_mm=0.0, displacement_mm=0.0)
    with pytest.raises(GeometryError, match="greater than zero"):
        BoxGeometry.rectangular(60.0, 0.0)


def test_plan_areas() -> None:
    assert BoxGeometry.square(60.0).plan_area_mm2 == 3600.0
    assert BoxGeometry.circular(50.0).plan_area_mm2 == pytest.approx(math.pi * 625.0)
