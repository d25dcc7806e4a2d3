"""Tests for the synthetic demonstration readings."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.typing import NDArray

from testing.demo.synthetic import (
    TIME_FACTOR_AT_50_PERCENT,
    ConsolidationReadings,
    ShearReadings,
    SoilKind,
    consolidation_readings,
    degree_of_consolidation,
    demo_parameters,
    shear_readings,
)

PARAMS = demo_parameters()


def _demo_shear(
    soil: SoilKind,
    *,
    seed: int = 7,
    normal_stress_kpa: float = 100.0,
    ring_constant_n_per_div: float | None = None,
) -> ShearReadings:
    p = PARAMS[soil]
    return shear_readings(
        seed=seed,
        soil=p.soil,
        normal_stress_kpa=normal_stress_kpa,
        rate_mm_per_min=p.rate_mm_per_min,
        phi_peak_deg=p.phi_peak_deg,
        phi_cv_deg=p.phi_cv_deg,
        cohesion_kpa=p.cohesion_kpa,
        displacement_to_peak_mm=p.displacement_to_peak_mm,
        max_dilation_deg=p.max_dilation_deg,
        contraction_mm=p.contraction_mm,
        ring_constant_n_per_div=ring_constant_n_per_div,
    )


def _demo_consolidation(*, seed: int = 3, t50_min: float = 12.0) -> ConsolidationReadings:
    return consolidation_readings(
        seed=seed,
        normal_stress_kpa=100.0,
        height_mm=20.0,
        t50_min=t50_min,
        final_settlement_mm=0.6,
    )


def _slope(x: NDArray[np.float64], y: NDArray[np.float64], half_window: int) -> NDArray[np.float64]:
    """Least-squares slope dy/dx over a centred moving window (interior points only)."""
    slopes = []
    for i in range(half_window, x.size - half_window):
        xs = x[i - half_window : i + half_window + 1]
        ys = y[i - half_window : i + half_window + 1]
        slopes.append(np.polyfit(xs, ys, 1)[0])
    return np.asarray(slopes)


def _is_multiple(values: NDArray[np.float64], resolution: float) -> bool:
    counts = values / resolution
    return bool(np.allclose(counts, np.rint(counts), rtol=0.0, atol=1e-6))


# --------------------------------------------------------------------------- consolidation


def test_degree_of_consolidation_matches_known_values() -> None:
    u = degree_of_consolidation([0.0, TIME_FACTOR_AT_50_PERCENT, 0.848, 2.0])
    assert u[0] == 0.0
    assert u[1] == pytest.approx(0.5, abs=0.002)
    assert u[2] == pytest.approx(0.9, abs=0.002)
    assert u[3] == pytest.approx(0.994, abs=0.001)
    # Short-time asymptote U = 2 sqrt(Tv / π).
    assert degree_of_consolidation(1e-4)[()] == pytest.approx(
        2 * math.sqrt(1e-4 / math.pi), rel=1e-6
    )


def test_degree_of_consolidation_rejects_negative_time_factor() -> None:
    with pytest.raises(ValueError, match="non-negative"):
        degree_of_consolidation([-0.1])


def test_consolidation_is_deterministic_by_seed() -> None:
    a, b = _demo_consolidation(seed=11), _demo_consolidation(seed=11)
    np.testing.assert_array_equal(a.settlement_mm, b.settlement_mm)
    np.testing.assert_array_equal(a.elapsed_min, b.elapsed_min)
    c = _demo_consolidation(seed=12)
    assert not np.array_equal(a.settlement_mm, c.settlement_mm)


@pytest.mark.parametrize("t50_min", [0.3, 3.0, 12.0, 50.0])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_consolidation_reaches_half_primary_at_t50(t50_min: float, seed: int) -> None:
    r = _demo_consolidation(seed=seed, t50_min=t50_min)
    t, s = r.elapsed_min, r.settlement_mm
    # First reading at or above half the primary settlement ...
    first = int(np.argmax(s >= 0.5 * 0.6))
    # ... must be the schedule step that brackets t50 from above, or its neighbour.
    above = int(np.searchsorted(t, t50_min, side="left"))
    assert abs(first - above) <= 1, (t[first], t50_min)


def test_consolidation_readings_are_physical() -> None:
    r = _demo_consolidation()
    assert r.elapsed_min[0] == 0.0
    assert r.settlement_mm[0] == 0.0
    assert np.all(np.diff(r.settlement_mm) >= 0.0)
    assert _is_multiple(r.settlement_mm, r.gauge_resolution_mm)
    # Primary is essentially complete by 1440 min and secondary adds a little more.
    assert 0.6 <= r.settlement_mm[-1] <= 0.6 * 1.1
    # Secondary compression: still settling between 240 and 1440 min.
    i240 = int(np.flatnonzero(r.elapsed_min == 240.0)[0])
    assert r.settlement_mm[-1] - r.settlement_mm[i240] >= 2 * r.gauge_resolution_mm


def test_consolidation_arrays_are_read_only() -> None:
    r = _demo_consolidation()
    with pytest.raises(ValueError, match="read-only"):
        r.settlement_mm[1] = 1.0


def test_consolidation_rejects_bad_input() -> None:
    with pytest.raises(ValueError, match="start at 0"):
        consolidation_readings(
            seed=0,
            normal_stress_kpa=50.0,
            height_mm=20.0,
            t50_min=1.0,
            final_settlement_mm=0.1,
            schedule_min=(1.0, 2.0),
        )
    with pytest.raises(ValueError, match="height"):
        consolidation_readings(
            seed=0, normal_stress_kpa=50.0, height_mm=1.0, t50_min=1.0, final_settlement_mm=2.0
        )


# --------------------------------------------------------------------------- shear: common


@pytest.mark.parametrize("soil", ["dense_sand", "clay"])
def test_shear_is_deterministic_by_seed(soil: SoilKind) -> None:
    a = _demo_shear(soil, seed=5, ring_constant_n_per_div=1.5)
    b = _demo_shear(soil, seed=5, ring_constant_n_per_div=1.5)
    for name in ("elapsed_min", "horizontal_mm", "vertical_mm", "shear_force_n", "ring_divisions"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    c = _demo_shear(soil, seed=6, ring_constant_n_per_div=1.5)
    assert not np.array_equal(a.shear_force_n, c.shear_force_n)


@settings(max_examples=25, deadline=None)
@given(
    soil=st.sampled_from(["dense_sand", "clay"]),
    seed=st.integers(0, 2**32 - 1),
    normal_stress_kpa=st.floats(10.0, 400.0),
    ring=st.one_of(st.none(), st.sampled_from([0.5, 1.37, 2.0])),
)
def test_shear_readings_are_physically_consistent(
    soil: SoilKind, seed: int, normal_stress_kpa: float, ring: float | None
) -> None:
    r = _demo_shear(
        soil, seed=seed, normal_stress_kpa=normal_stress_kpa, ring_constant_n_per_div=ring
    )
    n = r.horizontal_mm.size
    assert n == 201
    for arr in (r.elapsed_min, r.vertical_mm, r.shear_force_n):
        assert arr.shape == (n,)
    # Zero reading.
    assert r.horizontal_mm[0] == 0.0
    assert r.vertical_mm[0] == 0.0
    assert r.shear_force_n[0] == 0.0
    # Monotonic displacement and time, time = displacement / rate.
    assert np.all(np.diff(r.horizontal_mm) > 0.0)
    assert np.all(np.diff(r.elapsed_min) > 0.0)
    np.testing.assert_allclose(
        r.elapsed_min * r.rate_mm_per_min, r.horizontal_mm, atol=2 * r.gauge_resolution_mm
    )
    # No negative force.
    assert np.all(r.shear_force_n >= 0.0)
    # Readings are multiples of the device resolution.
    assert _is_multiple(r.horizontal_mm, r.gauge_resolution_mm)
    assert _is_multiple(r.vertical_mm, r.gauge_resolution_mm)
    assert _is_multiple(r.shear_force_n, r.force_resolution_n)
    if ring is None:
        assert r.ring_divisions is None
        assert r.force_resolution_n == 0.1
    else:
        assert r.ring_divisions is not None
        assert r.ring_divisions.dtype.kind == "i"
        assert np.all(r.ring_divisions >= 0)
        np.testing.assert_allclose(r.shear_force_n, ring * r.ring_divisions, atol=1e-9)
        assert r.force_resolution_n == ring
    # Shear force is τ · A0 on the nominal 60 mm × 60 mm area.
    assert r.area_mm2 == 3600.0
    np.testing.assert_allclose(r.shear_stress_kpa, r.shear_force_n / 3.6)


# --------------------------------------------------------------------------- shear: dense sand


@pytest.mark.parametrize("normal_stress_kpa", [50.0, 100.0, 200.0])
@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("ring", [None, 1.0])
def test_dense_sand_peaks_softens_and_dilates(
    normal_stress_kpa: float, seed: int, ring: float | None
) -> None:
    p = PARAMS["dense_sand"]
    r = _demo_shear(
        "dense_sand", seed=seed, normal_stress_kpa=normal_stress_kpa, ring_constant_n_per_div=ring
    )
    x, y, tau = r.horizontal_mm, r.vertical_mm, r.shear_stress_kpa

    # Clear peak at the requested displacement, with the requested friction angle.
    i_peak = int(np.argmax(tau))
    assert abs(x[i_peak] - p.displacement_to_peak_mm) <= 1.0
    assert 2.0 <= x[i_peak] <= 5.0
    phi_peak = math.degrees(math.atan(tau[i_peak] / normal_stress_kpa))
    assert abs(phi_peak - p.phi_peak_deg) <= 1.0

    # Softening after the peak towards τcv = σ tan φcv.
    tau_cv = normal_stress_kpa * math.tan(math.radians(p.phi_cv_deg))
    assert tau[-1] < 0.9 * tau[i_peak]
    assert tau[-1] == pytest.approx(tau_cv, rel=0.05)

    # Small initial compression, then dilation.
    assert -0.1 < y.min() < 0.0
    assert x[int(np.argmin(y))] < x[i_peak]
    assert y[-1] > 0.2

    # Dilation rate: maximum (positive) near the peak stress, ~0 at large displacement.
    half = 10  # ±0.5 mm window
    slope = _slope(x, y, half)
    xs = x[half:-half]
    i_max = int(np.argmax(slope))
    assert slope[i_max] > 0.0
    assert abs(xs[i_max] - x[i_peak]) <= 1.0
    tan_psi = math.tan(math.radians(p.max_dilation_deg))
    assert slope[i_max] == pytest.approx(tan_psi, rel=0.15)
    end_slope = np.polyfit(x[-40:], y[-40:], 1)[0]  # last 2 mm
    assert abs(end_slope) < 0.15 * slope[i_max]


def test_dense_sand_default_dilation_follows_bolton() -> None:
    r = shear_readings(
        seed=1,
        soil="dense_sand",
        normal_stress_kpa=100.0,
        rate_mm_per_min=1.0,
        phi_peak_deg=40.0,
        phi_cv_deg=32.0,
        displacement_to_peak_mm=3.0,
        gauge_resolution_mm=0.001,
    )
    slope = _slope(r.horizontal_mm, r.vertical_mm, 10)
    assert slope.max() == pytest.approx(math.tan(math.radians((40.0 - 32.0) / 0.8)), rel=0.1)


def test_dense_sand_respects_cohesion_in_peak() -> None:
    r = shear_readings(
        seed=2,
        soil="dense_sand",
        normal_stress_kpa=100.0,
        rate_mm_per_min=1.0,
        phi_peak_deg=38.0,
        phi_cv_deg=32.0,
        cohesion_kpa=10.0,
        displacement_to_peak_mm=3.0,
    )
    expected = 10.0 + 100.0 * math.tan(math.radians(38.0))
    assert r.shear_stress_kpa.max() == pytest.approx(expected, rel=0.01)


# --------------------------------------------------------------------------- shear: clay


@pytest.mark.parametrize("normal_stress_kpa", [50.0, 100.0, 200.0])
@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("ring", [None, 1.0])
def test_clay_plateaus_without_peak_and_contracts(
    normal_stress_kpa: float, seed: int, ring: float | None
) -> None:
    p = PARAMS["clay"]
    r = _demo_shear(
        "clay", seed=seed, normal_stress_kpa=normal_stress_kpa, ring_constant_n_per_div=ring
    )
    x, y, tau = r.horizontal_mm, r.vertical_mm, r.shear_stress_kpa
    tau_f = p.cohesion_kpa + normal_stress_kpa * math.tan(math.radians(p.phi_peak_deg))

    # No marked peak: never more than a 3 % drop from the running maximum.
    running_max = np.maximum.accumulate(tau)
    assert np.all(tau >= 0.97 * running_max)
    # Plateau reached at about 6-8 mm, at the requested strength.
    i_reach = int(np.argmax(tau >= 0.99 * tau_f))
    assert 5.0 <= x[i_reach] <= 8.0
    assert tau[-1] == pytest.approx(tau_f, rel=0.03)

    # Contraction: monotonic, negative, with a decreasing rate.
    assert np.all(np.diff(y) <= 0.0)
    assert y[-1] < -0.2
    first_rate = (y[20] - y[0]) / (x[20] - x[0])  # first 1 mm
    last_rate = (y[-1] - y[-21]) / (x[-1] - x[-21])  # last 1 mm
    assert first_rate < 0.0
    assert abs(last_rate) < 0.25 * abs(first_rate)


def test_clay_rejects_dilation_and_peak() -> None:
    with pytest.raises(ValueError, match="dilate"):
        shear_readings(
            seed=0,
            soil="clay",
            normal_stress_kpa=100.0,
            rate_mm_per_min=0.02,
            phi_peak_deg=24.0,
            displacement_to_peak_mm=7.0,
            max_dilation_deg=5.0,
        )
    with pytest.raises(ValueError, match="no peak"):
        shear_readings(
            seed=0,
            soil="clay",
            normal_stress_kpa=100.0,
            rate_mm_per_min=0.02,
            phi_peak_deg=24.0,
            phi_cv_deg=20.0,
            displacement_to_peak_mm=7.0,
        )


def test_shear_rejects_bad_input() -> None:
    with pytest.raises(ValueError, match="soil"):
        shear_readings(
            seed=0,
            soil="loose_sand",  # type: ignore[arg-type]
            normal_stress_kpa=100.0,
            rate_mm_per_min=1.0,
            phi_peak_deg=30.0,
            displacement_to_peak_mm=3.0,
        )
    with pytest.raises(ValueError, match="phi_cv_deg"):
        shear_readings(
            seed=0,
            soil="dense_sand",
            normal_stress_kpa=100.0,
            rate_mm_per_min=1.0,
            phi_peak_deg=30.0,
            phi_cv_deg=33.0,
            displacement_to_peak_mm=3.0,
        )
    with pytest.raises(ValueError, match="whole number"):
        shear_readings(
            seed=0,
            soil="dense_sand",
            normal_stress_kpa=100.0,
            rate_mm_per_min=1.0,
            phi_peak_deg=40.0,
            phi_cv_deg=33.0,
            displacement_to_peak_mm=3.0,
            interval_mm=0.3,
        )


# --------------------------------------------------------------------------- demo parameters


def test_demo_parameters_are_the_documented_values() -> None:
    sand, clay = PARAMS["dense_sand"], PARAMS["clay"]
    assert (sand.phi_peak_deg, sand.phi_cv_deg, sand.cohesion_kpa) == (40.0, 33.0, 0.0)
    assert (clay.phi_peak_deg, clay.phi_cv_deg, clay.cohesion_kpa) == (24.0, 24.0, 5.0)
    assert 2.0 <= sand.displacement_to_peak_mm <= 5.0
    assert 6.0 <= clay.displacement_to_peak_mm <= 8.0
    assert sand.soil == "dense_sand"
    assert clay.soil == "clay"
    assert "invented" in sand.description
    assert "invented" in clay.description
