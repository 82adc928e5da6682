"""The independence Student-t move and the move mixture against analytic targets.

A wrong Hastings factor does not crash anything; it changes the distribution
the chain samples.  For an independence proposal q the Metropolis rule
without the factor samples a density proportional to pi * q (Robert and
Casella, Monte Carlo Statistical Methods, 2nd ed., section 7.4), so the
moments of a skewed target seen through a deliberately mis-centred,
mis-scaled proposal reveal a missing or reversed factor.
"""

import math

import emcee
import numpy as np
import pytest
from scipy import special, stats

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError
from speciakin.estimation.checkpoint import read_checkpoint
from speciakin.estimation.proposals import (ADAPT_AT_STEPS, PROPOSALS, IndependenceStudentTMove, adapt_moves,
                                            adaptation_iterations, build_moves, proposal_cholesky,
                                            student_t_draw, student_t_log_density, warm_up_iterations)
from speciakin.pipeline.posterior import (proposal_covariance_from_fit, usable_fit_covariance,
                                                     widen_to_intervals)
from speciakin.estimation.sampling import sample_posterior

from .gaussian_target import MEAN, check_gaussian_moments, gaussian_log_likelihood

# ---------------------------------------------------------------------------
# pure functions
# ---------------------------------------------------------------------------
_SIGMA = np.array([[2.0, 0.6, 0.0], [0.6, 1.0, -0.3], [0.0, -0.3, 0.5]])
_CENTRE = np.array([1.0, -2.0, 0.5])


def test_student_t_log_density_matches_scipy():
    # reference library: scipy.stats.multivariate_t (Kotz and Nadarajah 2004, eq. 1.1)
    x = np.random.default_rng(1).normal(size=(20, 3)) * 3
    ours = student_t_log_density(x, _CENTRE, np.linalg.cholesky(_SIGMA), 5.0)
    ref = stats.multivariate_t(loc=_CENTRE, shape=_SIGMA, df=5.0).logpdf(x)
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=1e-12)


def test_student_t_draws_follow_the_distribution():
    # For x ~ t_nu(mu, Sigma) in d dimensions, the squared Mahalanobis distance
    # divided by d follows F(d, nu), and cov(x) = nu/(nu-2) Sigma
    # (Kotz and Nadarajah 2004, chapter 1; section numbers from memory).
    random = np.random.RandomState(3)
    nu, n = 7.0, 40000
    L = np.linalg.cholesky(_SIGMA)
    x = student_t_draw(random, n, _CENTRE, L, nu)
    z = np.linalg.solve(L, (x - _CENTRE).T)
    statistic = np.sum(z * z, axis=0) / 3
    assert stats.kstest(statistic, stats.f(3, nu).cdf).pvalue > 1e-3
    # covariance entries: relative error of a variance ~ sqrt(kurtosis-inflated 2/n); 5 % is > 4 SE here
    np.testing.assert_allclose(np.cov(x.T), nu / (nu - 2) * _SIGMA, atol=0.05 * nu / (nu - 2) * 2.0)


def test_draws_come_only_from_the_given_random_state():
    np.random.seed(0)
    before = np.random.get_state()[1].copy()
    a = student_t_draw(np.random.RandomState(9), 5, _CENTRE, np.eye(3), 5.0)
    b = student_t_draw(np.random.RandomState(9), 5, _CENTRE, np.eye(3), 5.0)
    assert np.array_equal(a, b)
    assert np.array_equal(np.random.get_state()[1], before)  # the global generator is untouched


@pytest.mark.parametrize("matrix, message", [
    (np.array([[1.0, 0.5], [0.4, 1.0]]), "not symmetric"),
    (np.array([[1.0, 2.0], [2.0, 1.0]]), "not positive definite"),
    (np.array([[1.0, np.nan], [np.nan, 1.0]]), "NaN or infinite"),
    (np.eye(3), "wrong shape"),
    ("abc", "not a matrix of numbers"),
])
def test_bad_covariance_is_refused(matrix, message):
    with pytest.raises(InputError, match=message):
        proposal_cholesky(matrix, 2)


def test_usable_fit_covariance_falls_back_with_a_reason():
    cov, note = usable_fit_covariance(np.diag([1.0, 2.0]), 2)
    assert note is None and cov.shape == (2, 2)
    cov, note = usable_fit_covariance(np.array([[1.0, 2.0], [2.0, 1.0]]), 2)
    assert cov is None and "not positive definite" in note and "stretch move" in note
    cov, note = usable_fit_covariance(None, 2)
    assert cov is None and "no covariance" in note


def test_widen_to_intervals_keeps_correlation():
    # 95 % normal interval = mean -/+ 1.959964 sd (Abramowitz and Stegun, table 26.5)
    cov = np.array([[1.0, 0.3], [0.3, 0.25]])  # sd 1 and 0.5, correlation 0.6
    z = stats.norm.ppf(0.975)
    out = widen_to_intervals(cov, [-2 * z, np.nan], [2 * z, np.nan])
    np.testing.assert_allclose(np.sqrt(np.diag(out)), [2.0, 0.5], rtol=1e-12)
    np.testing.assert_allclose(out[0, 1] / (2.0 * 0.5), 0.6, rtol=1e-12)
    # an interval narrower than the covariance says leaves the sd alone
    np.testing.assert_allclose(widen_to_intervals(cov, [-0.1, -0.1], [0.1, 0.1]), cov, rtol=1e-12)
    np.linalg.cholesky(out)


class _Fit:
    """The parts of a campaign fit result that the proposal reads (test double)."""

    def __init__(self, covariance, rows):
        self.covariance, self._rows, self.keys = covariance, rows, [r["name"] for r in rows]

        class _Inner:
            level = 0.95
        self.fit = _Inner()

    def rows(self):
        return self._rows


def test_proposal_covariance_from_fit_uses_bounds_for_open_profiles():
    z = stats.norm.ppf(0.975)
    rows = [{"name": "a", "profile_interval": [-1.0, 1.0], "profile_open_below": False,
             "profile_open_above": False, "bounds": [None, None]},
            {"name": "b", "profile_interval": [None, 1.0], "profile_open_below": True,
             "profile_open_above": False, "bounds": [-3.0, 4.0]}]
    cov, note = proposal_covariance_from_fit(_Fit(np.diag([0.25, 0.01]), rows))
    assert note is None
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), [1.0 / z, 4.0 / (2 * z)], rtol=1e-12)
    cov, note = proposal_covariance_from_fit(_Fit(np.array([[1.0, 2.0], [2.0, 1.0]]), rows))
    assert cov is None and "stretch move" in note


def test_proposal_covariance_has_the_width_of_the_stated_errors():
    # the covariance and the profiles are scaled to the observed scatter (s^2 = reduced chi-square
    # 0.25 here: the data scatter half as much as stated); the posterior uses the stated errors, so
    # the proposal is twice as wide (Bates and Watts 1988, section 2.3: cov = s^2 (J^T J)^-1)
    rows = [{"name": "a", "profile_interval": [-0.1, 0.1], "profile_open_below": False,
             "profile_open_above": False, "bounds": [None, None]},
            {"name": "b", "profile_interval": [None, 1.0], "profile_open_below": True,
             "profile_open_above": False, "bounds": [-3.0, 4.0]}]
    fit = _Fit(np.array([[0.04, 0.01], [0.01, 0.01]]), rows)
    fit.fit.reduced_chisqr, fit.fit.scale_by_residual_variance = 0.25, True
    cov, note = proposal_covariance_from_fit(fit)
    assert note is None
    z = stats.norm.ppf(0.975)
    # a: the covariance's sd 0.2 / 0.5 = 0.4 beats the profile's 0.1 / z / 0.5; b: the bound's width
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), [0.4, 4.0 / (2 * z)], rtol=1e-12)
    np.testing.assert_allclose(cov[0, 1] / np.sqrt(cov[0, 0] * cov[1, 1]), 0.5, rtol=1e-12)
    # a closed profile wider than the covariance: its width divided by s
    rows[0]["profile_interval"] = [-2.0, 2.0]
    cov, _ = proposal_covariance_from_fit(fit)
    assert np.sqrt(cov[0, 0]) == pytest.approx(2.0 / z / 0.5, rel=1e-12)


def test_move_choice_errors():
    with pytest.raises(InputError, match="unknown proposal"):
        build_moves("hop", np.zeros(2), np.eye(2))
    with pytest.raises(InputError, match="needs a covariance"):
        build_moves("laplace", np.zeros(2), None)
    with pytest.raises(InputError, match="'inflation' of the proposal"):
        IndependenceStudentTMove(np.zeros(2), np.eye(2), inflation=0.0)
    assert set(PROPOSALS) >= {"stretch", "laplace", "adaptive"}


# ---------------------------------------------------------------------------
# adaptation: the independence move refitted to the chain during warm-up
# ---------------------------------------------------------------------------
def test_adapt_to_takes_the_mean_and_covariance_of_the_draws():
    rng = np.random.default_rng(3)
    draws = rng.multivariate_normal(_CENTRE, _SIGMA, size=4000)
    move = IndependenceStudentTMove(np.zeros(3), np.eye(3))
    assert move.adapt_to(draws)
    np.testing.assert_array_equal(move.centre, draws.mean(axis=0))
    # scale matrix = ADAPTED_INFLATION^2 x the sample covariance (numpy.cov as the reference)
    from speciakin.estimation.proposals import ADAPTED_INFLATION
    np.testing.assert_allclose(move.cholesky @ move.cholesky.T, ADAPTED_INFLATION ** 2 * np.cov(draws.T),
                               rtol=1e-12)


def test_adapt_to_keeps_the_proposal_for_draws_without_spread():
    move = IndependenceStudentTMove(np.ones(3), np.eye(3))
    before = move.cholesky.copy()
    collapsed = np.tile([1.0, 2.0, 3.0], (50, 1))  # covariance zero: not positive definite
    assert not move.adapt_to(collapsed)
    assert not move.adapt_to(np.ones((3, 3)))  # fewer draws than needed
    np.testing.assert_array_equal(move.cholesky, before)
    np.testing.assert_array_equal(move.centre, np.ones(3))


def test_adaptation_points_and_warm_up():
    assert adaptation_iterations("adaptive") == ADAPT_AT_STEPS
    assert adaptation_iterations("adaptive", thin_by=4) == tuple(-(-s // 4) for s in ADAPT_AT_STEPS)
    assert warm_up_iterations("adaptive") == max(ADAPT_AT_STEPS)
    assert warm_up_iterations("laplace") == 0 and adaptation_iterations("stretch") == ()
    # adapt_moves refits only at an adaptation point, from the second half of the chain so far
    moves = build_moves("adaptive", np.zeros(2), np.eye(2))
    chain = np.random.default_rng(1).normal(size=(ADAPT_AT_STEPS[0] + 1, 8, 2)) + 5.0
    assert not adapt_moves(moves, "adaptive", chain, ADAPT_AT_STEPS[0] + 1)
    assert adapt_moves(moves, "adaptive", chain, ADAPT_AT_STEPS[0])
    window = chain[ADAPT_AT_STEPS[0] // 2:ADAPT_AT_STEPS[0]].reshape(-1, 2)
    move = moves[0][0]  # the adaptive choice places the Student-t on the window's normal scores
    assert move.marginal_map is not None
    np.testing.assert_array_equal(move.centre, move.marginal_map.forward(window)[0].mean(axis=0))
    assert not adapt_moves(build_moves("laplace", np.zeros(2), np.eye(2)), "laplace", chain, ADAPT_AT_STEPS[0])


# ---------------------------------------------------------------------------
# the move alone on a skewed target: x ~ Gamma(k, 1), y | x ~ N(x / 2, 0.5^2)
# Analytic moments (Johnson, Kotz and Balakrishnan, Continuous Univariate
# Distributions vol. 1, 2nd ed., ch. 17): E x = k, var x = k, E log x =
# digamma(k), E (x - k)^3 = 2k; E y = k/2, cov(x, y) = k/2.
# ---------------------------------------------------------------------------
_K = 3.0


def gamma_target(theta):
    x, y = theta[:, 0], theta[:, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        log_x = np.where(x > 0, (_K - 1) * np.log(np.where(x > 0, x, 1.0)) - x, -np.inf)
    return log_x - 0.5 * ((y - 0.5 * x) / 0.5) ** 2


class ReversedFactorMove(IndependenceStudentTMove):
    """The same move with the Hastings factor reversed (a deliberate bug)."""

    def _independent_proposal(self, coords, random):
        proposed, factor = super()._independent_proposal(coords, random)
        return proposed, -factor


def _run_move(move, n_steps, seed, n_walkers=32):
    sampler = emcee.EnsembleSampler(n_walkers, 2, gamma_target, vectorize=True, moves=move)
    rng = np.random.default_rng(seed)
    start = np.column_stack([rng.gamma(_K, size=n_walkers), rng.normal(1.5, 0.5, n_walkers)])
    sampler.random_state = np.random.RandomState(seed).get_state()
    sampler.run_mcmc(start, n_steps, progress=False)
    chain = sampler.get_chain(discard=n_steps // 10)
    tau = max(1.0, float(np.max(emcee.autocorr.integrated_time(chain, tol=0))))
    return chain.reshape(-1, 2), n_walkers * chain.shape[0] / tau


def _gamma_moments_agree(x, ess):
    """Moments within 4 Monte Carlo standard errors (normal theory, common practice)."""
    se_mean = math.sqrt(_K / ess)
    se_var = math.sqrt((2 * _K ** 2 + 6 * _K) / ess)  # (mu4 - var^2)/n with mu4 = 3k^2 + 6k
    se_log = math.sqrt(special.polygamma(1, _K) / ess)
    checks = [abs(x[:, 0].mean() - _K) < 4 * se_mean,
              abs(x[:, 0].var() - _K) < 4 * se_var,
              abs(np.log(x[:, 0]).mean() - special.digamma(_K)) < 4 * se_log,
              abs(x[:, 1].mean() - _K / 2) < 4 * math.sqrt((_K / 4 + 0.25) / ess)]
    return all(checks), checks


def _skewed_proposal(cls=IndependenceStudentTMove):
    # deliberately mis-centred (true mean (3, 1.5)), mis-scaled (true sd 1.73, 0.97) and without
    # the correlation (0.87); wider than the target so that pi / q stays moderate (a narrower
    # independence proposal is still exact but sticks in the tails, Robert and Casella section 7.4)
    return cls([2.2, 1.0], np.diag([4.0, 1.5]), degrees_of_freedom=5.0, inflation=1.0)


def test_independence_move_alone_reproduces_gamma_moments():
    x, ess = _run_move(_skewed_proposal(), 1500, seed=4)
    ok, checks = _gamma_moments_agree(x, ess)
    assert ok, checks


def test_reversed_hastings_factor_is_detected():
    # the same check must fail for a move that reverses log q(x_old) - log q(x_new)
    x, ess = _run_move(_skewed_proposal(ReversedFactorMove), 1500, seed=4)
    assert not _gamma_moments_agree(x, ess)[0]


def test_mixture_reproduces_gamma_moments():
    moves = [(_skewed_proposal(), 0.5), (emcee.moves.DEMove(), 0.5)]
    x, ess = _run_move(moves, 1500, seed=6)
    ok, checks = _gamma_moments_agree(x, ess)
    assert ok, checks


@pytest.mark.slow
@pytest.mark.parametrize("seed", [11, 12, 13])
@pytest.mark.parametrize("mixture", [False, True])
def test_gamma_moments_long(seed, mixture):
    move = [(_skewed_proposal(), 0.5), (emcee.moves.DEMove(), 0.5)] if mixture else _skewed_proposal()
    x, ess = _run_move(move, 15000, seed=seed)
    ok, checks = _gamma_moments_agree(x, ess)
    assert ok, checks
    # third central moment 2k (Johnson, Kotz and Balakrishnan, ch. 17); loose: heavy-tailed estimator
    assert abs(np.mean((x[:, 0] - x[:, 0].mean()) ** 3) - 2 * _K) < 0.1 * 2 * _K


# ---------------------------------------------------------------------------
# the mixture through sample_posterior on a correlated Gaussian (analytic
# covariance) with a proposal that is mis-centred and mis-scaled on purpose
# ---------------------------------------------------------------------------
_WIDE = [Prior("uniform", {"lower": -20, "upper": 20})] * 2


def _gaussian_run(n_steps, seed, proposal=None):
    # centre 0.7 sd off in each coordinate, covariance without correlation and 0.6 x the variances
    return sample_posterior(gaussian_log_likelihood, ["x", "y"], _WIDE, MEAN + [0.7, -1.4], [1.0, 2.0],
                            n_walkers=16, n_steps=n_steps, seed=seed, progress=False,
                            proposal_covariance=np.diag([0.6, 2.4]), proposal=proposal)


@pytest.mark.parametrize("proposal", ["laplace", "adaptive"])
def test_mixture_recovers_correlated_gaussian(proposal):
    result = _gaussian_run(1200, seed=5, proposal=proposal)
    assert result.proposal == proposal
    check_gaussian_moments(result)


def test_adaptive_is_the_default_with_a_covariance_and_discards_its_warm_up():
    result = _gaussian_run(400, seed=5)
    assert result.proposal == "adaptive"
    assert result.burn_in >= max(ADAPT_AT_STEPS)
    # after the warm-up the adapted proposal fits this Gaussian target: the walkers accept far more
    # often than through the deliberately wrong start proposal of "laplace" (0.2-0.3 here)
    assert result.acceptance_fraction.mean() > 0.45


@pytest.mark.slow
@pytest.mark.parametrize("seed", [21, 22, 23])
@pytest.mark.parametrize("proposal", ["laplace", "adaptive"])
def test_mixture_recovers_correlated_gaussian_long(seed, proposal):
    result = _gaussian_run(10000, seed, proposal)
    check_gaussian_moments(result)
    assert result.converged


# ---------------------------------------------------------------------------
# checkpoints: the move choice is part of the run
# ---------------------------------------------------------------------------
PRIORS = [Prior("normal", {"mean": 0.0, "sd": 3.0}), Prior("halfnormal", {"scale": 2.0})]
NAMES = ["shift", "noise"]
_BANANA_COV = np.array([[0.25, 0.02], [0.02, 0.06]])


def banana_log_likelihood(theta):
    """A mildly curved 2-D target (invented test function)."""
    a, b = theta[:, 0], theta[:, 1]
    return -0.5 * ((a - 0.4) / 0.5) ** 2 - 0.5 * ((b - 0.8 - 0.3 * a ** 2) / 0.2) ** 2


class InterruptAfter:
    """Likelihood that raises KeyboardInterrupt on its n-th call (simulated Ctrl-C)."""

    def __init__(self, n_calls):
        self.n_calls, self.calls = n_calls, 0

    def __call__(self, theta):
        self.calls += 1
        if self.calls == self.n_calls:
            raise KeyboardInterrupt
        return banana_log_likelihood(theta)


def run(function, n_steps, path=None, resume=False, covariance=_BANANA_COV, **kwargs):
    kwargs.setdefault("proposal", None if covariance is None else "laplace")
    return sample_posterior(function, NAMES, PRIORS, [0.4, 0.85], [0.2, 0.1], n_walkers=8, n_steps=n_steps,
                            seed=123, checkpoint=path, resume=resume, progress=False,
                            proposal_covariance=covariance, **kwargs)


# the adaptive choice is interrupted after its first adaptation (about step 77: 1.3 likelihood
# calls per step), after its second (about step 200) and after the last (about step 350)
@pytest.mark.parametrize("proposal, n_steps, calls, adaptations_before", [
    ("laplace", 120, 100, 0), ("adaptive", 400, 100, 1), ("adaptive", 400, 260, 2), ("adaptive", 400, 455, 3)])
def test_resume_with_mixture_equals_uninterrupted_run(tmp_path, proposal, n_steps, calls, adaptations_before):
    # reference: an uninterrupted run with the same seed (every random number
    # comes from the sampler's saved RandomState; the adaptation from the stored chain)
    reference = run(banana_log_likelihood, n_steps, proposal=proposal)
    assert reference.proposal == proposal
    path = tmp_path / "ck.h5"
    with pytest.raises(KeyboardInterrupt):
        run(InterruptAfter(calls), n_steps, path, checkpoint_every=1e9, checkpoint_every_steps=25,
            proposal=proposal)
    saved = read_checkpoint(path)
    assert 0 < saved.iteration < n_steps and saved.settings["proposal"] == proposal
    # interrupted where the test means to: after that many adaptations, before the next
    assert sum(step <= saved.iteration for step in PROPOSALS[proposal].adapt_at) == adaptations_before
    resumed = run(banana_log_likelihood, n_steps, path, resume=True, proposal=proposal)
    assert resumed.resumed_from == saved.iteration
    assert np.array_equal(resumed.chain[:saved.iteration], saved.chain)
    assert np.array_equal(resumed.chain, reference.chain)
    assert np.array_equal(resumed.log_prob, reference.log_prob)
    assert np.array_equal(resumed.acceptance_fraction, reference.acceptance_fraction)


def test_adaptive_run_extended_from_an_adaptation_step_equals_uninterrupted_run(tmp_path):
    # a finished run of exactly the last adaptation step, extended: the resumed run must redo that
    # adaptation from the stored chain before its first step
    n_first = ADAPT_AT_STEPS[-1]
    reference = run(banana_log_likelihood, 2 * n_first, proposal="adaptive")
    path = tmp_path / "ck.h5"
    run(banana_log_likelihood, n_first, path, proposal="adaptive")
    extended = run(banana_log_likelihood, 2 * n_first, path, resume=True, proposal="adaptive")
    assert extended.resumed_from == n_first
    assert np.array_equal(extended.chain, reference.chain)
    assert np.array_equal(extended.log_prob, reference.log_prob)


def test_resume_with_another_proposal_is_refused(tmp_path):
    path = tmp_path / "ck.h5"
    run(banana_log_likelihood, 10, path, covariance=None)  # stretch move
    with pytest.raises(InputError, match="'proposal' differs"):
        run(banana_log_likelihood, 20, path, resume=True)
    path2 = tmp_path / "ck2.h5"
    run(banana_log_likelihood, 10, path2)
    with pytest.raises(InputError, match="'proposal_fingerprint' differs"):
        run(banana_log_likelihood, 20, path2, resume=True, covariance=2 * _BANANA_COV)
    with pytest.raises(InputError, match="'proposal' differs"):
        run(banana_log_likelihood, 20, path2, resume=True, covariance=None)


def test_result_records_the_moves(tmp_path):
    from speciakin.estimation.sampling import PosteriorResult

    result = run(banana_log_likelihood, 30)
    assert result.to_dict()["proposal"] == "laplace"
    assert "independence Student-t" in result.to_dict()["moves"]
    assert any(line.startswith("moves (laplace):") for line in result.report().splitlines())
    result.save(tmp_path / "p.h5")
    back = PosteriorResult.load(tmp_path / "p.h5")
    assert back.proposal == "laplace" and back.moves == result.moves
    plain = run(banana_log_likelihood, 30, covariance=None)
    assert plain.proposal == "stretch" and "stretch" in plain.moves


def test_sample_posterior_refuses_bad_proposal_settings():
    with pytest.raises(InputError, match="not positive definite"):
        run(banana_log_likelihood, 10, covariance=np.array([[1.0, 2.0], [2.0, 1.0]]))
    with pytest.raises(InputError, match="needs a covariance"):
        run(banana_log_likelihood, 10, covariance=None, proposal="laplace")
    with pytest.raises(InputError, match="unknown proposal"):
        run(banana_log_likelihood, 10, proposal="jump")
