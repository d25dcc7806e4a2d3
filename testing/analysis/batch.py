"""Many envelope fits at once: the formulas of :mod:`.envelope` on arrays of sets.

Each row of the inputs is one set (one envelope); each column one stage. A boolean ``mask``
marks the stages included in each set, so sets of different sizes and excluded stages share one
array. Rows that cannot be fitted (fewer than 2 included stages, all normal stresses equal) are
returned with ``valid = False`` and NaN parameters instead of raising, so one bad set does not
stop a batch.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

from .errors import AnalysisError, as_float_array

__all__ = ["BatchEnvelopeFit", "fit_envelopes_batch"]


@dataclass(frozen=True, eq=False)
class BatchEnvelopeFit:
    """Envelope parameters for ``n_sets`` sets, one array element per set.

    Fields mirror :class:`.envelope.EnvelopeFit`; intervals are arrays shaped (n_sets, 2).
    ``residuals_kpa`` is shaped like the input with NaN at excluded stages.
    """

    through_origin: bool
    r_squared_kind: Literal["centred", "uncentred"]
    valid: NDArray[np.bool_]
    n: NDArray[np.int64]
    dof: NDArray[np.int64]
    cohesion_kpa: NDArray[np.float64]
    tan_phi: NDArray[np.float64]
    friction_angle_deg: NDArray[np.float64]
    stderr_cohesion_kpa: NDArray[np.float64]
    stderr_tan_phi: NDArray[np.float64]
    cohesion_ci95_kpa: NDArray[np.float64]
    tan_phi_ci95: NDArray[np.float64]
    friction_angle_ci95_deg: NDArray[np.float64]
    corr_cohesion_tan_phi: NDArray[np.float64]
    r_squared: NDArray[np.float64]
    residual_std_kpa: NDArray[np.float64]
    residuals_kpa: NDArray[np.float64]
    normal_stress_min_kpa: NDArray[np.float64]
    normal_stress_max_kpa: NDArray[np.float64]


def _t975(dof: NDArray[np.int64]) -> NDArray[np.float64]:
    """t(0.975, dof) per set, evaluating scipy once per distinct dof (NaN where dof < 1)."""
    uniq, inv = np.unique(dof, return_inverse=True)
    q = np.full(uniq.shape, np.nan)
    pos = uniq > 0
    q[pos] = stats.t.ppf(0.975, uniq[pos])
    return q[inv.reshape(dof.shape)]


def fit_envelopes_batch(
    normal_stress_kpa: ArrayLike,
    shear_stress_kpa: ArrayLike,
    *,
    mask: ArrayLike | None = None,
    through_origin: bool = False,
) -> BatchEnvelopeFit:
    """Fit a straight envelope to every row of (n_sets, n_stages) arrays, vectorised.

    Parameters
    ----------
    normal_stress_kpa, shear_stress_kpa
        Stresses at failure, shape (n_sets, n_stages); a 1-D input is one set. [kPa]
    mask
        Boolean array of the same shape, True where the stage is included. Excluded positions
        may hold NaN. Default: all included.
    through_origin
        Impose c′ = 0 for every set (R² uncentred).

    Returns
    -------
    BatchEnvelopeFit
    """
    s_in = np.asarray(normal_stress_kpa, dtype=np.float64)
    t_in = np.asarray(shear_stress_kpa, dtype=np.float64)
    if s_in.ndim == 1:
        s_in, t_in = s_in[None, :], t_in[None, :]
    if s_in.shape != t_in.shape or s_in.ndim != 2:
        raise AnalysisError(
            "Normal and shear stresses must be arrays of the same shape (sets × stages); got "
            f"{np.shape(normal_stress_kpa)} and {np.shape(shear_stress_kpa)}"
        )
    n_sets, n_stages = s_in.shape
    # Work stage-major (n_stages, n_sets): sums over stages become a few long vector adds.
    if mask is None:
        m_t: NDArray[np.bool_] | None = None
        s = np.ascontiguousarray(s_in.T)
        t = np.ascontiguousarray(t_in.T)
        n = np.full(n_sets, n_stages, dtype=np.int64)
    else:
        m = np.asarray(mask, dtype=bool)
        if m.ndim == 1:
            m = m[None, :]
        if m.shape != s_in.shape:
            raise AnalysisError(f"The stage mask has shape {m.shape}; the stresses {s_in.shape}")
        m_t = np.ascontiguousarray(m.T)
        # NaN is only allowed where the stage is excluded.
        s = np.where(m_t, s_in.T, 0.0)
        t = np.where(m_t, t_in.T, 0.0)
        n = m_t.sum(axis=0).astype(np.int64)
    as_float_array(s, "Normal stress", "kPa", min_size=0, ndim=2)
    as_float_array(t, "Shear stress", "kPa", min_size=0, ndim=2)
    nf = n.astype(np.float64)

    with np.errstate(divide="ignore", invalid="ignore"):
        if through_origin:
            mean_s = s.sum(axis=0) / nf
            sxx = np.einsum("ij,ij->j", s, s)
            b = np.einsum("ij,ij->j", s, t) / sxx
            a = np.zeros(n_sets)
            res = t - b * s
            if m_t is not None:
                res *= m_t
            dof = n - 1
            valid = (n >= 1) & (sxx > 0.0)
            ss_tot = np.einsum("ij,ij->j", t, t)
        else:
            mean_s = s.sum(axis=0) / nf
            mean_t = t.sum(axis=0) / nf
            sc = s - mean_s
            tc = t - mean_t
            if m_t is not None:
                sc *= m_t
                tc *= m_t
            sxx = np.einsum("ij,ij->j", sc, sc)
            b = np.einsum("ij,ij->j", sc, tc) / sxx
            a = mean_t - b * mean_s
            res = tc - b * sc
            dof = n - 2
            valid = (n >= 2) & (sxx > (1e-12 * np.maximum(np.abs(mean_s), 1.0)) ** 2 * nf)
            ss_tot = np.einsum("ij,ij->j", tc, tc)
        ss_res = np.einsum("ij,ij->j", res, res)
        has_dof = valid & (dof > 0)
        s2 = np.where(has_dof, ss_res / np.maximum(dof, 1), np.nan)
        se_b = np.sqrt(s2 / sxx)
        if through_origin:
            se_a = np.where(valid, 0.0, np.nan)
            corr = np.full(n_sets, np.nan)
        else:
            se_a = np.sqrt(s2 * (1.0 / nf + mean_s**2 / sxx))
            corr = -mean_s / np.sqrt(sxx / nf + mean_s**2)
        r2 = 1.0 - ss_res / ss_tot
        if m_t is None:
            d = n_stages - (1 if through_origin else 2)
            tq: NDArray[np.float64] | float = float(stats.t.ppf(0.975, d)) if d > 0 else np.nan
        else:
            tq = _t975(np.where(has_dof, dof, 0))
        b_ci = np.empty((n_sets, 2))
        b_ci[:, 0] = b - tq * se_b
        b_ci[:, 1] = b + tq * se_b
        a_ci = np.empty((n_sets, 2))
        if through_origin:
            a_ci[:] = np.where(valid, 0.0, np.nan)[:, None]
        else:
            a_ci[:, 0] = a - tq * se_a
            a_ci[:, 1] = a + tq * se_a
        if m_t is None:
            s_min, s_max = s.min(axis=0), s.max(axis=0)
        else:
            s_min = np.where(m_t, s, np.inf).min(axis=0)
            s_max = np.where(m_t, s, -np.inf).max(axis=0)
    if not valid.all():
        inval = ~valid
        for arr in (a, b, se_a, se_b, corr, r2, s2):
            arr[inval] = np.nan
        a_ci[inval] = np.nan
        b_ci[inval] = np.nan
        res[:, inval] = np.nan
    residuals = res.T if m_t is None else np.where(m_t, res, np.nan).T
    return BatchEnvelopeFit(
        through_origin=through_origin,
        r_squared_kind="uncentred" if through_origin else "centred",
        valid=valid,
        n=n,
        dof=dof,
        cohesion_kpa=a,
        tan_phi=b,
        friction_angle_deg=np.degrees(np.arctan(b)),
        stderr_cohesion_kpa=se_a,
        stderr_tan_phi=se_b,
        cohesion_ci95_kpa=a_ci,
        tan_phi_ci95=b_ci,
        friction_angle_ci95_deg=np.degrees(np.arctan(b_ci)),
        corr_cohesion_tan_phi=corr,
        r_squared=r2,
        residual_std_kpa=np.sqrt(s2),
        residuals_kpa=residuals,
        normal_stress_min_kpa=np.where(n > 0, s_min, np.nan),
        normal_stress_max_kpa=np.where(n > 0, s_max, np.nan),
    )
