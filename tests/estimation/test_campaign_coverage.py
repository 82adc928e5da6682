"""Seeded coverage study of the campaign fit: the true constants lie inside the 95 % intervals
(covariance and profile likelihood) at about the 95 % rate.

Synthetic campaigns from known truth (tests/estimation/campaign_synthetic.py; INVENTED model:
fictional diamine SK-301, three held-pH runs, 8 samples each, 3 fitted parameters), each with its own
seed of numpy.random.default_rng and the documented noise model
y_obs = y_true + N(0, sqrt(0.1^2 + (0.02 y_true)^2)).

If the intervals are honest, the number of intervals holding the truth among n is close to
Binomial(n, 0.95) (scipy.stats.binom as the reference; intervals of one dataset are correlated, which
widens the spread a little, so the bounds below are generous).  References: Raue et al.,
Bioinformatics 2009, 25, 1923 (profile intervals); Bates and Watts, "Nonlinear Regression Analysis and
Its Applications", 1988, section 6.1 (covariance t intervals).
"""

import numpy as np
import pytest
from scipy import stats

from speciakin.pipeline.fit import fit_campaign
from speciakin.pipeline.objective import CampaignObjective

from .campaign_synthetic import SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model, synthetic_campaign

#: Truth on the fitted scale, fit order: pKa shift of N_b (5.0 - 5.2), log10 k_a, log10 k_b.
THETA_TRUE = np.array([-0.2, 1.0, 0.0])


def _one(model, seed, with_profiles):
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=seed)
    result = fit_campaign(CampaignObjective(model, campaign, parallel=False), starts=1, profiles=with_profiles)
    assert result.fit.success, result.fit.message
    covariance_hits, profile_hits = [], []
    for row, true in zip(result.rows(), THETA_TRUE):
        lo, hi = row["covariance_interval"]
        covariance_hits.append(lo <= true <= hi)
        if with_profiles:
            plo, phi = row["profile_interval"]
            profile_hits.append((row["profile_open_below"] or plo <= true)
                                and (row["profile_open_above"] or true <= phi))
    return covariance_hits, profile_hits


def _study(seeds, profile_seeds):
    model = small_model()
    cov, prof = [], []
    for seed in seeds:
        c, p = _one(model, seed, seed in profile_seeds)
        cov += c
        prof += p
    return np.array(cov), np.array(prof)


def test_coverage_short():
    # 12 datasets x 3 parameters = 36 covariance intervals; profiles (slower) on the first 3 datasets =
    # 9 intervals.  Accept when the count of hits is above the 0.1 % quantile of Binomial(n, 0.95):
    # an honest method fails each count with probability at most 0.1 %.  Its power is modest: intervals
    # at 80 % true coverage would still pass 57 % of the time (P[Binomial(36, 0.8) >= 29] = 0.57,
    # scipy.stats.binom.sf), so it catches gross under-coverage; the slow study is the real check.
    seeds = list(range(1, 13))
    cov, prof = _study(seeds, set(seeds[:3]))
    assert cov.size == 36 and prof.size == 9
    assert cov.sum() >= stats.binom.ppf(0.001, cov.size, 0.95), cov.sum()
    assert prof.sum() >= stats.binom.ppf(0.001, prof.size, 0.95), prof.sum()


@pytest.mark.slow
def test_coverage_long():
    # 50 datasets x 3 parameters = 150 intervals of each kind.  Two-sided band: the central 99.8 % of
    # Binomial(150, 0.95) (scipy.stats.binom), so intervals that are too wide fail as well as too narrow.
    seeds = list(range(1001, 1051))
    cov, prof = _study(seeds, set(seeds))
    for hits in (cov, prof):
        assert hits.size == 150
        low, high = stats.binom.ppf([0.001, 0.999], hits.size, 0.95)
        assert low <= hits.sum() <= high, (hits.sum(), low, high)
