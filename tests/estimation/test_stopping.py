"""The stop rule: a run without a fixed length stops when the documented criteria hold.

Criteria (docs/sampling.md, speciakin.estimation.stopping): chain length >= 50
integrated autocorrelation times for every parameter, rank-normalised split
R-hat <= 1.01, bulk and tail ESS >= 400 (Vehtari et al., Bayesian Analysis
2021, 16, 667), checked every 200 steps from step 400, cap 5000.

References used here: ArviZ (rank R-hat, bulk and tail ESS; general-purpose
reference library implementing Vehtari et al. 2021), emcee's integrated
autocorrelation time (Foreman-Mackey et al. 2013), the analytic moments of the
shared Gaussian target, and an uninterrupted run with the same seed for resume.
"""

import math
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import emcee
import numpy as np
import pytest

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError
from speciakin.estimation.checkpoint import read_checkpoint
from speciakin.estimation.proposals import warm_up_iterations
from speciakin.estimation.sampling import sample_posterior
from speciakin.estimation.stopping import (DEFAULT_CHECK_EVERY, DEFAULT_MAX_STEPS, DEFAULT_MIN_STEPS, StopRule,
                                           check_chain)

from .gaussian_target import MEAN, check_gaussian_moments, gaussian_log_likelihood

WIDE = [Prior("uniform", {"lower": -20, "upper": 20})] * 2


class InterruptAfter:
    """Gaussian likelihood that raises KeyboardInterrupt on its n-th call (simulated Ctrl-C)."""

    def __init__(self, n_calls):
        self.n_calls = n_calls
        self.calls = 0

    def __call__(self, theta):
        self.calls += 1
        if self.calls == self.n_calls:
            raise KeyboardInterrupt
        return gaussian_log_likelihood(theta)


def gaussian_run(function=gaussian_log_likelihood, **kwargs):
    options = dict(n_walkers=16, seed=5, progress=False)
    options.update(kwargs)
    return sample_posterior(function, ["x", "y"], WIDE, MEAN, [1.0, 2.0], **options)


@pytest.fixture(scope="module")
def converged_run():
    return gaussian_run()


@pytest.fixture(scope="module")
def arviz():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        return pytest.importorskip("arviz")


def reference_criteria(arviz, chain, warm_up=0):
    """(tau multiple, max R-hat, min bulk ESS, min tail ESS) by emcee and ArviZ, after the
    burn-in of 2 x the longest tau (capped at half the chain; emcee documentation), of the
    chain after ``warm_up`` steps (an adapting proposal's warm-up, docs/sampling.md)."""
    chain = chain[warm_up:]
    tau = emcee.autocorr.integrated_time(chain, tol=0, quiet=True)
    burn_in = min(int(math.ceil(2 * np.max(tau))), chain.shape[0] // 2)
    kept = chain[burn_in:]
    r_hat = max(float(arviz.rhat(kept[:, :, j].T, method="rank")) for j in range(chain.shape[2]))
    bulk = min(float(arviz.ess(kept[:, :, j].T, method="bulk")) for j in range(chain.shape[2]))
    tail = min(float(arviz.ess(kept[:, :, j].T, method="tail")) for j in range(chain.shape[2]))
    return chain.shape[0] / np.max(tau), r_hat, bulk, tail


def test_defaults_are_the_documented_ones():
    # docs/sampling.md, "Stopping when converged"
    assert (DEFAULT_CHECK_EVERY, DEFAULT_MIN_STEPS, DEFAULT_MAX_STEPS) == (200, 400, 5000)
    rule = StopRule()
    assert [s for s in range(0, 1001) if rule.is_check_step(s)] == [400, 600, 800, 1000]
    assert rule.is_check_step(5000) and not rule.is_check_step(4900)


def test_stops_on_correlated_gaussian_at_the_documented_criteria(converged_run, arviz):
    result = converged_run
    assert result.stop_reason == "converged"
    assert result.stop_message.startswith(f"converged at step {result.n_steps}:")
    steps = [c["step"] for c in result.stop_checks]
    assert steps == list(range(400, result.n_steps + 1, 200))
    assert result.n_steps < 5000 and result.chain.shape[0] == result.n_steps
    assert [c["passed"] for c in result.stop_checks] == [False] * (len(steps) - 1) + [True]
    assert all(c["failing"] for c in result.stop_checks[:-1])
    # the criteria hold at the stop step by the reference libraries ...
    multiple, r_hat, bulk, tail = reference_criteria(arviz, result.chain)
    assert multiple >= 50 and r_hat <= 1.01 and bulk >= 400 and tail >= 400
    # ... and at least one of them failed at the check before (so the rule did not run on needlessly)
    multiple, r_hat, bulk, tail = reference_criteria(arviz, result.chain[:result.n_steps - 200])
    assert multiple < 50 or r_hat > 1.01 or bulk < 400 or tail < 400
    assert result.converged and result.diagnostics.converged
    check_gaussian_moments(result)  # analytic covariance and mean of the target
    data = result.to_dict()
    assert data["stop_reason"] == "converged" and data["stop_checks"][-1]["passed"] is True
    assert "stopped: converged at step" in result.report()


def test_adaptive_moves_stop_on_correlated_gaussian_at_the_documented_criteria(arviz):
    # start proposal deliberately wrong (no correlation, variances x 0.6 and 4); the adapted one
    # fits the target after the warm-up, so the rule should pass at an early check
    result = gaussian_run(proposal_covariance=np.diag([0.6, 16.0]))
    assert result.proposal == "adaptive" and result.stop_reason == "converged"
    steps = [c["step"] for c in result.stop_checks]
    assert steps == list(range(400, result.n_steps + 1, 200))
    warm_up = warm_up_iterations("adaptive")
    assert result.burn_in >= warm_up
    multiple, r_hat, bulk, tail = reference_criteria(arviz, result.chain, warm_up)
    assert multiple >= 50 and r_hat <= 1.01 and bulk >= 400 and tail >= 400
    if result.n_steps > 400:
        multiple, r_hat, bulk, tail = reference_criteria(arviz, result.chain[:result.n_steps - 200], warm_up)
        assert multiple < 50 or r_hat > 1.01 or bulk < 400 or tail < 400
    check_gaussian_moments(result)


def bimodal_log_likelihood(theta):
    """Equal mixture of N(-6, 1) and N(6, 1) in x, N(0, 1) in y (invented test target).

    A walker moves along the line through another walker with a stretch factor
    in [1/2, 2] (Goodman and Weare 2010), so it never lands near a walker of the
    other mode: walkers that start in different modes stay there and R-hat over
    walkers stays far above 1.01 however long the chain.
    """
    x, y = theta[:, 0], theta[:, 1]
    return np.logaddexp(-0.5 * (x - 6.0) ** 2, -0.5 * (x + 6.0) ** 2) - 0.5 * y ** 2


def test_does_not_stop_on_a_bimodal_target():
    priors = [Prior("uniform", {"lower": -30, "upper": 30})] * 2
    result = sample_posterior(bimodal_log_likelihood, ["x", "y"], priors, [0.0, 0.0], [60.0, 1.0],
                              n_walkers=16, seed=3, max_steps=2000, progress=False)
    side = np.sign(result.chain[result.n_steps // 2:, :, 0].mean(axis=0))
    assert 0 < np.sum(side > 0) < 16  # the premise: walkers sit in both modes
    assert result.stop_reason == "cap" and result.n_steps == 2000
    assert result.stop_message.startswith("reached the cap of 2000 steps")
    assert not any(c["passed"] for c in result.stop_checks)
    assert all(any(f.startswith("R-hat") for f in c["failing"]) for c in result.stop_checks)
    assert not result.converged


def test_does_not_stop_on_a_slowly_mixing_target():
    # 10-D Gaussian, correlation 0.99 between neighbours, sd from 1e-3 to 1e3.  The stretch move is
    # affine invariant, so correlation and scale alone do not slow it; its autocorrelation time
    # grows with the dimension (Huijser, Goodman and Brewer 2015, from memory): here ~60 steps,
    # so 1200 steps are only ~20 tau.
    d = 10
    sd = np.logspace(-3, 3, d)
    covariance = 0.99 ** np.abs(np.subtract.outer(np.arange(d), np.arange(d))) * np.outer(sd, sd)
    precision = np.linalg.inv(covariance)

    def log_likelihood(theta):
        return -0.5 * np.einsum("ni,ij,nj->n", theta, precision, theta)

    priors = [Prior("normal", {"mean": 0.0, "sd": 1e4 * s}) for s in sd]
    result = sample_posterior(log_likelihood, [f"p{i}" for i in range(d)], priors, np.zeros(d), sd,
                              n_walkers=24, seed=1, max_steps=1200, progress=False)
    assert result.stop_reason == "cap" and result.n_steps == 1200
    assert not any(c["passed"] for c in result.stop_checks)
    tau = emcee.autocorr.integrated_time(result.chain, tol=0, quiet=True)  # reference estimator
    assert 1200 < 50 * np.max(tau)
    assert all(any(f.startswith("chain") for f in c["failing"]) for c in result.stop_checks)


def test_fixed_steps_run_exactly_that_many_with_no_checks():
    result = gaussian_run(n_steps=450)
    assert result.chain.shape[0] == 450 and result.n_steps == 450
    assert result.stop_reason == "fixed" and result.stop_checks == [] and result.stop_rule is None
    assert result.stop_message == "fixed length requested: 450 steps (no convergence checks made)"
    thinned = gaussian_run(n_steps=450, thin_by=3)
    assert thinned.chain.shape[0] == 150 and thinned.n_steps == 450


def test_check_depends_only_on_the_chain(converged_run):
    chain = converged_run.chain[:1000]
    a = check_chain(chain, ["x", "y"], 1000)
    b = check_chain(np.array(chain, order="F"), ["x", "y"], 1000)
    assert a == b and a.to_dict() == converged_run.stop_checks[3]


def test_progress_reports_steps_against_the_cap():
    seen = []
    gaussian_run(max_steps=600, progress=lambda done, total, left: seen.append((done, total)))
    assert seen[-1] == (600, 600) and {t for _, t in seen} == {600}


def test_progress_of_a_run_that_converges_before_the_cap_ends_complete():
    # the last report of a converged run is (steps, steps, 0): a progress bar or a job ends at 100 %
    # instead of at the converged step against the cap
    seen = []
    run = gaussian_run(progress=lambda done, total, left: seen.append((done, total, left)))
    steps = run.chain.shape[0]
    assert steps < DEFAULT_MAX_STEPS
    assert seen[-1] == (steps, steps, 0.0)
    assert seen[-2][:2] == (steps, DEFAULT_MAX_STEPS)
    assert {t for _, t, _ in seen[:-1]} == {DEFAULT_MAX_STEPS}


def test_resume_across_a_check_gives_the_same_chain_and_stop_step(tmp_path, converged_run):
    path = tmp_path / "ck.h5"
    with pytest.raises(KeyboardInterrupt):
        # 1 call for the start, 2 per step: interrupted inside step 651, after the checks at 400 and 600
        gaussian_run(InterruptAfter(2 * 650 + 2), checkpoint=path, checkpoint_every=1e9,
                     checkpoint_every_steps=50)
    saved = read_checkpoint(path)
    assert saved.iteration == 650
    assert [c["step"] for c in saved.stop_checks] == [400, 600]
    assert saved.stop_checks == converged_run.stop_checks[:2]
    resumed = gaussian_run(checkpoint=path, resume=True)
    assert resumed.resumed_from == 650
    assert np.array_equal(resumed.chain, converged_run.chain)
    assert np.array_equal(resumed.log_prob, converged_run.log_prob)
    assert resumed.n_steps == converged_run.n_steps
    assert resumed.stop_checks == converged_run.stop_checks
    assert resumed.stop_message == converged_run.stop_message
    # a converged run resumed again takes no step and says the same
    again = gaussian_run(checkpoint=path, resume=True)
    assert again.n_likelihood_evaluations == 0 and again.stop_reason == "converged"
    assert np.array_equal(again.chain, converged_run.chain)


def test_resume_interrupted_exactly_at_a_check_step(tmp_path, converged_run):
    path = tmp_path / "ck.h5"
    with pytest.raises(KeyboardInterrupt):
        gaussian_run(InterruptAfter(2 * 800 + 2), checkpoint=path, checkpoint_every=1e9)
    assert read_checkpoint(path).iteration == 800
    resumed = gaussian_run(checkpoint=path, resume=True)
    assert np.array_equal(resumed.chain, converged_run.chain)
    assert resumed.stop_checks == converged_run.stop_checks


def test_a_capped_run_resumed_with_a_higher_cap_equals_the_uncapped_run(tmp_path, converged_run):
    path = tmp_path / "ck.h5"
    capped = gaussian_run(checkpoint=path, max_steps=700)
    assert capped.stop_reason == "cap" and capped.n_steps == 700
    assert [c["step"] for c in capped.stop_checks] == [400, 600, 700]
    assert "at step 700" in capped.stop_message
    resumed = gaussian_run(checkpoint=path, resume=True)
    assert np.array_equal(resumed.chain, converged_run.chain)
    assert resumed.stop_reason == "converged" and resumed.n_steps == converged_run.n_steps


def test_resume_refuses_other_checks(tmp_path):
    path = tmp_path / "ck.h5"
    gaussian_run(checkpoint=path, max_steps=400)
    with pytest.raises(InputError, match="other convergence checks"):
        gaussian_run(checkpoint=path, resume=True, check_every=100)
    fixed = gaussian_run(checkpoint=path, resume=True, n_steps=420)  # a fixed length may continue it
    assert fixed.chain.shape[0] == 420 and fixed.stop_reason == "fixed"


@pytest.mark.parametrize("kwargs, message", [
    ({"check_every": 0}, "'check_every' is not allowed"),
    ({"check_every": 200, "thin_by": 3}, "a multiple of thin_by"),
    ({"min_steps": -1}, "'min_steps' is not allowed"),
    ({"max_steps": 2}, "'max_steps' is not allowed"),
    ({"n_steps": 0}, "'n_steps' is not allowed"),
])
def test_bad_stop_settings_raise_clear_errors(kwargs, message):
    with pytest.raises(InputError, match=message):
        gaussian_run(**kwargs)


_CHILD = textwrap.dedent("""
    import sys, time
    sys.path.insert(0, {root!r})
    from tests.estimation.test_stopping import gaussian_run
    from tests.estimation.gaussian_target import gaussian_log_likelihood

    def slow(theta):
        time.sleep(0.002)
        return gaussian_log_likelihood(theta)

    gaussian_run(slow, checkpoint={path!r}, checkpoint_every=1e9, checkpoint_every_steps=10)
""")


def test_resume_after_kill_9_stops_at_the_same_step(tmp_path, converged_run):
    path = tmp_path / "ck.h5"
    root = str(Path(__file__).resolve().parents[2])
    code = _CHILD.format(root=root, path=str(path))
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([root] + sys.path))
    child = subprocess.Popen([sys.executable, "-c", code], env=env, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and child.poll() is None:
            if path.exists():
                try:
                    if read_checkpoint(path).iteration >= 420:  # past the first check
                        break
                except InputError:
                    pass  # the file is replaced atomically; a read during the rename may race
            time.sleep(0.05)
        assert child.poll() is None, child.stderr.read().decode()
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=20)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    saved = read_checkpoint(path)
    assert 420 <= saved.iteration < converged_run.n_steps
    assert saved.stop_checks == converged_run.stop_checks[:len(saved.stop_checks)]
    resumed = gaussian_run(checkpoint=path, resume=True)
    assert np.array_equal(resumed.chain, converged_run.chain)
    assert resumed.n_steps == converged_run.n_steps and resumed.stop_checks == converged_run.stop_checks


def test_stop_fields_survive_save_and_load(tmp_path, converged_run):
    import json

    from speciakin.estimation.sampling import PosteriorResult

    path = tmp_path / "posterior.h5"
    converged_run.save(path)
    back = PosteriorResult.load(path)
    for key in ("stop_reason", "stop_message", "stop_checks", "stop_rule"):
        assert getattr(back, key) == getattr(converged_run, key)
    assert back.stop_rule == {"check_every": 200, "min_steps": 400, "target_tau_multiple": 50.0,
                              "r_hat_limit": 1.01, "ess_minimum": 400.0, "max_steps": 5000}
    json.dumps(converged_run.to_dict(), allow_nan=False)
