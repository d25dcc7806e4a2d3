"""Measurement uncertainty of τ and σn at a reading (GUM first-order propagation, k = 2).

u_c²(y) = Σ (∂f/∂x_i)²·u²(x_i) for uncorrelated inputs (JCGM 100:2008), U = k·u_c. All inputs
here are *standard* uncertainties; convert certificate values with
:func:`standard_from_expanded` and resolutions or tolerances with :func:`standard_from_rectangular`.
The budget covers the measurement of τ and σn only — not the area model, friction, or the
failure pick, which are usually larger.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from .errors import AnalysisError, as_positive_float
from .geometry import BoxShape
from .loads import STANDARD_GRAVITY_M_S2

__all__ = [
    "StressUncertainty",
    "normal_stress_uncertainty",
    "shear_stress_uncertainty",
    "standard_from_expanded",
    "standard_from_rectangular",
]


def standard_from_expanded(expanded: float, k: float = 2.0) -> float:
    """Standard uncertainty from an expanded one quoted with coverage factor k."""
    return as_positive_float(expanded, "Expanded uncertainty", allow_zero=True) / k


def standard_from_rectangular(half_width: float) -> float:
    """Standard uncertainty of a ±half_width rectangular distribution (a/√3).

    For a digital resolution r, pass r/2.
    """
    return as_positive_float(half_width, "Half-width", allow_zero=True) / math.sqrt(3.0)


@dataclass(frozen=True, slots=True)
class StressUncertainty:
    """A stress with its combined and expanded uncertainty.

    Attributes
    ----------
    value_kpa, standard_uncertainty_kpa, expanded_uncertainty_kpa
        y, u_c(y) and U = k·u_c. [kPa]
    coverage_factor
        k. [-]
    relative_pct
        u_c/y. [%]
    budget_kpa
        Contribution |∂f/∂x_i|·u(x_i) of each input. [kPa]
    """

    value_kpa: float
    standard_uncertainty_kpa: float
    expanded_uncertainty_kpa: float
    coverage_factor: float
    relative_pct: float
    budget_kpa: Mapping[str, float]


def _combine(value: float, budget: dict[str, float], k: float) -> StressUncertainty:
    if not k > 0:
        raise AnalysisError(f"Coverage factor must be greater than zero; got {k}")
    u = math.sqrt(sum(c * c for c in budget.values()))
    return StressUncertainty(value, u, k * u, k, u / abs(value) * 100.0, budget)


def _area_terms(
    shape: BoxShape, length_mm: float, u_length_mm: float, width_mm: float | None, u_width_mm: float
) -> tuple[float, float]:
    """Area [mm²] and its relative standard uncertainty [-]."""
    length = as_positive_float(length_mm, "Box length", "mm")
    if shape == "circular":
        return math.pi * length**2 / 4.0, 2.0 * u_length_mm / length
    width = as_positive_float(width_mm if width_mm is not None else length, "Box width", "mm")
    return length * width, math.hypot(u_length_mm / length, u_width_mm / width)


def shear_stress_uncertainty(
    *,
    force_n: float,
    u_force_n: float,
    length_mm: float,
    u_length_mm: float,
    width_mm: float | None = None,
    u_width_mm: float = 0.0,
    shape: BoxShape = "square",
    coverage_factor: float = 2.0,
) -> StressUncertainty:
    """Uncertainty of τ = F/A (nominal area) from u(F), u(L), u(W) — standard uncertainties.

    For a circular box give the diameter as ``length_mm`` and its uncertainty as ``u_length_mm``.
    """
    area, rel_a = _area_terms(shape, length_mm, u_length_mm, width_mm, u_width_mm)
    tau = force_n * 1000.0 / area
    budget = {"force": abs(tau) * u_force_n / abs(force_n), "area": abs(tau) * rel_a}
    return _combine(tau, budget, coverage_factor)


def normal_stress_uncertainty(
    *,
    direct_mass_kg: float,
    u_direct_mass_kg: float,
    lever_ratio: float,
    u_lever_ratio: float,
    hanger_mass_kg: float,
    u_hanger_mass_kg: float,
    weights_mass_kg: float,
    u_weights_mass_kg: float,
    length_mm: float,
    u_length_mm: float,
    width_mm: float | None = None,
    u_width_mm: float = 0.0,
    shape: BoxShape = "square",
    g_m_s2: float = STANDARD_GRAVITY_M_S2,
    coverage_factor: float = 2.0,
) -> StressUncertainty:
    """Uncertainty of σn = g·[m_d + r·(m_h + m_w)]/A from masses, lever ratio and dimensions.

    Partial derivatives: ∂σ/∂m_d = g/A, ∂σ/∂m_h = ∂σ/∂m_w = g·r/A, ∂σ/∂r = g·(m_h + m_w)/A,
    and the relative area term as for τ. All uncertainties are standard uncertainties.
    """
    area, rel_a = _area_terms(shape, length_mm, u_length_mm, width_mm, u_width_mm)
    scale = g_m_s2 * 1000.0 / area  # kPa per kg
    mass = direct_mass_kg + lever_ratio * (hanger_mass_kg + weights_mass_kg)
    sigma = scale * mass
    budget = {
        "direct mass": scale * u_direct_mass_kg,
        "hanger mass": scale * lever_ratio * u_hanger_mass_kg,
        "weights": scale * lever_ratio * u_weights_mass_kg,
        "lever ratio": scale * (hanger_mass_kg + weights_mass_kg) * u_lever_ratio,
        "area": sigma * rel_a,
    }
    return _combine(sigma, budget, coverage_factor)
