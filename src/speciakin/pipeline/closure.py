"""Area% samples closed to 100 %: the degrees of freedom they do not carry.

The campaign objective compares each sample's area% with the model's area%
over the same compounds, and both sum to 100 when the lab reports every
peak of the sample; so the residuals of such a sample sum to a constant the
data fix, and its chi-square is expected to be smaller than one per value.
The fit takes that out of its degrees of freedom
(``estimation.leastsq.fit_least_squares(dof_reduction=...)``).
"""

from __future__ import annotations

import numpy as np

__all__ = ["REPORTING_STEPS", "SUM_FLOOR", "reporting_step", "closed_samples"]

#: Decimal steps [area%] a reported value may be rounded to, coarsest first.
REPORTING_STEPS = (1.0, 0.1, 0.01, 0.001, 0.0001)
#: Smallest allowance for |sum - 100| [area%] (values not rounded at all, or areas turned into area%).
SUM_FLOOR = 1e-7


def reporting_step(values: np.ndarray) -> np.ndarray:
    """The coarsest of :data:`REPORTING_STEPS` each value is a multiple of (0 when none)."""
    step = np.zeros(values.shape)
    for d in REPORTING_STEPS[::-1]:
        q = values / d
        step = np.where(np.abs(q - np.round(q)) <= 1e-6, d, step)
    return step


def closed_samples(sample: np.ndarray, n_samples: int, observed: np.ndarray, area: np.ndarray,
                   censored: np.ndarray, sigma: np.ndarray) -> tuple[int, float]:
    """HPLC samples whose area% are closed to 100 %, and the chi-square they do not carry.

    A sample counts when every value of it is an area% (peak areas are turned
    into area% per sample before this), none is below the LOQ, and the values
    sum to 100 within what their rounding allows: half the sample's reporting
    step per value (the finest of :func:`reporting_step` over its values; values
    given to two decimals: 0.005 each), at least :data:`SUM_FLOOR`.  So area%
    reported as the lab's software closes them count, and values that only
    happen to sum to about 100 do not.  The model's area%
    of such a sample also sum to 100 (the observation model above), so its
    residuals sum to a constant the data fix: a composition of K parts has
    K - 1 degrees of freedom (Aitchison, J., "The Statistical Analysis of
    Compositional Data", Chapman and Hall 1986, ch. 2).  With each peak's
    error e_i ~ N(0, d_i) before closing (d_i = sigma_i^2 of the error model)
    and fractions c_i = y_i / 100, the closed residuals are r = (I - c 1^T) e
    to first order, and the weighted chi-square of the sample has expectation

        E = tr(D^-1 (I - c 1^T) D (I - 1 c^T)) = K - 2 + (sum_j d_j)(sum_i c_i^2 / d_i)

    (K - 1 for equal fractions and errors, more when one part dominates), not
    K.  Returns the number of closed samples and the sum of K - E over them,
    the chi-square expected from K values that these samples do not carry.
    """
    if sample.size == 0:
        return 0, 0.0
    n = np.bincount(sample, minlength=n_samples)
    not_area = np.bincount(sample, weights=(~area | censored).astype(float), minlength=n_samples)
    y = np.where(np.isfinite(observed), observed, np.nan)
    total = np.bincount(sample, weights=y, minlength=n_samples)
    step = np.full(n_samples, np.inf)
    finite = np.isfinite(y)
    np.minimum.at(step, sample[finite], reporting_step(y[finite]))
    allowed = np.maximum(0.5 * step * n, SUM_FLOOR)
    with np.errstate(invalid="ignore"):
        closed = (n > 0) & (not_area == 0) & (np.abs(total - 100.0) <= allowed)
    if not closed.any():
        return 0, 0.0
    d = sigma ** 2
    c = y / 100.0
    with np.errstate(invalid="ignore", divide="ignore"):
        sum_d = np.bincount(sample, weights=d, minlength=n_samples)
        sum_c2_d = np.bincount(sample, weights=c * c / d, minlength=n_samples)
    expected = n - 2.0 + sum_d * sum_c2_d
    return int(np.count_nonzero(closed)), float(np.sum((n - expected)[closed]))
