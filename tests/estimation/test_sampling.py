"""Posterior sampling against analytic posteriors, plus the result object and input errors."""

import json
import math

import numpy as np
import pytest

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError, SolverError
from speciakin.estimation.sampling import PosteriorResult, sample_posterior

from .gaussian_target import MEAN, check_gaussian_moments, gaussian_log_likelihood

# ---------------------------------------------------------------------------
# Conjugate normal model, known variance (Gelman et al., Bayesian Data
# Analysis, 3rd ed., section 2.5, eq. 2.12): prior mu ~ N(mu0, tau0^2), data
# y_i ~ N(mu, sigma^2) ->  posterior N(mu_n, tau_n^2) with
#   1/tau_n^2 = 1/tau0^2 + n/sigma^2,  mu_n = (mu0/tau0^2 + sum(y)/sigma^2) tau_n^2.
# ---------------------------------------------------------------------------
_Y = np.random.default_rng(11).normal(2.3, 1.5, size=12)
_SIGMA, _MU0, _TAU0 = 1.5, 0.0, 2.0


def conjugate_log_likelihood(theta):
    mu = theta[:, 0:1]
    return -0.5 * np.sum(((_Y[None, :] - mu) / _SIGMA) ** 2, axis=1)


def conjugate_truth():
    precision = 1 / _TAU0 ** 2 + _Y.size / _SIGMA ** 2
    return (_MU0 / _TAU0 ** 2 + _Y.sum() / _SIGMA ** 2) / precision, math.sqrt(1 / precision)


def _run_conjugate(n_steps, seed, covariance=None, proposal=None):
    mean, sd = conjugate_truth()
    return sample_posterior(conjugate_log_likelihood, ["mu"], [Prior("normal", {"mean": _MU0, "sd": _TAU0})],
                            [_Y.mean()], [sd], n_walkers=16, n_steps=n_steps, seed=seed, progress=False,
                            proposal_covariance=covariance, proposal=proposal)


def _check_conjugate(result):
    mean, sd = conjugate_truth()
    s = result.summary[0]
    ess = min(result.diagnostics.ess_bulk[0], result.diagnostics.ess_autocorrelation[0])
    # Monte Carlo error: mean within 4 MCSE (MCSE = sd/sqrt(ESS)); sd within
    # 4 relative standard errors 1/sqrt(2 ESS) (normal-theory, common practice).
    assert abs(s.mean - mean) < 4 * sd / math.sqrt(ess)
    assert abs(s.sd / sd - 1) < 4 / math.sqrt(2 * ess)
    # 95 % interval of the normal posterior: mean -/+ 1.96 sd
    assert abs(s.lower_95 - (mean - 1.96 * sd)) < 0.25 * sd
    assert abs(s.upper_95 - (mean + 1.96 * sd)) < 0.25 * sd


def test_conjugate_normal_posterior():
    _check_conjugate(_run_conjugate(1500, seed=3))


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_conjugate_normal_posterior_long(seed):
    result = _run_conjugate(10000, seed)
    _check_conjugate(result)
    assert result.converged


# The same analytic posterior with the "laplace" and "adaptive" move mixtures; the
# proposal starts centred at the sample mean (not the posterior mean) with 1.7 x the
# posterior variance, so the check does not rely on a proposal that equals the target.
@pytest.mark.parametrize("proposal", ["laplace", "adaptive"])
def test_conjugate_normal_posterior_with_move_mixture(proposal):
    mean, sd = conjugate_truth()
    result = _run_conjugate(800, seed=3, covariance=[[1.7 * sd ** 2]], proposal=proposal)
    assert result.proposal == proposal
    _check_conjugate(result)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("proposal", ["laplace", "adaptive"])
def test_conjugate_normal_posterior_with_move_mixture_long(seed, proposal):
    mean, sd = conjugate_truth()
    result = _run_conjugate(6000, seed, covariance=[[1.7 * sd ** 2]], proposal=proposal)
    _check_conjugate(result)
    assert result.converged


# ---------------------------------------------------------------------------
# 2-D correlated Gaussian target, analytic covariance; wide uniform priors
# make the posterior the Gaussian itself (truncation at > 10 sd is negligible).
# ---------------------------------------------------------------------------
def test_correlated_gaussian_covariance_recovered():
    priors = [Prior("uniform", {"lower": -20, "upper": 20})] * 2
    result = sample_posterior(gaussian_log_likelihood, ["x", "y"], priors, MEAN, [1.0, 2.0],
                              n_walkers=16, n_steps=2000, seed=5, progress=False)
    check_gaussian_moments(result)


def failing_log_likelihood(theta):
    out = gaussian_log_likelihood(theta)
    return np.where(theta[:, 0] > 1.5, np.nan, out)


def test_failed_evaluations_are_counted_not_fatal():
    priors = [Prior("uniform", {"lower": -20, "upper": 20})] * 2
    result = sample_posterior(failing_log_likelihood, ["x", "y"], priors, MEAN, [1.0, 2.0],
                              n_walkers=8, n_steps=300, seed=1, progress=False)
    assert result.n_failed_evaluations > 0
    assert np.all(result.samples[:, 0] <= 1.5)
    assert any("evaluations failed" in w for w in result.warnings)


def test_same_seed_same_chain_and_different_seed_differs():
    a = _run_conjugate(100, seed=9)
    b = _run_conjugate(100, seed=9)
    c = _run_conjugate(100, seed=10)
    assert np.array_equal(a.chain, b.chain)
    assert not np.array_equal(a.chain, c.chain)


def test_walkers_start_inside_prior_support():
    priors = [Prior("halfnormal", {"scale": 1.0}), Prior("uniform", {"lower": -1, "upper": 1})]
    result = sample_posterior(gaussian_log_likelihood, ["x", "y"], priors, [0.0, 0.99], [5.0, 5.0],
                              n_walkers=8, n_steps=10, seed=2, progress=False)
    first = result.chain[0]
    assert np.all(first[:, 0] >= 0) and np.all(np.abs(first[:, 1]) <= 1)


def test_result_report_dict_save_load_and_draws(tmp_path):
    result = _run_conjugate(200, seed=4)
    text = result.report()
    for heading in ("Posterior summary", "Convergence", "Warnings"):
        assert heading in text.splitlines()
    json.dumps(result.to_dict(), allow_nan=False)
    path = tmp_path / "posterior.h5"
    result.save(path)
    back = PosteriorResult.load(path)
    assert np.array_equal(back.chain, result.chain)
    assert np.array_equal(back.samples, result.samples)
    assert back.summary == result.summary
    assert back.diagnostics == result.diagnostics
    assert back.report() == text
    d1, d2 = result.draws(50, seed=1), result.draws(50, seed=1)
    assert d1.shape == (50, 1) and np.array_equal(d1, d2)
    assert result.draws(10 * result.samples.shape[0], seed=2).shape[0] == 10 * result.samples.shape[0]
    assert result.trace("mu").shape == result.chain.shape[:2]
    with pytest.raises(InputError, match="number of draws"):
        result.draws(0)


def test_load_rejects_other_files(tmp_path):
    bad = tmp_path / "x.h5"
    bad.write_bytes(b"not hdf5")
    with pytest.raises(InputError, match="cannot be read"):
        PosteriorResult.load(bad)


def test_one_store_result_and_checkpoint(tmp_path):
    """save() beside the sampler's checkpoint of the same chain keeps it resumable; a result saved
    elsewhere loads but cannot be resumed; an unfinished checkpoint does not load as a result."""
    path = tmp_path / "posterior.h5"
    kwargs = dict(n_walkers=8, seed=5, progress=False, checkpoint=path)
    args = (conjugate_log_likelihood, ["mu"], [Prior("normal", {"mean": _MU0, "sd": _TAU0})], [_Y.mean()], [0.4])
    result = sample_posterior(*args, n_steps=30, **kwargs)
    with pytest.raises(InputError, match="unfinished run"):
        PosteriorResult.load(path)
    result.save(path)
    assert PosteriorResult.load(path).report() == result.report()
    # the file still resumes: 60 steps from it equal 60 steps without a stop
    longer = sample_posterior(*args, n_steps=60, resume=True, **kwargs)
    straight = sample_posterior(*args, n_steps=60, **dict(kwargs, checkpoint=tmp_path / "straight.h5"))
    assert np.array_equal(longer.chain, straight.chain)
    alone = tmp_path / "alone.h5"
    result.save(alone)
    assert np.array_equal(PosteriorResult.load(alone).chain, result.chain)
    with pytest.raises(InputError, match="cannot continue"):
        sample_posterior(*args, n_steps=60, resume=True, **dict(kwargs, checkpoint=alone))


def test_a_result_of_the_earlier_layout_loads(tmp_path):
    """Files of the earlier result-only layout (tag speciakin-posterior-1) are still read."""
    import dataclasses

    import h5py

    result = _run_conjugate(200, seed=4)
    path = tmp_path / "earlier.h5"
    meta = {f.name: getattr(result, f.name) for f in dataclasses.fields(result)
            if f.name not in ("chain", "log_prob", "acceptance_fraction", "samples")}
    meta["summary"] = [dataclasses.asdict(s) for s in result.summary]
    meta["diagnostics"] = dataclasses.asdict(result.diagnostics)
    with h5py.File(path, "w") as fh:  # the earlier layout, written here by hand
        fh.attrs["format"] = "speciakin-posterior-1"
        fh.attrs["metadata"] = json.dumps(meta)
        fh.create_dataset("chain", data=result.chain)
        fh.create_dataset("log_prob", data=result.log_prob)
        fh.create_dataset("acceptance_fraction", data=result.acceptance_fraction)
    back = PosteriorResult.load(path)
    assert np.array_equal(back.samples, result.samples) and back.report() == result.report()


def test_progress_callable_receives_steps_and_time_left():
    seen = []
    sample_posterior(conjugate_log_likelihood, ["mu"], [Prior("normal", {"mean": 0, "sd": 2})], [2.0], [0.4],
                     n_walkers=4, n_steps=20, seed=1, progress=lambda done, total, left: seen.append((done, total, left)))
    assert [s[0] for s in seen] == list(range(1, 21))
    assert all(s[1] == 20 for s in seen) and seen[-1][2] == 0


def test_thin_by_stores_every_kth_step():
    result = sample_posterior(conjugate_log_likelihood, ["mu"], [Prior("normal", {"mean": 0, "sd": 2})], [2.0],
                              [0.4], n_walkers=4, n_steps=60, thin_by=3, seed=1, progress=False)
    assert result.chain.shape == (20, 4, 1)


@pytest.mark.parametrize("kwargs, message", [
    ({"n_walkers": 1}, "'n_walkers' is not allowed"),
    ({"n_steps": 0}, "'n_steps' is not allowed"),
    ({"thin_by": 0}, "'thin_by' is not allowed"),
    ({"checkpoint_every": -1.0}, "'checkpoint_every' is not allowed"),
    ({"jobs": 0}, "number of worker processes"),
    ({"resume": True}, "resume needs a checkpoint file"),
])
def test_bad_settings_raise_clear_errors(kwargs, message):
    with pytest.raises(InputError, match=message):
        sample_posterior(conjugate_log_likelihood, ["mu"], [Prior("normal", {"mean": 0, "sd": 2})], [2.0], [0.4],
                         **{"n_walkers": 4, "n_steps": 10, "progress": False, **kwargs})


def test_bad_problem_definition_raises():
    prior = Prior("normal", {"mean": 0, "sd": 2})
    with pytest.raises(InputError, match="one prior per parameter"):
        sample_posterior(conjugate_log_likelihood, ["mu", "nu"], [prior], [2.0, 1.0], [0.4, 0.4], progress=False)
    with pytest.raises(InputError, match="start point is not usable"):
        sample_posterior(conjugate_log_likelihood, ["mu"], [prior], [float("nan")], [0.4], n_walkers=4, progress=False)
    with pytest.raises(InputError, match="unique"):
        sample_posterior(conjugate_log_likelihood, ["mu", "mu"], [prior] * 2, [1, 1], [1, 1], progress=False)
    with pytest.raises(InputError, match=r"prior\.mu.*unknown prior family"):
        sample_posterior(conjugate_log_likelihood, ["mu"], [Prior("flat")], [1.0], [1.0], progress=False)


def always_failing(theta):
    return np.full(theta.shape[0], -np.inf)


def test_no_finite_start_raises_solver_error():
    with pytest.raises(SolverError, match="could not place"):
        sample_posterior(always_failing, ["mu"], [Prior("normal", {"mean": 0, "sd": 2})], [2.0], [0.4],
                         n_walkers=4, n_steps=10, progress=False)


def test_wrong_likelihood_shape_raises_solver_error():
    with pytest.raises(SolverError, match="returned 1 values"):
        sample_posterior(lambda t: np.zeros(1), ["mu"], [Prior("normal", {"mean": 0, "sd": 2})], [2.0], [0.4],
                         n_walkers=4, n_steps=10, progress=False)


def test_docs_example_runs():
    # The example in docs/sampling.md is executed so that it cannot go stale.
    import re
    from pathlib import Path

    text = (Path(__file__).resolve().parents[2] / "docs" / "sampling.md").read_text()
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    example = [b for b in blocks if "sample_posterior(" in b and "result.draws" in b]
    assert example, "example missing from docs/sampling.md"
    namespace = {}
    exec(compile(example[0].replace("print(", "str("), "docs/sampling.md", "exec"), namespace)
    assert namespace["draws"].shape == (100, 1)
    # analytic posterior of the example (Gelman et al., BDA3 section 2.5): mean 0.3075, sd 0.0445
    assert abs(namespace["result"].summary[0].mean - 0.3075) < 0.015


def test_collapsed_start_is_a_solver_error():
    # all walkers identical in one coordinate: emcee refuses the start; we report it plainly
    with pytest.raises(SolverError, match="ensemble sampler stopped"):
        sample_posterior(gaussian_log_likelihood, ["x", "y"], [Prior("uniform", {"lower": -20, "upper": 20})] * 2,
                         [0.5, -1.0], [1.0, 1e-300], n_walkers=8, n_steps=10, seed=1, progress=False)
