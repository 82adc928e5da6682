"""Goodness-of-fit statistics and information criteria (pure functions)."""

from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = [
    "chi_square",
    "akaike_information_criterion",
    "bayesian_information_criterion",
    "akaike_weights",
    "group_residual_standard_deviation",
]


def chi_square(residuals: np.ndarray) -> float:
    """Sum of squared (weighted) residuals ``chi2 = sum r_i^2``."""
    r = np.asarray(residuals, dtype=float)
    return float(np.dot(r, r))


def akaike_information_criterion(chisqr: float, n_residuals: int, n_parameters: int) -> float:
    """``AIC = n ln(chi2 / n) + 2 p`` (Gaussian errors of unknown common variance).

    This is the convention of lmfit and of Burnham & Anderson for least
    squares; constants common to all models fitted to the same data are
    dropped, so only differences between models carry meaning.

    References
    ----------
    Akaike, H. IEEE Trans. Autom. Control 1974, 19, 716-723.
    Burnham, K. P.; Anderson, D. R. Model Selection and Multimodel Inference,
    2nd ed.; Springer, 2002, section 2.2 (least-squares form of AIC).
    """
    return float(n_residuals * np.log(chisqr / n_residuals) + 2.0 * n_parameters)


def bayesian_information_criterion(chisqr: float, n_residuals: int, n_parameters: int) -> float:
    """``BIC = n ln(chi2 / n) + ln(n) p``.

    References
    ----------
    Schwarz, G. Ann. Stat. 1978, 6, 461-464.
    """
    return float(n_residuals * np.log(chisqr / n_residuals) + np.log(n_residuals) * n_parameters)


def akaike_weights(criteria: Sequence[float]) -> np.ndarray:
    """Weights ``w_i = exp(-D_i/2) / sum_j exp(-D_j/2)`` with ``D_i = AIC_i - min AIC``.

    The same formula gives Schwarz weights when BIC values are passed.

    References
    ----------
    Burnham, K. P.; Anderson, D. R. Model Selection and Multimodel Inference,
    2nd ed.; Springer, 2002, eq. 2.14 (section 2.9).
    """
    values = np.asarray(criteria, dtype=float)
    delta = values - np.min(values)
    rel = np.exp(-0.5 * delta)
    return rel / rel.sum()


def group_residual_standard_deviation(residuals: np.ndarray, groups: Sequence | None
                                      ) -> dict[str, dict[str, float]]:
    """Root-mean-square residual and count per group label.

    ``rms_g = sqrt(sum_{i in g} r_i^2 / n_g)`` (no degrees of freedom are
    subtracted within a group, because parameters are shared between groups).
    For weighted residuals a value near 1 means the stated error model fits
    that group.
    """
    if groups is None:
        return {}
    r = np.asarray(residuals, dtype=float)
    labels = np.asarray([str(g) for g in groups])
    out: dict[str, dict[str, float]] = {}
    for label in dict.fromkeys(labels.tolist()):
        sel = r[labels == label]
        out[label] = {"rms": float(np.sqrt(np.mean(sel ** 2))), "count": int(sel.size)}
    return out
