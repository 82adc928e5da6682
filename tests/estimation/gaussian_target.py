"""A correlated 2-D Gaussian posterior with known moments, for the sampler tests.

Uniform priors far wider than the Gaussian make the posterior the Gaussian
itself (truncation at > 10 sd is negligible).
"""

from __future__ import annotations

import math

import numpy as np

COV = np.array([[1.0, 1.6], [1.6, 4.0]])  # sd 1 and 2, correlation 0.8
PRECISION = np.linalg.inv(COV)
MEAN = np.array([0.5, -1.0])


def gaussian_log_likelihood(theta):
    d = theta - MEAN
    return -0.5 * np.einsum("ni,ij,nj->n", d, PRECISION, d)


def check_gaussian_moments(result):
    """Sample covariance, correlation and mean against COV, MEAN within 4
    standard errors from the effective sample size: variances relative SE
    sqrt(2/ESS), correlation (1 - rho^2)/sqrt(ESS), mean sd/sqrt(ESS)
    (large-sample normal theory, common practice)."""
    x = result.samples
    ess = min(min(result.diagnostics.ess_bulk), min(result.diagnostics.ess_autocorrelation))
    cov = np.cov(x.T)
    np.testing.assert_allclose(np.diag(cov), np.diag(COV), rtol=4 * math.sqrt(2 / ess))
    rho = cov[0, 1] / math.sqrt(cov[0, 0] * cov[1, 1])
    assert abs(rho - 0.8) < 4 * (1 - 0.8 ** 2) / math.sqrt(ess)
    assert np.all(np.abs(x.mean(axis=0) - MEAN) < 4 * np.sqrt(np.diag(COV) / ess))
