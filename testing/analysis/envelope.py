"""Mohr–Coulomb strength envelopes: τf = c′ + σ′n·tanφ′ by least squares.

Free fit (ordinary least squares, dof n − 2)::

    b = tanφ′ = Sxy/Sxx,  a = c′ = τ̄ − b·σ̄,  s² = SSres/(n − 2)
    SE(b) = s/√Sxx,  SE(a) = s·√(1/n + σ̄²/Sxx),  corr(a, b) = −σ̄/√(Sxx/n + σ̄²)

Through the origin (c′ = 0 imposed, dof n − 1)::

    b0 = Σστ/Σσ²,  s0² = SSres/(n − 1),  SE(b0) = s0/√Σσ²,  R² = 1 − SSres/Στ² (uncentred)

95 % intervals use Student's t(0.975, dof); the φ′ interval is the arctan of the tanφ′ limits.
These are the standard OLS results (e.g. Draper & Smith, *Applied Regression Analysis*, ch. 1).
The same machinery serves peak, ultimate and residual sets; which one a fit is for is the
caller's label.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

from .errors import AnalysisError, InsufficientDataError, as_float_array, fmt, same_length
from .flags import Flag, check_envelope_plausible, check_stage_count

__all__ = [
    "EnvelopeFit",
    "EnvelopeValue",
    "ExcludedStage",
    "fit_envelope",
    "secant_friction_angle_deg",
]


@dataclass(frozen=True, slots=True)
class ExcludedStage:
    """A stage left out of a fit, with the reason the checker gave."""

    index: int
    normal_stress_kpa: float
    shear_stress_kpa: float
    reason: str


@dataclass(frozen=True, slots=True)
class EnvelopeValue:
    """Shear strength read off an envelope at one normal stress.

    Attributes
    ----------
    normal_stress_kpa, shear_stress_kpa
        The stress asked for and the strength on the line. [kPa]
    inside_tested_range
        Whether the stress lies within the tested normal stresses.
    flags
        An ``OUTSIDE_TESTED_RANGE`` warning when extrapolating.
    """

    normal_stress_kpa: float
    shear_stress_kpa: float
    inside_tested_range: bool
    flags: tuple[Flag, ...]


@dataclass(frozen=True, eq=False)
class EnvelopeFit:
    """Least-squares Mohr–Coulomb envelope and its statistics.

    Attributes
    ----------
    method
        ``"least squares, free intercept"`` or ``"least squares through the origin (c′ = 0)"``.
    through_origin
        Whether c′ = 0 was imposed.
    n, dof
        Number of stages used and residual degrees of freedom.
    cohesion_kpa, tan_phi, friction_angle_deg
        c′ [kPa] (never clipped; may be negative), tanφ′ [-], φ′ [deg].
    stderr_cohesion_kpa, stderr_tan_phi, stderr_friction_angle_deg
        Standard errors (c′ SE is 0 when imposed; NaN when dof = 0). [kPa], [-], [deg]
    cohesion_ci95_kpa, tan_phi_ci95, friction_angle_ci95_deg
        Two-sided 95 % confidence intervals (lower, upper).
    corr_cohesion_tan_phi
        Correlation of the c′ and tanφ′ estimates (NaN through the origin). [-]
    r_squared, r_squared_kind
        R² and ``"centred"`` or ``"uncentred"`` (through the origin: not comparable with the
        free-fit value).
    residual_std_kpa
        s, the residual standard deviation. [kPa]
    normal_stress_kpa, shear_stress_kpa
        The included points. [kPa]
    residuals_kpa
        τ − τ̂ at each included point. [kPa]
    normal_stress_range_kpa
        (min, max) of the tested normal stresses; use the line only inside it. [kPa]
    mean_normal_stress_kpa, sxx_kpa2
        σ̄ and Σ(σ − σ̄)² (or Σσ² through the origin), for confidence bands. [kPa], [kPa²]
    included_indices
        Positions of the included stages in the input.
    excluded
        Stages left out, each with its reason.
    warnings
        Flags as data: 3 stages, negative c′, plausibility.
    through_origin_alternative
        When the free fit gives c′ < 0, the c′ = 0 fit offered beside it; else ``None``.
    """

    method: str
    through_origin: bool
    n: int
    dof: int
    cohesion_kpa: float
    tan_phi: float
    friction_angle_deg: float
    stderr_cohesion_kpa: float
    stderr_tan_phi: float
    stderr_friction_angle_deg: float
    cohesion_ci95_kpa: tuple[float, float]
    tan_phi_ci95: tuple[float, float]
    friction_angle_ci95_deg: tuple[float, float]
    corr_cohesion_tan_phi: float
    r_squared: float
    r_squared_kind: Literal["centred", "uncentred"]
    residual_std_kpa: float
    normal_stress_kpa: NDArray[np.float64]
    shear_stress_kpa: NDArray[np.float64]
    residuals_kpa: NDArray[np.float64]
    normal_stress_range_kpa: tuple[float, float]
    mean_normal_stress_kpa: float
    sxx_kpa2: float
    included_indices: tuple[int, ...]
    excluded: tuple[ExcludedStage, ...] = ()
    warnings: tuple[Flag, ...] = ()
    through_origin_alternative: EnvelopeFit | None = field(default=None)

    def shear_strength_kpa(self, normal_stress_kpa: ArrayLike) -> NDArray[np.float64]:
        """τ on the line, c′ + σ·tanφ′, for any normal stress (no range check). [kPa]"""
        s = np.asarray(normal_stress_kpa, dtype=np.float64)
        return self.cohesion_kpa + s * self.tan_phi

    def evaluate(self, normal_stress_kpa: float) -> EnvelopeValue:
        """Strength at one normal stress, with a warning when outside the tested range."""
        s = float(normal_stress_kpa)
        lo, hi = self.normal_stress_range_kpa
        inside = lo <= s <= hi
        flags: tuple[Flag, ...] = ()
        if not inside:
            flags = (
                Flag(
                    "OUTSIDE_TESTED_RANGE",
                    "warning",
                    f"Normal stress {fmt(s)} kPa is outside the tested range "
                    f"{fmt(lo)}–{fmt(hi)} kPa; the envelope is an extrapolation there",
                    {"normal_stress_kpa": s, "min_kpa": lo, "max_kpa": hi},
                ),
            )
        return EnvelopeValue(s, self.cohesion_kpa + s * self.tan_phi, inside, flags)


def secant_friction_angle_deg(
    normal_stress_kpa: ArrayLike, shear_stress_kpa: ArrayLike
) -> NDArray[np.float64]:
    """Secant friction angle per stage, φ′sec = arctan(τ/σ′n). [deg]"""
    s = as_float_array(normal_stress_kpa, "Normal stress", "kPa")
    t = as_float_array(shear_stress_kpa, "Shear stress", "kPa")
    same_length((s, t), ("normal stress", "shear stress"))
    if np.any(s <= 0.0):
        raise AnalysisError("Normal stress must be greater than zero for a secant friction angle")
    return np.degrees(np.arctan(t / s))


def _t975(dof: int) -> float:
    return float(stats.t.ppf(0.975, dof)) if dof > 0 else math.nan


def _fit(
    s: NDArray[np.float64],
    t: NDArray[np.float64],
    through_origin: bool,
    included: tuple[int, ...],
    excluded: tuple[ExcludedStage, ...],
) -> EnvelopeFit:
    n = s.size
    if through_origin:
        sxx = float(np.dot(s, s))
        if sxx == 0.0:
            raise InsufficientDataError(
                "All normal stresses are zero; a line through the origin cannot be fitted"
            )
        b = float(np.dot(s, t)) / sxx
        a = 0.0
        res = t - b * s
        dof = n - 1
        ss_res = float(np.dot(res, res))
        s2 = ss_res / dof if dof > 0 else math.nan
        se_b = math.sqrt(s2 / sxx) if dof > 0 else math.nan
        se_a = 0.0
        corr = math.nan
        ss_tot = float(np.dot(t, t))
        kind: Literal["centred", "uncentred"] = "uncentred"
        mean_s = float(s.mean())
        method = "least squares through the origin (c′ = 0)"
    else:
        mean_s = float(s.mean())
        sc = s - mean_s
        sxx = float(np.dot(sc, sc))
        if sxx <= (1e-12 * max(abs(mean_s), 1.0)) ** 2 * n:
            raise InsufficientDataError(
                f"All normal stresses are equal ({fmt(mean_s)} kPa); an envelope needs at least "
                "two different normal stresses"
            )
        b = float(np.dot(sc, t)) / sxx
        a = float(t.mean()) - b * mean_s
        res = t - (a + b * s)
        dof = n - 2
        ss_res = float(np.dot(res, res))
        s2 = ss_res / dof if dof > 0 else math.nan
        se_b = math.sqrt(s2 / sxx) if dof > 0 else math.nan
        se_a = math.sqrt(s2 * (1.0 / n + mean_s**2 / sxx)) if dof > 0 else math.nan
        corr = -mean_s / math.sqrt(sxx / n + mean_s**2)
        tc = t - t.mean()
        ss_tot = float(np.dot(tc, tc))
        kind = "centred"
        method = "least squares, free intercept"
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0.0 else math.nan
    tq = _t975(dof)
    b_ci = (b - tq * se_b, b + tq * se_b)
    a_ci = (a - tq * se_a, a + tq * se_a) if not through_origin else (0.0, 0.0)
    phi_ci = (
        (math.degrees(math.atan(b_ci[0])), math.degrees(math.atan(b_ci[1])))
        if dof > 0
        else (math.nan, math.nan)
    )
    phi = math.degrees(math.atan(b))
    warnings: list[Flag] = []
    count_flag = check_stage_count(n)
    if count_flag is not None:
        warnings.append(count_flag)
    alternative: EnvelopeFit | None = None
    if not through_origin and a < 0.0:
        alternative = _fit(s, t, True, included, excluded)
        warnings.append(
            Flag(
                "NEGATIVE_COHESION",
                "warning",
                f"The fitted c′ is negative ({a:.2f} kPa); it is reported as fitted, and the fit "
                f"through the origin (φ′ = {alternative.friction_angle_deg:.1f}°) is given beside it",
                {
                    "cohesion_kpa": a,
                    "through_origin_friction_angle_deg": alternative.friction_angle_deg,
                },
            )
        )
    warnings.extend(
        f
        for f in check_envelope_plausible(
            phi, a, stderr_cohesion_kpa=se_a, r_squared=r2 if not through_origin else math.nan, n=n
        )
        if not (f.code == "COHESION_OUTSIDE_TYPICAL" and a < 0.0)  # already said above
    )
    return EnvelopeFit(
        method=method,
        through_origin=through_origin,
        n=n,
        dof=dof,
        cohesion_kpa=a,
        tan_phi=b,
        friction_angle_deg=phi,
        stderr_cohesion_kpa=se_a,
        stderr_tan_phi=se_b,
        stderr_friction_angle_deg=math.degrees(se_b / (1.0 + b * b)) if dof > 0 else math.nan,
        cohesion_ci95_kpa=a_ci,
        tan_phi_ci95=b_ci,
        friction_angle_ci95_deg=phi_ci,
        corr_cohesion_tan_phi=corr,
        r_squared=r2,
        r_squared_kind=kind,
        residual_std_kpa=math.sqrt(s2) if dof > 0 else math.nan,
        normal_stress_kpa=s,
        shear_stress_kpa=t,
        residuals_kpa=res,
        normal_stress_range_kpa=(float(s.min()), float(s.max())),
        mean_normal_stress_kpa=mean_s,
        sxx_kpa2=sxx,
        included_indices=included,
        excluded=excluded,
        warnings=tuple(warnings),
        through_origin_alternative=alternative,
    )


def fit_envelope(
    normal_stress_kpa: ArrayLike,
    shear_stress_kpa: ArrayLike,
    *,
    through_origin: bool = False,
    exclude: Mapping[int, str] | None = None,
) -> EnvelopeFit:
    """Fit a straight Mohr–Coulomb envelope to one set of stages.

    Parameters
    ----------
    normal_stress_kpa
        σ′n at failure, one value per stage. [kPa]
    shear_stress_kpa
        τ at failure under the chosen criterion, one value per stage. [kPa]
    through_origin
        Impose c′ = 0 (R² is then the uncentred form, labelled so).
    exclude
        Stages to leave out, ``{position: reason}``; the reason is required and kept.

    Returns
    -------
    EnvelopeFit

    Raises
    ------
    AnalysisError
        NaN input, unequal lengths, fewer than 2 included stages, all normal stresses equal, or
        an exclusion without a reason.
    """
    s_all = as_float_array(normal_stress_kpa, "Normal stress", "kPa", min_size=0)
    t_all = as_float_array(shear_stress_kpa, "Shear stress", "kPa", min_size=0)
    same_length((s_all, t_all), ("normal stress", "shear stress"))
    exclude = dict(exclude or {})
    for i, reason in exclude.items():
        if not 0 <= i < s_all.size:
            raise AnalysisError(
                f"Stage {i + 1} cannot be excluded: the set has {s_all.size} stages"
            )
        if not str(reason).strip():
            raise AnalysisError(f"Give a reason for excluding stage {i + 1}")
    keep = tuple(i for i in range(s_all.size) if i not in exclude)
    if len(keep) < 2:
        raise InsufficientDataError(
            f"An envelope needs at least 2 stages; {len(keep)} "
            f"{'is' if len(keep) == 1 else 'are'} included"
        )
    excluded = tuple(
        ExcludedStage(i, float(s_all[i]), float(t_all[i]), str(exclude[i])) for i in sorted(exclude)
    )
    idx = np.asarray(keep, dtype=np.intp)
    return _fit(s_all[idx], t_all[idx], through_origin, keep, excluded)
