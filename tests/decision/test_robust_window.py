"""One robust window: per-draw edges refined by bisection to 0.01 pH on a coarse
grid, checked against a brute-force fine scan of the closed-form truth; curve,
band, text and JSON give the same numbers."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from decision_synthetic import NAMES, TRUTH, closed_form, outcome_fn
from speciakin.decision import Specification, WindowResult, compute_window, evaluate_specs
from speciakin.decision.refine import coverage, level_set, shrink_intervals

SPECS = [Specification("percent", ("PB",), ">=", 90.0), Specification("percent", ("S",), "<=", 1.0)]
COARSE = np.round(np.arange(2.0, 8.0001, 0.5), 10)       # 0.5 pH step: 50 x the resolution
FINE_STEP = 1e-4


def draws(n=120, sd=0.06, seed=3):
    return TRUTH + sd * np.random.default_rng(seed).standard_normal((n, TRUTH.size))


def brute_force_sets(theta, tolerance, level, confidence=None):
    """Window and robust set by a brute-force scan of the closed form every 1e-4 pH:
    p(x) = share passing at x; r(x) = share passing at every fine point within
    [x - tol, x + tol] inside the scanned range.  With ``confidence`` a point is
    claimed where the one-sided Clopper-Pearson lower bound of the share is
    >= level (beta quantile, scipy.stats.beta; Clopper and Pearson, Biometrika 1934)."""
    from scipy import stats

    fine = np.round(np.arange(COARSE[0], COARSE[-1] + FINE_STEP / 2, FINE_STEP), 10)
    ok = evaluate_specs(closed_form(theta, fine), SPECS, NAMES)           # (n, n_fine)
    w = int(round(tolerance / FINE_STEP))
    # a point passes robustly when the whole window of 2w+1 fine points passes
    fails = np.concatenate([np.zeros((ok.shape[0], 1), int), np.cumsum(~ok, axis=1)], axis=1)
    robust = np.zeros_like(ok)
    idx = np.arange(w, fine.size - w)
    robust[:, idx] = (fails[:, idx + w + 1] - fails[:, idx - w]) == 0

    def edges(mask):
        k, n = mask.sum(axis=0), mask.shape[0]
        if confidence is None:
            share = k / n >= level - 1e-12
        else:
            share = (k > 0) & (stats.beta.ppf(1 - confidence, np.maximum(k, 1), n - k + 1) >= level - 1e-12)
        where = np.flatnonzero(share)
        runs = np.split(where, np.flatnonzero(np.diff(where) > 1) + 1) if where.size else []
        return [(fine[r[0]], fine[r[-1]]) for r in runs]
    return edges(ok), edges(robust)


@pytest.mark.parametrize("level, tolerance, confidence", [(0.95, 0.3, 0.95), (0.8, 0.2, 0.95), (0.95, 0.3, None),
                                                       (0.8, 0.2, None)])
def test_bisection_reaches_the_resolution_on_a_coarse_grid(level, tolerance, confidence):
    # with and without the Monte Carlo guard (120 draws: enough for it at both levels)
    theta = draws()
    result = compute_window(outcome_fn, theta, COARSE, SPECS, level, tolerance, outcome_names=NAMES,
                            mc_confidence=confidence)
    assert result.mc_confidence == confidence
    window_ref, robust_ref = brute_force_sets(theta, tolerance, level, confidence)
    assert len(result.windows) == len(window_ref) == 1
    assert len(result.robust_windows) == len(robust_ref) == 1
    for got, ref in ((result.windows[0], window_ref[0]), (result.robust_windows[0], robust_ref[0])):
        # within 0.01 pH (+ the reference's own step) of the brute-force edges, and on the
        # safe side: the refined set never reaches beyond the reference set
        assert abs(got[0] - ref[0]) <= 0.01 + FINE_STEP and abs(got[1] - ref[1]) <= 0.01 + FINE_STEP
        assert got[0] >= ref[0] - FINE_STEP and got[1] <= ref[1] + FINE_STEP
    assert result.resolution == 0.01 and result.n_refinement_simulations > 0


def test_curve_band_text_and_json_show_the_same_robust_window():
    theta = draws(seed=8)
    result = compute_window(outcome_fn, theta, COARSE, SPECS, 0.9, 0.3, outcome_names=NAMES)
    assert result.robust_windows and result.robust_windows_per_draw == result.robust_windows
    x, r = result.curve_ph, result.curve_robust_probability
    inside = np.zeros(x.shape, bool)
    for a, b in result.robust_windows:
        inside |= (x >= a) & (x <= b)
    # inside the shaded band the plotted curve is at or above the level everywhere;
    # outside it is below (the band is exactly the curve's level set)
    assert np.all(r[inside] >= 0.9 - 1e-12)
    assert np.all(r[~inside] < 0.9)
    p = result.curve_probability
    win = np.zeros(x.shape, bool)
    for a, b in result.windows:
        win |= (x >= a) & (x <= b)
    assert np.all(p[win] >= 0.9 - 1e-12) and np.all(p[~win] < 0.9)
    # the robust probability is never above the pointwise one
    assert np.all(r <= p + 1e-12)
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    assert [tuple(w) for w in data["robust_windows"]] == result.robust_windows
    back = WindowResult.from_dict(data)
    np.testing.assert_array_equal(back.curve_robust_probability, r)
    text = result.report()
    for a, b in result.robust_windows:
        assert f"pH {a:.2f} to {b:.2f}" in text


def test_level_set_and_coverage_by_hand():
    # three draws; share >= 2/3 where at least two intervals overlap
    intervals = [[(1.0, 4.0)], [(2.0, 5.0)], [(3.0, 3.5), (4.5, 6.0)]]
    assert level_set(intervals, 0.6) == [(2.0, 4.0), (4.5, 5.0)]
    assert level_set(intervals, 0.99) == [(3.0, 3.5)]
    np.testing.assert_allclose(coverage(intervals, [0.5, 1.5, 3.2, 4.7]), [0, 1 / 3, 1, 2 / 3])
    assert shrink_intervals(intervals, 0.5) == [[(1.5, 3.5)], [(2.5, 4.5)], [(5.0, 5.5)]]


interval = st.tuples(st.floats(0, 10), st.floats(0, 3)).map(lambda t: (t[0], t[0] + t[1]))


@settings(max_examples=100, deadline=None)
@given(rows=st.lists(st.lists(interval, max_size=3).map(
           lambda ivs: [iv for k, iv in enumerate(sorted(ivs))
                        if all(iv[0] > other[1] for other in sorted(ivs)[:k])]), min_size=1, max_size=12),
       level=st.floats(0.05, 1.0), x=st.lists(st.floats(-1, 14), min_size=1, max_size=30))
def test_level_set_is_where_the_coverage_reaches_the_level(rows, level, x):
    # property: away from the interval ends, x lies in level_set exactly when the share of rows
    # covering x is >= level (definition of the level set of a step function)
    found = level_set(rows, level)
    ends = np.array([e for row in rows for iv in row for e in iv] or [np.inf])
    for v in x:
        if np.min(np.abs(ends - v)) < 1e-6:
            continue
        inside = any(a <= v <= b for a, b in found)
        assert inside == (coverage(rows, [v])[0] >= level - 1e-9)


def test_monte_carlo_guard_counts_by_hand():
    from scipy import stats

    from speciakin.decision.montecarlo import claim_count, lower_bound, minimum_draws

    # all n pass: the one-sided Clopper-Pearson bound is (1 - confidence)^(1/n) in closed form
    for n in (16, 59, 200):
        assert lower_bound(n, n, 0.95) == pytest.approx(0.05 ** (1 / n), rel=1e-10)
    assert minimum_draws(0.95, 0.95) == 59          # 0.05^(1/59) = 0.9505 >= 0.95 > 0.05^(1/58)
    assert claim_count(58, 0.95) is None and claim_count(59, 0.95) == 59
    # 200 draws: 196 is the smallest count whose bound reaches 0.95 (scipy.stats.beta as reference)
    assert claim_count(200, 0.95) == 196
    assert stats.beta.ppf(0.05, 196, 5) >= 0.95 > stats.beta.ppf(0.05, 195, 6)
    assert claim_count(200, 0.95, None) == 190 and claim_count(16, 0.95, None) == 16


def test_too_few_draws_fall_back_to_the_share_and_say_so():
    theta = draws(n=40)
    guarded = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES)
    plain = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES, mc_confidence=None)
    assert guarded.mc_confidence is None and guarded.claim_count == 38
    assert guarded.windows == plain.windows
    assert any("too few to show probability" in w for w in guarded.warnings)
    assert "not applied" in guarded.report()


def test_guard_narrows_the_window_to_where_the_lower_bound_reaches_the_level():
    theta = draws(n=200, seed=5)
    guarded = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES)
    plain = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES, mc_confidence=None)
    assert guarded.mc_confidence == 0.95 and guarded.claim_count == 196
    (a, b), (c, d) = guarded.windows[0], plain.windows[0]
    assert c <= a < b <= d and (a > c or b < d)
    # the plotted curve is the lower bound: it crosses the level exactly at the guarded edges
    x, p = guarded.curve_ph, guarded.curve_probability
    inside = (x >= a) & (x <= b)
    assert np.all(p[inside] >= 0.95) and np.all(p[~inside] < 0.95)
    assert "196 of 200 draws pass" in guarded.report()


def test_best_set_point_says_when_its_probability_is_the_guards_lower_bound():
    # with the guard on, the best set point's number is the one-sided Clopper-Pearson bound
    # (all 200 draws passing give 0.05^(1/200) = 0.985, closed form), not the share of draws (1.000),
    # so the text must name it a lower bound; without the guard it is the share itself
    theta = draws(n=200, seed=5)
    guarded = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES)
    plain = compute_window(outcome_fn, theta, COARSE, SPECS, 0.95, 0.3, outcome_names=NAMES, mc_confidence=None)
    assert guarded.best_probability == pytest.approx(0.05 ** (1 / 200), rel=1e-9)
    assert plain.best_probability == 1.0
    assert "at least" in guarded.best_probability_text() and "0.95 Monte Carlo lower bound" in guarded.report()
    assert plain.best_probability_text() == f"probability {plain.best_probability:.3f}"
    assert "lower bound" not in plain.best_probability_text()
