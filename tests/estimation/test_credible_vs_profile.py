"""Posterior credible intervals against profile-likelihood intervals on a
well-determined synthetic campaign (INVENTED model and data, seeded).

For a well-determined model with weak priors the posterior is close to the
likelihood, and the 95 % equal-tailed credible interval and the 95 % profile
interval should have nearly the same width (Raue et al., Bioinformatics 2009,
25, 1923, section 2.3: profile intervals approximate Bayesian credible
intervals under flat priors; Gelman et al., Bayesian Data Analysis, 3rd ed.,
section 4.1: asymptotic normality of the posterior).  The issue asks for
agreement "to within about 20 %" in width.
"""

import numpy as np
import pytest

from speciakin.pipeline.fit import fit_campaign
from speciakin.pipeline.posterior import sample_campaign
from speciakin.pipeline.objective import CampaignObjective

from .campaign_synthetic import SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model, synthetic_campaign


def _widths(steps: int):
    model = small_model()
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=202)
    objective = CampaignObjective(model, campaign)
    fit = fit_campaign(objective, starts=1, profiles=True)
    assert fit.fit.success
    se = np.array([fit.fit.parameter(k).standard_error for k in fit.keys])
    post = sample_campaign(objective, fit.theta, se, n_walkers=24, n_steps=steps, seed=3, progress=False)
    out = []
    for row, summary in zip(fit.rows(), post.summary):
        lo, hi = row["profile_interval"]
        assert lo is not None and hi is not None, row["name"]
        assert summary.name == row["name"]
        out.append((row["name"], hi - lo, summary.upper_95 - summary.lower_95))
    return out, post


def _check(widths, tolerance):
    for name, profile_width, credible_width in widths:
        ratio = credible_width / profile_width
        assert abs(ratio - 1.0) < tolerance, (name, profile_width, credible_width, ratio)


def test_credible_and_profile_widths_agree_short():
    # Short chain: 24 walkers x 700 steps.  The Monte Carlo error of a 95 % interval width from
    # a few hundred effective draws is roughly 10 %, so the 20 % criterion of the issue is
    # checked with 0.30 here; the slow test below checks 0.20 with a long chain.
    widths, post = _widths(700)
    _check(widths, 0.30)


@pytest.mark.slow
def test_credible_and_profile_widths_agree_long():
    widths, post = _widths(5000)
    assert post.diagnostics.long_enough, post.warnings  # chain >= 50 autocorrelation times
    _check(widths, 0.20)
