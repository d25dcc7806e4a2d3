"""Envelope statistics cross-checked against scipy.stats.linregress and statsmodels OLS."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from testing.analysis import fit_envelope, fit_envelopes_batch

SEEDS = range(12)


def _random_set(seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 12))
    sigma = np.sort(rng.uniform(20.0, 600.0, n))
    tau = rng.uniform(-5.0, 30.0) + sigma * rng.uniform(0.2, 1.0) + rng.normal(0.0, 8.0, n)
    return sigma, tau


@pytest.mark.parametrize("seed", SEEDS)
def test_free_fit_matches_linregress(seed: int) -> None:
    sigma, tau = _random_set(seed)
    fit = fit_envelope(sigma, tau)
    ref = stats.linregress(sigma, tau)
    assert fit.tan_phi == pytest.approx(ref.slope, rel=1e-10)
    assert fit.cohesion_kpa == pytest.approx(ref.intercept, rel=1e-9, abs=1e-9)
    assert fit.stderr_tan_phi == pytest.approx(ref.stderr, rel=1e-9)
    assert fit.stderr_cohesion_kpa == pytest.approx(ref.intercept_stderr, rel=1e-9)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-9)


@pytest.mark.parametrize("seed", SEEDS)
def test_free_fit_matches_statsmodels(seed: int) -> None:
    sigma, tau = _random_set(seed)
    fit = fit_envelope(sigma, tau)
    ols = sm.OLS(tau, sm.add_constant(sigma)).fit()
    ci = ols.conf_int(alpha=0.05)
    assert fit.cohesion_ci95_kpa == pytest.approx(tuple(ci[0]), rel=1e-9, abs=1e-9)
    assert fit.tan_phi_ci95 == pytest.approx(tuple(ci[1]), rel=1e-9)
    cov = ols.cov_params()
    corr = cov[0, 1] / math.sqrt(cov[0, 0] * cov[1, 1])
    assert fit.corr_cohesion_tan_phi == pytest.approx(corr, rel=1e-9)
    np.testing.assert_allclose(fit.residuals_kpa, ols.resid, rtol=1e-8, atol=1e-9)
    assert fit.residual_std_kpa == pytest.approx(math.sqrt(ols.scale), rel=1e-9)
    assert fit.friction_angle_ci95_deg == pytest.approx(
        tuple(np.degrees(np.arctan(ci[1]))), rel=1e-9
    )


@pytest.mark.parametrize("seed", SEEDS)
def test_through_origin_matches_statsmodels_without_constant(seed: int) -> None:
    sigma, tau = _random_set(seed)
    fit = fit_envelope(sigma, tau, through_origin=True)
    ols = sm.OLS(tau, sigma).fit()  # no constant: statsmodels reports the uncentred R²
    assert fit.tan_phi == pytest.approx(ols.params[0], rel=1e-10)
    assert fit.stderr_tan_phi == pytest.approx(ols.bse[0], rel=1e-9)
    assert fit.r_squared == pytest.approx(ols.rsquared, rel=1e-9)
    assert fit.r_squared_kind == "uncentred"
    assert fit.tan_phi_ci95 == pytest.approx(tuple(ols.conf_int(alpha=0.05)[0]), rel=1e-9)


@pytest.mark.parametrize("through_origin", [False, True])
def test_batch_matches_single_fits_with_mask(through_origin: bool) -> None:
    rng = np.random.default_rng(7)
    n_sets, n_stages = 40, 6
    sigma = rng.uniform(20.0, 600.0, (n_sets, n_stages))
    tau = 10.0 + 0.6 * sigma + rng.normal(0.0, 10.0, sigma.shape)
    mask = rng.random(sigma.shape) > 0.2
    mask[:, :3] = True  # at least 3 stages per set
    sigma[~mask] = np.nan  # excluded stages may hold NaN
    batch = fit_envelopes_batch(sigma, tau, mask=mask, through_origin=through_origin)
    assert batch.valid.all()
    for i in range(n_sets):
        keep = mask[i]
        single = fit_envelope(sigma[i, keep], tau[i, keep], through_origin=through_origin)
        assert batch.n[i] == single.n
        assert batch.cohesion_kpa[i] == pytest.approx(single.cohesion_kpa, rel=1e-9, abs=1e-9)
        assert batch.tan_phi[i] == pytest.approx(single.tan_phi, rel=1e-10)
        assert batch.stderr_tan_phi[i] == pytest.approx(single.stderr_tan_phi, rel=1e-9)
        assert batch.stderr_cohesion_kpa[i] == pytest.approx(
            single.stderr_cohesion_kpa, rel=1e-9, abs=1e-12
        )
        assert batch.r_squared[i] == pytest.approx(single.r_squared, rel=1e-9)
        assert tuple(batch.cohesion_ci95_kpa[i]) == pytest.approx(
            single.cohesion_ci95_kpa, rel=1e-9, abs=1e-9
        )
        assert tuple(batch.friction_angle_ci95_deg[i]) == pytest.approx(
            single.friction_angle_ci95_deg, rel=1e-9
        )
        np.testing.assert_allclose(batch.residuals_kpa[i, keep], single.residuals_kpa, atol=1e-9)
        assert np.isnan(batch.residuals_kpa[i, ~keep]).all()


def test_batch_marks_unfittable_sets_invalid_instead_of_raising() -> None:
    sigma = np.array([[100.0, 200.0, 300.0], [150.0, 150.0, 150.0], [100.0, 200.0, 300.0]])
    tau = np.array([[80.0, 150.0, 215.0], [90.0, 95.0, 100.0], [80.0, 150.0, 215.0]])
    mask = np.array([[True, True, True], [True, True, True], [True, False, False]])
    batch = fit_envelopes_batch(sigma, tau, mask=mask)
    assert batch.valid.tolist() == [True, False, False]
    assert np.isnan(batch.tan_phi[1:]).all()
