"""Synthetic raw readings for the demonstration data set.

This module generates the readings a technician would record during one stage
of a direct shear (shear box) test: the consolidation dial readings under the
normal load, and the horizontal displacement, vertical displacement and shear
force readings during shearing.  The readings come from simple, physically
sensible closed-form models, carry a small amount of noise at the resolution of
the instrument, and are rounded to that resolution.  A seed makes every call
deterministic (``numpy.random.default_rng(seed)``).

The module is pure: it depends on the standard library and numpy only.

Models
------
Consolidation
    Terzaghi one-dimensional consolidation theory, with the time factor scaled
    so that the degree of consolidation is 50 % at the requested ``t50``
    (``Tv50 = 0.197``), plus a small secondary-compression term that is linear
    in ``log10(t)`` after the end of primary consolidation.
Shear, dense sand
    The shear stress hardens smoothly to a clear peak ``τp = c + σ tan φp`` and
    then softens towards the critical-state value ``τcv = σ tan φcv``.  The rate
    of dilation ``dy/dx = tan ψ`` is negative at first (a small compression),
    reaches its maximum ``tan ψmax`` at the peak stress and falls to zero as the
    stress approaches ``τcv`` (constant volume), which follows the
    stress-dilatancy relation used by Taylor (1948) and Bolton (1986).  When no
    dilation angle is given, Bolton's (1986) plane-strain relation
    ``φp − φcv ≈ 0.8 ψmax`` supplies one.
Shear, normally consolidated clay
    The shear stress rises to a plateau ``τf = c + σ tan φ`` without a marked
    peak, and the specimen contracts monotonically with a decreasing rate.

All soil parameters used by the demonstration (:func:`demo_parameters`) are
invented values chosen to look typical; they are not measurements.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from typing import Final, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "DEFAULT_CONSOLIDATION_SCHEDULE_MIN",
    "TIME_FACTOR_AT_50_PERCENT",
    "ConsolidationReadings",
    "ShearReadings",
    "SoilKind",
    "SoilParameters",
    "consolidation_readings",
    "degree_of_consolidation",
    "demo_parameters",
    "shear_readings",
]

SoilKind = Literal["dense_sand", "clay"]

TIME_FACTOR_AT_50_PERCENT: Final[float] = 0.197
"""Time factor ``Tv`` at 50 % degree of consolidation [-]."""

DEFAULT_CONSOLIDATION_SCHEDULE_MIN: Final[tuple[float, ...]] = (
    0.0,
    0.1,
    0.25,
    0.5,
    1.0,
    2.0,
    4.0,
    8.0,
    15.0,
    30.0,
    60.0,
    120.0,
    240.0,
    480.0,
    1440.0,
)
"""Customary reading times of a consolidation stage [min]."""

_END_OF_PRIMARY_TIME_FACTOR: Final[float] = 1.5
"""Time factor after which secondary compression is added (U ≈ 99 %) [-]."""

_DEFAULT_SECONDARY_FRACTION_PER_LOG_CYCLE: Final[float] = 0.03
"""Default secondary settlement per log10 cycle of time, as a fraction of primary [-]."""

_SAND_HARDENING_EXPONENT: Final[float] = 3.0
"""Exponent ``n`` of the pre-peak curve ``1 − (1 − x/xp)^n`` for dense sand [-]."""

_CLAY_HARDENING_EXPONENT: Final[float] = 2.0
"""Exponent ``n`` of the pre-peak curve ``1 − (1 − x/xp)^n`` for clay [-]."""

_BOLTON_PLANE_STRAIN_FACTOR: Final[float] = 0.8
"""Bolton (1986): ``φp − φcv ≈ 0.8 ψmax`` in plane strain [-]."""

_DEFAULT_SAND_CONTRACTION_MM: Final[float] = 0.03
_DEFAULT_CLAY_CONTRACTION_MM: Final[float] = 0.3

_SOILS: Final[tuple[SoilKind, ...]] = ("dense_sand", "clay")


# --------------------------------------------------------------------------- helpers


def _require_positive(name: str, value: float) -> None:
    if not (math.isfinite(value) and value > 0.0):
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")


def _require_non_negative(name: str, value: float) -> None:
    if not (math.isfinite(value) and value >= 0.0):
        raise ValueError(f"{name} must be a non-negative finite number, got {value!r}")


def _decimals(resolution: float) -> int:
    """Number of decimal places needed to print multiples of ``resolution``."""
    exponent = Decimal(repr(resolution)).normalize().as_tuple().exponent
    if not isinstance(exponent, int):  # pragma: no cover - NaN/inf rejected earlier
        raise ValueError(f"invalid resolution {resolution!r}")
    return max(0, -exponent)


def _quantize(values: NDArray[np.float64], resolution: float) -> NDArray[np.float64]:
    """Round ``values`` to the nearest multiple of ``resolution``, printed cleanly."""
    counts = np.rint(values / resolution)
    return np.round(counts * resolution, _decimals(resolution)) + 0.0  # + 0.0 drops −0.0


def _frozen(values: NDArray[np.float64]) -> NDArray[np.float64]:
    values.flags.writeable = False
    return values


def _frozen_int(values: NDArray[np.int64]) -> NDArray[np.int64]:
    values.flags.writeable = False
    return values


# --------------------------------------------------------------------------- consolidation


def degree_of_consolidation(time_factor: ArrayLike) -> NDArray[np.float64]:
    """Average degree of consolidation from Terzaghi's series solution.

    ``U(Tv) = 1 − Σ (2 / M²) exp(−M² Tv)`` with ``M = π (2m + 1) / 2``,
    summed over ``m = 0, 1, 2, …`` until the terms are negligible.

    Parameters
    ----------
    time_factor : array_like
        Dimensionless time factor ``Tv = cv t / d²`` [-]; must be ``>= 0``.

    Returns
    -------
    numpy.ndarray
        Degree of consolidation ``U`` [-], in ``[0, 1]``, same shape as the input.

    Raises
    ------
    ValueError
        If any time factor is negative or not finite.
    """
    tv = np.asarray(time_factor, dtype=np.float64)
    if not np.all(np.isfinite(tv)) or np.any(tv < 0.0):
        raise ValueError("time factors must be finite and non-negative")
    flat = tv.ravel()
    u = np.zeros_like(flat)
    # Below this the series needs too many terms; the short-time asymptote
    # U = 2 sqrt(Tv / π) is exact to far better than float precision there.
    tiny = 1.0e-8
    small = (flat > 0.0) & (flat < tiny)
    u[small] = 2.0 * np.sqrt(flat[small] / math.pi)
    series = flat >= tiny
    if np.any(series):
        tv_series = flat[series]
        # Enough terms that M² Tv >= 50 for the last one at the smallest Tv.
        terms = math.ceil(math.sqrt(50.0 / float(tv_series.min())) * 2.0 / math.pi) + 1
        m = np.arange(terms, dtype=np.float64)
        big_m = math.pi * (2.0 * m + 1.0) / 2.0
        total = np.zeros_like(tv_series)
        # Accumulate in chunks to bound memory for very small time factors.
        chunk = 4096
        for start in range(0, terms, chunk):
            mm = big_m[start : start + chunk]
            total += np.sum(
                (2.0 / mm**2)[None, :] * np.exp(-np.outer(tv_series, mm**2)),
                axis=1,
            )
        u[series] = 1.0 - total
    return np.clip(u, 0.0, 1.0).reshape(tv.shape)


@dataclass(frozen=True, eq=False)
class ConsolidationReadings:
    """Dial readings of one consolidation stage.

    Attributes
    ----------
    seed : int
        Seed of the random generator that produced the noise.
    normal_stress_kpa : float
        Normal stress applied for the stage [kPa].
    height_mm : float
        Specimen height at the start of the stage [mm].
    gauge_resolution_mm : float
        Resolution of the vertical dial gauge [mm]; every settlement reading
        is a multiple of it.
    elapsed_min : numpy.ndarray
        Elapsed time since the load was applied [min].
    settlement_mm : numpy.ndarray
        Cumulative settlement (compression positive) since the load was
        applied [mm]; non-decreasing, the first reading is the zero reading.
    """

    seed: int
    normal_stress_kpa: float
    height_mm: float
    gauge_resolution_mm: float
    elapsed_min: NDArray[np.float64]
    settlement_mm: NDArray[np.float64]


def consolidation_readings(
    *,
    seed: int,
    normal_stress_kpa: float,
    height_mm: float,
    t50_min: float,
    final_settlement_mm: float,
    gauge_resolution_mm: float = 0.002,
    schedule_min: Sequence[float] = DEFAULT_CONSOLIDATION_SCHEDULE_MIN,
    secondary_mm_per_log_cycle: float | None = None,
) -> ConsolidationReadings:
    """Generate the settlement readings of one consolidation stage.

    Primary settlement follows Terzaghi one-dimensional consolidation theory,
    ``s = S · U(Tv)`` with ``Tv = 0.197 · t / t50``.  After the end of primary
    consolidation (``Tv = 1.5``, ``U ≈ 99 %``) a secondary-compression term,
    linear in ``log10(t)``, is added.  Each reading gets Gaussian noise with a
    standard deviation of half a gauge division; the readings are then made
    non-decreasing (a dial under a constant load does not run back) and
    rounded to the gauge resolution.

    Parameters
    ----------
    seed : int
        Seed for ``numpy.random.default_rng``.
    normal_stress_kpa : float
        Normal stress of the stage [kPa]; recorded, does not change the model.
    height_mm : float
        Specimen height at the start of the stage [mm]; the total settlement
        must stay below it.
    t50_min : float
        Time to 50 % primary consolidation [min].
    final_settlement_mm : float
        Settlement at the end of primary consolidation, ``S`` [mm].
    gauge_resolution_mm : float, optional
        Resolution of the dial gauge [mm].
    schedule_min : sequence of float, optional
        Reading times [min]; must start at 0 and strictly increase.
    secondary_mm_per_log_cycle : float or None, optional
        Secondary settlement per log10 cycle of time after the end of primary
        consolidation [mm]; ``None`` uses 3 % of ``final_settlement_mm``
        (an invented demonstration default).

    Returns
    -------
    ConsolidationReadings
        The readings, with read-only arrays.

    Raises
    ------
    ValueError
        If a parameter is out of range or the schedule is invalid.
    """
    _require_positive("normal_stress_kpa", normal_stress_kpa)
    _require_positive("height_mm", height_mm)
    _require_positive("t50_min", t50_min)
    _require_non_negative("final_settlement_mm", final_settlement_mm)
    _require_positive("gauge_resolution_mm", gauge_resolution_mm)
    secondary = (
        _DEFAULT_SECONDARY_FRACTION_PER_LOG_CYCLE * final_settlement_mm
        if secondary_mm_per_log_cycle is None
        else secondary_mm_per_log_cycle
    )
    _require_non_negative("secondary_mm_per_log_cycle", secondary)
    elapsed_min = np.asarray(schedule_min, dtype=np.float64).copy()
    if elapsed_min.ndim != 1 or elapsed_min.size < 2:
        raise ValueError("schedule_min must be a sequence of at least two times")
    if not np.all(np.isfinite(elapsed_min)) or elapsed_min[0] != 0.0:
        raise ValueError("schedule_min must be finite and start at 0")
    if np.any(np.diff(elapsed_min) <= 0.0):
        raise ValueError("schedule_min must be strictly increasing")

    time_factor = TIME_FACTOR_AT_50_PERCENT * elapsed_min / t50_min
    primary_mm = final_settlement_mm * degree_of_consolidation(time_factor)
    end_of_primary_min = _END_OF_PRIMARY_TIME_FACTOR * t50_min / TIME_FACTOR_AT_50_PERCENT
    after = elapsed_min > end_of_primary_min
    secondary_mm = np.zeros_like(elapsed_min)
    secondary_mm[after] = secondary * np.log10(elapsed_min[after] / end_of_primary_min)
    true_mm = primary_mm + secondary_mm
    if true_mm[-1] >= height_mm:
        raise ValueError(
            f"total settlement {true_mm[-1]:.3f} mm would reach the specimen height "
            f"{height_mm:.3f} mm"
        )

    rng = np.random.default_rng(seed)
    noisy_mm = true_mm + rng.normal(0.0, 0.5 * gauge_resolution_mm, size=true_mm.shape)
    noisy_mm[0] = 0.0  # the zero reading is taken as the load goes on
    noisy_mm = np.maximum.accumulate(np.clip(noisy_mm, 0.0, None))
    settlement_mm = _quantize(noisy_mm, gauge_resolution_mm)
    return ConsolidationReadings(
        seed=seed,
        normal_stress_kpa=float(normal_stress_kpa),
        height_mm=float(height_mm),
        gauge_resolution_mm=float(gauge_resolution_mm),
        elapsed_min=_frozen(elapsed_min),
        settlement_mm=_frozen(settlement_mm),
    )


# --------------------------------------------------------------------------- shear


@dataclass(frozen=True, eq=False)
class ShearReadings:
    """Readings of the shearing stage of one direct shear specimen.

    Attributes
    ----------
    seed : int
        Seed of the random generator that produced the noise.
    soil : {"dense_sand", "clay"}
        Soil model that produced the readings.
    normal_stress_kpa : float
        Normal stress during shearing [kPa].
    area_mm2 : float
        Nominal (initial) plan area of the specimen, ``A0`` [mm²].
    rate_mm_per_min : float
        Constant horizontal displacement rate [mm/min].
    gauge_resolution_mm : float
        Resolution of the horizontal and vertical dial gauges [mm].
    force_resolution_n : float
        Resolution of the force readings [N]; equal to the ring constant when
        a proving ring is used.
    ring_constant_n_per_div : float or None
        Proving-ring constant [N/division], or ``None`` for a load cell.
    elapsed_min : numpy.ndarray
        Elapsed time since shearing started [min]; ``x / rate``.
    horizontal_mm : numpy.ndarray
        Horizontal displacement reading [mm]; strictly increasing.
    vertical_mm : numpy.ndarray
        Vertical displacement reading [mm]; dilation (upward) positive.
    shear_force_n : numpy.ndarray
        Shear force [N]; non-negative.  With a proving ring it is
        ``ring_constant_n_per_div · ring_divisions``.
    ring_divisions : numpy.ndarray or None
        Proving-ring dial readings [divisions] (integers), or ``None``.
    """

    seed: int
    soil: SoilKind
    normal_stress_kpa: float
    area_mm2: float
    rate_mm_per_min: float
    gauge_resolution_mm: float
    force_resolution_n: float
    ring_constant_n_per_div: float | None
    elapsed_min: NDArray[np.float64]
    horizontal_mm: NDArray[np.float64]
    vertical_mm: NDArray[np.float64]
    shear_force_n: NDArray[np.float64]
    ring_divisions: NDArray[np.int64] | None = None

    @property
    def shear_stress_kpa(self) -> NDArray[np.float64]:
        """Shear stress on the nominal area, ``τ = F / A0`` [kPa]."""
        stress: NDArray[np.float64] = self.shear_force_n / self.area_mm2 * 1000.0
        return stress


def _smoothstep(s: NDArray[np.float64]) -> NDArray[np.float64]:
    """``3 s² − 2 s³`` [-]: rises from 0 to 1 with zero slope at both ends."""
    out: NDArray[np.float64] = s * s * (3.0 - 2.0 * s)
    return out


def _sand_compression_depth(k: float) -> float:
    """Depth of the initial compression trough per ``tan ψmax · xp`` [-].

    Pre-peak dilation rate is ``tan ψmax · (−k + (1 + k) · smoothstep(s))`` with
    ``s = x / xp``.  Its integral is negative until the rate changes sign at
    ``smoothstep(s0) = k / (1 + k)``; this returns ``−∫₀^{s0} rate ds`` divided
    by ``tan ψmax``, i.e. a positive number growing with ``k``.
    """
    target = k / (1.0 + k)
    lo, hi = 0.0, 1.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if mid * mid * (3.0 - 2.0 * mid) < target:
            lo = mid
        else:
            hi = mid
    s0 = 0.5 * (lo + hi)
    return -(-k * s0 + (1.0 + k) * (s0**3 - 0.5 * s0**4))


def _sand_contraction_factor(contraction_mm: float, tan_psi: float, peak_mm: float) -> float:
    """Solve for ``k`` so that the sand compresses by ``contraction_mm`` first."""
    if contraction_mm == 0.0:
        return 0.0
    target = contraction_mm / (tan_psi * peak_mm)
    lo, hi = 0.0, 1.0
    while _sand_compression_depth(hi) < target:
        hi *= 2.0
        if hi > 1.0e6:
            raise ValueError("contraction_mm is too large for the dilation parameters")
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if _sand_compression_depth(mid) < target:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _erf(values: NDArray[np.float64]) -> NDArray[np.float64]:
    return np.fromiter((math.erf(float(v)) for v in values), dtype=np.float64, count=values.size)


def _dense_sand_curves(
    x_mm: NDArray[np.float64],
    *,
    normal_stress_kpa: float,
    phi_peak_deg: float,
    phi_cv_deg: float,
    cohesion_kpa: float,
    peak_mm: float,
    tan_psi: float,
    softening_scale_mm: float,
    contraction_mm: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Noise-free shear stress [kPa] and vertical displacement [mm] of dense sand."""
    tau_peak = cohesion_kpa + normal_stress_kpa * math.tan(math.radians(phi_peak_deg))
    tau_cv = normal_stress_kpa * math.tan(math.radians(phi_cv_deg))
    pre = x_mm <= peak_mm
    post = ~pre
    s = np.clip(x_mm / peak_mm, 0.0, 1.0)
    u = (x_mm - peak_mm) / softening_scale_mm  # only used where post

    tau = np.empty_like(x_mm)
    tau[pre] = tau_peak * (1.0 - (1.0 - s[pre]) ** _SAND_HARDENING_EXPONENT)
    tau[post] = tau_cv + (tau_peak - tau_cv) * np.exp(-(u[post] ** 2))

    # Rate of dilation: −k … +1 (× tan ψmax) before the peak, then decaying as
    # (τ − τcv) / (τp − τcv), the stress-dilatancy form, which is exp(−u²).
    k = _sand_contraction_factor(contraction_mm, tan_psi, peak_mm)
    vertical = np.empty_like(x_mm)
    sp = s[pre]
    vertical[pre] = tan_psi * peak_mm * (-k * sp + (1.0 + k) * (sp**3 - 0.5 * sp**4))
    at_peak = tan_psi * peak_mm * (-k + (1.0 + k) * 0.5)
    vertical[post] = at_peak + tan_psi * softening_scale_mm * 0.5 * math.sqrt(math.pi) * _erf(
        u[post]
    )
    return tau, vertical


def _clay_curves(
    x_mm: NDArray[np.float64],
    *,
    normal_stress_kpa: float,
    phi_deg: float,
    cohesion_kpa: float,
    peak_mm: float,
    contraction_mm: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Noise-free shear stress [kPa] and vertical displacement [mm] of NC clay."""
    tau_failure = cohesion_kpa + normal_stress_kpa * math.tan(math.radians(phi_deg))
    s = np.clip(x_mm / peak_mm, 0.0, 1.0)
    tau = tau_failure * (1.0 - (1.0 - s) ** _CLAY_HARDENING_EXPONENT)
    # Contraction with a decreasing rate; 95 % of it is reached at the plateau.
    vertical = -contraction_mm * (1.0 - np.exp(-3.0 * x_mm / peak_mm))
    return tau, vertical


def shear_readings(
    *,
    seed: int,
    soil: SoilKind,
    normal_stress_kpa: float,
    rate_mm_per_min: float,
    phi_peak_deg: float,
    displacement_to_peak_mm: float,
    phi_cv_deg: float | None = None,
    cohesion_kpa: float = 0.0,
    max_dilation_deg: float | None = None,
    contraction_mm: float | None = None,
    softening_scale_mm: float = 3.0,
    box_length_mm: float = 60.0,
    box_width_mm: float = 60.0,
    travel_mm: float = 10.0,
    interval_mm: float = 0.05,
    ring_constant_n_per_div: float | None = None,
    force_resolution_n: float = 0.1,
    gauge_resolution_mm: float = 0.002,
) -> ShearReadings:
    """Generate the readings of the shearing stage of one specimen.

    Readings are taken every ``interval_mm`` of horizontal travel at a constant
    rate, so ``elapsed_min = x / rate_mm_per_min``.  The shear force is the
    model shear stress times the nominal area ``A0 = L · W``.  Each reading gets
    Gaussian noise with a standard deviation of half a device division and is
    rounded to the device resolution.  The first row is the zero reading
    (all zeros).  For clay the vertical readings are made non-increasing, since
    a contracting specimen's dial does not run back.

    Parameters
    ----------
    seed : int
        Seed for ``numpy.random.default_rng``.
    soil : {"dense_sand", "clay"}
        Soil model; see the module docstring.
    normal_stress_kpa : float
        Normal stress during shearing, ``σ`` [kPa].
    rate_mm_per_min : float
        Horizontal displacement rate [mm/min].
    phi_peak_deg : float
        Peak friction angle ``φp`` [°]; for clay, the friction angle of the
        plateau.
    displacement_to_peak_mm : float
        Horizontal displacement at the peak (sand) or at the start of the
        plateau (clay) [mm].
    phi_cv_deg : float or None, optional
        Constant-volume (critical-state) friction angle ``φcv`` [°]; ``None``
        means equal to ``phi_peak_deg``.  For clay it must equal
        ``phi_peak_deg``.
    cohesion_kpa : float, optional
        Cohesion intercept ``c`` of the peak (sand) or plateau (clay)
        strength [kPa].
    max_dilation_deg : float or None, optional
        Maximum dilation angle ``ψmax`` of dense sand, reached at the peak [°];
        ``None`` uses Bolton's (1986) ``(φp − φcv) / 0.8``.  Must be ``None``
        or 0 for clay.
    contraction_mm : float or None, optional
        Sand: depth of the initial compression before dilation starts [mm].
        Clay: total contraction approached at large displacement [mm].
        ``None`` uses 0.03 mm (sand) or 0.3 mm (clay), invented defaults.
    softening_scale_mm : float, optional
        Dense sand: horizontal distance over which the post-peak stress excess
        ``τ − τcv`` falls by a factor ``e`` (Gaussian decay) [mm].
    box_length_mm, box_width_mm : float, optional
        Internal plan dimensions of the shear box [mm].
    travel_mm : float, optional
        Total horizontal travel [mm].
    interval_mm : float, optional
        Horizontal travel between readings [mm].
    ring_constant_n_per_div : float or None, optional
        Proving-ring constant [N/division]; when given, force is read as an
        integer number of divisions and ``force_resolution_n`` is ignored.
    force_resolution_n : float, optional
        Resolution of the load-cell force reading [N], used without a ring.
    gauge_resolution_mm : float, optional
        Resolution of the horizontal and vertical dial gauges [mm].

    Returns
    -------
    ShearReadings
        The readings, with read-only arrays.

    Raises
    ------
    ValueError
        If a parameter is out of range or inconsistent with the soil model.
    """
    if soil not in _SOILS:
        raise ValueError(f"soil must be one of {_SOILS}, got {soil!r}")
    phi_cv = phi_peak_deg if phi_cv_deg is None else phi_cv_deg
    for name, value in (
        ("normal_stress_kpa", normal_stress_kpa),
        ("rate_mm_per_min", rate_mm_per_min),
        ("displacement_to_peak_mm", displacement_to_peak_mm),
        ("softening_scale_mm", softening_scale_mm),
        ("box_length_mm", box_length_mm),
        ("box_width_mm", box_width_mm),
        ("travel_mm", travel_mm),
        ("interval_mm", interval_mm),
        ("force_resolution_n", force_resolution_n),
        ("gauge_resolution_mm", gauge_resolution_mm),
    ):
        _require_positive(name, value)
    _require_non_negative("cohesion_kpa", cohesion_kpa)
    for name, value in (("phi_peak_deg", phi_peak_deg), ("phi_cv_deg", phi_cv)):
        if not (math.isfinite(value) and 0.0 < value < 60.0):
            raise ValueError(f"{name} must lie in (0, 60) degrees, got {value!r}")
    if ring_constant_n_per_div is not None:
        _require_positive("ring_constant_n_per_div", ring_constant_n_per_div)
    n_intervals = round(travel_mm / interval_mm)
    if n_intervals < 1 or not math.isclose(n_intervals * interval_mm, travel_mm, rel_tol=1e-9):
        raise ValueError("travel_mm must be a whole number of interval_mm")
    if interval_mm <= 2.0 * gauge_resolution_mm:
        raise ValueError("interval_mm must be larger than twice gauge_resolution_mm")

    x_mm = np.arange(n_intervals + 1, dtype=np.float64) * interval_mm
    if soil == "dense_sand":
        if phi_cv > phi_peak_deg:
            raise ValueError("phi_cv_deg must not exceed phi_peak_deg for dense sand")
        psi_deg = (
            (phi_peak_deg - phi_cv) / _BOLTON_PLANE_STRAIN_FACTOR
            if max_dilation_deg is None
            else max_dilation_deg
        )
        if not (math.isfinite(psi_deg) and 0.0 <= psi_deg < 45.0):
            raise ValueError(f"max_dilation_deg must lie in [0, 45) degrees, got {psi_deg!r}")
        contraction = _DEFAULT_SAND_CONTRACTION_MM if contraction_mm is None else contraction_mm
        _require_non_negative("contraction_mm", contraction)
        tan_psi = math.tan(math.radians(psi_deg))
        if tan_psi == 0.0 and contraction > 0.0:
            raise ValueError("a contracting dense sand needs a positive max_dilation_deg")
        tau_kpa, vertical_true_mm = _dense_sand_curves(
            x_mm,
            normal_stress_kpa=normal_stress_kpa,
            phi_peak_deg=phi_peak_deg,
            phi_cv_deg=phi_cv,
            cohesion_kpa=cohesion_kpa,
            peak_mm=displacement_to_peak_mm,
            tan_psi=tan_psi,
            softening_scale_mm=softening_scale_mm,
            contraction_mm=contraction,
        )
    else:
        if not math.isclose(phi_cv, phi_peak_deg):
            raise ValueError(
                "normally consolidated clay has no peak: phi_cv_deg must equal phi_peak_deg"
            )
        if max_dilation_deg not in (None, 0.0):
            raise ValueError(
                "normally consolidated clay does not dilate: max_dilation_deg must be None or 0"
            )
        contraction = _DEFAULT_CLAY_CONTRACTION_MM if contraction_mm is None else contraction_mm
        _require_non_negative("contraction_mm", contraction)
        tau_kpa, vertical_true_mm = _clay_curves(
            x_mm,
            normal_stress_kpa=normal_stress_kpa,
            phi_deg=phi_peak_deg,
            cohesion_kpa=cohesion_kpa,
            peak_mm=displacement_to_peak_mm,
            contraction_mm=contraction,
        )

    area_mm2 = box_length_mm * box_width_mm
    force_true_n = tau_kpa * area_mm2 / 1000.0  # kPa · mm² = 1e-3 N
    elapsed_min = x_mm / rate_mm_per_min

    rng = np.random.default_rng(seed)
    half = 0.5 * gauge_resolution_mm
    horizontal_mm = _quantize(x_mm + rng.normal(0.0, half, size=x_mm.shape), gauge_resolution_mm)
    vertical_noisy = vertical_true_mm + rng.normal(0.0, half, size=x_mm.shape)
    if soil == "clay":
        vertical_noisy = np.minimum.accumulate(np.minimum(vertical_noisy, 0.0))
    vertical_mm = _quantize(vertical_noisy, gauge_resolution_mm)

    ring_divisions: NDArray[np.int64] | None = None
    if ring_constant_n_per_div is not None:
        divisions_noisy = force_true_n / ring_constant_n_per_div + rng.normal(
            0.0, 0.5, size=x_mm.shape
        )
        ring_divisions = np.rint(np.clip(divisions_noisy, 0.0, None)).astype(np.int64)
        ring_divisions[0] = 0
        resolution_n = float(ring_constant_n_per_div)
        shear_force_n = np.round(
            ring_divisions.astype(np.float64) * resolution_n, _decimals(resolution_n)
        )
    else:
        resolution_n = float(force_resolution_n)
        force_noisy = force_true_n + rng.normal(0.0, 0.5 * resolution_n, size=x_mm.shape)
        shear_force_n = _quantize(np.clip(force_noisy, 0.0, None), resolution_n)

    # The zero reading: all gauges are zeroed as shearing starts.
    horizontal_mm[0] = 0.0
    vertical_mm[0] = 0.0
    shear_force_n[0] = 0.0
    if np.any(np.diff(horizontal_mm) <= 0.0):  # pragma: no cover - guarded by interval check
        raise AssertionError("horizontal readings are not strictly increasing")

    return ShearReadings(
        seed=seed,
        soil=soil,
        normal_stress_kpa=float(normal_stress_kpa),
        area_mm2=float(area_mm2),
        rate_mm_per_min=float(rate_mm_per_min),
        gauge_resolution_mm=float(gauge_resolution_mm),
        force_resolution_n=resolution_n,
        ring_constant_n_per_div=(
            None if ring_constant_n_per_div is None else float(ring_constant_n_per_div)
        ),
        elapsed_min=_frozen(elapsed_min),
        horizontal_mm=_frozen(horizontal_mm),
        vertical_mm=_frozen(vertical_mm),
        shear_force_n=_frozen(shear_force_n),
        ring_divisions=None if ring_divisions is None else _frozen_int(ring_divisions),
    )


# --------------------------------------------------------------------------- demo parameters


@dataclass(frozen=True)
class SoilParameters:
    """Parameters of one demonstration soil.

    All values are invented for the demonstration data set; they are chosen to
    look typical of the soil type and are not measurements of any real soil.

    Attributes
    ----------
    soil : {"dense_sand", "clay"}
        Soil model passed to :func:`shear_readings`.
    description : str
        Short human-readable description.
    phi_peak_deg : float
        Peak friction angle (clay: plateau friction angle) [°].
    phi_cv_deg : float
        Constant-volume friction angle [°].
    cohesion_kpa : float
        Cohesion intercept [kPa].
    displacement_to_peak_mm : float
        Horizontal displacement at peak or at the start of the plateau [mm].
    max_dilation_deg : float
        Maximum dilation angle [°]; 0 for clay.
    contraction_mm : float
        Sand: initial compression; clay: total contraction during shear [mm].
    rate_mm_per_min : float
        Shearing rate [mm/min].
    t50_min : float
        Time to 50 % primary consolidation [min].
    settlement_per_100_kpa_mm : float
        Primary consolidation settlement of a 20 mm specimen per 100 kPa of
        normal stress [mm].
    """

    soil: SoilKind
    description: str
    phi_peak_deg: float
    phi_cv_deg: float
    cohesion_kpa: float
    displacement_to_peak_mm: float
    max_dilation_deg: float
    contraction_mm: float
    rate_mm_per_min: float
    t50_min: float
    settlement_per_100_kpa_mm: float


def demo_parameters() -> dict[SoilKind, SoilParameters]:
    """Return the invented parameters of the two demonstration soils.

    The dense sand has ``φp = 40°``, ``φcv = 33°``, ``c = 0`` and a maximum
    dilation angle of 9° (about Bolton's ``(φp − φcv) / 0.8``), peaking at
    3 mm.  The firm normally consolidated clay has ``φ = 24°``, ``c = 5 kPa``
    and reaches its plateau at 7 mm while contracting by 0.3 mm.  These are
    demonstration values only, not data from any real soil.

    Returns
    -------
    dict
        ``{"dense_sand": SoilParameters, "clay": SoilParameters}``.
    """
    return {
        "dense_sand": SoilParameters(
            soil="dense_sand",
            description="Dense, clean, fine-to-medium quartz sand (invented demo soil)",
            phi_peak_deg=40.0,
            phi_cv_deg=33.0,
            cohesion_kpa=0.0,
            displacement_to_peak_mm=3.0,
            max_dilation_deg=9.0,
            contraction_mm=0.03,
            rate_mm_per_min=0.3,  # within the drained limit of every demo stage
            t50_min=0.2,
            settlement_per_100_kpa_mm=0.08,
        ),
        "clay": SoilParameters(
            soil="clay",
            description="Firm, normally consolidated silty clay (invented demo soil)",
            phi_peak_deg=24.0,
            phi_cv_deg=24.0,
            cohesion_kpa=5.0,
            displacement_to_peak_mm=7.0,
            max_dilation_deg=0.0,
            contraction_mm=0.3,
            rate_mm_per_min=0.02,
            t50_min=12.0,
            settlement_per_100_kpa_mm=0.6,
        ),
    }
