"""The Monte Carlo guard of a window claim.

The window claims "every specification is met with probability >= level" at
a set point.  The probability is estimated from n parameter draws: k of them
pass.  With few draws near the level the estimate k / n can reach the level
while the probability under the draws' distribution lies below it (in the
calibration study, tests/decision/test_calibration.py, a campaign with 200
posterior draws claimed a set point with 190 / 200 = 0.95 passing where 4000
draws of the same posterior gave 0.904).  The guard claims a set point only
where the one-sided Clopper-Pearson lower confidence bound of the probability,
at confidence ``MC_CONFIDENCE``, is at least the level: the claim then does not
rest on Monte Carlo luck.  The guard treats the draws as independent (emcee
draws are thinned by the sampler; covariance draws are independent).

With fewer than :func:`minimum_draws` draws even k = n cannot show the level;
the window then falls back to the share k / n (``claim_count`` returns None)
and the ``Monte Carlo error`` gate makes the status provisional.

References
----------
Clopper, C. J.; Pearson, E. S. "The use of confidence or fiducial limits
illustrated in the case of the binomial", Biometrika 1934, 26, 404-413 (the
bound is the beta quantile used here, scipy.stats.beta).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

__all__ = ["MC_CONFIDENCE", "lower_bound", "claim_count", "minimum_draws"]

#: One-sided confidence of the Monte Carlo guard [-] (common practice: 95 %).
MC_CONFIDENCE = 0.95


def lower_bound(count, n: int, confidence: float = MC_CONFIDENCE) -> np.ndarray:
    """One-sided Clopper-Pearson lower confidence bound of a probability [-].

    Parameters
    ----------
    count
        Number of passing draws (array-like, 0 to ``n``).
    n
        Number of draws (>= 1).
    confidence
        One-sided confidence, in (0, 1).
    """
    k = np.rint(np.asarray(count, dtype=float))
    with np.errstate(invalid="ignore"):
        bound = stats.beta.ppf(1.0 - confidence, np.maximum(k, 1.0), n - k + 1.0)
    return np.where(k <= 0, 0.0, bound)


def claim_count(n: int, level: float, confidence: float | None = MC_CONFIDENCE) -> int | None:
    """Smallest number of passing draws out of ``n`` whose lower bound reaches ``level``.

    ``confidence`` None gives the plain share: ceil(level x n).  Returns None
    when even ``n`` passing draws cannot show ``level`` at ``confidence``.
    """
    if confidence is None:
        return int(math.ceil(level * n - 1e-9))
    counts = np.arange(1, n + 1)
    ok = np.flatnonzero(lower_bound(counts, n, confidence) >= level - 1e-12)
    return int(counts[ok[0]]) if ok.size else None


def minimum_draws(level: float, confidence: float = MC_CONFIDENCE) -> int:
    """Fewest draws for which all passing can show ``level``: (1 - confidence)^(1/n) >= level."""
    return int(math.ceil(math.log(1.0 - confidence) / math.log(level) - 1e-9))
