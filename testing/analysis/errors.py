"""Domain errors and the input checks shared by every module of the core.

Every message is written for the technician who entered the data: it names the quantity, the
value, the unit and the limit that was broken.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "AnalysisError",
    "CalibrationRangeError",
    "GeometryError",
    "InsufficientDataError",
    "as_float_array",
    "as_positive_float",
    "fmt",
    "same_length",
]


class AnalysisError(ValueError):
    """Input that the shear-box calculations cannot use, with a readable reason."""


class InsufficientDataError(AnalysisError):
    """Too few readings, stages or distinct values for the requested calculation."""


class GeometryError(AnalysisError):
    """Box or specimen dimensions that make no physical sense (zero area, x ≥ L, ...)."""


class CalibrationRangeError(AnalysisError):
    """A device reading outside the range its calibration covers."""


def fmt(value: float) -> str:
    """Format a number the way a data sheet would (no trailing noise)."""
    if not math.isfinite(value):
        return str(value)
    return f"{value:.6g}" if abs(value) < 1e6 else f"{value:.4g}"


def as_float_array(
    values: ArrayLike, name: str, unit: str = "", *, min_size: int = 1, ndim: int = 1
) -> NDArray[np.float64]:
    """Convert ``values`` to a finite float64 array, or raise :class:`AnalysisError`.

    Parameters
    ----------
    values
        Sequence or array of numbers.
    name
        Plain-language name used in error messages, e.g. ``"Shear force"``.
    unit
        Unit shown in error messages, e.g. ``"N"``.
    min_size
        Minimum number of values along the last axis.
    ndim
        Required number of dimensions (1 for a series, 2 for a batch of sets).
    """
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"{name} must be numbers; got {values!r:.60}") from exc
    if arr.ndim == 0 and ndim == 1:
        arr = arr.reshape(1)
    if arr.ndim != ndim:
        raise AnalysisError(f"{name} must be a {ndim}-dimensional array; got shape {arr.shape}")
    if arr.shape[-1] < min_size:
        raise InsufficientDataError(
            f"{name} needs at least {min_size} value{'s' if min_size != 1 else ''}; "
            f"got {arr.shape[-1]}"
        )
    finite = np.isfinite(arr)
    if not finite.all():
        bad = np.flatnonzero(~finite.ravel())
        first = int(bad[0])
        unit_txt = f" [{unit}]" if unit else ""
        raise AnalysisError(
            f"{name}{unit_txt} has {bad.size} missing or non-numeric value"
            f"{'s' if bad.size != 1 else ''} (NaN or infinite), first at position {first + 1}"
        )
    return arr


def as_positive_float(
    value: float, name: str, unit: str = "", *, allow_zero: bool = False
) -> float:
    """Return ``value`` as a finite float that is > 0 (or ≥ 0), else raise."""
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"{name} must be a number; got {value!r}") from exc
    unit_txt = f" {unit}" if unit else ""
    if not math.isfinite(v):
        raise AnalysisError(f"{name} is missing or not a number ({v})")
    if v < 0 or (v == 0 and not allow_zero):
        need = "zero or more" if allow_zero else "greater than zero"
        raise GeometryError(f"{name} must be {need}; got {fmt(v)}{unit_txt}")
    return v


def same_length(arrays: Sequence[NDArray[np.float64]], names: Sequence[str]) -> None:
    """Raise unless all arrays have the same length."""
    sizes = {a.shape[-1] for a in arrays}
    if len(sizes) > 1:
        parts = ", ".join(f"{n}: {a.shape[-1]}" for n, a in zip(names, arrays, strict=True))
        raise AnalysisError(f"Series must have one value per reading; lengths differ ({parts})")
