"""Consolidation-stage constructions: Taylor root-time, Casagrande log-time, BS t100.

Each result carries its construction (fitted lines and picked points) so a checker can review
the pick and a chart can draw it. Settlement ``d`` is positive downwards, time in minutes.

* Taylor: fit the early straight part of d against √t (intercept d0, slope m); the line from d0
  with abscissae 1.15× larger (slope m/1.15) cuts the curve at √t90;
  d100 = d0 + (10/9)(d90 − d0); t50 = t90/4.28 (the ASTM D3080 conversion, from memory).
* Casagrande: d0 = d(t1) − [d(4t1) − d(t1)]; d100 where the tangent at the steepest point of d
  against log t meets the line through the final (secondary) readings; t50 read at
  d50 = (d0 + d100)/2.
* BS t100: extend the early √t line to the 100 % primary level d100: √t100 = (d100 − d0)/m.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, InsufficientDataError, as_float_array, same_length

__all__ = [
    "CasagrandeResult",
    "TaylorResult",
    "bs_t100_min",
    "casagrande_log_time",
    "taylor_root_time",
]

#: t50 = t90 / 4.28 (time factors 0.848/0.197, rounded as in ASTM D3080; from memory).
T90_TO_T50 = 4.28


def _series(
    time_min: ArrayLike, settlement_mm: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    t = as_float_array(time_min, "Elapsed time", "min", min_size=4)
    d = as_float_array(settlement_mm, "Settlement", "mm", min_size=4)
    same_length((t, d), ("time", "settlement"))
    if np.any(np.diff(t) <= 0.0) or t[0] < 0.0:
        raise AnalysisError("Consolidation times must start at zero or later and keep increasing")
    return t, d


@dataclass(frozen=True, slots=True)
class TaylorResult:
    """Taylor square-root-of-time construction.

    Attributes
    ----------
    t90_min, t50_min
        t90 and t50 = t90/4.28. [min]
    d0_mm, d90_mm, d100_mm, d50_mm
        Corrected zero and settlements at 90, 100 and 50 % primary consolidation. [mm]
    slope_mm_per_sqrt_min
        Slope m of the early straight line d = d0 + m·√t. [mm/√min]
    fit_indices
        Readings used for the early straight line.
    """

    t90_min: float
    t50_min: float
    d0_mm: float
    d90_mm: float
    d100_mm: float
    d50_mm: float
    slope_mm_per_sqrt_min: float
    fit_indices: tuple[int, ...]

    @property
    def sqrt_t90(self) -> float:
        """√t90. [√min]"""
        return math.sqrt(self.t90_min)


def taylor_root_time(
    time_min: ArrayLike,
    settlement_mm: ArrayLike,
    *,
    fit_range_min: tuple[float, float] | None = None,
) -> TaylorResult:
    """Taylor's 1.15 construction.

    Parameters
    ----------
    time_min, settlement_mm
        Consolidation readings (settlement positive). [min], [mm]
    fit_range_min
        Times bounding the early straight part; by default the readings after t = 0 up to
        half of the total settlement. [min]
    """
    t, d = _series(time_min, settlement_mm)
    s = np.sqrt(t)
    if fit_range_min is None:
        half = d[0] + 0.5 * (d[-1] - d[0])
        sel = np.flatnonzero((t > 0.0) & (d <= half))
        if sel.size < 2:
            sel = np.flatnonzero(t > 0.0)[:3]
    else:
        sel = np.flatnonzero((t >= fit_range_min[0]) & (t <= fit_range_min[1]))
    if sel.size < 2:
        raise InsufficientDataError(
            "The early straight part of the root-time plot needs at least 2 readings"
        )
    m, d0 = np.polyfit(s[sel], d[sel], 1)
    if m <= 0.0:
        raise AnalysisError("Settlement does not increase with time on the early straight part")
    # Second line d0 + (m/1.15)·√t; the curve crosses it from above to below at √t90.
    diff = d - (d0 + m / 1.15 * s)
    after = np.arange(d.size) > sel[-1]
    cross = np.flatnonzero(after[1:] & (diff[:-1] >= 0.0) & (diff[1:] < 0.0))
    if cross.size == 0:
        raise InsufficientDataError(
            "The settlement curve never falls below the 1.15 line: consolidation was not long "
            "enough to reach 90 %"
        )
    i = int(cross[0])
    f = diff[i] / (diff[i] - diff[i + 1])
    s90 = float(s[i] + f * (s[i + 1] - s[i]))
    d90 = float(d0 + m / 1.15 * s90)
    d100 = float(d0 + (d90 - d0) * 10.0 / 9.0)
    t90 = s90 * s90
    return TaylorResult(
        t90,
        t90 / T90_TO_T50,
        float(d0),
        d90,
        d100,
        float((d0 + d100) / 2.0),
        float(m),
        tuple(int(k) for k in sel),
    )


def bs_t100_min(taylor: TaylorResult, *, d100_mm: float | None = None) -> float:
    """t100 by extending the early √t line to the 100 % level: ((d100 − d0)/m)². [min]

    ``d100_mm`` defaults to the Taylor construction's d100 (BS practice, from memory).
    """
    d100 = taylor.d100_mm if d100_mm is None else float(d100_mm)
    root = (d100 - taylor.d0_mm) / taylor.slope_mm_per_sqrt_min
    if root <= 0.0:
        raise AnalysisError("The 100 % level lies above the corrected zero; check the construction")
    return root * root


@dataclass(frozen=True, slots=True)
class CasagrandeResult:
    """Casagrande log-time construction.

    Attributes
    ----------
    t50_min, t100_min
        Times at 50 % and 100 % primary consolidation. [min]
    d0_mm, d50_mm, d100_mm
        Corrected zero and settlements at 50 % and 100 %. [mm]
    t1_min
        The early time used for d0 (with 4·t1). [min]
    primary_tangent, secondary_line
        (slope [mm per log10 cycle], intercept [mm]) of d = a·log10(t) + b for each line.
    """

    t50_min: float
    t100_min: float
    d0_mm: float
    d50_mm: float
    d100_mm: float
    t1_min: float
    primary_tangent: tuple[float, float]
    secondary_line: tuple[float, float]


def casagrande_log_time(
    time_min: ArrayLike,
    settlement_mm: ArrayLike,
    *,
    t1_min: float | None = None,
    secondary_readings: int = 3,
) -> CasagrandeResult:
    """Casagrande's log-time construction (readings at t > 0 are used on the log axis).

    Parameters
    ----------
    t1_min
        Early time for the d0 correction; default the first reading after zero. [min]
    secondary_readings
        Number of final readings the secondary (creep) line is fitted through.
    """
    t, d = _series(time_min, settlement_mm)
    pos = t > 0.0
    tp, dp = t[pos], d[pos]
    lt = np.log10(tp)
    if tp.size < secondary_readings + 3:
        raise InsufficientDataError("Too few readings for the log-time construction")
    t1 = float(tp[0]) if t1_min is None else float(t1_min)
    if not tp[0] <= 4.0 * t1 <= tp[-1]:
        raise AnalysisError("t1 and 4·t1 must both lie within the readings")
    d_t1 = float(np.interp(math.log10(t1), lt, dp))
    d_4t1 = float(np.interp(math.log10(4.0 * t1), lt, dp))
    d0 = d_t1 - (d_4t1 - d_t1)
    # Steepest part of the primary curve: largest slope between neighbours, tangent through
    # the midpoint of that segment.
    slopes = np.diff(dp) / np.diff(lt)
    k = int(np.argmax(slopes[: tp.size - secondary_readings]))
    a1 = float(slopes[k])
    b1 = float((dp[k] + dp[k + 1]) / 2.0 - a1 * (lt[k] + lt[k + 1]) / 2.0)
    a2, b2 = (float(v) for v in np.polyfit(lt[-secondary_readings:], dp[-secondary_readings:], 1))
    if a1 <= a2:
        raise AnalysisError("The primary and secondary lines do not intersect: check the readings")
    lt100 = (b2 - b1) / (a1 - a2)
    d100 = a1 * lt100 + b1
    d50 = (d0 + d100) / 2.0
    if not dp[0] <= d50 <= dp[-1]:
        raise AnalysisError("The 50 % settlement lies outside the readings")
    j = int(np.argmax(dp >= d50))
    f = (d50 - dp[j - 1]) / (dp[j] - dp[j - 1]) if j > 0 else 0.0
    t50 = 10.0 ** float(lt[j - 1] + f * (lt[j] - lt[j - 1])) if j > 0 else float(tp[0])
    return CasagrandeResult(t50, 10.0**lt100, d0, d50, float(d100), t1, (a1, b1), (a2, b2))
