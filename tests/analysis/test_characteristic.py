"""Characteristic values: k_n table and the EN 1990 D7.2 / EN 1997-1 2.4.5.2 rules."""

from __future__ import annotations

import math

import numpy as np
import pytest

from testing.analysis import (
    AnalysisError,
    InsufficientDataError,
    characteristic_parameters,
    characteristic_value,
    fit_envelope,
    k_n,
    regression_lower_band,
    schneider_value,
)

# k_n of EN 1990 Annex D (D7.2): fractile u0.95·√(1+1/n) (V known) or t(0.95,n−1)·√(1+1/n)
# (V unknown); mean 1.645/√n or t(0.95,n−1)/√n. Values computed from the stated formula
# (Student t). The printed EN 1990 Table D1 entries (from memory) are rounded and differ in the
# last digit for some n, so they are not used as the oracle.
# n: (fractile V known, fractile V unknown, mean V known, mean V unknown)
KN_TABLE = {
    3: (1.899, 3.372, 0.950, 1.686),
    4: (1.839, 2.631, 0.822, 1.177),
    5: (1.802, 2.335, 0.736, 0.953),
    6: (1.777, 2.177, 0.672, 0.823),
    7: (1.758, 2.077, 0.622, 0.734),
    8: (1.745, 2.010, 0.582, 0.670),
    9: (1.734, 1.960, 0.548, 0.620),
    10: (1.725, 1.923, 0.520, 0.580),
    20: (1.685, 1.772, 0.368, 0.387),
    30: (1.672, 1.727, 0.300, 0.310),
    math.inf: (1.645, 1.645, 0.0, 0.0),
}


@pytest.mark.parametrize("n", list(KN_TABLE))
def test_kn_table(n: float) -> None:
    frac_known, frac_unknown, mean_known, mean_unknown = KN_TABLE[n]
    assert k_n(n, kind="fractile", variance_known=True) == pytest.approx(frac_known, abs=6e-4)
    assert k_n(n, kind="fractile", variance_known=False) == pytest.approx(frac_unknown, abs=6e-4)
    assert k_n(n, kind="mean", variance_known=True) == pytest.approx(mean_known, abs=6e-4)
    assert k_n(n, kind="mean", variance_known=False) == pytest.approx(mean_unknown, abs=6e-4)


def test_mean_with_unknown_variance_is_xbar_minus_t_s_over_root_n() -> None:
    values = np.array([0.58, 0.62, 0.55, 0.60, 0.64])
    cv = characteristic_value(values, kind="mean")
    expected = values.mean() - 2.131847 * values.std(ddof=1) / math.sqrt(5)  # t(0.95, 4)
    assert cv.value == pytest.approx(expected, rel=1e-6)
    assert cv.n == 5
    assert cv.kind == "mean"
    assert not cv.variance_known
    assert "interpretation" in cv.note


def test_fractile_with_known_cov() -> None:
    values = [30.0, 32.0, 31.0, 29.0]
    cv = characteristic_value(values, kind="fractile", variance_known=True, cov=0.10)
    assert cv.value == pytest.approx(30.5 * (1 - 1.644854 * math.sqrt(1.25) * 0.10), rel=1e-6)
    assert cv.cov == 0.10


def test_schneider_is_half_a_standard_deviation_below_the_mean() -> None:
    values = np.array([10.0, 12.0, 8.0, 11.0])
    assert schneider_value(values).value == pytest.approx(values.mean() - 0.5 * values.std(ddof=1))


def test_parameters_are_treated_separately_then_phi_from_tan_phi() -> None:
    c = [5.0, 8.0, 2.0, 6.0]
    tan_phi = [0.60, 0.62, 0.58, 0.65]
    res = characteristic_parameters(c, tan_phi, kind="mean")
    assert res.cohesion_kpa == characteristic_value(c, kind="mean").value
    t_k = characteristic_value(tan_phi, kind="mean").value
    assert res.friction_angle_deg == pytest.approx(math.degrees(math.atan(t_k)))


def test_characteristic_value_errors() -> None:
    with pytest.raises(InsufficientDataError, match="at least 2"):
        characteristic_value([0.6])
    with pytest.raises(AnalysisError, match="cov"):
        characteristic_value([0.6, 0.7], variance_known=True)
    with pytest.raises(AnalysisError, match="only used when the variance is known"):
        characteristic_value([0.6, 0.7], cov=0.1)
    with pytest.raises(AnalysisError, match="'mean' or 'fractile'"):
        characteristic_value([0.6, 0.7], kind="median")  # type: ignore[arg-type]


def test_regression_lower_band_against_formula() -> None:
    # Pooled regression; lower one-sided band τ̂ − t(0.95, n−2)·s·√(k + 1/n + (σ−σ̄)²/Sxx)
    # (standard OLS confidence / prediction band, computed from the stated formula).
    rng = np.random.default_rng(3)
    s = np.repeat([50.0, 100.0, 200.0, 300.0], 3)
    t = 5.0 + 0.6 * s + rng.normal(0.0, 6.0, s.size)
    fit = fit_envelope(s, t)
    grid = np.array([50.0, 175.0, 300.0])
    mean_band = regression_lower_band(fit, grid, kind="mean")
    pred_band = regression_lower_band(fit, grid, kind="prediction")
    resid = t - (fit.cohesion_kpa + fit.tan_phi * s)
    sd = math.sqrt((resid**2).sum() / (s.size - 2))
    sxx = ((s - s.mean()) ** 2).sum()
    tq = 1.812461  # t(0.95, 10)
    line = fit.cohesion_kpa + fit.tan_phi * grid
    np.testing.assert_allclose(
        mean_band.lower_kpa,
        line - tq * sd * np.sqrt(1 / 12 + (grid - s.mean()) ** 2 / sxx),
        rtol=1e-6,
    )
    np.testing.assert_allclose(
        pred_band.lower_kpa,
        line - tq * sd * np.sqrt(1 + 1 / 12 + (grid - s.mean()) ** 2 / sxx),
        rtol=1e-6,
    )
    assert np.all(pred_band.lower_kpa < mean_band.lower_kpa)
