"""Curved (power-law) envelope τ = a·σ^b, with tangent φ′ and local c′ at a chosen stress.

Fitting choices (state which one a result used):

``"log-log"``
    Linear least squares of ln τ on ln σ; minimises relative (multiplicative) errors.
``"nonlinear"``
    Nonlinear least squares of τ on σ (scipy ``curve_fit``, started from the log-log fit);
    minimises errors in τ itself.

Tangent at σ*: tanφ′t = a·b·σ*^(b−1); local intercept c′t = τ(σ*) − σ*·tanφ′t.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import optimize

from .errors import AnalysisError, InsufficientDataError, as_float_array, fmt, same_length
from .flags import Flag

__all__ = ["PowerEnvelopeFit", "TangentParameters", "fit_power_envelope"]


@dataclass(frozen=True, slots=True)
class TangentParameters:
    """Linearisation of a curved envelope at one normal stress."""

    normal_stress_kpa: float
    shear_stress_kpa: float
    tan_phi: float
    friction_angle_deg: float
    cohesion_kpa: float
    flags: tuple[Flag, ...]


@dataclass(frozen=True, slots=True)
class PowerEnvelopeFit:
    """Power-law envelope τ = a·σ^b.

    Attributes
    ----------
    a
        Coefficient; τ and σ in kPa. [kPa^(1−b)]
    b
        Exponent (b < 1: curved; b = 1: straight through the origin). [-]
    method
        ``"log-log"`` or ``"nonlinear"``.
    n
        Stages used.
    normal_stress_range_kpa
        Tested range. [kPa]
    """

    a: float
    b: float
    method: Literal["log-log", "nonlinear"]
    n: int
    normal_stress_range_kpa: tuple[float, float]

    def tangent(self, normal_stress_kpa: float) -> TangentParameters:
        """Tangent φ′ and local c′ at ``normal_stress_kpa`` [kPa]."""
        s = float(normal_stress_kpa)
        if not (math.isfinite(s) and s > 0.0):
            raise AnalysisError(f"The design normal stress must be greater than zero; got {s} kPa")
        tau = self.a * s**self.b
        tan_t = self.a * self.b * s ** (self.b - 1.0)
        lo, hi = self.normal_stress_range_kpa
        flags: tuple[Flag, ...] = ()
        if not lo <= s <= hi:
            flags = (
                Flag(
                    "OUTSIDE_TESTED_RANGE",
                    "warning",
                    f"Normal stress {fmt(s)} kPa is outside the tested range "
                    f"{fmt(lo)}–{fmt(hi)} kPa",
                    {"normal_stress_kpa": s, "min_kpa": lo, "max_kpa": hi},
                ),
            )
        return TangentParameters(
            s, tau, tan_t, math.degrees(math.atan(tan_t)), tau - s * tan_t, flags
        )


def fit_power_envelope(
    normal_stress_kpa: ArrayLike,
    shear_stress_kpa: ArrayLike,
    *,
    method: Literal["log-log", "nonlinear"] = "log-log",
) -> PowerEnvelopeFit:
    """Fit τ = a·σ^b to stresses at failure (all must be > 0) [kPa]."""
    s = as_float_array(normal_stress_kpa, "Normal stress", "kPa")
    t = as_float_array(shear_stress_kpa, "Shear stress", "kPa")
    same_length((s, t), ("normal stress", "shear stress"))
    if s.size < 2:
        raise InsufficientDataError(f"A power-law envelope needs at least 2 stages; got {s.size}")
    if np.any(s <= 0.0) or np.any(t <= 0.0):
        raise AnalysisError("A power-law envelope needs every normal and shear stress above zero")
    ls, lt = np.log(s), np.log(t)
    lc = ls - ls.mean()
    sxx = float(np.dot(lc, lc))
    if sxx == 0.0:
        raise InsufficientDataError(
            f"All normal stresses are equal ({fmt(float(s[0]))} kPa); an envelope needs at least "
            "two different normal stresses"
        )
    b = float(np.dot(lc, lt)) / sxx
    a = math.exp(float(lt.mean()) - b * float(ls.mean()))
    if method == "nonlinear":
        popt, _ = optimize.curve_fit(
            lambda x, aa, bb: aa * np.power(x, bb), s, t, p0=(a, b), maxfev=10_000
        )
        a, b = float(popt[0]), float(popt[1])
    elif method != "log-log":
        raise AnalysisError(f"method must be 'log-log' or 'nonlinear'; got {method!r}")
    return PowerEnvelopeFit(a, b, method, int(s.size), (float(s.min()), float(s.max())))
