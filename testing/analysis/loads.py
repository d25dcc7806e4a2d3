"""Normal force from masses and a lever, force from a calibrated device, gauge readings.

All forces are in newtons, masses in kilograms, displacements in millimetres.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, CalibrationRangeError, as_float_array, as_positive_float, fmt

__all__ = [
    "STANDARD_GRAVITY_M_S2",
    "LinearCalibration",
    "PolynomialCalibration",
    "gauge_displacement_mm",
    "normal_force_n",
]

#: Standard acceleration of gravity (CGPM 1901). [m/s²]
STANDARD_GRAVITY_M_S2 = 9.80665


def normal_force_n(
    *,
    direct_mass_kg: float = 0.0,
    lever_ratio: float = 1.0,
    hanger_mass_kg: float = 0.0,
    weights_mass_kg: float = 0.0,
    beam_offset_n: float = 0.0,
    g_m_s2: float = STANDARD_GRAVITY_M_S2,
) -> float:
    """Normal force on the specimen from a lever-arm hanger and direct masses.

    ``N = g·[m_direct + r·(m_hanger + m_weights)] + N_beam``

    Parameters
    ----------
    direct_mass_kg
        Mass bearing directly on the specimen: top cap, grid plate, porous stone, yoke. [kg]
    lever_ratio
        Lever ratio r (1 for dead weights hung directly). [-]
    hanger_mass_kg, weights_mass_kg
        Hanger and the weights on it. [kg]
    beam_offset_n
        Net force from the beam's own weight (0 when counter-balanced). [N]
    g_m_s2
        Acceleration of gravity; 9.80665 by default, 9.81 if the method says so. [m/s²]

    Returns
    -------
    float
        Normal force. [N]
    """
    for name, v in (
        ("Direct mass", direct_mass_kg),
        ("Hanger mass", hanger_mass_kg),
        ("Mass of weights", weights_mass_kg),
    ):
        as_positive_float(v, name, "kg", allow_zero=True)
    as_positive_float(lever_ratio, "Lever ratio")
    as_positive_float(g_m_s2, "Acceleration of gravity", "m/s²")
    force = g_m_s2 * (direct_mass_kg + lever_ratio * (hanger_mass_kg + weights_mass_kg))
    force += float(beam_offset_n)
    if force <= 0.0:
        raise AnalysisError(f"Normal force must be greater than zero; got {fmt(force)} N")
    return force


def _check_range(r: NDArray[np.float64], lo: float, hi: float, unit: str, device: str) -> None:
    if r.size == 0:
        return
    rmin, rmax = float(r.min()), float(r.max())
    if rmin < lo or rmax > hi:
        bad = rmax if rmax > hi else rmin
        raise CalibrationRangeError(
            f"Force reading {fmt(bad)} {unit} is outside the calibrated range "
            f"{fmt(lo)}–{fmt(hi)} {unit} of the {device}"
        )


@dataclass(frozen=True, slots=True)
class LinearCalibration:
    """Linear force calibration ``F = K·(R − R0)`` (proving ring "mean calibration").

    Attributes
    ----------
    factor_n_per_unit
        K, force per reading unit. [N/div] (or N per mV/V, N per count)
    zero_reading
        R0, reading at zero force. [div]
    range_min, range_max
        Readings covered by the calibration certificate. [div]
    unit
        Reading unit shown in messages (``"div"``, ``"mV/V"``, ``"counts"``).
    device
        Device name shown in messages, e.g. ``"ring"`` or ``"load cell"``.
    """

    factor_n_per_unit: float
    zero_reading: float = 0.0
    range_min: float = -np.inf
    range_max: float = np.inf
    unit: str = "div"
    device: str = "ring"

    def __post_init__(self) -> None:
        if not np.isfinite(self.factor_n_per_unit) or self.factor_n_per_unit == 0.0:
            raise AnalysisError(
                f"Calibration factor of the {self.device} must be a non-zero number; got "
                f"{self.factor_n_per_unit}"
            )
        if not self.range_min < self.range_max:
            raise AnalysisError(
                f"Calibrated range of the {self.device} is empty: "
                f"{fmt(self.range_min)}–{fmt(self.range_max)} {self.unit}"
            )

    def force_n(self, reading: ArrayLike) -> NDArray[np.float64]:
        """Force for each reading, refusing readings outside the calibrated range. [N]"""
        r = as_float_array(reading, "Force reading", self.unit, min_size=0)
        _check_range(r, self.range_min, self.range_max, self.unit, self.device)
        return self.factor_n_per_unit * (r - self.zero_reading)


@dataclass(frozen=True, slots=True)
class PolynomialCalibration:
    """Polynomial force calibration ``F = a0 + a1·d + a2·d² + a3·d³`` (up to 3rd degree).

    ``d`` is the reading minus ``zero_reading``. The polynomial is only valid inside the
    calibrated range of readings (interpolation equations of up to 3rd degree are the usual
    limit for force-proving instruments; from memory of ISO 376).

    Attributes
    ----------
    coefficients
        (a0, a1, ...) in ascending powers, 2 to 4 values. [N, N/div, N/div², N/div³]
    range_min, range_max
        Readings covered by the calibration certificate (before subtracting the zero). [div]
    """

    coefficients: tuple[float, ...]
    range_min: float
    range_max: float
    zero_reading: float = 0.0
    unit: str = "div"
    device: str = "ring"

    def __post_init__(self) -> None:
        n = len(self.coefficients)
        if not 2 <= n <= 4:
            raise AnalysisError(
                f"A force calibration polynomial has 2 to 4 coefficients (1st to 3rd degree); "
                f"got {n}"
            )
        if not all(np.isfinite(c) for c in self.coefficients):
            raise AnalysisError("Calibration coefficients must all be numbers")
        if not (np.isfinite(self.range_min) and np.isfinite(self.range_max)):
            raise AnalysisError(
                f"A polynomial calibration of the {self.device} needs a finite calibrated range"
            )
        if not self.range_min < self.range_max:
            raise AnalysisError(
                f"Calibrated range of the {self.device} is empty: "
                f"{fmt(self.range_min)}–{fmt(self.range_max)} {self.unit}"
            )

    def force_n(self, reading: ArrayLike) -> NDArray[np.float64]:
        """Force for each reading, refusing readings outside the calibrated range. [N]"""
        r = as_float_array(reading, "Force reading", self.unit, min_size=0)
        _check_range(r, self.range_min, self.range_max, self.unit, self.device)
        d = r - self.zero_reading
        out = np.full_like(d, self.coefficients[-1])
        for c in reversed(self.coefficients[:-1]):  # Horner
            out = out * d + c
        return out


def gauge_displacement_mm(
    reading: ArrayLike,
    *,
    zero_reading: float,
    factor_mm_per_unit: float,
    sign: int = 1,
) -> NDArray[np.float64]:
    """Displacement from a dial gauge or LVDT: ``(R − R0)·factor·sign``. [mm]

    Parameters
    ----------
    reading
        Gauge readings. [div]
    zero_reading
        Reading at zero displacement. [div]
    factor_mm_per_unit
        Gauge factor, e.g. 0.002 mm/div for a vertical dial gauge. [mm/div]
    sign
        +1 or −1 so that the result follows the declared convention (dilation positive for the
        vertical gauge, forward travel positive for the horizontal one).
    """
    if sign not in (1, -1):
        raise AnalysisError(f"Gauge sign must be +1 or −1; got {sign}")
    if not np.isfinite(factor_mm_per_unit) or factor_mm_per_unit <= 0.0:
        raise AnalysisError(
            f"Gauge factor must be greater than zero; got {factor_mm_per_unit} mm/div"
        )
    r = as_float_array(reading, "Gauge reading", "div", min_size=0)
    return (r - float(zero_reading)) * (factor_mm_per_unit * sign)
