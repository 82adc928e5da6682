"""Priors truncated to the model-file bounds: density, normalisation, draws,
and a sampler run whose walkers must never leave the bounds."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

from .campaign_synthetic import small_model
from speciakin.chemistry.model import Prior
from speciakin.errors import InputError
from speciakin.estimation.priors import PRIOR_FAMILIES, build_prior
from speciakin.estimation.sampling import sample_posterior

# One parameter set per family (invented numbers) and the scipy.stats reference.
FAMILIES = {
    "normal": ({"mean": 0.3, "sd": 0.5}, stats.norm(loc=0.3, scale=0.5)),
    "lognormal": ({"log_mean": -1.2, "log_sd": 0.4}, stats.lognorm(s=0.4, scale=math.exp(-1.2))),
    "uniform": ({"lower": -2.0, "upper": 7.5}, stats.uniform(loc=-2.0, scale=9.5)),
    "halfnormal": ({"scale": 0.8}, stats.halfnorm(scale=0.8)),
    "student_t": ({"degrees_of_freedom": 4.0, "mean": 1.0, "scale": 0.3}, stats.t(df=4.0, loc=1.0, scale=0.3)),
}
BOUNDS = {"normal": (-0.2, 0.6), "lognormal": (0.2, 0.5), "uniform": (0.0, 1.0), "halfnormal": (0.1, 1.5),
          "student_t": (0.5, 3.0)}


def test_every_family_has_a_truncation_check():
    assert set(FAMILIES) == set(PRIOR_FAMILIES) == set(BOUNDS)


@pytest.mark.parametrize("family", sorted(FAMILIES))
def test_truncated_density_is_the_renormalised_scipy_density(family):
    # Reference: scipy.stats logpdf minus log(cdf(upper) - cdf(lower)) (definition of a
    # truncated distribution; e.g. Johnson, Kotz and Balakrishnan, Continuous Univariate
    # Distributions, vol. 1, 2nd ed., 1994, section 10.1).
    parameters, reference = FAMILIES[family]
    lo, hi = BOUNDS[family]
    prior = build_prior(Prior(family, parameters)).truncated(lo, hi)
    x = np.linspace(lo, hi, 41)
    expected = reference.logpdf(x) - math.log(reference.cdf(hi) - reference.cdf(lo))
    np.testing.assert_allclose(prior.log_density(x), expected, rtol=1e-10, atol=1e-10)
    outside = np.array([lo - 1e-9, hi + 1e-9, lo - 5.0, hi + 5.0])
    assert np.all(np.isneginf(prior.log_density(outside)))
    # integrates to one over the bounds (scipy.integrate.quad as the reference)
    total, _ = integrate.quad(lambda v: math.exp(prior.log_density(np.array([v]))[0]), lo, hi)
    assert total == pytest.approx(1.0, abs=1e-8)
    assert prior.support() == (lo, hi)


@pytest.mark.parametrize("family", sorted(FAMILIES))
def test_truncated_draws_follow_the_truncated_distribution(family):
    # Kolmogorov-Smirnov against the truncated reference CDF; p > 0.001 for a correct
    # sampler (fixed seed).
    parameters, reference = FAMILIES[family]
    lo, hi = BOUNDS[family]
    prior = build_prior(Prior(family, parameters)).truncated(lo, hi)
    x = prior.draw(np.random.default_rng(3), 3000)
    assert np.all((x >= lo) & (x <= hi))
    c_lo, c_hi = reference.cdf(lo), reference.cdf(hi)
    assert stats.kstest(x, lambda v: (reference.cdf(v) - c_lo) / (c_hi - c_lo)).pvalue > 1e-3


def test_build_prior_keeps_the_bounds_and_describe_says_so():
    prior = build_prior(Prior("normal", {"mean": 0.0, "sd": 0.5})).truncated(-1.0, 1.0)
    again = build_prior(prior)
    assert (again.lower, again.upper) == (-1.0, 1.0)
    assert again.describe() == "normal(mean=0, sd=0.5) within [-1, 1]"
    assert again.to_dict()["lower"] == -1.0


def test_prior_without_mass_between_the_bounds_is_a_located_error():
    prior = build_prior(Prior("halfnormal", {"scale": 1.0}))
    with pytest.raises(InputError, match="puts no probability between the bounds"):
        prior.truncated(-3.0, -1.0)


finite = st.floats(-50, 50, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(family=st.sampled_from(sorted(FAMILIES)), a=finite, width=st.floats(0.01, 30), x=st.floats(-1e3, 1e3))
def test_log_prior_is_minus_infinity_outside_the_bounds(family, a, width, x):
    base = build_prior(Prior(family, FAMILIES[family][0]))
    s_lo, s_hi = base.support()
    lo, hi = a, a + width
    if not (max(lo, s_lo) < min(hi, s_hi)):
        return
    try:
        prior = base.truncated(lo, hi)
    except InputError:  # no representable mass between the bounds (far tail)
        return
    value = float(prior.log_density(np.array([x]))[0])
    if x < lo or x > hi:
        assert value == -math.inf
    else:
        assert value <= -math.inf or math.isfinite(value)
        assert value == -math.inf or x >= s_lo


def test_campaign_pka_prior_is_truncated_to_the_model_file_bounds():
    from speciakin.pipeline.posterior import campaign_priors

    class Stub:  # campaign_priors reads only the model source and the fitted parameters
        pass

    from speciakin.pipeline.objective import FittedParameter

    model = small_model()
    stub = Stub()
    stub.model = model
    stub.parameters = [FittedParameter("pKa[S.N_b]", "pKa_S_N_b", "quantity", 0, 5.2, True, 0.0, -1.0, 1.0,
                                       "pK units (shift)"),
                       FittedParameter("log10k[acyl_b]", "k", "quantity", 1, 0.0, False, 0.0, -3.0, 3.0, "-",
                                       Prior("normal", {"mean": 0.0, "sd": 5.0}))]
    pka, rate = campaign_priors(stub)
    assert pka.support() == (-1.0, 1.0) and rate.support() == (-3.0, 3.0)
    assert np.isneginf(pka.log_density(np.array([1.01, -300.0]))).all()


def test_walkers_never_leave_the_model_file_bounds():
    # The likelihood pulls hard toward values far outside the bounds (a normal
    # likelihood centred at +5 and -400 (sd 0.3 and 2) with the bounds [-1, 1] and [-3, 3]); with
    # truncated priors every stored position of every walker stays inside.
    priors = [build_prior(Prior("normal", {"mean": 0.0, "sd": 0.5})).truncated(-1.0, 1.0),
              build_prior(Prior("student_t", {"degrees_of_freedom": 3, "mean": 0.0,
                                              "scale": 5.0})).truncated(-3.0, 3.0)]
    centre = np.array([5.0, -400.0])

    def log_likelihood(theta):
        return -0.5 * np.sum(((np.atleast_2d(theta) - centre) / np.array([0.3, 2.0])) ** 2, axis=1)

    result = sample_posterior(log_likelihood, ["shift", "rate"], priors, np.array([0.9, -2.9]),
                              np.array([0.05, 0.1]), n_walkers=16, n_steps=400, seed=4, progress=False)
    chain = result.chain
    assert np.all(chain[..., 0] >= -1.0) and np.all(chain[..., 0] <= 1.0)
    assert np.all(chain[..., 1] >= -3.0) and np.all(chain[..., 1] <= 3.0)
    # the mass does pile up at the upper/lower bound, as the likelihood says
    assert np.median(result.samples[:, 0]) > 0.8 and np.median(result.samples[:, 1]) < -2.5
