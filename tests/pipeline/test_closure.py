"""Area% samples closed to 100 %: which count, and the whitening of their residuals."""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.estimation.leastsq import fit_least_squares
from speciakin.pipeline.closure import closed_covariance, closed_samples, closure_whitening


def _one_sample(y, sigma, area=True, censored=False):
    k = len(y)
    closed = closed_samples(np.zeros(k, np.int64), 1, np.asarray(y, float), np.full(k, area),
                            np.full(k, censored), np.asarray(sigma, float))
    assert closed.shape == (1,)
    return bool(closed[0])


def test_only_complete_area_samples_summing_to_100_count():
    assert _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4])
    # values to two decimals may miss 100 by 0.005 each, to one decimal by 0.05 each
    assert _one_sample([50.01, 30.0, 19.98], [1.0, 0.6, 0.4])
    assert not _one_sample([50.11, 30.0, 19.98], [1.0, 0.6, 0.4])
    assert _one_sample([50.1, 30.1, 19.9], [1.0, 0.6, 0.4])
    assert not _one_sample([50.1, 30.2, 19.9], [1.0, 0.6, 0.4])
    # unrounded values that only happen to sum to about 100 (independent noise, not closed)
    assert not _one_sample([50.0123456, 30.0054321, 19.9876543], [1.0, 0.6, 0.4])
    # peak areas turned into area% by the objective sum to 100 up to rounding of the division
    areas = np.array([123.4, 56.7, 8.9])
    assert _one_sample(100.0 * areas / areas.sum(), [1.0, 0.6, 0.4])
    # a missing peak's share, a value below the LOQ, a concentration, a zero sd, a single peak: not closed
    assert not _one_sample([50.5, 30.25, 18.25], [1.0, 0.6, 0.4])
    assert not _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4], censored=True)
    assert not _one_sample([50.0, 30.0, 20.0], [1.0, 0.6, 0.4], area=False)
    assert not _one_sample([50.0, 30.0, 20.0], [1.0, 0.0, 0.4])
    assert not _one_sample([100.0], [1.0])
    # two samples: one closed, one with a value missing (NaN)
    sample = np.array([0, 0, 1, 1])
    y = np.array([60.0, 40.0, 60.0, np.nan])
    closed = closed_samples(sample, 2, y, np.ones(4, bool), np.zeros(4, bool), np.ones(4))
    assert closed.tolist() == [True, False]


def test_a_sample_with_a_value_below_the_loq_is_a_closed_sub_composition():
    # the quantified values may miss 100 by the LOQ of each value below it (and their rounding)
    sample, area = np.zeros(3, np.int64), np.ones(3, bool)
    cens, loq, sigma = np.array([False, False, True]), np.array([np.nan, np.nan, 0.05]), np.array([1.9, 0.12, 0.1])

    def closed(y):
        # with a complete sample (none below the LOQ) that is closed, as the lab's software closes them
        both = np.r_[y, 60.0, 40.0]
        two = np.r_[sample, 1, 1]
        out = closed_samples(two, 2, both, np.r_[area, True, True], np.r_[cens, False, False],
                             np.r_[sigma, 1.2, 0.8], np.r_[loq, np.nan, np.nan])
        assert out[1]
        return bool(out[0])

    assert closed([95.0, 4.97, np.nan]) and closed([95.0, 5.0, np.nan])
    assert not closed([95.01, 4.89, np.nan]) and not closed([95.01, 5.02, np.nan])
    assert not closed_samples(sample, 1, np.array([95.0, 4.97, np.nan]), area, cens, sigma, np.full(3, np.nan))[0]
    # alone, or beside a complete sample that is not closed, it does not count: values that are not
    # closed fall into the window of the LOQs by chance
    assert not closed_samples(sample, 1, np.array([95.0, 4.97, np.nan]), area, cens, sigma, loq)[0]
    assert not closed_samples(np.r_[sample, 1, 1], 2, np.array([95.0, 4.97, np.nan, 60.3, 40.1]),
                              np.ones(5, bool), np.r_[cens, False, False], np.r_[sigma, 1.2, 0.8],
                              np.r_[loq, np.nan, np.nan]).any()
    rows, block, matrix = closure_whitening(sample, np.array([True]), np.array([95.0, 4.97, np.nan]), sigma, cens)
    assert rows.tolist() == [0, 1] and matrix.shape == (2, 2) and np.all(matrix[-1] == 0.0)
    # Monte Carlo: a third peak at 0.03 area% (reported below the LOQ); the sub-composition of the two
    # others, closed to their observed sum, whitens to one residual of unit variance
    y = np.array([94.97, 5.0, 0.03])
    d = np.hypot(0.1, 0.02 * y)
    rng = np.random.default_rng(7)
    closed3 = _close(y + rng.standard_normal((200_000, 3)) * d)
    quantified = closed3[:, :2]
    observed_sum = quantified.sum(axis=1, keepdims=True)
    r = y[:2] * observed_sum / y[:2].sum() - quantified   # the model closed to the observed sum
    _, _, matrix = closure_whitening(sample, np.array([True]), y, d, cens)
    w = r @ matrix.T
    assert np.var(w[:, 0]) == pytest.approx(1.0, rel=0.02)


def _close(noisy):
    return 100.0 * noisy / noisy.sum(axis=1, keepdims=True)


@pytest.mark.parametrize("fractions", [(0.5, 0.3, 0.2), (0.9, 0.05, 0.05), (0.7, 0.2, 0.06, 0.04)])
def test_whitened_residuals_of_a_closed_sample_are_independent_with_unit_variance(fractions):
    # Sample each peak's error before closing, close to 100 %, and whiten the residuals: their
    # covariance must be I (K - 1 values) and the extra one exactly 0; the whitened chi-square must
    # equal r^T Sigma^+ r with numpy's pseudo-inverse and have mean K - 1 (a composition of K parts
    # has K - 1 degrees of freedom: Aitchison 1986, ch. 2).  The covariance is first order in the
    # errors (1-2 % of the values here): agreement to 2 %.
    c = np.array(fractions)
    k = c.size
    y = 100.0 * c
    sigma = np.hypot(0.1, 0.02 * y)  # absolute + relative error model, as in a model file
    rows, block, matrix = closure_whitening(np.zeros(k, np.int64), np.array([True]), y, sigma)
    assert rows.tolist() == list(range(k)) and block.tolist() == [0] * k and matrix.shape == (k, k)
    assert np.all(matrix[-1] == 0.0)
    rng = np.random.default_rng(20261205)
    r = _close(y + rng.standard_normal((200_000, k)) * sigma) - y
    w = r @ matrix.T
    assert np.all(w[:, -1] == 0.0)
    np.testing.assert_allclose(np.cov(w[:, :-1].T), np.eye(k - 1), atol=0.02)
    pinv = np.linalg.pinv(closed_covariance(y, sigma))
    np.testing.assert_allclose(np.sum(w * w, axis=1)[:100], np.einsum("ni,ij,nj->n", r[:100], pinv, r[:100]),
                               rtol=1e-9)
    assert np.mean(np.sum(w * w, axis=1)) == pytest.approx(k - 1, rel=0.02)
    # each value weighed on its own as if independent: its chi-square has the expectation
    # E[e^T A e] = tr(A Sigma) (Searle, "Linear Models", Wiley 1971, ch. 2, theorem 1), which is
    # neither K nor K - 1 in general: such weights are not the likelihood of closed data
    own = np.mean(np.sum((r / sigma) ** 2, axis=1))
    assert own == pytest.approx(np.trace(closed_covariance(y, sigma) / sigma ** 2), rel=0.01)
    assert abs(own - (k - 1)) > 0.05


def _consecutive(k1, k2, t):
    """A -> B -> C, first order, fractions of the start amount (Atkins, Physical Chemistry, consecutive
    reactions: [B] = k1 / (k2 - k1) (exp(-k1 t) - exp(-k2 t)) [A]0)."""
    a = np.exp(-k1 * t)
    b = k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return np.column_stack([a, b, 1.0 - a - b])


def test_weighing_closed_samples_with_their_covariance_calibrates_the_standard_errors():
    # Area% of A, B and C (RRF 1) at 6 times, each peak with an error sd of 0.1 area% + 2 %, closed
    # to 100 and rounded to 0.01 as an HPLC's software reports them; fitted for log10 k1, log10 k2 on
    # 300 seeded copies.  Calibrated standard errors give z = (estimate - truth) / se with standard
    # deviation 1 (its standard error here is about 1 / sqrt(2 * 300) = 0.04).  Weighed with the
    # joint covariance (the objective's way) the standard deviation is within 0.1 of 1; each value
    # weighed on its own gives a wider scatter than its standard errors say.
    from scipy.optimize import least_squares

    t = np.array([2.0, 5.0, 10.0, 20.0, 35.0, 60.0])
    truth = np.log10([0.08, 0.03])
    y_true = 100.0 * _consecutive(*10.0 ** truth, t)
    rng = np.random.default_rng(4107)
    sample = np.repeat(np.arange(t.size), 3)
    z_joint, z_own = [], []
    for _ in range(300):
        noisy = y_true + rng.standard_normal(y_true.shape) * np.hypot(0.1, 0.02 * y_true)
        obs = np.round(_close(noisy), 2).ravel()
        sigma = np.hypot(0.1, 0.02 * obs)
        closed = closed_samples(sample, t.size, obs, np.ones(obs.size, bool), np.zeros(obs.size, bool), sigma)
        assert closed.all()
        rows, _, matrix = closure_whitening(sample, closed, obs, sigma)

        def own(v):
            return (100.0 * _consecutive(*10.0 ** v, t).ravel() - obs) / sigma

        def joint(v):
            return matrix @ (100.0 * _consecutive(*10.0 ** v, t).ravel() - obs)[rows]

        for residual, out in ((own, z_own), (joint, z_joint)):
            fit = least_squares(residual, truth + 0.05, method="lm", xtol=1e-12, ftol=1e-12)
            se = np.sqrt(np.diag(np.linalg.inv(fit.jac.T @ fit.jac)))  # stated errors: no rescaling
            out.append((fit.x - truth) / se)
    sd_joint, sd_own = np.std(z_joint, axis=0), np.std(z_own, axis=0)
    assert np.all(np.abs(sd_joint - 1.0) < 0.1), sd_joint
    assert np.all(sd_own > sd_joint), (sd_own, sd_joint)


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
                                one_sided=np.r_[np.zeros(20, bool), np.ones(2, bool), False],
                                groups=["line"] * 20 + ["limit"] * 2 + ["line"])
    assert reduced.n_inactive == 3
    # the RMS per group leaves the inactive residuals out (a group of them only has no entry)
    assert reduced.group_residual_sd == {"line": {"rms": pytest.approx(np.sqrt(plain.chisqr / 20)), "count": 20}}
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


def test_the_degrees_of_freedom_note_names_closed_samples_and_other_inactive_values():
    # one zero residual per closed sample is among the inactive ones; a fit saved by the version
    # before took a fractional reduction for the closed samples instead
    from speciakin.pipeline.fit import degrees_of_freedom_note, left_out

    x = np.linspace(0.0, 1.0, 12)
    y = 1.0 + 2.0 * x + 0.1 * np.random.default_rng(5).standard_normal(x.size)
    params = [{"name": "a", "value": 0.5}, {"name": "b", "value": 1.0}]
    fit = fit_least_squares(lambda v: np.r_[(y - v[0] - v[1] * x) / 0.1, np.zeros(3)], params, starts=1)
    assert fit.n_inactive == 3 and fit.degrees_of_freedom == 15 - 3 - 2
    assert left_out(fit, 2) == (2.0, 1)
    note = degrees_of_freedom_note(fit, 2)
    assert "2 HPLC samples with area% summing to 100: one value fewer each" in note
    assert "1 value the model meets exactly" in note
    old = fit_least_squares(lambda v: (y - v[0] - v[1] * x) / 0.1, params, starts=1, dof_reduction=1.25)
    assert left_out(old, 2) == (1.25, 0)
    assert degrees_of_freedom_note(old, 2) == " (2 HPLC samples with area% summing to 100: 1.25 fewer)"


def test_the_suggestion_weighs_a_candidates_closed_samples_like_the_campaigns(monkeypatch, tmp_path):
    # The invented example's area% are closed (pipeline.closure), so a candidate run's samples carry
    # the information J^T Sigma^+ J of a closed composition (generalised least squares, Seber and
    # Wild 1989, ch. 2; numpy's pseudo-inverse as the reference), not that of K independent
    # values; the titrant part stays value by value.
    from speciakin.data import example
    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
    from speciakin.pipeline.suggest import candidate_observables, candidate_runs, local_sensitivity

    example.new_example(tmp_path / "example")
    model, campaign, _ = load_inputs(resolve_inputs(tmp_path / "example"))
    objective = make_objective(model, campaign)
    assert objective.closed_samples > 0
    theta = objective.start.copy()
    for name, value in example.TRUTH.items():
        theta[objective.names.index(name)] = value
    draws = theta + 0.01 * np.random.default_rng(2).standard_normal((12, theta.size))
    runs, times = candidate_runs(objective, [{"setpoint_pH": 6.5}], 0, np.array([300.0, 900.0, 1800.0]))
    obs = candidate_observables(objective, draws, runs, times, 0)
    joint = local_sensitivity(objective, obs, draws, runs, times, 0, n_local=2).candidates[0]
    monkeypatch.setattr(objective, "closed_samples", 0)
    own = local_sensitivity(objective, obs, draws, runs, times, 0, n_local=2).candidates[0]
    k, n_hplc = len(obs.columns), obs.n_hplc[0]
    assert k == 3 and n_hplc == 9
    for i, row in enumerate(np.unique(np.linspace(0, 11, 2).round().astype(int))):
        values = obs.values[0][row]
        sd = obs.sd(0, values[None, :])[0]
        for s in range(0, n_hplc, k):
            raw = own[i, s:s + k] * sd[s:s + k, None]
            want = raw.T @ np.linalg.pinv(closed_covariance(values[s:s + k], sd[s:s + k])) @ raw
            got = joint[i, s:s + k].T @ joint[i, s:s + k]
            np.testing.assert_allclose(got, want, rtol=1e-8, atol=1e-12 * np.abs(want).max())
        np.testing.assert_array_equal(joint[i, n_hplc:], own[i, n_hplc:])


def test_whitened_candidate_coordinates_have_unit_independent_noise():
    # closed samples simulated around one composition (two samples of K = 3, then two titrant
    # readings kept as they are): in the whitened coordinates their noise has covariance I, the
    # K - 1 values per sample a ranking that treats observations as independent needs
    from speciakin.pipeline.closure import whitened_candidates

    y = np.array([70.0, 25.0, 5.0, 40.0, 45.0, 15.0])
    rng = np.random.default_rng(11)

    def sd_of(v):
        return np.hypot(0.1, 0.02 * v)

    noisy = np.concatenate([_close(y[:3] + rng.standard_normal((100_000, 3)) * sd_of(y[:3])),
                            _close(y[3:] + rng.standard_normal((100_000, 3)) * sd_of(y[3:])),
                            np.tile([1e-3, 2e-3], (100_000, 1))], axis=1)
    z = whitened_candidates(noisy, 6, 3, sd_of)
    assert z.shape == (100_000, 2 + 2 + 2)
    np.testing.assert_allclose(np.cov(z[:, :4].T), np.eye(4), atol=0.03)
    np.testing.assert_array_equal(z[:, 4:], noisy[:, 6:])
    # a failed draw (NaN) stays NaN and is left out of the sample's mean
    noisy[0, 1] = np.nan
    z2 = whitened_candidates(noisy, 6, 3, sd_of)
    assert np.all(np.isnan(z2[0, :2])) and np.allclose(z2[1:, :2], z[1:, :2], atol=1e-3)


@pytest.mark.parametrize("method", ["linear", "preposterior"])
def test_the_suggestion_ranks_a_closed_campaign_with_every_method(tmp_path, method):
    # the linear and pre-posterior methods see each candidate sample in whitened coordinates
    # (unit sd); the titrant readings keep the error model's sd
    from speciakin.data import example
    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.suggest import candidate_observables, candidate_runs, suggest_for_campaign

    example.new_example(tmp_path / "example")
    model, campaign, _ = load_inputs(resolve_inputs(tmp_path / "example"))
    objective = make_objective(model, campaign)
    fit = fit_campaign(objective, profiles=False)
    theta = np.array([r["value"] for r in fit.rows()])[None, :] + np.zeros((12, 1))
    runs, times = candidate_runs(objective, [{"setpoint_pH": 6.5}], 0, np.array([300.0, 900.0, 1800.0]))
    obs = candidate_observables(objective, theta, runs, times, 0)
    values, sd = obs.ranked()
    n_tit = obs.values[0].shape[1] - obs.n_hplc[0]
    assert values[0].shape[1] == 3 * (3 - 1) + n_tit and n_tit == 3
    np.testing.assert_array_equal(sd(0, values[0])[:, :6], 1.0)
    np.testing.assert_allclose(sd(0, values[0])[:, 6:], obs.sd(0, obs.values[0])[:, 9:])
    result = suggest_for_campaign(objective, fit=fit, n_draws=60, method=method, ph_step=1.0)
    assert result.candidates and all(np.isfinite(c.d_gain) for c in result.candidates)
