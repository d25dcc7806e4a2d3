"""Rate of shearing: the maximum permitted (drained) rate and the rate actually used.

``t_f = factor × t50`` (ASTM D3080 / AASHTO T 236: 50·t50) or ``factor × t100`` (BS 1377-7:
12.7·t100); ``v_max = d_f / t_f``. The factors live in the method profile.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from .errors import AnalysisError, InsufficientDataError, as_float_array, fmt, same_length
from .profiles import MethodProfile

__all__ = ["RateLimit", "max_rate", "measured_rate_mm_per_min"]


@dataclass(frozen=True, slots=True)
class RateLimit:
    """The maximum permitted displacement rate and how it was obtained.

    Attributes
    ----------
    max_rate_mm_per_min
        v_max = d_f / t_f. [mm/min]
    time_to_failure_min
        t_f, after any floor of the profile. [min]
    basis, basis_time_min
        ``"t50"`` or ``"t100"`` and its value. [min]
    factor
        Multiplier of the basis time. [-]
    displacement_at_failure_mm
        d_f used. [mm]
    displacement_source
        ``"user"`` or ``"profile default"``.
    profile
        Code and edition of the profile.
    """

    max_rate_mm_per_min: float
    time_to_failure_min: float
    basis: str
    basis_time_min: float
    factor: float
    displacement_at_failure_mm: float
    displacement_source: str
    profile: str


def max_rate(
    profile: MethodProfile,
    *,
    t50_min: float | None = None,
    t100_min: float | None = None,
    displacement_at_failure_mm: float | None = None,
    fine_grained: bool = False,
) -> RateLimit:
    """Maximum permitted displacement rate from the consolidation result and the profile.

    Parameters
    ----------
    profile
        Method profile (its time-to-failure rule and default d_f).
    t50_min, t100_min
        Consolidation times; the one the profile's rule needs must be given. [min]
    displacement_at_failure_mm
        d_f; defaults to the profile's value (the fine-grained one when ``fine_grained``). [mm]
    fine_grained
        Fine-grained, normally or lightly overconsolidated soil (D3080's larger d_f).
    """
    name = f"{profile.code}:{profile.edition}"
    if profile.time_to_failure_basis is None or profile.time_to_failure_factor is None:
        raise AnalysisError(
            f"The profile {name} has no time-to-failure rule; set one from the standard before "
            "computing the permitted rate"
        )
    basis = profile.time_to_failure_basis
    t_basis = t50_min if basis == "t50" else t100_min
    if t_basis is None or not math.isfinite(t_basis) or t_basis <= 0.0:
        raise AnalysisError(
            f"{name} needs {basis} from the consolidation stage (greater than zero); got {t_basis}"
        )
    source = "user"
    d_f = displacement_at_failure_mm
    if d_f is None:
        source = "profile default"
        d_f = (
            profile.displacement_at_failure_fine_mm
            if fine_grained and profile.displacement_at_failure_fine_mm is not None
            else profile.displacement_at_failure_mm
        )
    if d_f is None or not math.isfinite(d_f) or d_f <= 0.0:
        raise AnalysisError(
            f"Give the displacement expected at failure d_f; the profile {name} has no default"
        )
    t_f = profile.time_to_failure_factor * t_basis
    if profile.min_time_to_failure_min is not None:
        t_f = max(t_f, profile.min_time_to_failure_min)
    return RateLimit(
        d_f / t_f,
        t_f,
        basis,
        float(t_basis),
        profile.time_to_failure_factor,
        float(d_f),
        source,
        name,
    )


def measured_rate_mm_per_min(time_min: ArrayLike, horizontal_mm: ArrayLike) -> float:
    """Rate actually used: least-squares slope of displacement on time. [mm/min]"""
    t = as_float_array(time_min, "Elapsed time", "min", min_size=2)
    x = as_float_array(horizontal_mm, "Horizontal displacement", "mm", min_size=2)
    same_length((t, x), ("time", "horizontal"))
    tc = t - t.mean()
    stt = float(np.dot(tc, tc))
    if stt == 0.0:
        raise InsufficientDataError(
            f"All readings have the same time ({fmt(float(t[0]))} min); the rate cannot be measured"
        )
    return float(np.dot(tc, x)) / stt
