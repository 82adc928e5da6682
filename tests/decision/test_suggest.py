"""Pure next-run criteria (decision/suggest.py) against closed forms.

References used below:
- conjugate update of a linear-Gaussian model: posterior covariance
  (S^-1 + J^T R^-1 J)^-1 (Bishop, "Pattern Recognition and Machine Learning",
  Springer 2006, eq. 3.50-3.51; Chaloner and Verdinelli, Statist. Sci. 1995,
  10, 273, section 2.1); its expected information gain
  0.5 log det(I + R^-1/2 J S J^T R^-1/2) (Lindley 1956, Ann. Math. Statist. 27, 986).
- E[Phi(a + bZ)] = Phi(a / sqrt(1 + b^2)) and E[Phi(a + bZ)^2] = Phi2(h, h; b^2/(1+b^2))
  with h = a / sqrt(1 + b^2) (Owen, Commun. Statist. B 1980, 9, 389, formulas
  10,010.8 and 20,010.3; from memory), with scipy's bivariate normal CDF as
  the reference library.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import multivariate_normal, norm

from speciakin.decision.specs import Specification
from speciakin.decision.suggest import (
    DecisionDraws,
    LocalSensitivity,
    credible_width,
    decision_draws,
    draw_edges,
    expected_pass_variance,
    rank_candidates,
    undecided_width,
)


def _linear_case(n: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    cov = np.array([[1.0, 0.3, 0.0], [0.3, 0.5, 0.1], [0.0, 0.1, 2.0]])
    theta = rng.multivariate_normal(np.zeros(3), cov, size=n)
    jac = [np.array([[1.0, 0.0, 0.0], [0.5, 0.5, 0.0]]),      # candidate 0: parameters 1 and 2
           np.array([[0.0, 0.0, 1.0]]),                     # candidate 1: parameter 3 only
           np.array([[0.9, 0.1, 0.0], [0.4, 0.6, 0.0]])]    # candidate 2: like candidate 0
    sd = 0.5
    preds = [theta @ j.T for j in jac]
    return theta, cov, jac, sd, preds


def _exact_gain(cov, jac, sd):
    r = np.eye(jac.shape[0]) * sd ** 2
    post = np.linalg.inv(np.linalg.inv(cov) + jac.T @ np.linalg.inv(r) @ jac)
    gain = 0.5 * np.log(np.linalg.det(np.eye(jac.shape[0]) + jac @ cov @ jac.T / sd ** 2))
    return post, gain


def test_linear_update_equals_conjugate_gaussian_update():
    theta, cov, jac, sd, preds = _linear_case(40000)
    names = ["a", "b", "c"]
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, sd),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=names)
    assert not result.has_decision
    for score in result.candidates:
        post, gain = _exact_gain(cov, jac[score.index], sd)
        # Monte Carlo error of a covariance from 40000 draws: about 1 % (sqrt(2/n) relative)
        assert score.d_gain == pytest.approx(gain, rel=0.03)
        expected_shrink = 1.0 - np.sqrt(np.diag(post) / np.diag(cov))
        np.testing.assert_allclose([score.sd_shrinkage[n] for n in names], expected_shrink, atol=0.02)
    # candidate 1 informs the widest parameter (variance 2) and has the largest exact gain
    gains = [_exact_gain(cov, j, sd)[1] for j in jac]
    assert result.candidates[0].index == int(np.argmax(gains))


def _constant_sensitivity(n: int, cov, jac, sd, edges=None, margins=None) -> LocalSensitivity:
    """The linearisation of a model linear in the parameters: the same at every draw."""
    info = np.repeat(np.linalg.inv(cov)[None], n, axis=0)
    cands = [np.repeat((j / sd)[None], n, axis=0) for j in jac]
    return LocalSensitivity(info, cands, edges, margins)


def test_fisher_update_equals_conjugate_gaussian_update():
    theta, cov, jac, sd, preds = _linear_case(500)
    names = ["a", "b", "c"]
    sens = _constant_sensitivity(40, cov, jac, sd)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, sd),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=names,
                             method="fisher", sensitivity=sens)
    for score in result.candidates:
        post, gain = _exact_gain(cov, jac[score.index], sd)
        # no Monte Carlo in the local update of a linear model: the closed forms up to the
        # numerical ridge of 1e-10 (relative) added before inverting
        assert score.d_gain == pytest.approx(gain, rel=1e-8)
        expected_shrink = 1.0 - np.sqrt(np.diag(post) / np.diag(cov))
        np.testing.assert_allclose([score.sd_shrinkage[n] for n in names], expected_shrink, rtol=1e-8, atol=1e-8)
    gains = [_exact_gain(cov, j, sd)[1] for j in jac]
    assert [s.index for s in result.candidates] == list(np.argsort(gains)[::-1])
    with pytest.raises(ValueError, match="LocalSensitivity"):
        rank_candidates(theta, preds, lambda c, v: np.full(v.shape, sd),
                        [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=names, method="fisher")


def test_preposterior_reweighting_agrees_with_conjugate_update():
    theta, cov, jac, sd, preds = _linear_case(3000, seed=1)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, sd),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["a", "b", "c"],
                             method="preposterior", n_simulated=200, seed=2)
    for score in result.candidates:
        _, gain = _exact_gain(cov, jac[score.index], sd)
        # importance reweighting of 3000 draws, 200 simulated data sets: within 15 % of the exact gain
        assert score.d_gain == pytest.approx(gain, rel=0.15)
        assert score.effective_draws > 100


def test_greedy_batch_picks_the_complementary_run():
    theta, cov, jac, sd, preds = _linear_case(20000, seed=3)
    # candidate 2 repeats candidate 0 exactly; candidate 1 (noise sd 1.0) informs the third
    # parameter.  Exact gains (Lindley): singles 1.084, 0.549, 1.084 nats; pair 0+2: 1.492,
    # pair 0+1: 1.632, so the greedy second run is 1 although it ranks last alone.
    jac[2] = jac[0]
    preds[2] = preds[0].copy()
    noise = [sd, 1.0, sd]
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["a", "b", "c"],
                             batch=2)
    singles = [s.index for s in result.candidates]
    assert singles.index(1) == 2
    assert [s.index for s in result.batch] == [singles[0], 1]
    stacked = np.vstack([jac[0], jac[1] * sd / 1.0])
    assert result.batch[1].d_gain == pytest.approx(_exact_gain(cov, stacked, sd)[1], rel=0.03)
    assert result.batch[1].d_gain == pytest.approx(1.632, rel=0.03)


@pytest.mark.parametrize("p, r2", [(0.5, 0.3), (0.2, 0.6), (0.93, 0.1), (0.04, 0.9)])
def test_expected_pass_variance_closed_form(p, r2):
    z0 = norm.ppf(p)
    # Owen 1980: E[Phi(a + bZ)^2] = Phi2(z0, z0; r2) here (a, b as in the docstring); E[p'] = p
    second = multivariate_normal(mean=[0, 0], cov=[[1, r2], [r2, 1]]).cdf([z0, z0])
    expected = p - second
    got = expected_pass_variance(np.array([p]), np.array([r2]))[0]
    assert got == pytest.approx(expected, abs=2e-4)
    assert got <= p * (1 - p) + 1e-12
    # nothing explained: unchanged; p = 0 or 1: nothing to decide
    assert expected_pass_variance(np.array([p, 0.0, 1.0]), np.array([0.0, 0.5, 0.5])) == \
        pytest.approx([p * (1 - p), 0.0, 0.0])


def test_undecided_width_by_hand():
    # p rises linearly from 0 to 1 over [0, 1]: 4 * integral p (1 - p) = 4 / 6 (exact for the
    # quadratic with a fine grid; trapezoid error ~ h^2)
    x = np.linspace(-1, 2, 3001)
    p = np.clip(x, 0, 1)
    assert undecided_width(x, p) == pytest.approx(2.0 / 3.0, abs=1e-5)
    assert undecided_width(x, np.where(x > 0.5, 1.0, 0.0)) == pytest.approx(0.0, abs=2e-3)


def test_draw_edges_by_hand():
    ph = np.array([3.0, 4.0, 5.0, 6.0, 7.0])
    margin = np.array([[-1.0, 1.0, 2.0, 1.0, -3.0],     # crosses 0 at 3.5 and 6.25
                       [-1.0, -0.5, 1.0, 3.0, 1.0],     # 4 + 0.5/1.5 = 4.333..., open to the grid end
                       [-1.0, -1.0, -1.0, -1.0, -1.0]])  # never passes: zero width at the anchor
    decision = DecisionDraws(ph, margin > 0, margin, anchor=2)
    edges = draw_edges(decision)
    np.testing.assert_allclose(edges, [[3.5, 6.25], [4.0 + 0.5 / 1.5, 7.0], [5.0, 5.0]])


def test_decision_draws_margin_sign_and_anchor():
    spec = Specification("percent", ("P",), ">=", 60.0)
    upper = Specification("percent", ("Q",), "<=", 10.0)
    ph = np.array([4.0, 5.0, 6.0])
    out = np.zeros((2, 3, 2))
    out[..., 0] = [[50, 70, 80], [59, 61, 90]]
    out[..., 1] = [[5, 5, 20], [5, 5, 5]]
    d = decision_draws(ph, out, [spec, upper], ["P", "Q"])
    np.testing.assert_array_equal(d.passes, [[False, True, False], [False, True, True]])
    assert np.array_equal(d.margin > 0, d.passes)
    # margin relative to the limit's size: (70 - 60) / 60 and (10 - 20) / 10
    assert d.margin[0, 1] == pytest.approx(min(10 / 60, 5 / 10))
    assert d.margin[0, 2] == pytest.approx(-1.0)
    assert d.anchor == 1


def test_credible_width_weighted_equals_unweighted_for_equal_weights():
    x = np.random.default_rng(4).normal(size=2001)
    assert credible_width(x, np.ones_like(x)) == pytest.approx(credible_width(x), abs=0.02)
    assert credible_width(x) == pytest.approx(2 * norm.ppf(0.95), abs=0.15)


def _toy_decision(spread: float, n: int = 600, seed: int = 5):
    """Window edge at pH = theta[0] (one parameter), process passes below it."""
    rng = np.random.default_rng(seed)
    theta = np.column_stack([7.0 + spread * rng.standard_normal(n), rng.standard_normal(n)])
    ph = np.linspace(3, 10, 29)
    margin = theta[:, [0]] - ph[None, :]
    decision = DecisionDraws(ph, margin > 0, margin, anchor=4)
    # candidate runs measure theta[0] at different precisions, or only the nuisance theta[1]
    preds = [theta[:, [0]], theta[:, [0]], theta[:, [1]]]
    noise = [0.05, 0.5, 0.05]
    return theta, decision, preds, noise


def test_decision_criteria_rank_the_run_that_pins_the_edge():
    theta, decision, preds, noise = _toy_decision(spread=0.8)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["edge", "other"],
                             decision=decision)
    assert [c.index for c in result.candidates] == [0, 1, 2]
    assert result.helps and "Run pH 0.00 next" in result.message
    assert result.moving == ["edge"]
    top = result.candidates[0]
    # linear-Gaussian: sd of the edge after measuring it with sd 0.05 is
    # 0.8 * 0.05 / sqrt(0.8^2 + 0.05^2); the width scales with the sd
    ratio = 0.05 / np.hypot(0.8, 0.05)
    assert top.edge_width_after[1] == pytest.approx(top.edge_width_before[1] * ratio, rel=0.05)
    assert result.candidates[2].edge_reduction == pytest.approx(0.0, abs=0.03)
    data = result.to_dict()
    assert data["candidates"][0]["conditions"]["setpoint_pH"] == 0.0
    assert data["candidates"][0]["expected"]["window_edge_credible_width_pH"]["high"]["reduction"] > 1.0


def _toy_sensitivity(theta, decision, noise, n: int = 40) -> LocalSensitivity:
    """Exact linearisation of the toy decision: edge = theta[0], margin = theta[0] - pH, the
    candidates observe theta[0] or theta[1] directly; information of the current data = the
    inverse of the draws' covariance (a Gaussian posterior)."""
    cov = np.cov(theta.T)
    unit = [np.array([[1.0, 0.0]]), np.array([[1.0, 0.0]]), np.array([[0.0, 1.0]])]
    edges = np.zeros((n, 2, 2))
    edges[:, 1, 0] = 1.0                                   # only the high edge moves, with theta[0]
    margins = np.zeros((n, decision.ph.size, 2))
    margins[:, :, 0] = 1.0
    return LocalSensitivity(np.repeat(np.linalg.inv(cov)[None], n, axis=0),
                            [np.repeat((u / s)[None], n, axis=0) for u, s in zip(unit, noise)], edges, margins)


def test_fisher_update_of_the_toy_decision_by_hand():
    theta, decision, preds, noise = _toy_decision(spread=0.8)
    sens = _toy_sensitivity(theta, decision, noise)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["edge", "other"],
                             decision=decision, method="fisher", sensitivity=sens)
    assert [c.index for c in result.candidates] == [0, 1, 2]
    assert result.helps
    sd = np.std(theta[:, 0], ddof=1)
    # conjugate update of the edge sd after measuring it with sd s: sd * s / sqrt(sd^2 + s^2)
    # (Bishop 2006, eq. 3.50-3.51); the draws' credible width scales with the sd ratio
    for c, s in ((0, 0.05), (1, 0.5)):
        score = next(x for x in result.candidates if x.index == c)
        assert score.edge_width_after[1] == pytest.approx(score.edge_width_before[1] * s / np.hypot(sd, s),
                                                          rel=1e-6)
    # the nuisance run informs the edge only through the draws' sample correlation of the two
    # parameters (about 1 / sqrt(600)): next to nothing
    last = result.candidates[2]
    assert last.edge_reduction == pytest.approx(0.0, abs=0.01)
    assert last.undecided_reduction == pytest.approx(0.0, abs=1e-3)


def test_a_pinned_decision_reports_that_no_run_helps_much():
    theta, decision, preds, noise = _toy_decision(spread=0.01)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["edge", "other"],
                             decision=decision)
    assert not result.helps
    assert result.message.startswith("No candidate helps much")
    assert "threshold 0.1 pH" in result.message


def test_bad_arguments():
    theta, decision, preds, noise = _toy_decision(spread=0.5)
    sd = lambda c, v: np.ones_like(v)  # noqa: E731
    with pytest.raises(ValueError, match="method"):
        rank_candidates(theta, preds, sd, [{"setpoint_pH": 1.0}] * 3, parameter_names=["a", "b"], method="x")
    with pytest.raises(ValueError, match="one prediction array"):
        rank_candidates(theta, [], sd, [], parameter_names=["a", "b"])
    with pytest.raises(ValueError, match="n_draws >= 10"):
        rank_candidates(theta[:3], [p[:3] for p in preds], sd, [{"setpoint_pH": 1.0}] * 3,
                        parameter_names=["a", "b"])


def test_a_candidate_whose_simulations_fail_is_not_judged():
    theta, decision, preds, noise = _toy_decision(spread=0.8)
    preds[0] = preds[0].copy()
    preds[0][::2] = np.nan                       # half the draws failed, plus one more
    preds[0][1] = np.nan
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["edge", "other"],
                             decision=decision)
    failed = next(c for c in result.candidates if c.index == 0)
    assert failed.reason.startswith("not judged") and failed.edge_reduction == 0.0
    assert result.candidates[0].index == 1


def test_shrinkage_figure_is_a_png():
    from speciakin.report.figures.suggest import suggest_shrinkage_figure

    theta, decision, preds, noise = _toy_decision(spread=0.8)
    result = rank_candidates(theta, preds, lambda c, v: np.full(v.shape, noise[c]),
                             [{"setpoint_pH": float(i)} for i in range(3)], parameter_names=["edge", "other"],
                             decision=decision)
    curves = result.by_ph()
    np.testing.assert_array_equal(curves["ph"], [0.0, 1.0, 2.0])
    assert curves["edge_high"][0] == pytest.approx(result.candidates[0].edge_width_before[1]
                                                   - result.candidates[0].edge_width_after[1])
    png = suggest_shrinkage_figure(curves["ph"], curves["edge_low"], curves["edge_high"], curves["undecided"],
                                   curves["d_gain"], min_gain=0.1, best_ph=0.0)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


def test_a_reason_says_how_much_smaller_the_standard_deviation_gets():
    # a shrinkage of 0.06 (sd after / before = 0.94) reads as "6 % smaller", not as a negative standard deviation
    from speciakin.decision.suggest.rank import _reason
    from speciakin.decision.suggest.result import CandidateScore

    score = CandidateScore(0, {}, None, None, None, None, 0.0, 0.0, {"a": 0.06, "b": 0.01})
    assert _reason(score, ["a", "b"], has_decision=False) == \
        "expected to mostly inform a (its standard deviation 6 % smaller)"
    quiet = CandidateScore(0, {}, None, None, None, None, 0.0, 0.0, {"a": 0.01})
    assert _reason(quiet, ["a"], has_decision=False).startswith("expected to change little")
