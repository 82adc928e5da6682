"""Area% samples closed to 100 %: their count and the chi-square they do not carry."""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.estimation.leastsq import fit_least_squares
from speciakin.pipeline.closure import closed_samples


def _one_sample(y, sigma, area=True, censored=False):
    k = len(y)
    return closed_samples(np.zeros(k, np.int64), 1, np.asarray(y, float), np.full(k, area),
                          np.full(k, censored), np.asarray(sigma, float))


def test_equal_parts_and_errors_lose_one_degree_of_freedom():
    # A composition of K parts has K - 1 degrees of freedom (Aitchison 1986, ch. 2); with equal
    # fractions and equal errors the closing is an orthogonal projection of rank K - 1, whose
    # weighted chi-square has expectation K - 1 (Cochran's theorem).
    for k in (1, 2, 3, 5):
        n, deficit = _one_sample(np.full(k, 100.0 / k), np.full(k, 0.7))
        assert n == 1
        assert deficit == pytest.approx(1.0, rel=1e-12)


def test_only_complete_area_samples_summing_to_100_count():
    assert _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4])[0] == 1
    # values to two decimals may miss 100 by 0.005 each, to one decimal by 0.05 each
    assert _one_sample([50.01, 30.0, 19.98], [1.0, 0.6, 0.4])[0] == 1
    assert _one_sample([50.11, 30.0, 19.98], [1.0, 0.6, 0.4]) == (0, 0.0)
    assert _one_sample([50.1, 30.1, 19.9], [1.0, 0.6, 0.4])[0] == 1
    assert _one_sample([50.1, 30.2, 19.9], [1.0, 0.6, 0.4]) == (0, 0.0)
    # unrounded values that only happen to sum to about 100 (independent noise, not closed)
    assert _one_sample([50.0123456, 30.0054321, 19.9876543], [1.0, 0.6, 0.4]) == (0, 0.0)
    # peak areas turned into area% by the objective sum to 100 up to rounding of the division
    areas = np.array([123.4, 56.7, 8.9])
    assert _one_sample(100.0 * areas / areas.sum(), [1.0, 0.6, 0.4])[0] == 1
    # a missing peak's share, a value below the LOQ, a concentration: not closed
    assert _one_sample([50.5, 30.25, 18.25], [1.0, 0.6, 0.4]) == (0, 0.0)
    assert _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4], censored=True) == (0, 0.0)
    assert _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4], area=False) == (0, 0.0)
    # two samples: one closed, one with a value missing (NaN)
    sample = np.array([0, 0, 1, 1])
    y = np.array([60.0, 40.0, 60.0, np.nan])
    n, _ = closed_samples(sample, 2, y, np.ones(4, bool), np.zeros(4, bool), np.ones(4))
    assert n == 1


@pytest.mark.parametrize("fractions", [(0.5, 0.3, 0.2), (0.9, 0.05, 0.05), (0.7, 0.2, 0.06, 0.04)])
def test_expected_chi_square_of_a_closed_sample_matches_monte_carlo(fractions):
    # E[e^T A e] = tr(A Sigma) for e ~ N(0, Sigma) (Searle, "Linear Models", Wiley 1971, ch. 2,
    # theorem 1): sample the errors of each peak before closing, close to 100 %, weigh by the
    # error model's sigma, and compare the mean chi-square with K - deficit.
    c = np.array(fractions)
    y = 100.0 * c
    sigma = np.hypot(0.1, 0.02 * y)  # absolute + relative error model, as in a model file
    rng = np.random.default_rng(20261205)
    e = rng.standard_normal((200_000, c.size)) * sigma
    noisy = y + e
    closed = 100.0 * noisy / noisy.sum(axis=1, keepdims=True)
    chi2 = np.sum(((closed - y) / sigma) ** 2, axis=1)
    n, deficit = _one_sample(y, sigma)
    assert n == 1
    # the expectation is first order in the errors (1-2 % of the values here): agreement to 1 %
    assert np.mean(chi2) == pytest.approx(c.size - deficit, rel=0.01)


def test_least_squares_takes_the_reduction_and_inactive_residuals_out():
    # a straight line through 20 points, two one-sided residuals (values below a limit) that stay
    # zero at the optimum, and one datum the model meets exactly whatever the parameters
    x = np.linspace(0.0, 1.0, 20)
    rng = np.random.default_rng(3)
    y = 1.0 + 2.0 * x + 0.1 * rng.standard_normal(x.size)

    def residual(v):
        line = (y - v[0] - v[1] * x) / 0.1
        return np.concatenate([line, np.maximum(v[0] - 10.0, 0.0) * np.ones(2), np.zeros(1)])

    def plain_residual(v):
        return (y - v[0] - v[1] * x) / 0.1

    params = [{"name": "a", "value": 0.5}, {"name": "b", "value": 1.0}]
    plain = fit_least_squares(plain_residual, params, starts=1)
    assert plain.degrees_of_freedom == 20 - 2 and plain.n_inactive == 0
    reduced = fit_least_squares(residual, params, starts=1, dof_reduction=3.5,
                                one_sided=np.r_[np.zeros(20, bool), np.ones(2, bool), False])
    assert reduced.n_inactive == 3
    assert reduced.degrees_of_freedom == pytest.approx(23 - 3 - 3.5 - 2)
    assert reduced.chisqr == pytest.approx(plain.chisqr)
    assert reduced.reduced_chisqr == pytest.approx(reduced.chisqr / reduced.degrees_of_freedom)
    # the covariance is scaled by chi2/dof: standard errors grow by sqrt(18 / 14.5)
    assert reduced.parameters[0].standard_error == pytest.approx(
        plain.parameters[0].standard_error * np.sqrt(18 / 14.5), rel=1e-6)


def test_a_fit_saved_before_the_reduction_loads_with_nothing_left_out():
    # fit.json of earlier versions has no dof_reduction / n_inactive in its fit_result
    import json

    from speciakin._json import json_ready
    from speciakin.estimation.results import FitResult

    x = np.linspace(0.0, 1.0, 10)
    fit = fit_least_squares(lambda v: (1.0 + 2.0 * x + 0.01 * np.sin(7 * x) - v[0] - v[1] * x) / 0.1,
                            [{"name": "a", "value": 0.0}, {"name": "b", "value": 0.0}], starts=1)
    data = json.loads(json.dumps(json_ready(fit.to_dict())))
    for key in ("dof_reduction", "n_inactive"):
        del data[key]
    old = FitResult.from_dict(data)
    assert old.dof_reduction == 0.0 and old.n_inactive == 0
    assert old.degrees_of_freedom == 8 and old.chisqr == pytest.approx(fit.chisqr)
