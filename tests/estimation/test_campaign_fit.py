"""fit_campaign: recovery of known constants, open profiles of undetermined parameters,
model ranking, and the saved result.

Synthetic campaigns from known truth with a seeded numpy.random.default_rng
(tests/estimation/campaign_synthetic.py; INVENTED model and numbers).
"""

import json

import numpy as np
import pytest
from scipy import stats

from speciakin.pipeline.fit import CampaignFitResult, fit_campaign
from speciakin.estimation.comparison import compare_models
from speciakin.pipeline.objective import CampaignObjective

from .campaign_synthetic import (DOUBLE_COMPOUNDS, SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model,
                                 synthetic_campaign)

#: The truth on the fitted scale, in fit order: pKa shift of N_b (5.0 - 5.2), log10 k_a, log10 k_b.
#: The model file's values are the starts: shift 0 (+0.2 off), log10 30 (+0.48 off), log10 0.3 (-0.52 off).
THETA_TRUE = np.array([-0.2, 1.0, 0.0])


@pytest.fixture(scope="module")
def recovery():
    model = small_model()
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=101)
    objective = CampaignObjective(model, campaign, parallel=False)
    return fit_campaign(objective, starts=1, profiles=True)


def test_recovery_truth_inside_both_intervals(recovery):
    # Truth from which the data were simulated lies inside the 95 % covariance and profile intervals
    # (Raue et al., Bioinformatics 2009, 25, 1923; Bates and Watts 1988, section 6.1).  A single seeded
    # dataset: each interval misses with probability 0.05, so this seed was not chosen after the fact
    # and a failure here after a code change is a real signal to look at.
    fit = recovery
    assert fit.fit.success
    assert fit.names == ["pKa[S.N_b]", "log10k[acyl_a]", "log10k[acyl_b]"]
    for row, true in zip(fit.rows(), THETA_TRUE):
        lo, hi = row["covariance_interval"]
        assert lo <= true <= hi, (row["name"], lo, true, hi)
        plo, phi = row["profile_interval"]
        assert plo is not None and phi is not None
        assert plo <= true <= phi, (row["name"], plo, true, phi)
    # the shift is also reported as the pKa it implies: 5.2 + shift
    assert fit.rows()[0]["implied_value"] == pytest.approx(5.2 + fit.theta[0], abs=1e-12)
    # residuals scatter like the stated error (reduced chi-square near 1; chi-square with 93 d.o.f. has
    # a 99.9 % range of about [0.57, 1.52] x 93 (scipy.stats.chi2))
    assert 0.5 < fit.fit.reduced_chisqr < 1.6
    assert not any("cannot determine" in w for w in fit.warnings)
    assert not any("stated errors look too large" in w for w in fit.warnings)


def test_recovery_precision_low_noise():
    # With ten times smaller noise the fit lands within 0.01 (log10 / pK units) of the truth from starts
    # offset by about 0.2-0.5 units.  Stated precision: 0.01 is more than ten standard errors here.
    model = small_model()
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS,
                                  noise=(0.01, 0.002), seed=5, titrant_noise=False)
    result = fit_campaign(CampaignObjective(model, campaign, parallel=False), starts=1, profiles=False)
    assert result.fit.success
    np.testing.assert_allclose(result.theta, THETA_TRUE, rtol=0, atol=0.01)
    assert result.profiles == {}
    assert "not computed" in result.report()
    # the data scatter about ten times less than the model file's error model says: chi-square far
    # below the 0.1 % quantile of chi-square with its degrees of freedom (scipy.stats.chi2), so the
    # fit says the stated errors look too large and what that does to the posterior and the window
    dof = result.fit.n_residuals - result.fit.n_varying
    assert result.fit.chisqr < stats.chi2.ppf(0.001, dof)
    said = [w for w in result.warnings if "stated errors look too large" in w]
    assert len(said) == 1
    assert f"reduced chi-square {result.fit.reduced_chisqr:.3g}" in said[0] and "on the safe side" in said[0]


def test_overstated_errors_warning_at_the_chi_square_quantile():
    # the limit is the 0.1 % quantile of chi-square (scipy.stats.chi2.ppf), on either side of it
    from speciakin.pipeline.fit import overstated_errors_warning

    limit = stats.chi2.ppf(0.001, 93)
    assert overstated_errors_warning(limit * 0.999, 93) is not None
    assert overstated_errors_warning(limit * 1.001, 93) is None
    assert overstated_errors_warning(0.0, 0) is None


def test_undetermined_parameter_has_open_profile():
    # Hydroxide path of reagent hydrolysis with runs only at pH 5 and 6: k_OH [OH-] is below 2e-6 1/s for
    # any k_OH up to about 20 L/(mol*s), against 3e-4 1/s for water (k_hyd = k_w + k_OH [OH-],
    # the usual rate law of hydrolysis by water and hydroxide); nothing in the data pins log10 k_OH down
    # from below.  Raue et al. 2009: a profile that never reaches the threshold is an open
    # (non-identifiable) interval and must not be reported as a number.
    model = small_model(fit_pka=False, fit_kb=False, fit_hydrolysis_oh=True, setpoints=(5.0, 6.0))
    campaign = synthetic_campaign(model, model.runs, {"log10k[acyl_a]": 1.0}, SAMPLE_TIMES, SMALL_COMPOUNDS,
                                  seed=7)
    result = fit_campaign(CampaignObjective(model, campaign, parallel=False), starts=1, profiles=True,
                          profile_points=8)
    rows = {r["name"]: r for r in result.rows()}
    k_oh = rows["log10k[hydrolysis_hydroxide_ANH]"]
    assert k_oh["profile_open_below"] is True
    assert k_oh["profile_interval"][0] is None
    assert any("log10k[hydrolysis_hydroxide_ANH]" in w and ("cannot determine" in w or "no lower limit" in w)
               for w in result.warnings), result.warnings
    assert "open" in result.report()
    # the well-determined rate constant keeps a closed profile interval, near its truth (within 0.05
    # log10 units; whether the 95 % interval holds the truth is a coverage question, tested in
    # test_campaign_coverage.py: with this seed it narrowly misses, as 1 dataset in 20 should)
    k_a = rows["log10k[acyl_a]"]
    assert not k_a["profile_open_below"] and not k_a["profile_open_above"]
    lo, hi = k_a["profile_interval"]
    assert lo < k_a["value"] < hi and hi - lo < 0.1
    assert abs(k_a["value"] - 1.0) < 0.05
    # JSON form keeps the open end as null, never a number
    data = json.loads(result.to_json())
    saved = {p["name"]: p for p in data["parameters"]}
    assert saved["log10k[hydrolysis_hydroxide_ANH]"]["profile_interval"][0] is None


def test_model_comparison_prefers_true_mechanism():
    # Data generated WITH the second acylation (PA -> PD, k = 1 L/(mol*s), invented).  The model with
    # that step must rank first by AIC and BIC with most of the Akaike weight (Burnham and Anderson,
    # "Model Selection and Multimodel Inference", 2nd ed., 2002, section 2.9).
    truth = {**SMALL_TRUTH, "log10k[double_a]": 0.0}
    with_double = small_model(double=True, fit_pka=False, fit_kb=False)
    without = small_model(double=False, fit_pka=False, fit_kb=False)
    truth_fixed_pka = {k: v for k, v in truth.items() if not k.startswith("pKa")}
    campaign = synthetic_campaign(with_double, with_double.runs, truth_fixed_pka, SAMPLE_TIMES, DOUBLE_COMPOUNDS,
                                  seed=13)
    fits = {name: fit_campaign(CampaignObjective(m, campaign, parallel=False), starts=1, profiles=False).fit
            for name, m in (("with second acylation", with_double), ("without", without))}
    ranking = compare_models(fits)
    assert ranking.names[0] == "with second acylation"
    assert ranking.akaike_weights[0] > 0.99
    assert ranking.bic_weights[0] > 0.99
    assert ranking.delta_aic[1] > 10.0  # "essentially no support" (Burnham and Anderson 2002, p. 70)


def test_result_json_round_trip(recovery):
    data = recovery.to_dict()
    text = json.dumps(data, allow_nan=False, default=_plain)
    again = CampaignFitResult.from_dict(json.loads(text))
    assert again.names == recovery.names
    np.testing.assert_allclose(again.theta, recovery.theta, rtol=1e-12)
    np.testing.assert_allclose(again.covariance, recovery.covariance, rtol=1e-12)
    assert set(again.profiles) == set(recovery.profiles)
    assert json.dumps(again.to_dict(), allow_nan=False, default=_plain, sort_keys=True) == \
        json.dumps(json.loads(text), allow_nan=False, sort_keys=True)
    assert again.report() == recovery.report()
    # to_json (the saved form) is strict JSON as well
    json.loads(recovery.to_json())


def _plain(value):
    """numpy scalars/arrays to plain JSON (to_dict promises JSON-ready, so ideally never called)."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"not JSON-ready: {type(value).__name__}")


def test_to_dict_is_json_ready_without_help(recovery):
    # to_dict() promises JSON-ready output: plain json.dumps with no default hook and no NaN
    json.dumps(recovery.to_dict(), allow_nan=False)


def test_report_headings(recovery):
    text = recovery.report()
    for heading in ("Campaign fit", "Fit statistics", "Parameters", "Residuals by run and observable", "Warnings"):
        assert heading in text
