"""QA flags as data: a code, a severity, a message and the numbers behind it.

The core never prints or logs; it returns flags and lets the application decide how to show,
block or sign them off. Plausibility ranges are heuristics, not acceptance criteria.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from .errors import AnalysisError, as_float_array, fmt

__all__ = [
    "Flag",
    "Severity",
    "check_calibration_valid",
    "check_dry_density_spread",
    "check_envelope_plausible",
    "check_normal_stresses_distinct",
    "check_particle_size",
    "check_peak_at_end_of_travel",
    "check_rate",
    "check_saturation",
    "check_stage_count",
]

Severity = Literal["info", "warning", "error"]


@dataclass(frozen=True, slots=True)
class Flag:
    """One QA finding.

    Attributes
    ----------
    code
        Stable machine code, e.g. ``"RATE_TOO_FAST"``.
    severity
        ``"info"``, ``"warning"`` or ``"error"`` (error: the result should not be approved as is).
    message
        Sentence for the technician or checker.
    values
        The numbers behind the finding, keyed by a name that carries the unit.
    """

    code: str
    severity: Severity
    message: str
    values: Mapping[str, float] = field(default_factory=dict)


def check_rate(measured_rate_mm_per_min: float, max_rate_mm_per_min: float) -> Flag | None:
    """Flag a stage sheared faster than the maximum permitted (drained) rate."""
    if measured_rate_mm_per_min > max_rate_mm_per_min:
        return Flag(
            "RATE_TOO_FAST",
            "error",
            f"Stage sheared at {fmt(measured_rate_mm_per_min)} mm/min, faster than the maximum "
            f"permitted {fmt(max_rate_mm_per_min)} mm/min for drained conditions",
            {
                "measured_rate_mm_per_min": measured_rate_mm_per_min,
                "max_rate_mm_per_min": max_rate_mm_per_min,
            },
        )
    return None


def check_saturation(saturation_pct: float, *, label: str = "") -> Flag | None:
    """Flag a degree of saturation above 100 % (particle density or volume is wrong)."""
    if saturation_pct > 100.0:
        where = f" ({label})" if label else ""
        return Flag(
            "SATURATION_OVER_100",
            "warning",
            f"Degree of saturation{where} is {saturation_pct:.1f} %, above 100 %: check the particle "
            "density, the specimen dimensions and the masses",
            {"saturation_pct": saturation_pct},
        )
    return None


def check_particle_size(
    max_particle_size_mm: float,
    *,
    width_mm: float,
    thickness_mm: float,
    min_width_ratio: float | None,
    min_thickness_ratio: float | None,
    profile_code: str = "",
) -> Flag | None:
    """Flag a largest particle too big for the box under the method profile's ratios.

    Parameters
    ----------
    max_particle_size_mm
        Largest particle size in the specimen. [mm]
    width_mm, thickness_mm
        Specimen width (or diameter) and initial thickness. [mm]
    min_width_ratio, min_thickness_ratio
        Required width / D_max and thickness / D_max; ``None`` when the profile has no rule.
    """
    problems: list[str] = []
    values: dict[str, float] = {
        "max_particle_size_mm": max_particle_size_mm,
        "width_mm": width_mm,
        "thickness_mm": thickness_mm,
    }
    if min_width_ratio is not None and width_mm < min_width_ratio * max_particle_size_mm:
        problems.append(
            f"width {fmt(width_mm)} mm is less than {fmt(min_width_ratio)} × {fmt(max_particle_size_mm)} mm"
        )
        values["min_width_ratio"] = min_width_ratio
    if (
        min_thickness_ratio is not None
        and thickness_mm < min_thickness_ratio * max_particle_size_mm
    ):
        problems.append(
            f"thickness {fmt(thickness_mm)} mm is less than {fmt(min_thickness_ratio)} × "
            f"{fmt(max_particle_size_mm)} mm"
        )
        values["min_thickness_ratio"] = min_thickness_ratio
    if not problems:
        return None
    by = f" under {profile_code}" if profile_code else ""
    return Flag(
        "PARTICLE_TOO_LARGE",
        "warning",
        f"Largest particle is too large for the box{by}: " + "; ".join(problems),
        values,
    )


def check_dry_density_spread(
    dry_densities_mg_m3: ArrayLike, *, limit_pct: float = 3.0
) -> Flag | None:
    """Flag a set whose specimens' initial dry densities differ by more than ``limit_pct``.

    The spread is (max − min) / mean × 100. Uneven compaction between the specimens of a set is
    a main source of scatter in an envelope (common practice; default limit 3 %).
    """
    rho = as_float_array(dry_densities_mg_m3, "Initial dry density", "Mg/m³")
    if rho.size < 2:
        return None
    mean = float(rho.mean())
    spread = float((rho.max() - rho.min()) / mean * 100.0)
    if spread > limit_pct:
        return Flag(
            "DRY_DENSITY_SPREAD",
            "warning",
            f"Initial dry densities in the set range from {rho.min():.3f} to {rho.max():.3f} Mg/m³ "
            f"({spread:.1f} % of the mean), more than the {fmt(limit_pct)} % limit",
            {"spread_pct": spread, "limit_pct": limit_pct, "mean_mg_m3": mean},
        )
    return None


def check_stage_count(n_stages: int) -> Flag | None:
    """Flag an envelope from fewer than 3 stages, and note the weak statistics of exactly 3."""
    if n_stages < 3:
        return Flag(
            "FEWER_THAN_3_STAGES",
            "error",
            f"Envelope from {n_stages} stage{'s' if n_stages != 1 else ''}; the methods expect "
            "three or more specimens at different normal stresses",
            {"n": float(n_stages)},
        )
    if n_stages == 3:
        return Flag(
            "THREE_STAGES_ONLY",
            "warning",
            "Envelope from exactly 3 stages: one degree of freedom, so the 95 % intervals on c′ "
            "and φ′ are very wide (t = 12.71)",
            {"n": 3.0},
        )
    return None


def check_peak_at_end_of_travel(
    peak_horizontal_mm: float, end_horizontal_mm: float, *, tolerance_mm: float = 1e-9
) -> Flag | None:
    """Flag a 'peak' that is the last reading: the specimen may not have reached failure."""
    if peak_horizontal_mm >= end_horizontal_mm - tolerance_mm:
        return Flag(
            "PEAK_AT_END_OF_TRAVEL",
            "warning",
            f"The maximum shear stress is at the end of travel (x = {fmt(peak_horizontal_mm)} mm); "
            "there is no clear peak: report τ at a stated displacement or at the end of travel",
            {"peak_horizontal_mm": peak_horizontal_mm, "end_horizontal_mm": end_horizontal_mm},
        )
    return None


def check_envelope_plausible(
    friction_angle_deg: float,
    cohesion_kpa: float,
    *,
    stderr_cohesion_kpa: float = math.nan,
    r_squared: float = math.nan,
    n: int = 0,
    friction_angle_range_deg: tuple[float, float] = (5.0, 50.0),
    cohesion_range_kpa: tuple[float, float] = (0.0, 100.0),
) -> list[Flag]:
    """Plausibility flags for envelope parameters (heuristics, not acceptance criteria).

    Defaults: φ′ between 5° and 50°; c′ between 0 and 100 kPa, negative c′ flagged only when it is
    more than one standard error below zero; R² < 0.95 flagged when n ≥ 4.
    """
    flags: list[Flag] = []
    lo, hi = friction_angle_range_deg
    if not lo <= friction_angle_deg <= hi:
        flags.append(
            Flag(
                "PHI_OUTSIDE_TYPICAL",
                "warning",
                f"φ′ = {friction_angle_deg:.1f}° is outside the typical range {fmt(lo)}–{fmt(hi)}°",
                {"friction_angle_deg": friction_angle_deg},
            )
        )
    c_lo, c_hi = cohesion_range_kpa
    se = stderr_cohesion_kpa if math.isfinite(stderr_cohesion_kpa) else 0.0
    if cohesion_kpa < c_lo - se or cohesion_kpa > c_hi:
        flags.append(
            Flag(
                "COHESION_OUTSIDE_TYPICAL",
                "warning",
                f"c′ = {cohesion_kpa:.1f} kPa is outside the typical range {fmt(c_lo)}–{fmt(c_hi)} kPa",
                {"cohesion_kpa": cohesion_kpa, "stderr_cohesion_kpa": stderr_cohesion_kpa},
            )
        )
    if n >= 4 and math.isfinite(r_squared) and r_squared < 0.95:
        flags.append(
            Flag(
                "LOW_R_SQUARED",
                "warning",
                f"R² = {r_squared:.3f} with {n} stages: the points scatter widely about the line",
                {"r_squared": r_squared, "n": float(n)},
            )
        )
    return flags


def check_normal_stresses_distinct(
    normal_stress_kpa: Sequence[float] | ArrayLike, *, min_relative_gap: float = 0.05
) -> Flag | None:
    """Flag a set whose normal stresses are not distinct (closer than ``min_relative_gap``)."""
    s = np.sort(as_float_array(normal_stress_kpa, "Normal stress", "kPa"))
    if s.size < 2:
        return None
    scale = float(np.max(np.abs(s)))
    gaps = np.diff(s)
    if scale == 0.0 or float(gaps.min()) <= min_relative_gap * scale:
        i = int(np.argmin(gaps))
        return Flag(
            "NORMAL_STRESSES_NOT_DISTINCT",
            "warning",
            f"Normal stresses {fmt(float(s[i]))} and {fmt(float(s[i + 1]))} kPa are too close; "
            "each specimen of a set should be tested at a clearly different normal stress",
            {"min_gap_kpa": float(gaps.min()), "max_normal_stress_kpa": scale},
        )
    return None


def check_calibration_valid(
    test_date: dt.date,
    *,
    calibrated_on: dt.date,
    due_date: dt.date,
    device: str = "device",
) -> Flag | None:
    """Flag a calibration that was not valid on the test date (expired or not yet made)."""
    if calibrated_on > due_date:
        raise AnalysisError(
            f"Calibration of {device}: due date {due_date.isoformat()} is before the calibration "
            f"date {calibrated_on.isoformat()}"
        )
    if test_date > due_date:
        return Flag(
            "CALIBRATION_EXPIRED",
            "error",
            f"Calibration of {device} expired on {due_date.isoformat()}, before the test date "
            f"{test_date.isoformat()}",
            {"days_overdue": float((test_date - due_date).days)},
        )
    if test_date < calibrated_on:
        return Flag(
            "CALIBRATION_NOT_YET_VALID",
            "error",
            f"Calibration of {device} is dated {calibrated_on.isoformat()}, after the test date "
            f"{test_date.isoformat()}",
            {"days_early": float((calibrated_on - test_date).days)},
        )
    return None
