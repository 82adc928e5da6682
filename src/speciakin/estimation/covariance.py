"""Covariance of least-squares estimates from the Jacobian of the residuals."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

__all__ = ["CovarianceEstimate", "covariance_from_jacobian", "t_interval"]


@dataclass
class CovarianceEstimate:
    """Covariance, standard errors and correlations of the varying parameters.

    Attributes
    ----------
    covariance
        ``s^2 (J^T J)^-1`` [unit_i * unit_j], shape (p, p).
    standard_errors
        Square roots of the diagonal [unit]; ``inf`` for a parameter in the
        null space of a rank-deficient Jacobian.
    correlation
        Correlation matrix (NaN where a standard error is infinite).
    rank
        Numerical rank of the column-scaled Jacobian.
    condition_number
        Ratio of largest to smallest singular value of the column-scaled Jacobian.
    singular
        True when ``rank < p``.
    residual_variance
        ``s^2 = chi2 / (n - p)`` (1 when ``scale_by_residual_variance`` is False).
    """

    covariance: np.ndarray
    standard_errors: np.ndarray
    correlation: np.ndarray
    rank: int
    condition_number: float
    singular: bool
    residual_variance: float


def covariance_from_jacobian(jacobian: np.ndarray, chisqr: float, n_residuals: int, *,
                             scale_by_residual_variance: bool = True, dof_reduction: float = 0.0,
                             relative_rank_tolerance: float | None = None) -> CovarianceEstimate:
    """Asymptotic covariance ``s^2 (J^T J)^-1`` computed through an SVD.

    The columns of ``J`` are first scaled to unit norm (so the rank test does
    not depend on the units of the parameters); then ``J_s = U S V^T`` and
    ``(J^T J)^-1 = D^-1 V S^-2 V^T D^-1``.  Singular values below
    ``tol * S_max`` (default ``tol = max(n, p) * eps``, the numpy ``matrix_rank``
    rule) count as zero; parameters with a loading above 1e-6 on such a direction get an infinite
    standard error.

    Parameters
    ----------
    jacobian
        ``(n, p)`` Jacobian of the residuals at the optimum.
    chisqr
        Sum of squared residuals at the optimum.
    n_residuals
        ``n``.
    scale_by_residual_variance
        Multiply by ``s^2 = chi2 / (n - p)`` (residuals with an unknown common
        scale, the usual case and NIST's convention).  Set False when the
        residuals are divided by known standard deviations.
    dof_reduction
        Degrees of freedom the data's structure takes beyond the parameters
        (residuals that carry none; may be fractional):
        ``s^2 = chi2 / (n - dof_reduction - p)``.

    References
    ----------
    Bates, D. M.; Watts, D. G. Nonlinear Regression Analysis and Its
    Applications; Wiley, 1988, section 2.3 (linear approximation inference).
    Golub, G. H.; Van Loan, C. F. Matrix Computations, 4th ed., 2013, section 5.5
    (rank-deficient least squares via the SVD).
    """
    jac = np.asarray(jacobian, dtype=float)
    n, p = jac.shape
    dof = n - dof_reduction - p
    s2 = chisqr / dof if (scale_by_residual_variance and dof > 0) else (np.nan if scale_by_residual_variance else 1.0)
    norms = np.linalg.norm(jac, axis=0)
    zero_column = norms == 0.0
    safe = np.where(zero_column, 1.0, norms)
    scaled = jac / safe
    _, sv, vt = np.linalg.svd(scaled, full_matrices=False)
    tol = (relative_rank_tolerance if relative_rank_tolerance is not None else max(n, p) * np.finfo(float).eps)
    keep = sv > tol * (sv[0] if sv.size and sv[0] > 0 else 1.0)
    rank = int(np.count_nonzero(keep))
    cond = float(sv[0] / sv[-1]) if sv.size and sv[-1] > 0 else float("inf")
    inv_s2 = np.where(keep, 1.0 / np.where(keep, sv, 1.0) ** 2, 0.0)
    cov_scaled = (vt.T * inv_s2) @ vt
    cov = s2 * cov_scaled / np.outer(safe, safe)
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    if rank < p:
        null = vt[~keep]
        loaded = np.any(np.abs(null) > 1e-6, axis=0) | zero_column
        se = np.where(loaded, np.inf, se)
    with np.errstate(all="ignore"):
        corr = cov / np.outer(se, se)
    corr[~np.isfinite(corr)] = np.nan
    np.fill_diagonal(corr, np.where(np.isfinite(se) & (se > 0), 1.0, np.nan))
    return CovarianceEstimate(cov, se, np.clip(corr, -1.0, 1.0), rank, cond, rank < p, float(s2))


def t_interval(value: np.ndarray, standard_error: np.ndarray, dof: int, level: float = 0.95
               ) -> tuple[np.ndarray, np.ndarray]:
    """Two-sided interval ``value -+ t_{dof, (1+level)/2} * se``.

    References
    ----------
    Bates, D. M.; Watts, D. G. Nonlinear Regression Analysis and Its
    Applications; Wiley, 1988, eq. 2.28 (linearization interval).
    """
    t = stats.t.ppf(0.5 + level / 2.0, dof) if dof > 0 else np.inf
    half = t * np.asarray(standard_error, dtype=float)
    return np.asarray(value) - half, np.asarray(value) + half
