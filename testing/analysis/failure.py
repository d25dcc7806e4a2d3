"""Failure points of one stage and the dilation angle.

Every picker records its criterion and x, y at the point so the report can say what was used
(AGS ``SHBT_CRIT``, ``SHBT_PDIS``/``SHBT_PDIN``, ``SHBT_RDIS``/``SHBT_RDIN``).

Sign convention: ``vertical_mm`` is the upward movement of the top platen, dilation positive;
``horizontal_mm`` is the relative displacement of the box halves, forward positive.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, InsufficientDataError, as_float_array, fmt, same_length

__all__ = [
    "CRITERION_LABELS",
    "DilationResult",
    "FailureCriterion",
    "FailurePoint",
    "at_displacement",
    "dilation_angle_deg",
    "first_traverse_stop",
    "max_dilation_angle",
    "pick_at_displacement",
    "pick_end_of_travel",
    "pick_peak",
    "pick_peak_ratio",
    "pick_ultimate",
    "point_at",
    "prefix_sums",
    "rolling_slopes",
    "window_bounds",
    "window_slopes",
]

FailureCriterion = Literal[
    "peak", "peak_ratio", "at_displacement", "end_of_travel", "ultimate", "residual"
]

#: Plain-language labels, suitable for AGS SHBT_CRIT.
CRITERION_LABELS: dict[str, str] = {
    "peak": "Peak shear stress",
    "peak_ratio": "Peak stress ratio",
    "at_displacement": "Shear stress at stated displacement",
    "end_of_travel": "Shear stress at end of travel",
    "ultimate": "Ultimate (constant volume)",
    "residual": "Residual (multiple reversals)",
}


@dataclass(frozen=True, slots=True)
class FailurePoint:
    """A failure (or ultimate/residual) point picked on one stage.

    Attributes
    ----------
    criterion
        Which rule picked the point (see :data:`CRITERION_LABELS`).
    index
        Reading index of the point (the window's middle reading for window criteria).
    horizontal_mm, vertical_mm
        Displacements at the point. [mm]
    shear_stress_kpa, normal_stress_kpa
        Stresses at the point (window means for window criteria). [kPa]
    stress_ratio
        τ/σn. [-]
    secant_friction_angle_deg
        arctan(τ/σn). [deg]
    cumulative_horizontal_mm
        Cumulative displacement (differs from x after reversals). [mm]
    window
        ``(start, stop)`` reading indices of the averaging window, or ``None``.
    detail
        What else the checker should know (target displacement, tolerance, ...).
    """

    criterion: FailureCriterion
    index: int
    horizontal_mm: float
    vertical_mm: float
    shear_stress_kpa: float
    normal_stress_kpa: float
    stress_ratio: float
    secant_friction_angle_deg: float
    cumulative_horizontal_mm: float
    window: tuple[int, int] | None = None
    detail: str = ""

    @property
    def label(self) -> str:
        """Criterion in words."""
        return CRITERION_LABELS[self.criterion]


def point_at(
    criterion: FailureCriterion,
    index: int,
    x: float,
    y: float,
    tau: float,
    sigma: float,
    cum: float | None = None,
    window: tuple[int, int] | None = None,
    detail: str = "",
) -> FailurePoint:
    ratio = tau / sigma if sigma != 0.0 else math.nan
    return FailurePoint(
        criterion,
        int(index),
        float(x),
        float(y),
        float(tau),
        float(sigma),
        float(ratio),
        math.degrees(math.atan2(tau, sigma)) if sigma > 0.0 else math.nan,
        float(x if cum is None else cum),
        window,
        detail,
    )


def _series(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
) -> tuple[NDArray[np.float64], ...]:
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm")
    y = as_float_array(vertical_mm, "Vertical displacement", "mm")
    t = as_float_array(shear_stress_kpa, "Shear stress", "kPa")
    s = as_float_array(normal_stress_kpa, "Normal stress", "kPa")
    same_length((x, y, t, s), ("horizontal", "vertical", "shear stress", "normal stress"))
    return x, y, t, s


def first_traverse_stop(x: NDArray[np.float64], reversal_tolerance_mm: float) -> int:
    """Index one past the last reading of the first forward traverse."""
    back = np.maximum.accumulate(x) - x > reversal_tolerance_mm
    if not back.any():
        return int(x.size)
    return int(np.argmax(back))


def pick_peak(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
    *,
    stop: int | None = None,
) -> FailurePoint:
    """Reading of maximum shear stress (first one if tied) among readings ``[0, stop)``."""
    x, y, t, s = _series(horizontal_mm, vertical_mm, shear_stress_kpa, normal_stress_kpa)
    i = int(np.argmax(t[:stop]))
    return point_at("peak", i, x[i], y[i], t[i], s[i])


def pick_peak_ratio(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
    *,
    stop: int | None = None,
) -> FailurePoint:
    """Reading of maximum stress ratio τ/σn among readings ``[0, stop)``."""
    x, y, t, s = _series(horizontal_mm, vertical_mm, shear_stress_kpa, normal_stress_kpa)
    if np.any(s[:stop] <= 0.0):
        raise AnalysisError("Normal stress must be greater than zero to pick the peak stress ratio")
    i = int(np.argmax(t[:stop] / s[:stop]))
    return point_at("peak_ratio", i, x[i], y[i], t[i], s[i])


def pick_at_displacement(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
    *,
    displacement_mm: float,
    stop: int | None = None,
) -> FailurePoint | None:
    """Stresses at a stated displacement, interpolated linearly between readings.

    Returns ``None`` when the stage never reached ``displacement_mm`` [mm] on its first traverse.
    """
    x, y, t, s = _series(horizontal_mm, vertical_mm, shear_stress_kpa, normal_stress_kpa)
    return at_displacement(x, y, t, s, displacement_mm, stop)


def at_displacement(
    x: NDArray[np.float64],
    y: NDArray[np.float64],
    t: NDArray[np.float64],
    s: NDArray[np.float64],
    displacement_mm: float,
    stop: int | None,
) -> FailurePoint | None:
    """:func:`pick_at_displacement` on validated arrays."""
    xs = x[:stop]
    reached = xs >= displacement_mm
    i = int(np.argmax(reached))
    if not reached[i]:
        return None
    detail = f"at x = {fmt(displacement_mm)} mm"
    if i == 0 or xs[i] == displacement_mm:
        return point_at("at_displacement", i, x[i], y[i], t[i], s[i], detail=detail)
    f = (displacement_mm - xs[i - 1]) / (xs[i] - xs[i - 1])

    def lerp(a: NDArray[np.float64]) -> float:
        return float(a[i - 1] + f * (a[i] - a[i - 1]))

    return point_at("at_displacement", i, displacement_mm, lerp(y), lerp(t), lerp(s), detail=detail)


def pick_end_of_travel(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
    *,
    stop: int | None = None,
) -> FailurePoint:
    """Last reading of the first forward traverse."""
    x, y, t, s = _series(horizontal_mm, vertical_mm, shear_stress_kpa, normal_stress_kpa)
    i = (x.size if stop is None else stop) - 1
    return point_at("end_of_travel", i, x[i], y[i], t[i], s[i])


def window_bounds(
    x: NDArray[np.float64], half_window_mm: float
) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """``[start, stop)`` of the readings within ±half_window_mm of each reading (x non-decreasing)."""
    xr = np.maximum.accumulate(x)  # small backward jitter must not break the search
    return (
        np.searchsorted(xr, xr - half_window_mm, side="left"),
        np.searchsorted(xr, xr + half_window_mm, side="right"),
    )


PrefixSums = tuple[
    NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], float
]


def prefix_sums(x: NDArray[np.float64], y: NDArray[np.float64]) -> PrefixSums:
    """Prefix sums of centred x, y, x² and xy for O(1) least-squares slopes over any window."""
    xc = x - x.mean()
    yc = y - y.mean()
    z = np.zeros(1)
    return (
        np.concatenate((z, np.cumsum(xc))),
        np.concatenate((z, np.cumsum(yc))),
        np.concatenate((z, np.cumsum(xc * xc))),
        np.concatenate((z, np.cumsum(xc * yc))),
        float(np.max(np.abs(xc))) if xc.size else 0.0,
    )


def window_slopes(
    sums: PrefixSums, starts: NDArray[np.intp], stops: NDArray[np.intp]
) -> NDArray[np.float64]:
    """Least-squares slope over each window ``[starts[k], stops[k])`` from :func:`prefix_sums`.

    Windows with fewer than two distinct x values give NaN.
    """
    cx, cy, cxx, cxy, xmax = sums
    m = (stops - starts).astype(np.float64)
    sx = cx[stops] - cx[starts]
    sy = cy[stops] - cy[starts]
    sxx = m * (cxx[stops] - cxx[starts]) - sx * sx
    sxy = m * (cxy[stops] - cxy[starts]) - sx * sy
    out = np.full(m.shape, np.nan)
    # A window has spread when its variance is above the round-off of the prefix sums.
    ok = sxx > 1e-9 * m * m * (xmax * xmax + 1e-300)
    np.divide(sxy, sxx, out=out, where=ok)
    return out


def rolling_slopes(
    x: NDArray[np.float64],
    y: NDArray[np.float64],
    starts: NDArray[np.intp],
    stops: NDArray[np.intp],
) -> NDArray[np.float64]:
    """Least-squares slope of y on x over each window ``[starts[k], stops[k])``, in O(n)."""
    return window_slopes(prefix_sums(x, y), starts, stops)


@dataclass(frozen=True, slots=True)
class DilationResult:
    """Dilation angle ψ = arctan(dy/dx) from a least-squares slope over a window.

    Attributes
    ----------
    dilation_angle_deg
        ψ; positive when the specimen dilates. [deg]
    slope
        dy/dx over the window. [-]
    window
        ``(start, stop)`` reading indices used.
    horizontal_range_mm
        x at the first and last reading of the window. [mm]
    """

    dilation_angle_deg: float
    slope: float
    window: tuple[int, int]
    horizontal_range_mm: tuple[float, float]


def dilation_angle_deg(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    *,
    index: int,
    half_window_mm: float | None = None,
    readings_before: int = 1,
    readings_after: int = 1,
) -> DilationResult:
    """Dilation angle from the least-squares slope of y on x over a window around ``index``.

    The window is the readings within ±``half_window_mm`` [mm] of x[index] when given, otherwise
    ``readings_before`` readings before and ``readings_after`` after the index. A slope over a
    few readings, not two adjacent ones, is the usual practice.
    """
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm")
    y = as_float_array(vertical_mm, "Vertical displacement", "mm")
    same_length((x, y), ("horizontal", "vertical"))
    if not 0 <= index < x.size:
        raise AnalysisError(f"Reading {index + 1} does not exist; the stage has {x.size} readings")
    if half_window_mm is not None:
        xr = np.maximum.accumulate(x)
        a = int(np.searchsorted(xr, xr[index] - half_window_mm, side="left"))
        b = int(np.searchsorted(xr, xr[index] + half_window_mm, side="right"))
    else:
        a, b = max(0, index - readings_before), min(x.size, index + readings_after + 1)
    xs, ys = x[a:b], y[a:b]
    if xs.size < 2 or np.ptp(xs) == 0.0:
        raise InsufficientDataError(
            f"The dilation window around x = {fmt(float(x[index]))} mm holds fewer than two "
            "readings at different displacements; widen the window"
        )
    xc = xs - xs.mean()
    slope = float(np.dot(xc, ys - ys.mean()) / np.dot(xc, xc))
    return DilationResult(
        math.degrees(math.atan(slope)), slope, (a, b), (float(xs[0]), float(xs[-1]))
    )


def max_dilation_angle(
    x: NDArray[np.float64], y: NDArray[np.float64], half_window_mm: float
) -> tuple[float, int]:
    """ψmax [deg] over centred windows of ±half_window_mm and the index where it occurs.

    Returns ``(nan, -1)`` when no window has two distinct displacements.
    """
    starts, stops = window_bounds(x, half_window_mm)
    slopes = rolling_slopes(x, y, starts, stops)
    if np.isnan(slopes).all():
        return math.nan, -1
    i = int(np.nanargmax(slopes))
    return math.degrees(math.atan(float(slopes[i]))), i


def pick_ultimate(
    x: NDArray[np.float64],
    y: NDArray[np.float64],
    tau: NDArray[np.float64],
    sigma: NDArray[np.float64],
    *,
    after_index: int,
    half_window_mm: float,
    slope_tolerance: float = 0.01,
    slopes: NDArray[np.float64] | None = None,
    bounds: tuple[NDArray[np.intp], NDArray[np.intp]] | None = None,
) -> FailurePoint | None:
    """Ultimate (constant-volume) point: the last window after the peak with |dy/dx| < tolerance.

    τ and σn are the means over that window; x, y are those of its middle reading. Arrays must be
    validated, of equal length, and cover one forward traverse. Returns ``None`` when no window
    after ``after_index`` qualifies.
    """
    starts, stops = bounds if bounds is not None else window_bounds(x, half_window_mm)
    if slopes is None:
        slopes = rolling_slopes(x, y, starts, stops)
    with np.errstate(invalid="ignore"):
        ok = (np.abs(slopes) < slope_tolerance) & (starts >= after_index) & (stops - starts >= 3)
    if not ok.any():
        return None
    i = int(ok.size - 1 - np.argmax(ok[::-1]))
    a, b = int(starts[i]), int(stops[i])
    return point_at(
        "ultimate",
        i,
        x[i],
        y[i],
        float(tau[a:b].mean()),
        float(sigma[a:b].mean()),
        window=(a, b),
        detail=f"|dy/dx| = {abs(float(slopes[i])):.4f} < {fmt(slope_tolerance)} over "
        f"x = {fmt(float(x[a]))}–{fmt(float(x[b - 1]))} mm",
    )
