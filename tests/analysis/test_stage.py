"""One-call stage reduction and the failure pickers."""

from __future__ import annotations

import math

import numpy as np
import pytest

from testing.analysis import (
    BoxGeometry,
    StageCriteria,
    dilation_angle_deg,
    pick_peak,
    pick_residual,
    reduce_stage,
)

# Powrie, *Soil Mechanics: Concepts and Applications*, Q2.7 (inputs as quoted second-hand;
# answers computed from ψ = arctan(dy/dx) and φ′ = arctan(τ/σ′)). 60 × 60 mm specimen,
# σ′n = 41.67 kPa, readings near the peak; y is the upward movement of the lid.
POWRIE_X = [0.30, 0.40, 0.80]
POWRIE_TAU = [42.5, 43.1, 42.8]
POWRIE_Y = [0.05, 0.075, 0.105]
POWRIE_SIGMA = 41.67


def test_powrie_peak_friction_angle() -> None:
    peak = pick_peak(POWRIE_X, POWRIE_Y, POWRIE_TAU, [POWRIE_SIGMA] * 3)
    assert peak.index == 1
    assert peak.secant_friction_angle_deg == pytest.approx(45.97, abs=0.005)
    assert (peak.horizontal_mm, peak.vertical_mm) == (0.40, 0.075)


def test_powrie_dilation_angle_depends_on_the_window() -> None:
    before = dilation_angle_deg(POWRIE_X, POWRIE_Y, index=1, readings_before=1, readings_after=0)
    after = dilation_angle_deg(POWRIE_X, POWRIE_Y, index=1, readings_before=0, readings_after=1)
    assert before.slope == pytest.approx(0.25)
    assert before.dilation_angle_deg == pytest.approx(14.0, abs=0.05)
    assert after.slope == pytest.approx(0.075)
    assert after.dilation_angle_deg == pytest.approx(4.3, abs=0.05)
    # Taylor-corrected ratio τ/σ − dy/dx = 0.784 → 38.1° (interpretation, computed).
    ratio = 43.1 / POWRIE_SIGMA - before.slope
    assert math.degrees(math.atan(ratio)) == pytest.approx(38.1, abs=0.05)


def test_powrie_through_reduce_stage() -> None:
    area = 3600.0
    red = reduce_stage(
        time_min=[3.0, 4.0, 8.0],
        horizontal_mm=POWRIE_X,
        vertical_mm=POWRIE_Y,
        shear_force_n=np.array(POWRIE_TAU) * area / 1000.0,
        normal_force_n=POWRIE_SIGMA * area / 1000.0,
        box=BoxGeometry.square(60.0),
        criteria=StageCriteria(dilation_half_window_mm=0.15),
    )
    assert red.peak.shear_stress_kpa == pytest.approx(43.1)
    assert red.peak.normal_stress_kpa == pytest.approx(POWRIE_SIGMA)
    assert red.dilation_at_peak is not None
    assert red.dilation_at_peak.dilation_angle_deg == pytest.approx(14.0, abs=0.05)
    assert red.measured_rate_mm_per_min == pytest.approx(0.1, rel=1e-12)


def _synthetic_stage(n: int = 4001, rate: float = 0.5) -> dict[str, np.ndarray]:
    """Dense-sand-like stage: peak near x = 2 mm, then constant volume from about 6 mm."""
    x = np.linspace(0.0, 10.0, n)
    t = x / rate
    y = 0.6 * (1.0 - np.exp(-np.clip(x - 0.5, 0.0, None))) ** 3 * (x < 6.0) + 0.6 * (
        1.0 - np.exp(-5.5)
    ) ** 3 * (x >= 6.0)
    f = 300.0 * (1.0 - np.exp(-3.0 * x)) + 80.0 * np.exp(-((x - 2.0) ** 2))
    return {"time_min": t, "horizontal_mm": x, "vertical_mm": y, "shear_force_n": f}


def test_reduce_stage_stresses_per_reading_and_points() -> None:
    data = _synthetic_stage()
    box = BoxGeometry.square(60.0)
    red = reduce_stage(**data, normal_force_n=360.0, box=box, area_model="corrected")
    x = data["horizontal_mm"]
    area = 60.0 * (60.0 - x)
    np.testing.assert_allclose(red.area_mm2, area)
    np.testing.assert_allclose(red.shear_stress_kpa, data["shear_force_n"] * 1000 / area)
    np.testing.assert_allclose(red.normal_stress_kpa, 360.0 * 1000 / area)
    np.testing.assert_allclose(red.stress_ratio, data["shear_force_n"] / 360.0)
    i = int(np.argmax(red.shear_stress_kpa))
    assert red.peak.index == i
    assert red.peak.criterion == "peak"
    assert red.peak_ratio.index == int(np.argmax(data["shear_force_n"]))
    assert red.at_displacement is not None
    assert red.at_displacement.horizontal_mm == pytest.approx(6.0)  # 10 % of 60 mm
    assert red.end_of_travel.horizontal_mm == 10.0
    assert red.ultimate is not None
    assert red.ultimate.horizontal_mm > 6.0
    assert red.ultimate.window is not None
    a, b = red.ultimate.window
    assert red.ultimate.shear_stress_kpa == pytest.approx(red.shear_stress_kpa[a:b].mean())
    assert red.max_dilation_angle_deg > 0.0
    assert red.measured_rate_mm_per_min == pytest.approx(0.5, rel=1e-9)
    assert red.residual is None
    assert red.n_traverses == 1
    assert red.analysis_version


def test_rate_flag_when_faster_than_allowed() -> None:
    data = _synthetic_stage(rate=0.5)
    box = BoxGeometry.square(60.0)
    slow = reduce_stage(**data, normal_force_n=360.0, box=box, max_rate_mm_per_min=1.0)
    fast = reduce_stage(**data, normal_force_n=360.0, box=box, max_rate_mm_per_min=0.01)
    assert "RATE_TOO_FAST" not in [f.code for f in slow.flags]
    flag = next(f for f in fast.flags if f.code == "RATE_TOO_FAST")
    assert flag.values["measured_rate_mm_per_min"] == pytest.approx(0.5)


def test_peak_at_end_of_travel_is_flagged() -> None:
    x = np.linspace(0.0, 8.0, 200)
    red = reduce_stage(
        time_min=x,
        horizontal_mm=x,
        vertical_mm=np.zeros_like(x),
        shear_force_n=100.0 * (1 - np.exp(-x)),
        normal_force_n=200.0,
        box=BoxGeometry.square(60.0),
    )
    assert "PEAK_AT_END_OF_TRAVEL" in [f.code for f in red.flags]


def test_psi_max_matches_direct_least_squares() -> None:
    data = _synthetic_stage(n=801)
    crit = StageCriteria(dilation_half_window_mm=0.3)
    red = reduce_stage(**data, normal_force_n=360.0, box=BoxGeometry.square(60.0), criteria=crit)
    x, y = data["horizontal_mm"], data["vertical_mm"]
    best = -np.inf
    for i in range(x.size):
        w = np.abs(x - x[i]) <= 0.3 + 1e-12
        best = max(best, np.polyfit(x[w], y[w], 1)[0])
    assert red.max_dilation_angle_deg == pytest.approx(math.degrees(math.atan(best)), rel=1e-6)


def _reversal_stage() -> dict[str, np.ndarray]:
    """Three forward traverses of 8 mm with fast returns; strength falls to a residual."""
    xs, taus = [], []
    for k in range(3):
        fwd = np.linspace(0.0, 8.0, 81)
        back = np.linspace(8.0, 0.0, 9)[1:-1]
        floor = 60.0 - 10.0 * k
        xs += [fwd, back]
        taus += [
            floor + (20.0 - 8 * k) * np.exp(-((fwd - 1.0) ** 2)) * (1 - np.exp(-5 * fwd)),
            -floor * np.ones_like(back),
        ]
    x = np.concatenate(xs)
    return {"horizontal_mm": x, "tau": np.concatenate(taus)}


def test_residual_after_reversals_uses_cumulative_displacement() -> None:
    d = _reversal_stage()
    x, tau = d["horizontal_mm"], d["tau"]
    res = pick_residual(x, np.zeros_like(x), tau, np.full_like(x, 100.0))
    assert res.n_traverses == 3
    assert res.point.shear_stress_kpa == pytest.approx(40.0, abs=0.5)
    assert res.point.cumulative_horizontal_mm > 2 * 16.0  # two full out-and-back traverses
    assert res.traverse_minima_kpa[0] > res.traverse_minima_kpa[-1]

    area = 3600.0
    red = reduce_stage(
        time_min=np.arange(x.size, dtype=float),
        horizontal_mm=x,
        vertical_mm=np.zeros_like(x),
        shear_force_n=tau * area / 1000.0,
        normal_force_n=360.0,
        box=BoxGeometry.square(60.0),
    )
    assert red.n_traverses == 3
    assert red.first_traverse_stop == 81
    assert red.residual is not None
    assert red.residual.point.shear_stress_kpa == pytest.approx(res.point.shear_stress_kpa)
    assert red.cumulative_horizontal_mm is not None
    assert red.cumulative_horizontal_mm[-1] == pytest.approx(np.abs(np.diff(x)).sum())
