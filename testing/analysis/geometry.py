"""Box geometry, plan area models and stresses per reading.

Area models
-----------
``"nominal"``
    The initial plan area A0 for every reading.
``"corrected"``
    The overlap of the two box halves at relative displacement x:
    square/rectangular ``A = W·(L − x)``; circular ``A = (D²/2)·(θ − sinθ·cosθ)``,
    ``θ = arccos(x/D)`` (circular-segment geometry).

Which model a method uses is data in its profile (see :mod:`.profiles`), never a constant here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, overload

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import AnalysisError, GeometryError, as_float_array, as_positive_float, fmt

__all__ = [
    "AreaModel",
    "BoxGeometry",
    "BoxShape",
    "area_mm2",
    "corrected_area_mm2",
    "stress_kpa",
]

BoxShape = Literal["square", "rectangular", "circular"]
AreaModel = Literal["nominal", "corrected"]


@dataclass(frozen=True, slots=True)
class BoxGeometry:
    """Internal plan dimensions of a shear box.

    Attributes
    ----------
    shape
        ``"square"``, ``"rectangular"`` or ``"circular"``.
    length_mm
        Length in the direction of shearing; the diameter for a circular box. [mm]
    width_mm
        Width across the direction of shearing (equal to ``length_mm`` for square and circular
        boxes). [mm]
    """

    shape: BoxShape
    length_mm: float
    width_mm: float

    def __post_init__(self) -> None:
        if self.shape not in ("square", "rectangular", "circular"):
            raise AnalysisError(
                f"Box shape must be 'square', 'rectangular' or 'circular'; got {self.shape!r}"
            )
        as_positive_float(self.length_mm, "Box length", "mm")
        as_positive_float(self.width_mm, "Box width", "mm")
        if self.shape in ("square", "circular") and self.width_mm != self.length_mm:
            raise GeometryError(
                f"A {self.shape} box has one size; got length {fmt(self.length_mm)} mm and width "
                f"{fmt(self.width_mm)} mm"
            )

    @classmethod
    def square(cls, size_mm: float) -> BoxGeometry:
        """Square box of side ``size_mm`` [mm]."""
        return cls("square", float(size_mm), float(size_mm))

    @classmethod
    def rectangular(cls, length_mm: float, width_mm: float) -> BoxGeometry:
        """Rectangular box, ``length_mm`` in the shear direction [mm]."""
        return cls("rectangular", float(length_mm), float(width_mm))

    @classmethod
    def circular(cls, diameter_mm: float) -> BoxGeometry:
        """Circular box of diameter ``diameter_mm`` [mm]."""
        return cls("circular", float(diameter_mm), float(diameter_mm))

    @property
    def plan_area_mm2(self) -> float:
        """Nominal plan area A0. [mm²]"""
        if self.shape == "circular":
            return math.pi * self.length_mm**2 / 4.0
        return self.length_mm * self.width_mm


def _check_displacement(x_abs: NDArray[np.float64], length_mm: float) -> None:
    worst = float(x_abs.max()) if x_abs.size else 0.0
    if worst >= length_mm:
        raise GeometryError(
            f"Horizontal displacement {worst:.1f} mm is not less than the box length "
            f"{length_mm:.1f} mm"
        )


def _corrected(
    shape: BoxShape, length_mm: float, width_mm: float, x: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Overlap area for |x| < L (checked by the caller). [mm²]"""
    xa = np.abs(x)
    _check_displacement(xa, length_mm)
    if shape == "circular":
        # A = (D²/2)(θ − sinθ cosθ), θ = arccos(x/D); sinθ = √(1 − (x/D)²) for θ in [0, π/2].
        r = xa / length_mm
        return (length_mm * length_mm / 2.0) * (np.arccos(r) - r * np.sqrt(1.0 - r * r))
    return width_mm * (length_mm - xa)


@overload
def corrected_area_mm2(
    *, shape: BoxShape, size_mm: float, displacement_mm: float, width_mm: float | None = None
) -> float: ...
@overload
def corrected_area_mm2(
    *,
    shape: BoxShape,
    size_mm: float,
    displacement_mm: ArrayLike,
    width_mm: float | None = None,
) -> NDArray[np.float64]: ...
def corrected_area_mm2(
    *,
    shape: BoxShape,
    size_mm: float,
    displacement_mm: ArrayLike | float,
    width_mm: float | None = None,
) -> float | NDArray[np.float64]:
    """Plan area shared by the two box halves after a relative displacement.

    Parameters
    ----------
    shape
        ``"square"``, ``"rectangular"`` or ``"circular"``.
    size_mm
        Box length in the shear direction, or the diameter of a circular box. [mm]
    displacement_mm
        Relative horizontal displacement x, scalar or array; its sign is ignored. [mm]
    width_mm
        Width across the shear direction for a rectangular box (defaults to ``size_mm``). [mm]

    Returns
    -------
    float or ndarray
        Corrected area A_c, same shape as ``displacement_mm``. [mm²]

    Raises
    ------
    AnalysisError
        If a displacement is not finite or not less than the box length, or a size is not
        positive.

    Examples
    --------
    >>> round(corrected_area_mm2(shape="square", size_mm=60.0, displacement_mm=6.0), 6)
    3240.0
    """
    if shape == "circular" and width_mm is not None and width_mm != size_mm:
        raise GeometryError("A circular box has one size: give the diameter as size_mm only")
    if shape == "square" and width_mm is not None and width_mm != size_mm:
        raise GeometryError("A square box has one size: use shape='rectangular' to give a width")
    geom = BoxGeometry(shape, float(size_mm), float(width_mm if width_mm is not None else size_mm))
    scalar = np.ndim(displacement_mm) == 0
    x = as_float_array(displacement_mm, "Horizontal displacement", "mm", min_size=0)
    area = _corrected(geom.shape, geom.length_mm, geom.width_mm, x)
    return float(area[0]) if scalar else area


def area_mm2(
    box: BoxGeometry, horizontal_mm: NDArray[np.float64], model: AreaModel
) -> NDArray[np.float64]:
    """Area per reading under ``model`` (``"nominal"`` or ``"corrected"``). [mm²]

    ``horizontal_mm`` must already be a finite float array (see :func:`.errors.as_float_array`).
    """
    if model == "nominal":
        _check_displacement(np.abs(horizontal_mm), box.length_mm)
        return np.full(horizontal_mm.shape, box.plan_area_mm2)
    if model == "corrected":
        return _corrected(box.shape, box.length_mm, box.width_mm, horizontal_mm)
    raise AnalysisError(f"Area model must be 'nominal' or 'corrected'; got {model!r}")


def stress_kpa(force_n: ArrayLike, area: ArrayLike) -> NDArray[np.float64]:
    """Stress from force and area: σ = 1000·F/A. [kPa] (F in N, A in mm²)."""
    a = np.asarray(area, dtype=np.float64)
    if np.any(a <= 0.0):
        raise GeometryError("Area must be greater than zero to compute a stress")
    return np.asarray(force_n, dtype=np.float64) * 1000.0 / a
