"""One-call reduction of a shear stage: arrays in, frozen results out.

This is the entry point the application adapter calls once per stage. It is vectorised: the
cost is a handful of passes over the readings (areas, stresses, prefix sums for the sliding
least-squares slopes), so a 100,000-reading logger file reduces in milliseconds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, InsufficientDataError, as_float_array, fmt, same_length
from .failure import (
    DilationResult,
    FailurePoint,
    at_displacement,
    pick_ultimate,
    point_at,
    prefix_sums,
    window_slopes,
)
from .flags import Flag, check_peak_at_end_of_travel, check_rate
from .geometry import AreaModel, BoxGeometry, area_mm2
from .residual import ResidualSearch, pick_residual
from .version import ANALYSIS_VERSION

__all__ = ["StageCriteria", "StageReduction", "reduce_stage"]


@dataclass(frozen=True, slots=True)
class StageCriteria:
    """Choices for picking failure points; the defaults are common practice, not a standard.

    Attributes
    ----------
    stated_displacement_mm
        Displacement for the "τ at a stated displacement" point; ``None`` means 10 % of the box
        length (6 mm in a 60 mm box). [mm]
    dilation_half_window_mm
        ψ is the least-squares slope of y on x over readings within ± this of the point. [mm]
    ultimate_half_window_mm
        Half-width of the windows searched for constant volume. [mm]
    ultimate_slope_tolerance
        |dy/dx| below this counts as constant volume. [-]
    reversal_tolerance_mm
        A fall of x by more than this below its running maximum is a reversal. [mm]
    residual_window_readings
        Readings averaged when picking the residual. [-]
    end_of_travel_tolerance_mm
        A peak within this of the last forward displacement is flagged as at end of travel. [mm]
    """

    stated_displacement_mm: float | None = None
    dilation_half_window_mm: float = 0.25
    ultimate_half_window_mm: float = 0.5
    ultimate_slope_tolerance: float = 0.01
    reversal_tolerance_mm: float = 0.5
    residual_window_readings: int = 5
    end_of_travel_tolerance_mm: float = 0.0

    def __post_init__(self) -> None:
        for name in ("dilation_half_window_mm", "ultimate_half_window_mm", "reversal_tolerance_mm"):
            v = getattr(self, name)
            if not (math.isfinite(v) and v > 0):
                raise AnalysisError(f"{name.replace('_', ' ')} must be greater than zero; got {v}")
        if not self.ultimate_slope_tolerance > 0:
            raise AnalysisError("The constant-volume slope tolerance must be greater than zero")


@dataclass(frozen=True, eq=False)
class StageReduction:
    """Everything computed from one shear stage.

    Attributes
    ----------
    analysis_version
        :data:`ANALYSIS_VERSION` of the code that made this result.
    box, area_model, criteria
        The inputs that shape the result, echoed for storage.
    n_readings
        Number of readings.
    area_mm2
        Area per reading under ``area_model``. [mm²]
    shear_stress_kpa, normal_stress_kpa, stress_ratio
        τ, σn and τ/σn per reading. [kPa], [kPa], [-]
    first_traverse_stop, n_traverses
        Readings ``[0, first_traverse_stop)`` form the first forward traverse, where the peak,
        the stated-displacement point, ψ and the ultimate are picked; number of traverses.
    peak, peak_ratio, end_of_travel
        Always available.
    at_displacement
        τ at the stated displacement, ``None`` if never reached.
    ultimate
        Constant-volume point, ``None`` if no window qualifies.
    residual
        Residual search after reversals, ``None`` for a single traverse.
    cumulative_horizontal_mm
        Σ|Δx| per reading when the stage has reversals, else ``None``. [mm]
    dilation_at_peak
        ψ over the window around the peak, ``None`` if the window has < 2 distinct x.
    max_dilation_angle_deg, max_dilation_horizontal_mm
        ψmax over the first traverse and the x at which it occurs (NaN if undefined). [deg], [mm]
    measured_rate_mm_per_min
        Least-squares slope of x against time over the first traverse. [mm/min]
    max_rate_mm_per_min
        Maximum permitted rate passed in (see :mod:`.rate`), or ``None``. [mm/min]
    flags
        QA flags as data.
    """

    analysis_version: str
    box: BoxGeometry
    area_model: AreaModel
    criteria: StageCriteria
    n_readings: int
    area_mm2: NDArray[np.float64]
    shear_stress_kpa: NDArray[np.float64]
    normal_stress_kpa: NDArray[np.float64]
    stress_ratio: NDArray[np.float64]
    first_traverse_stop: int
    n_traverses: int
    peak: FailurePoint
    peak_ratio: FailurePoint
    end_of_travel: FailurePoint
    at_displacement: FailurePoint | None
    ultimate: FailurePoint | None
    residual: ResidualSearch | None
    cumulative_horizontal_mm: NDArray[np.float64] | None
    dilation_at_peak: DilationResult | None
    max_dilation_angle_deg: float
    max_dilation_horizontal_mm: float
    measured_rate_mm_per_min: float
    max_rate_mm_per_min: float | None
    flags: tuple[Flag, ...] = field(default=())


def reduce_stage(
    *,
    time_min: ArrayLike,
    horizontal_mm: ArrayLike,
    vertical_mm: ArrayLike,
    shear_force_n: ArrayLike,
    normal_force_n: float | ArrayLike,
    box: BoxGeometry,
    area_model: AreaModel = "nominal",
    criteria: StageCriteria | None = None,
    max_rate_mm_per_min: float | None = None,
) -> StageReduction:
    """Reduce one shear stage: stresses per reading, failure points, ψ, rate and flags.

    Parameters
    ----------
    time_min
        Elapsed time of each reading, non-decreasing. [min]
    horizontal_mm
        Relative horizontal displacement x, forward positive. [mm]
    vertical_mm
        Vertical movement of the top platen y, upward (dilation) positive. [mm]
    shear_force_n
        Shear force per reading after calibration (see :mod:`.loads`). [N]
    normal_force_n
        Normal force: one value (dead weight / lever) or one per reading (servo). [N]
    box
        Box geometry.
    area_model
        ``"nominal"`` or ``"corrected"``; take it from the method profile.
    criteria
        Failure-picking choices; defaults as in :class:`StageCriteria`.
    max_rate_mm_per_min
        Maximum permitted displacement rate; when given, a faster stage is flagged. [mm/min]

    Raises
    ------
    AnalysisError
        NaN readings, unequal lengths, fewer than 2 readings, time going backwards, zero or
        negative normal force, displacement not less than the box length.
    """
    crit = criteria if criteria is not None else StageCriteria()
    t = as_float_array(time_min, "Elapsed time", "min", min_size=2)
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm", min_size=2)
    y = as_float_array(vertical_mm, "Vertical displacement", "mm", min_size=2)
    f = as_float_array(shear_force_n, "Shear force", "N", min_size=2)
    same_length((t, x, y, f), ("time", "horizontal", "vertical", "shear force"))
    n = x.size
    if np.ndim(normal_force_n) == 0:
        nf: float | NDArray[np.float64] = float(normal_force_n)  # type: ignore[arg-type]
        if not (math.isfinite(nf) and nf > 0.0):
            raise AnalysisError(f"Normal force must be greater than zero; got {nf} N")
    else:
        nf = as_float_array(normal_force_n, "Normal force", "N")
        same_length((x, nf), ("horizontal", "normal force"))
        if float(nf.min()) <= 0.0:
            raise AnalysisError(
                f"Normal force must be greater than zero; got {fmt(float(nf.min()))} N"
            )
    dt = np.diff(t)
    if float(dt.min()) < 0.0:
        i = int(np.argmin(dt)) + 1
        raise AnalysisError(
            f"Elapsed time goes backwards at reading {i + 1} ({fmt(float(t[i - 1]))} → "
            f"{fmt(float(t[i]))} min)"
        )

    area = area_mm2(box, x, area_model)
    inv_area = 1000.0 / area
    tau = f * inv_area
    sigma = nf * inv_area
    ratio = f / nf

    # First forward traverse: where reversals (if any) begin.
    runmax = np.maximum.accumulate(x)
    back = runmax - x > crit.reversal_tolerance_mm
    stop = int(np.argmax(back)) if back.any() else n
    xs, ys = x[:stop], y[:stop]

    i_pk = int(np.argmax(tau[:stop]))
    i_rt = int(np.argmax(ratio[:stop]))
    peak = point_at("peak", i_pk, x[i_pk], y[i_pk], tau[i_pk], sigma[i_pk])
    peak_ratio = point_at("peak_ratio", i_rt, x[i_rt], y[i_rt], tau[i_rt], sigma[i_rt])
    i_end = stop - 1
    end = point_at("end_of_travel", i_end, x[i_end], y[i_end], tau[i_end], sigma[i_end])
    target = (
        crit.stated_displacement_mm
        if crit.stated_displacement_mm is not None
        else 0.10 * box.length_mm
    )
    at_disp = at_displacement(x, y, tau, sigma, target, stop)

    # Sliding least-squares slopes dy/dx from one set of prefix sums.
    sums = prefix_sums(xs, ys)
    xr = runmax[:stop]
    h_d = crit.dilation_half_window_mm
    d_starts = np.searchsorted(xr, xr - h_d, side="left")
    d_stops = np.searchsorted(xr, xr + h_d, side="right")
    psi_slopes = window_slopes(sums, d_starts, d_stops)
    if np.isnan(psi_slopes).all():
        psi_max, x_psi_max = math.nan, math.nan
    else:
        k = int(np.nanargmax(psi_slopes))
        psi_max, x_psi_max = math.degrees(math.atan(float(psi_slopes[k]))), float(x[k])
    slope_pk = float(psi_slopes[i_pk])
    dil: DilationResult | None = None
    if math.isfinite(slope_pk):
        a, b = int(d_starts[i_pk]), int(d_stops[i_pk])
        dil = DilationResult(
            math.degrees(math.atan(slope_pk)), slope_pk, (a, b), (float(x[a]), float(x[b - 1]))
        )
    h_u = crit.ultimate_half_window_mm
    if h_u == h_d:
        bounds, ult_slopes = (d_starts, d_stops), psi_slopes
    else:
        bounds = (
            np.searchsorted(xr, xr - h_u, side="left"),
            np.searchsorted(xr, xr + h_u, side="right"),
        )
        ult_slopes = window_slopes(sums, *bounds)
    ultimate = pick_ultimate(
        xs,
        ys,
        tau[:stop],
        sigma[:stop],
        after_index=i_pk,
        half_window_mm=crit.ultimate_half_window_mm,
        slope_tolerance=crit.ultimate_slope_tolerance,
        slopes=ult_slopes,
        bounds=bounds,
    )

    # Measured rate: least-squares slope of x on t over the first traverse.
    ts = t[:stop]
    tc = ts - ts.mean()
    stt = float(np.dot(tc, tc))
    if stt == 0.0:
        raise InsufficientDataError(
            "All readings of the forward traverse have the same time; the rate cannot be measured"
        )
    rate = float(np.dot(tc, xs)) / stt

    residual: ResidualSearch | None = None
    cum: NDArray[np.float64] | None = None
    n_trav = 1
    if stop < n:
        cum = np.concatenate((np.zeros(1), np.cumsum(np.abs(np.diff(x))))) + abs(float(x[0]))
        try:
            residual = pick_residual(
                x,
                y,
                tau,
                sigma,
                reversal_tolerance_mm=crit.reversal_tolerance_mm,
                window_readings=crit.residual_window_readings,
            )
            n_trav = residual.n_traverses
        except InsufficientDataError:
            residual = None

    flags: list[Flag] = []
    fl = check_peak_at_end_of_travel(
        float(x[i_pk]), float(xs.max()), tolerance_mm=crit.end_of_travel_tolerance_mm
    )
    if fl is not None:
        flags.append(fl)
    if max_rate_mm_per_min is not None:
        fl = check_rate(rate, float(max_rate_mm_per_min))
        if fl is not None:
            flags.append(fl)
    if at_disp is None:
        flags.append(
            Flag(
                "STATED_DISPLACEMENT_NOT_REACHED",
                "info",
                f"The stage did not reach the stated displacement {fmt(target)} mm "
                f"(largest {fmt(float(xs.max()))} mm)",
                {"stated_displacement_mm": target, "max_horizontal_mm": float(xs.max())},
            )
        )
    if ultimate is None:
        flags.append(
            Flag(
                "NO_CONSTANT_VOLUME",
                "info",
                f"No window after the peak where |dy/dx| < {fmt(crit.ultimate_slope_tolerance)}; "
                "no ultimate (constant volume) value",
                {"slope_tolerance": crit.ultimate_slope_tolerance},
            )
        )
    return StageReduction(
        analysis_version=ANALYSIS_VERSION,
        box=box,
        area_model=area_model,
        criteria=crit,
        n_readings=n,
        area_mm2=area,
        shear_stress_kpa=tau,
        normal_stress_kpa=sigma,
        stress_ratio=ratio,
        first_traverse_stop=stop,
        n_traverses=n_trav,
        peak=peak,
        peak_ratio=peak_ratio,
        end_of_travel=end,
        at_displacement=at_disp,
        ultimate=ultimate,
        residual=residual,
        cumulative_horizontal_mm=cum,
        dilation_at_peak=dil,
        max_dilation_angle_deg=psi_max,
        max_dilation_horizontal_mm=x_psi_max,
        measured_rate_mm_per_min=rate,
        max_rate_mm_per_min=max_rate_mm_per_min,
        flags=tuple(flags),
    )
