"""Tauline computation core: every direct shear (shear box) calculation, pure and typed.

Standard library, numpy and scipy only: no Django, no files, no network. Inputs are arrays
with units in their names (``_mm``, ``_kpa``, ``_n``, ``_min``, ``_deg``); results are frozen
dataclasses; bad input raises :class:`AnalysisError` (a ``ValueError``) with a message for the
technician; QA findings come back as :class:`Flag` data, never as prints or exceptions. Store
:data:`ANALYSIS_VERSION` with every result.

Entry points
------------
Per stage, one call::

    import numpy as np
    from testing.analysis import BoxGeometry, LinearCalibration, normal_force_n, reduce_stage

    ring = LinearCalibration(factor_n_per_unit=20.0, range_min=0.0, range_max=750.0)
    normal = normal_force_n(direct_mass_kg=1.2, lever_ratio=10.0, hanger_mass_kg=0.8,
                            weights_mass_kg=5.0)                       # [N]
    red = reduce_stage(
        time_min=t, horizontal_mm=x, vertical_mm=y,                     # arrays, one per reading
        shear_force_n=ring.force_n(ring_div),                           # [N]
        normal_force_n=normal,                                          # scalar or per reading
        box=BoxGeometry.square(60.0),
        area_model="nominal",                                           # or "corrected"
        max_rate_mm_per_min=limit.max_rate_mm_per_min,                  # optional, see max_rate
    )
    red.shear_stress_kpa, red.normal_stress_kpa, red.stress_ratio       # per reading
    red.peak.shear_stress_kpa, red.peak.horizontal_mm, red.peak.vertical_mm
    red.at_displacement, red.ultimate, red.residual                     # may be None
    red.max_dilation_angle_deg, red.measured_rate_mm_per_min, red.flags

Per set, the envelope::

    fit = fit_envelope([red.peak.normal_stress_kpa for red in stages],
                       [red.peak.shear_stress_kpa for red in stages],
                       exclude={2: "specimen disturbed during set-up"})
    fit.cohesion_kpa, fit.friction_angle_deg, fit.cohesion_ci95_kpa, fit.warnings
    fit.through_origin_alternative          # offered when c′ < 0 (never clipped)

Many sets at once: ``fit_envelopes_batch(sigma, tau, mask=included)`` with (n_sets, n_stages)
arrays. Characteristic values (interpretations): ``characteristic_value(values, kind="mean")``.
Areas: ``corrected_area_mm2(shape="circular", size_mm=63.5, displacement_mm=x)``.

Before the shear stage, the permitted rate::

    taylor = taylor_root_time(cons_time_min, settlement_mm)             # t90, t50, construction
    limit = max_rate(ASTM_D3080_23, t50_min=taylor.t50_min)             # v_max = d_f / (50·t50)

Modules: loads (forces, calibrations, gauges), geometry (areas, stresses), phase, consolidation,
rate, failure, stage, envelope, batch, curved, characteristic, uncertainty, flags, profiles.
"""

from __future__ import annotations

from .batch import BatchEnvelopeFit, fit_envelopes_batch
from .characteristic import (
    INTERPRETATION_NOTE,
    CharacteristicParameters,
    CharacteristicValue,
    RegressionBand,
    characteristic_parameters,
    characteristic_value,
    k_n,
    regression_lower_band,
    schneider_value,
)
from .consolidation import (
    CasagrandeResult,
    TaylorResult,
    bs_t100_min,
    casagrande_log_time,
    taylor_root_time,
)
from .curved import PowerEnvelopeFit, TangentParameters, fit_power_envelope
from .envelope import (
    EnvelopeFit,
    EnvelopeValue,
    ExcludedStage,
    fit_envelope,
    secant_friction_angle_deg,
)
from .errors import (
    AnalysisError,
    CalibrationRangeError,
    GeometryError,
    InsufficientDataError,
)
from .failure import (
    CRITERION_LABELS,
    DilationResult,
    FailureCriterion,
    FailurePoint,
    dilation_angle_deg,
    pick_at_displacement,
    pick_end_of_travel,
    pick_peak,
    pick_peak_ratio,
)
from .flags import (
    Flag,
    Severity,
    check_calibration_valid,
    check_dry_density_spread,
    check_envelope_plausible,
    check_normal_stresses_distinct,
    check_particle_size,
    check_peak_at_end_of_travel,
    check_rate,
    check_saturation,
    check_stage_count,
)
from .geometry import AreaModel, BoxGeometry, BoxShape, area_mm2, corrected_area_mm2, stress_kpa
from .loads import (
    STANDARD_GRAVITY_M_S2,
    LinearCalibration,
    PolynomialCalibration,
    gauge_displacement_mm,
    normal_force_n,
)
from .phase import ConsolidatedState, PhaseState, consolidated_state, phase_relations
from .profiles import (
    AASHTO_T236,
    ASTM_D3080_23,
    BS_1377_7_1990,
    BS_EN_ISO_17892_10_2018,
    PROFILES,
    MethodProfile,
)
from .rate import RateLimit, max_rate, measured_rate_mm_per_min
from .residual import (
    ResidualSearch,
    cumulative_displacement_mm,
    forward_traverses,
    pick_residual,
)
from .stage import StageCriteria, StageReduction, reduce_stage
from .uncertainty import (
    StressUncertainty,
    normal_stress_uncertainty,
    shear_stress_uncertainty,
    standard_from_expanded,
    standard_from_rectangular,
)
from .version import ANALYSIS_VERSION

__all__ = [
    "AASHTO_T236",
    "ANALYSIS_VERSION",
    "ASTM_D3080_23",
    "BS_1377_7_1990",
    "BS_EN_ISO_17892_10_2018",
    "CRITERION_LABELS",
    "INTERPRETATION_NOTE",
    "PROFILES",
    "STANDARD_GRAVITY_M_S2",
    "AnalysisError",
    "AreaModel",
    "BatchEnvelopeFit",
    "BoxGeometry",
    "BoxShape",
    "CalibrationRangeError",
    "CasagrandeResult",
    "CharacteristicParameters",
    "CharacteristicValue",
    "ConsolidatedState",
    "DilationResult",
    "EnvelopeFit",
    "EnvelopeValue",
    "ExcludedStage",
    "FailureCriterion",
    "FailurePoint",
    "Flag",
    "GeometryError",
    "InsufficientDataError",
    "LinearCalibration",
    "MethodProfile",
    "PhaseState",
    "PolynomialCalibration",
    "PowerEnvelopeFit",
    "RateLimit",
    "RegressionBand",
    "ResidualSearch",
    "Severity",
    "StageCriteria",
    "StageReduction",
    "StressUncertainty",
    "TangentParameters",
    "TaylorResult",
    "area_mm2",
    "bs_t100_min",
    "casagrande_log_time",
    "characteristic_parameters",
    "characteristic_value",
    "check_calibration_valid",
    "check_dry_density_spread",
    "check_envelope_plausible",
    "check_normal_stresses_distinct",
    "check_particle_size",
    "check_peak_at_end_of_travel",
    "check_rate",
    "check_saturation",
    "check_stage_count",
    "consolidated_state",
    "corrected_area_mm2",
    "cumulative_displacement_mm",
    "dilation_angle_deg",
    "fit_envelope",
    "fit_envelopes_batch",
    "fit_power_envelope",
    "forward_traverses",
    "gauge_displacement_mm",
    "k_n",
    "max_rate",
    "measured_rate_mm_per_min",
    "normal_force_n",
    "normal_stress_uncertainty",
    "phase_relations",
    "pick_at_displacement",
    "pick_end_of_travel",
    "pick_peak",
    "pick_peak_ratio",
    "pick_residual",
    "reduce_stage",
    "regression_lower_band",
    "schneider_value",
    "secant_friction_angle_deg",
    "shear_stress_uncertainty",
    "standard_from_expanded",
    "standard_from_rectangular",
    "stress_kpa",
    "taylor_root_time",
]
