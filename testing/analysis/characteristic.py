"""Characteristic values (an interpretation, not a test result).

EN 1997-1:2004 §2.4.5.2 asks for a cautious estimate; where statistics are used, EN 1990
Annex D §D7.2 gives ``X_k = x̄·(1 − k_n·V)`` with

=========================  ===========================  ==================================
target                     V known                      V unknown
=========================  ===========================  ==================================
5 % fractile               u0.95·√(1 + 1/n)             t(0.95, n−1)·√(1 + 1/n)
mean, 95 % confidence      u0.95/√n                     t(0.95, n−1)/√n
=========================  ===========================  ==================================

k_n is computed exactly from scipy's normal and Student t quantiles (the printed EN 1990
Table D1 values are rounded). Apply to tanφ′ and to c′ separately, then φ′k = arctan(tanφ′k).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

from .envelope import EnvelopeFit
from .errors import AnalysisError, InsufficientDataError, as_float_array

__all__ = [
    "INTERPRETATION_NOTE",
    "CharacteristicParameters",
    "CharacteristicValue",
    "RegressionBand",
    "characteristic_parameters",
    "characteristic_value",
    "k_n",
    "regression_lower_band",
    "schneider_value",
]

CharacteristicKind = Literal["mean", "fractile"]

INTERPRETATION_NOTE = (
    "Characteristic value: an interpretation (EN 1997-1 2.4.5.2 / EN 1990 D7.2), not a test result"
)


def k_n(n: float, *, kind: CharacteristicKind, variance_known: bool) -> float:
    """Statistical coefficient k_n of EN 1990 D7.2 for n values (``n = math.inf`` allowed).

    Raises
    ------
    AnalysisError
        Unknown ``kind``, or too few values (1 when V is known, 2 when it is estimated).
    """
    if kind not in ("mean", "fractile"):
        raise AnalysisError(f"kind must be 'mean' or 'fractile'; got {kind!r}")
    need = 1 if variance_known else 2
    if not n >= need:
        raise InsufficientDataError(
            f"A characteristic value needs at least {need} test value{'s' if need > 1 else ''}"
            f"{' when the variance is estimated from them' if not variance_known else ''}; got {n}"
        )
    if variance_known or math.isinf(n):
        q = float(stats.norm.ppf(0.95))
    else:
        q = float(stats.t.ppf(0.95, n - 1))
    if kind == "fractile":
        return q * math.sqrt(1.0 + 1.0 / n)
    return q / math.sqrt(n)


@dataclass(frozen=True, slots=True)
class CharacteristicValue:
    """A characteristic value and everything needed to reproduce it.

    Attributes
    ----------
    value
        X_k, in the unit of the inputs.
    mean, std
        x̄ and the sample standard deviation s (ddof = 1; NaN for n = 1).
    cov
        V used: the given one when known, else s/x̄. [-]
    k_n
        Statistical coefficient. [-]
    n
        Number of values.
    kind, variance_known
        The rule applied.
    note
        Label saying this is an interpretation.
    """

    value: float
    mean: float
    std: float
    cov: float
    k_n: float
    n: int
    kind: CharacteristicKind
    variance_known: bool
    note: str = INTERPRETATION_NOTE


def characteristic_value(
    values: ArrayLike,
    *,
    kind: CharacteristicKind = "mean",
    variance_known: bool = False,
    cov: float | None = None,
) -> CharacteristicValue:
    """Characteristic value ``X_k = x̄·(1 − k_n·V)`` (EN 1990 D7.2, EN 1997-1 2.4.5.2).

    Parameters
    ----------
    values
        Derived values, e.g. tanφ′ [-] or c′ [kPa] of several sets.
    kind
        ``"mean"`` (95 % confidence in the mean, large zones) or ``"fractile"`` (5 % fractile,
        local failure).
    variance_known
        Use an a-priori coefficient of variation ``cov`` instead of the sample one.
    cov
        Known V [-]; required when ``variance_known`` and only then.
    """
    x = as_float_array(values, "Values for the characteristic value")
    n = x.size
    kn = k_n(n, kind=kind, variance_known=variance_known)
    mean = float(x.mean())
    std = float(x.std(ddof=1)) if n > 1 else math.nan
    if variance_known:
        if cov is None or not math.isfinite(cov) or cov < 0:
            raise AnalysisError(
                "variance_known=True needs the known coefficient of variation as cov (e.g. 0.10)"
            )
        v = float(cov)
    else:
        if cov is not None:
            raise AnalysisError(
                "cov is only used when the variance is known; set variance_known=True or drop cov"
            )
        if mean == 0.0:
            raise AnalysisError(
                "The mean of the values is zero, so their coefficient of variation is undefined"
            )
        v = std / abs(mean)
    # x̄·(1 − k_n·V) with V relative to |x̄|: always k_n·V·|x̄| below the mean (cautious side).
    return CharacteristicValue(
        mean - kn * v * abs(mean),
        mean,
        std,
        v,
        kn,
        n,
        kind,
        variance_known,
    )


def schneider_value(values: ArrayLike) -> CharacteristicValue:
    """Schneider (1999) approximation ``X_k ≈ x̄ − 0.5·s`` (half a standard deviation below)."""
    x = as_float_array(values, "Values for the characteristic value", min_size=2)
    mean = float(x.mean())
    std = float(x.std(ddof=1))
    v = std / abs(mean) if mean != 0.0 else math.nan
    return CharacteristicValue(
        mean - 0.5 * std,
        mean,
        std,
        v,
        0.5,
        x.size,
        "mean",
        False,
        "Schneider (1999) approximation x̄ − 0.5·s: an interpretation, not a test result",
    )


@dataclass(frozen=True, slots=True)
class CharacteristicParameters:
    """c′k and φ′k from several sets, each parameter treated separately."""

    cohesion: CharacteristicValue
    tan_phi: CharacteristicValue
    cohesion_kpa: float
    friction_angle_deg: float
    note: str = INTERPRETATION_NOTE


def characteristic_parameters(
    cohesion_kpa: ArrayLike,
    tan_phi: ArrayLike,
    *,
    kind: CharacteristicKind = "mean",
    variance_known: bool = False,
    cov_cohesion: float | None = None,
    cov_tan_phi: float | None = None,
) -> CharacteristicParameters:
    """Apply :func:`characteristic_value` to c′ [kPa] and tanφ′ [-] of several sets separately."""
    c = characteristic_value(
        cohesion_kpa, kind=kind, variance_known=variance_known, cov=cov_cohesion
    )
    t = characteristic_value(tan_phi, kind=kind, variance_known=variance_known, cov=cov_tan_phi)
    return CharacteristicParameters(c, t, c.value, math.degrees(math.atan(t.value)))


@dataclass(frozen=True, eq=False)
class RegressionBand:
    """Lower one-sided band under a pooled regression line.

    Attributes
    ----------
    normal_stress_kpa
        Where the band is evaluated. [kPa]
    line_kpa
        The fitted line τ̂. [kPa]
    lower_kpa
        τ̂ − t(confidence, dof)·s·√(extra + 1/n + (σ − σ̄)²/Sxx), extra = 0 (mean) or 1
        (prediction). [kPa]
    kind, confidence, t_value
        The band drawn and its one-sided Student t.
    """

    normal_stress_kpa: NDArray[np.float64]
    line_kpa: NDArray[np.float64]
    lower_kpa: NDArray[np.float64]
    kind: Literal["mean", "prediction"]
    confidence: float
    t_value: float
    note: str = INTERPRETATION_NOTE


def regression_lower_band(
    fit: EnvelopeFit,
    normal_stress_kpa: ArrayLike,
    *,
    kind: Literal["mean", "prediction"] = "mean",
    confidence: float = 0.95,
) -> RegressionBand:
    """Lower one-sided band of a pooled free-intercept regression (mean line or prediction).

    The characteristic line is then chosen by the engineer under this band over the design
    stress range; the choice is theirs and should be recorded.
    """
    if fit.through_origin:
        raise AnalysisError("The regression band is drawn for the free-intercept fit only")
    if fit.dof < 1:
        raise InsufficientDataError(
            "A regression band needs at least 3 stages (1 degree of freedom)"
        )
    if kind not in ("mean", "prediction"):
        raise AnalysisError(f"kind must be 'mean' or 'prediction'; got {kind!r}")
    if not 0.5 < confidence < 1.0:
        raise AnalysisError(f"Confidence must be between 0.5 and 1; got {confidence}")
    s = as_float_array(normal_stress_kpa, "Normal stress", "kPa")
    tq = float(stats.t.ppf(confidence, fit.dof))
    extra = 1.0 if kind == "prediction" else 0.0
    half = (
        tq
        * fit.residual_std_kpa
        * np.sqrt(extra + 1.0 / fit.n + (s - fit.mean_normal_stress_kpa) ** 2 / fit.sxx_kpa2)
    )
    line = fit.cohesion_kpa + fit.tan_phi * s
    return RegressionBand(s, line, line - half, kind, confidence, tq)
