"""The quantile map of the adapted independence proposal, and the proposal placed in its score space.

References: the change-of-variables formula for densities (a transformed
density integrates to one; checked with scipy.integrate.quad), scipy.stats
(Student-t CDF for a Kolmogorov-Smirnov test of the draws), and the analytic
moments of a Gamma distribution (Johnson, Kotz and Balakrishnan, Continuous
Univariate Distributions vol. 1, 2nd ed., ch. 17) for the sampler run.
"""

import math

import emcee
import numpy as np
from scipy import integrate, special, stats

from speciakin.estimation.proposals import IndependenceStudentTMove
from speciakin.estimation.quantile_map import QuantileMap


def skewed_draws(n=5000, seed=2):
    rng = np.random.default_rng(seed)
    x = rng.gamma(2.0, 1.0, n)
    return np.column_stack([x, 0.5 * x + rng.normal(0.0, 0.4, n)])


def test_map_is_increasing_and_inverse_undoes_it():
    qmap = QuantileMap.fit(skewed_draws())
    x = np.column_stack([np.linspace(-5, 30, 2001), np.linspace(-8, 20, 2001)])  # beyond the knots too
    z, _ = qmap.forward(x)
    assert np.all(np.diff(z, axis=0) > 0)
    np.testing.assert_allclose(qmap.inverse(z), x, rtol=1e-12, atol=1e-12)


def test_log_jacobian_is_the_slope_of_the_map():
    qmap = QuantileMap.fit(skewed_draws())
    x = np.array([[0.7, 0.2], [3.1, 1.9], [25.0, -6.0]])  # last point beyond the outer knots
    z, log_jacobian = qmap.forward(x)
    h = 1e-7
    slopes = [(qmap.forward(x + h * np.eye(2)[j])[0][:, j] - z[:, j]) / h for j in range(2)]
    np.testing.assert_allclose(log_jacobian, np.log(slopes[0]) + np.log(slopes[1]), rtol=1e-5)


def test_ties_and_constant_columns():
    draws = skewed_draws()
    draws[:2500, 0] = 1.0  # half the draws repeated (a walker that did not move): knots dropped
    qmap = QuantileMap.fit(draws)
    assert qmap is not None and np.all(np.diff(qmap.x_knots[0]) > 0)
    draws[:, 1] = 3.0
    assert QuantileMap.fit(draws) is None


def adapted_move(draws):
    move = IndependenceStudentTMove(np.zeros(draws.shape[1]), np.eye(draws.shape[1]), shape_marginals=True)
    assert move.adapt_to(draws) and move.marginal_map is not None
    return move


def test_proposal_density_in_score_space_integrates_to_one():
    # one dimension: q_x(x) = t(z(x)) dz/dx must integrate to one (change of variables)
    move = adapted_move(skewed_draws()[:, :1])
    knots = move.marginal_map.x_knots[0]
    pieces = np.concatenate([[-np.inf], knots, [np.inf]])
    total = sum(integrate.quad(lambda v: math.exp(move.log_density(np.array([[v]]))[0]), a, b, limit=200)[0]
                for a, b in zip(pieces[:-1], pieces[1:]))
    assert abs(total - 1.0) < 1e-6


def test_draws_follow_the_proposal_density():
    # the CDF of a draw x is T_nu((z(x) - centre) / scale) in one dimension (scipy.stats.t)
    move = adapted_move(skewed_draws()[:, :1])
    x, _ = move._independent_proposal(np.zeros((4000, 1)), np.random.RandomState(7))
    z = move.marginal_map.forward(x)[0][:, 0]
    u = (z - move.centre[0]) / move.cholesky[0, 0]
    assert stats.kstest(u, stats.t(move.degrees_of_freedom).cdf).pvalue > 1e-3


def gamma_target(theta):
    # x ~ Gamma(3, 1), y | x ~ N(x / 2, 0.5^2)
    x, y = theta[:, 0], theta[:, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        log_x = np.where(x > 0, 2.0 * np.log(np.where(x > 0, x, 1.0)) - x, -np.inf)
    return log_x - 0.5 * ((y - 0.5 * x) / 0.5) ** 2


class NoJacobianMove(IndependenceStudentTMove):
    """The score-space proposal with the Jacobian left out of its density (a deliberate bug)."""

    def log_density(self, x):
        return super().log_density(x) - self.marginal_map.forward(x)[1]


def gamma_moments_agree(move):
    sampler = emcee.EnsembleSampler(32, 2, gamma_target, vectorize=True, moves=move)
    rng = np.random.default_rng(5)
    start = np.column_stack([rng.gamma(3.0, size=32), rng.normal(1.5, 0.5, 32)])
    sampler.random_state = np.random.RandomState(5).get_state()
    sampler.run_mcmc(start, 1500, progress=False)
    chain = sampler.get_chain(discard=150)
    tau = max(1.0, float(np.max(emcee.autocorr.integrated_time(chain, tol=0))))
    x = chain.reshape(-1, 2)
    ess = x.shape[0] / tau
    k = 3.0
    checks = [abs(x[:, 0].mean() - k) < 4 * math.sqrt(k / ess),
              abs(x[:, 0].var() - k) < 4 * math.sqrt((2 * k ** 2 + 6 * k) / ess),
              abs(np.log(x[:, 0]).mean() - special.digamma(k)) < 4 * math.sqrt(special.polygamma(1, k) / ess),
              abs(x[:, 1].mean() - k / 2) < 4 * math.sqrt((k / 4 + 0.25) / ess)]
    return all(checks), checks, float(np.mean(sampler.acceptance_fraction))


def test_score_space_proposal_samples_a_skewed_target_exactly():
    # the map is fitted to draws of a DIFFERENT distribution (Gamma(2) shape, other slope), so the
    # chain is right only through the Hastings factor with the Jacobian: moments within 4 MCSE
    move = IndependenceStudentTMove(np.zeros(2), np.eye(2), shape_marginals=True)
    assert move.adapt_to(skewed_draws())
    ok, checks, acceptance = gamma_moments_agree(move)
    assert ok, checks
    assert acceptance > 0.5  # the shaped proposal fits this target well


def test_a_missing_jacobian_is_detected():
    move = NoJacobianMove(np.zeros(2), np.eye(2), shape_marginals=True)
    assert move.adapt_to(skewed_draws())
    assert not gamma_moments_agree(move)[0]
