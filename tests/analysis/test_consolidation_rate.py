"""Consolidation constructions and the rate of shearing."""

from __future__ import annotations

import math

import numpy as np
import pytest

from testing.analysis import (
    AASHTO_T236,
    ASTM_D3080_23,
    BS_1377_7_1990,
    BS_EN_ISO_17892_10_2018,
    AnalysisError,
    bs_t100_min,
    casagrande_log_time,
    max_rate,
    measured_rate_mm_per_min,
    taylor_root_time,
)


def terzaghi_degree(time_factor: np.ndarray) -> np.ndarray:
    """Average degree of consolidation U(T), Terzaghi's series solution (textbook theory)."""
    m = np.arange(400)
    big_m = np.pi * (2 * m + 1) / 2
    return 1 - np.sum(
        2 / big_m[:, None] ** 2 * np.exp(-(big_m[:, None] ** 2) * time_factor[None, :]), axis=0
    )


T90 = 10.0  # min; Terzaghi time factors T90 = 0.848, T50 = 0.197 (textbook values)
TIMES = np.concatenate(([0.0], np.geomspace(0.05, 1440.0, 120)))
SETTLEMENT = 0.05 + 1.2 * terzaghi_degree(TIMES * 0.848 / T90)


def test_taylor_recovers_t90_of_terzaghi_curve() -> None:
    # Taylor's construction is designed on Terzaghi's curve, so it should return t90 closely.
    res = taylor_root_time(TIMES, SETTLEMENT)
    assert res.t90_min == pytest.approx(T90, rel=0.02)
    assert res.t50_min == pytest.approx(res.t90_min / 4.28)
    assert res.d0_mm == pytest.approx(0.05, abs=0.005)
    assert res.d100_mm == pytest.approx(1.25, rel=0.01)
    assert len(res.fit_indices) >= 2


def test_bs_t100_from_the_root_time_line() -> None:
    # Early part U = (2/√π)·√T, so the line reaches U = 1 at T = π/4: t100 = (π/4)/0.848 × t90
    # (computed from the stated formula).
    res = taylor_root_time(TIMES, SETTLEMENT)
    assert bs_t100_min(res) == pytest.approx(math.pi / 4 / 0.848 * T90, rel=0.03)


def test_casagrande_recovers_t50_with_secondary_compression() -> None:
    secondary = 0.03 * np.log10(np.maximum(TIMES, 1e-9) / (2 * T90)) * (TIMES > 2 * T90)
    res = casagrande_log_time(TIMES, SETTLEMENT + secondary, t1_min=0.1)
    assert res.t50_min == pytest.approx(0.197 / 0.848 * T90, rel=0.05)
    assert res.d0_mm == pytest.approx(0.05, abs=0.01)
    assert res.d100_mm == pytest.approx(1.25, rel=0.03)
    assert res.secondary_line[0] == pytest.approx(0.03, rel=0.05)


@pytest.mark.parametrize(
    ("t50", "d_f", "expected"),
    [(10.0, 5.0, 0.010), (2.0, 12.0, 0.12), (0.2, 5.0, 0.5)],
)
def test_astm_rate_examples(t50: float, d_f: float, expected: float) -> None:
    # t_f = 50·t50 (ASTM D3080 / AASHTO T 236, quoted second-hand); v = d_f/t_f, computed from
    # the stated formula. The 10-minute floor for clean sands is from memory.
    lim = max_rate(ASTM_D3080_23, t50_min=t50, displacement_at_failure_mm=d_f)
    assert lim.max_rate_mm_per_min == pytest.approx(expected)
    assert lim.displacement_source == "user"
    aashto = max_rate(AASHTO_T236, t50_min=t50, displacement_at_failure_mm=d_f)
    assert aashto.max_rate_mm_per_min == pytest.approx(expected)


def test_bs_rate_example() -> None:
    # BS 1377-7: t_f = 12.7·t100 (from memory); t100 = 40 min, d_f = 5 mm → 0.0098 mm/min.
    lim = max_rate(BS_1377_7_1990, t100_min=40.0, displacement_at_failure_mm=5.0)
    assert lim.time_to_failure_min == pytest.approx(508.0)
    assert lim.max_rate_mm_per_min == pytest.approx(0.0098, abs=5e-5)


def test_profile_default_displacement_and_fine_grained() -> None:
    lim = max_rate(ASTM_D3080_23, t50_min=2.0, fine_grained=True)
    assert lim.displacement_at_failure_mm == 12.0
    assert lim.displacement_source == "profile default"
    assert "displacement_at_failure_fine_mm" in ASTM_D3080_23.from_memory


def test_rate_errors() -> None:
    with pytest.raises(AnalysisError, match="needs t50"):
        max_rate(ASTM_D3080_23, t100_min=40.0)
    with pytest.raises(AnalysisError, match="no time-to-failure rule"):
        max_rate(BS_EN_ISO_17892_10_2018, t50_min=1.0, displacement_at_failure_mm=5.0)


def test_measured_rate_is_least_squares_slope() -> None:
    t = np.linspace(0.0, 100.0, 51)
    x = 0.02 * t + 0.001 * np.sin(t)
    assert measured_rate_mm_per_min(t, x) == pytest.approx(np.polyfit(t, x, 1)[0], rel=1e-10)
