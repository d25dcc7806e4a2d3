"""Hypothesis properties of the envelope fit (bounded example counts: the suite stays fast)."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from testing.analysis import fit_envelope, fit_envelopes_batch

FAST = settings(max_examples=60, deadline=None)

stress_sets = st.lists(
    st.floats(min_value=5.0, max_value=1000.0, allow_nan=False), min_size=3, max_size=10
).filter(lambda v: max(v) - min(v) > 1.0)


@FAST
@given(
    sigma=stress_sets,
    cohesion=st.floats(min_value=0.5, max_value=100.0),
    phi_deg=st.floats(min_value=5.0, max_value=50.0),
)
def test_exact_data_on_a_line_recovers_parameters(
    sigma: list[float], cohesion: float, phi_deg: float
) -> None:
    s = np.array(sigma)
    tan_phi = math.tan(math.radians(phi_deg))
    fit = fit_envelope(s, cohesion + tan_phi * s)
    assert math.isclose(fit.tan_phi, tan_phi, rel_tol=1e-9)
    assert math.isclose(fit.friction_angle_deg, phi_deg, rel_tol=1e-9)
    assert math.isclose(fit.cohesion_kpa, cohesion, rel_tol=1e-9, abs_tol=1e-9 * max(s) * tan_phi)


@FAST
@given(sigma=stress_sets, seed=st.integers(0, 2**32 - 1))
def test_stage_order_does_not_matter(sigma: list[float], seed: int) -> None:
    rng = np.random.default_rng(seed)
    s = np.array(sigma)
    t = 5.0 + 0.7 * s + rng.normal(0.0, 5.0, s.size)
    perm = rng.permutation(s.size)
    a, b = fit_envelope(s, t), fit_envelope(s[perm], t[perm])
    assert math.isclose(a.tan_phi, b.tan_phi, rel_tol=1e-9, abs_tol=1e-12)
    assert math.isclose(a.cohesion_kpa, b.cohesion_kpa, rel_tol=1e-9, abs_tol=1e-9)
    assert math.isclose(a.stderr_tan_phi, b.stderr_tan_phi, rel_tol=1e-7, abs_tol=1e-12)


@FAST
@given(
    sigma=stress_sets,
    seed=st.integers(0, 2**32 - 1),
    factor=st.sampled_from([0.001, 1.0 / 6.894757, 10.0, 1000.0]),  # kPa→MPa, kPa→psi, ...
)
def test_scaling_stress_units_scales_cohesion_and_keeps_phi(
    sigma: list[float], seed: int, factor: float
) -> None:
    rng = np.random.default_rng(seed)
    s = np.array(sigma)
    t = 12.0 + 0.6 * s + rng.normal(0.0, 4.0, s.size)
    a, b = fit_envelope(s, t), fit_envelope(s * factor, t * factor)
    assert math.isclose(b.friction_angle_deg, a.friction_angle_deg, rel_tol=1e-9)
    assert math.isclose(
        b.cohesion_kpa, a.cohesion_kpa * factor, rel_tol=1e-7, abs_tol=1e-9 * factor * max(s)
    )
    assert math.isclose(b.r_squared, a.r_squared, rel_tol=1e-9, abs_tol=1e-12)


@settings(max_examples=30, deadline=None)
@given(sets=st.lists(stress_sets.filter(lambda v: len(v) == 4), min_size=1, max_size=8))
def test_batch_equals_single(sets: list[list[float]]) -> None:
    s = np.array(sets)
    t = 8.0 + 0.55 * s + np.sin(s)  # deterministic scatter
    batch = fit_envelopes_batch(s, t)
    for i in range(s.shape[0]):
        single = fit_envelope(s[i], t[i])
        assert math.isclose(batch.tan_phi[i], single.tan_phi, rel_tol=1e-9)
        assert math.isclose(batch.cohesion_kpa[i], single.cohesion_kpa, rel_tol=1e-8, abs_tol=1e-8)
