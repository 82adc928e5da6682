"""Seeded coverage study: the true constants lie inside the 95 % intervals at about the 95 % rate.

Synthetic data from known truth (invented first-order formation curve
y = A (1 - exp(-k t)), A = 2.0 mmol/L, k = 0.2 1/min) with an absolute + relative
error model sigma = sqrt(0.01^2 + (0.02 y)^2).  The number of intervals that
contain the truth is Binomial(N, 0.95) if the intervals are honest; the
acceptance band is the central 99.8 % of that distribution (scipy.stats.binom).
"""

import numpy as np
import pytest
from scipy import stats

from speciakin.estimation import ParameterSpec, fit_least_squares, profile_all

TRUTH = {"A": 2.0, "k": 0.2}
T = np.linspace(0.5, 30.0, 20)


def _one(seed, with_profile, method):
    rng = np.random.default_rng(seed)
    model = lambda b: b[0] * (1 - np.exp(-b[1] * T))  # noqa: E731
    truth = model([TRUTH["A"], TRUTH["k"]])
    sigma = np.sqrt(0.01 ** 2 + (0.02 * truth) ** 2)
    y = truth + rng.normal(0.0, sigma)
    res = lambda b: (y - model(b)) / sigma  # noqa: E731
    fit = fit_least_squares(res, [ParameterSpec("A", 1.0, 0.0, 50.0), ParameterSpec("k", 0.05, 1e-4, 10.0)],
                            starts=3, seed=seed, method=method)
    hits = {}
    for name, true in TRUTH.items():
        lo, hi = fit.parameter(name).covariance_interval
        hits[("covariance", name)] = lo <= true <= hi
    if with_profile:
        for name, prof in profile_all(res, fit, method=method).items():
            inside = (prof.open_below or prof.lower <= TRUTH[name]) and (prof.open_above or TRUTH[name] <= prof.upper)
            hits[("profile", name)] = inside
    return hits


def _study(n_datasets, with_profile, method):
    counts: dict = {}
    for seed in range(n_datasets):
        for key, hit in _one(1000 + seed, with_profile, method).items():
            counts[key] = counts.get(key, 0) + int(hit)
    lo = stats.binom.ppf(0.001, n_datasets, 0.95)
    hi = stats.binom.isf(0.001, n_datasets, 0.95)
    return counts, lo, hi


def test_coverage_short():
    # MINPACK (lmfit "leastsq") keeps the default run short; the long study uses the default method.
    counts, lo, _ = _study(20, with_profile=True, method="leastsq")
    for key, count in counts.items():
        assert count >= lo, (key, count, lo)


@pytest.mark.slow
def test_coverage_long():
    counts, lo, hi = _study(200, with_profile=True, method="least_squares")
    for key, count in counts.items():
        assert lo <= count <= hi, (key, count, lo, hi)
