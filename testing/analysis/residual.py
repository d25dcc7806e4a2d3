"""Residual strength after multiple reversals (cumulative displacement, traverses).

A multiple-reversal stage shears forward to the end of travel, returns, and repeats. The
residual is the minimum steady strength after large cumulative displacement.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, InsufficientDataError, as_float_array
from .failure import FailurePoint, _series, point_at

__all__ = ["ResidualSearch", "cumulative_displacement_mm", "forward_traverses", "pick_residual"]


def forward_traverses(
    horizontal_mm: ArrayLike, *, reversal_tolerance_mm: float = 0.5
) -> list[tuple[int, int]]:
    """``[start, stop)`` of each forward traverse of a (multiple-reversal) stage.

    A reversal is recognised when x falls more than ``reversal_tolerance_mm`` [mm] below its
    running maximum (forward) or rises that much above its running minimum (return).
    """
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm")
    out: list[tuple[int, int]] = []
    i, n = 0, x.size
    while i < n:
        seg = x[i:]
        back = np.maximum.accumulate(seg) - seg > reversal_tolerance_mm
        j = i + (int(np.argmax(back)) if back.any() else seg.size)
        peak = i + int(np.argmax(x[i:j]))
        out.append((i, peak + 1))
        if j >= n:
            break
        seg = x[peak:]
        fwd = seg - np.minimum.accumulate(seg) > reversal_tolerance_mm
        if not fwd.any():
            break
        k = peak + int(np.argmax(fwd))  # first reading clearly moving forward again
        i = peak + int(np.argmin(x[peak:k]))  # the trough starts the next traverse
    return out


def cumulative_displacement_mm(horizontal_mm: ArrayLike) -> NDArray[np.float64]:
    """Cumulative horizontal displacement Σ|Δx|, counting travel in both directions. [mm]

    Common practice for multiple-reversal tests: the shear plane is sheared on every traverse.
    """
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm")
    return np.concatenate((np.zeros(1), np.cumsum(np.abs(np.diff(x))))) + abs(float(x[0]))


@dataclass(frozen=True, slots=True)
class ResidualSearch:
    """Residual point and the per-traverse minima it was chosen from.

    Attributes
    ----------
    point
        The residual point (lowest steady post-peak strength of all forward traverses).
    traverse_minima_kpa
        Lowest rolling-mean τ after the traverse's own maximum, per forward traverse. [kPa]
    n_traverses
        Number of forward traverses (AGS ``SHBT_REVS``).
    last_change_pct
        Change between the last two traverse minima, relative to the last (for a stop rule). [%]
    """

    point: FailurePoint
    traverse_minima_kpa: tuple[float, ...]
    n_traverses: int
    last_change_pct: float


def pick_residual(
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_stress_kpa: ArrayLike,
    normal_stress_kpa: ArrayLike,
    *,
    reversal_tolerance_mm: float = 0.5,
    window_readings: int = 5,
) -> ResidualSearch:
    """Residual strength after multiple reversals (minimum steady strength).

    On each forward traverse, after that traverse's maximum τ, τ is smoothed by a running mean
    over ``window_readings`` readings and its minimum taken. The residual is the lowest of those
    minima; its displacement is reported both as x and as cumulative displacement.
    """
    x, y, t, s = _series(horizontal_mm, vertical_mm, shear_stress_kpa, normal_stress_kpa)
    if window_readings < 1:
        raise AnalysisError("The residual averaging window needs at least one reading")
    cum = cumulative_displacement_mm(x)
    best: tuple[float, int, int, int] | None = None
    minima: list[float] = []
    traverses = forward_traverses(x, reversal_tolerance_mm=reversal_tolerance_mm)
    for a, b in traverses:
        pk = a + int(np.argmax(t[a:b]))
        if b - pk < window_readings:
            continue
        k = window_readings
        c = np.cumsum(np.concatenate((np.zeros(1), t[pk:b])))
        means = (c[k:] - c[:-k]) / k
        j = int(np.argmin(means))
        minima.append(float(means[j]))
        if best is None or means[j] <= best[0]:
            best = (float(means[j]), pk + j, pk + j + k, pk + j + k // 2)
    if best is None:
        raise InsufficientDataError(
            f"No forward traverse has {window_readings} readings after its peak; the residual "
            "cannot be picked"
        )
    value, a, b, mid = best
    change = (
        abs(minima[-1] - minima[-2]) / abs(minima[-1]) * 100.0
        if len(minima) >= 2 and minima[-1] != 0.0
        else math.nan
    )
    point = point_at(
        "residual",
        mid,
        x[mid],
        y[mid],
        value,
        float(s[a:b].mean()),
        cum=float(cum[mid]),
        window=(a, b),
        detail=f"lowest {window_readings}-reading mean after the peak of {len(traverses)} "
        "forward traverse(s)",
    )
    return ResidualSearch(point, tuple(minima), len(traverses), change)
