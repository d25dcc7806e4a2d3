"""Phase relations, measurement uncertainty, power-law envelope and QA flags."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest

from testing.analysis import (
    AnalysisError,
    check_calibration_valid,
    check_dry_density_spread,
    check_normal_stresses_distinct,
    check_particle_size,
    consolidated_state,
    fit_power_envelope,
    normal_stress_uncertainty,
    phase_relations,
    shear_stress_uncertainty,
    standard_from_expanded,
    standard_from_rectangular,
)


def test_phase_relations_textbook_definitions() -> None:
    # 60 × 60 × 20 mm specimen (72 cm³), computed from w = Mw/Ms, ρd = Ms/V, e = ρs/ρd − 1,
    # Sr = w·ρs/e (textbook definitions).
    st = phase_relations(
        wet_mass_g=144.0,
        dry_mass_g=120.0,
        volume_cm3=72.0,
        particle_density_mg_m3=2.65,
        particle_density_measured=False,
    )
    assert st.water_content_pct == pytest.approx(20.0)
    assert st.bulk_density_mg_m3 == pytest.approx(2.0)
    assert st.dry_density_mg_m3 == pytest.approx(120 / 72)
    e = 2.65 / (120 / 72) - 1
    assert st.void_ratio == pytest.approx(e)
    assert st.porosity == pytest.approx(e / (1 + e))
    assert st.saturation_pct == pytest.approx(0.2 * 2.65 / e * 100)
    assert st.particle_density_label == "#2.65"
    assert st.flags == ()


def test_saturation_over_100_is_a_flag_not_an_error() -> None:
    st = phase_relations(
        wet_mass_g=160.0,
        dry_mass_g=120.0,
        volume_cm3=72.0,
        particle_density_mg_m3=2.65,
        particle_density_measured=True,
    )
    assert st.saturation_pct > 100.0
    assert [f.code for f in st.flags] == ["SATURATION_OVER_100"]
    assert st.particle_density_label == "2.65"


def test_consolidated_void_ratio() -> None:
    st = phase_relations(
        wet_mass_g=144.0,
        dry_mass_g=120.0,
        volume_cm3=72.0,
        particle_density_mg_m3=2.65,
        particle_density_measured=True,
    )
    c = consolidated_state(st, initial_height_mm=20.0, settlement_mm=0.5)
    assert c.void_ratio == pytest.approx(st.void_ratio - 0.5 / 20 * (1 + st.void_ratio))
    # Same answer from the volumes: e = ρs/ρd,c − 1 with ρd,c = Ms/(A·H_c).
    assert c.void_ratio == pytest.approx(2.65 / c.dry_density_mg_m3 - 1)
    with pytest.raises(AnalysisError, match="Dry mass 150 g is more than the wet mass 144 g"):
        phase_relations(
            wet_mass_g=144.0,
            dry_mass_g=150.0,
            volume_cm3=72.0,
            particle_density_mg_m3=2.65,
            particle_density_measured=True,
        )


def test_shear_stress_uncertainty_worked_numbers() -> None:
    # F = 417 N, load cell U = 0.5 % (k = 2), resolution 0.1 N, L = W = 60.00 ± 0.02 mm
    # (rectangular): τ = 115.83 kPa, U(k = 2) ≈ 0.58 kPa. Computed from the GUM law of
    # propagation (JCGM 100:2008).
    u_cell = standard_from_expanded(0.005 * 417.0, k=2.0)
    u_res = standard_from_rectangular(0.05)
    u_f = math.hypot(u_cell, u_res)
    u_l = standard_from_rectangular(0.02)
    res = shear_stress_uncertainty(
        force_n=417.0, u_force_n=u_f, length_mm=60.0, u_length_mm=u_l, width_mm=60.0, u_width_mm=u_l
    )
    assert res.value_kpa == pytest.approx(115.83, abs=0.005)
    assert res.relative_pct == pytest.approx(0.25, abs=0.005)
    assert res.expanded_uncertainty_kpa == pytest.approx(0.58, abs=0.005)


def test_normal_stress_uncertainty_against_finite_differences() -> None:
    # σn = 222.0 kPa with r = 10.00 ± 0.05 (k = 2) and 1 g mass uncertainties; masses chosen to
    # give 222.0 kPa. Expected u ≈ 0.55 kPa; partial derivatives checked numerically.
    g = 9.80665
    inputs = {"md": 1.5, "mh": 2.0, "mw": 6.0, "r": 10.0, "L": 60.0, "W": 60.0}
    u = {"md": 0.001, "mh": 0.001, "mw": 0.001, "r": 0.025, "L": 0.0, "W": 0.0}
    res = normal_stress_uncertainty(
        direct_mass_kg=1.5,
        u_direct_mass_kg=0.001,
        lever_ratio=10.0,
        u_lever_ratio=0.025,
        hanger_mass_kg=2.0,
        u_hanger_mass_kg=0.001,
        weights_mass_kg=6.0,
        u_weights_mass_kg=0.001,
        length_mm=60.0,
        u_length_mm=0.0,
    )
    assert res.value_kpa == pytest.approx(222.0, abs=0.05)
    assert res.standard_uncertainty_kpa == pytest.approx(0.55, abs=0.01)

    def sigma(p: dict[str, float]) -> float:
        return g * (p["md"] + p["r"] * (p["mh"] + p["mw"])) * 1000 / (p["L"] * p["W"])

    total = 0.0
    for k, v in inputs.items():
        h = 1e-6 * max(abs(v), 1.0)
        hi, lo = dict(inputs), dict(inputs)
        hi[k], lo[k] = v + h, v - h
        total += ((sigma(hi) - sigma(lo)) / (2 * h) * u[k]) ** 2
    assert res.standard_uncertainty_kpa == pytest.approx(math.sqrt(total), rel=1e-6)


def test_power_law_envelope_exact_and_tangent() -> None:
    # τ = a·σ^b (power-law envelope after Atkinson, *The Mechanics of Soils and Foundations*);
    # tangent tanφ′t = a·b·σ^(b−1), c′t = τ − σ·tanφ′t (computed from the stated formula).
    s = np.array([50.0, 100.0, 200.0, 400.0])
    t = 2.1 * s**0.85
    for method in ("log-log", "nonlinear"):
        fit = fit_power_envelope(s, t, method=method)  # type: ignore[arg-type]
        assert fit.a == pytest.approx(2.1, rel=1e-6)
        assert fit.b == pytest.approx(0.85, rel=1e-6)
        assert fit.method == method
    tan = fit_power_envelope(s, t).tangent(150.0)
    assert tan.tan_phi == pytest.approx(2.1 * 0.85 * 150.0 ** (-0.15), rel=1e-9)
    assert tan.cohesion_kpa == pytest.approx(2.1 * 150.0**0.85 - 150.0 * tan.tan_phi, rel=1e-9)
    assert tan.cohesion_kpa > 0.0
    assert fit_power_envelope(s, t).tangent(800.0).flags[0].code == "OUTSIDE_TESTED_RANGE"


def test_qa_flags() -> None:
    flag = check_dry_density_spread([1.80, 1.82, 1.88])
    assert flag is not None
    assert flag.code == "DRY_DENSITY_SPREAD"
    assert check_dry_density_spread([1.80, 1.82, 1.83]) is None
    flag = check_normal_stresses_distinct([100.0, 101.0, 300.0])
    assert flag is not None
    assert flag.code == "NORMAL_STRESSES_NOT_DISTINCT"
    assert check_normal_stresses_distinct([100.0, 200.0, 300.0]) is None
    flag = check_particle_size(
        8.0, width_mm=60.0, thickness_mm=20.0, min_width_ratio=10.0, min_thickness_ratio=6.0
    )
    assert flag is not None
    assert flag.code == "PARTICLE_TOO_LARGE"
    assert "width 60 mm is less than 10 × 8 mm" in flag.message
    expired = check_calibration_valid(
        dt.date(2025, 3, 2),
        calibrated_on=dt.date(2024, 3, 1),
        due_date=dt.date(2025, 3, 1),
        device="ring 4512",
    )
    assert expired is not None
    assert expired.code == "CALIBRATION_EXPIRED"
    assert "ring 4512 expired on 2025-03-01" in expired.message
    assert (
        check_calibration_valid(
            dt.date(2025, 3, 1), calibrated_on=dt.date(2024, 3, 1), due_date=dt.date(2025, 3, 1)
        )
        is None
    )
