"""compute_window on a synthetic closed-form truth (see decision_synthetic.py)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from decision_synthetic import NAMES, TRUTH, closed_form, outcome_fn
from speciakin.decision import (
    COVARIANCE_SOURCE,
    REPORT_HEADINGS,
    Specification,
    WindowResult,
    compute_window,
    evaluate_specs,
)
from speciakin.decision.result import outcomes_at_best
from speciakin.errors import SolverError

SPECS = [
    Specification("percent", ("PB",), ">=", 90.0, label="desired product"),
    Specification("percent", ("S",), "<=", 1.0, label="remaining substrate"),
]
GRID = np.round(np.arange(2.0, 12.0001, 0.05), 10)


def brute_force_window(params, step=1e-4):
    """Edges of the set where the truth meets every spec, on a very fine grid."""
    fine = np.arange(2.0, 12.0, step)
    ok = evaluate_specs(closed_form(params, fine)[0], SPECS, NAMES)
    idx = np.flatnonzero(ok)
    assert idx.size and np.all(np.diff(idx) == 1), "truth window must be one interval"
    return fine[idx[0]], fine[idx[-1]]


def test_truth_window_matches_brute_force_scan():
    # All draws equal to the truth: p is 0 or 1, so the interpolated edge lies
    # within one grid step of the exact edge found by a brute-force scan.
    draws = np.tile(TRUTH, (5, 1))
    result = compute_window(outcome_fn, draws, GRID, SPECS, 0.95, 0.3, outcome_names=NAMES)
    low, high = brute_force_window(TRUTH)
    assert 2.5 < low < high < 6.0          # the window lies inside the scan
    assert len(result.windows) == 1
    (a, b), = result.windows
    assert abs(a - low) <= 0.05 and abs(b - high) <= 0.05
    assert result.primary_window == (a, b)
    np.testing.assert_array_equal(result.probability_standard_error, 0.0)
    assert result.best_ph is not None and a + 0.3 <= result.best_ph <= b - 0.3
    (ra, rb), = result.robust_windows
    assert ra == pytest.approx(a + 0.3) and rb == pytest.approx(b - 0.3)


def test_truth_window_converges_with_grid_refinement():
    fine = np.round(np.arange(2.0, 12.0001, 0.002), 10)
    result = compute_window(outcome_fn, TRUTH[None, :], fine, SPECS, 0.95, 0.3, outcome_names=NAMES)
    low, high = brute_force_window(TRUTH)
    (a, b), = result.windows
    assert abs(a - low) <= 0.002 and abs(b - high) <= 0.002


def test_wider_posterior_gives_narrower_window():
    # Common random numbers: the same standard normals scaled by a growing sd.
    rng = np.random.default_rng(11)
    z = rng.standard_normal((400, TRUTH.size))
    widths = []
    for sd in (0.0, 0.05, 0.15, 0.3):
        draws = TRUTH + sd * z
        result = compute_window(outcome_fn, draws, GRID, SPECS, 0.95, 0.3, outcome_names=NAMES)
        widths.append(sum(b - a for a, b in result.windows))
    assert all(w1 > w2 for w1, w2 in zip(widths, widths[1:])), widths


def test_bands_contain_the_truth_curve_and_are_ordered():
    rng = np.random.default_rng(5)
    draws = TRUTH + 0.05 * rng.standard_normal((300, TRUTH.size))
    result = compute_window(outcome_fn, draws, GRID, SPECS, outcome_names=NAMES)
    truth = closed_form(TRUTH, GRID)[0]
    for i, name in enumerate(NAMES):
        lo, med, hi = result.outcome_lower[name], result.outcome_median[name], result.outcome_upper[name]
        assert np.all(lo <= med + 1e-12) and np.all(med <= hi + 1e-12)
        # the truth is the centre of the draws: it lies inside the 5-95 % band
        # at most grid points (common practice for a symmetric spread)
        assert np.mean((truth[:, i] >= lo - 1e-9) & (truth[:, i] <= hi + 1e-9)) > 0.9


def test_outcomes_stated_at_the_best_set_point_are_simulated_there():
    # The best set point lies between grid points (a 0.5 pH grid here); the outcomes stated beside it are
    # the closed form's median and 5 / 95 % quantiles over the draws at that very pH (numpy's quantiles of
    # the analytic outcomes), not those of the nearest scanned pH; they survive window.json and are what
    # window.txt prints.
    rng = np.random.default_rng(8)
    draws = TRUTH + 0.05 * rng.standard_normal((200, TRUTH.size))
    grid = np.round(np.arange(2.0, 12.0001, 0.5), 10)
    result = compute_window(outcome_fn, draws, grid, SPECS, 0.95, 0.3, outcome_names=NAMES)
    assert result.best_ph is not None and not np.any(np.isclose(grid, result.best_ph))
    at = np.stack([closed_form(d, np.array([result.best_ph]))[0][0] for d in draws])   # (n_draws, n_out)
    ph, rows = outcomes_at_best(result)
    assert ph == result.best_ph
    for i, (name, median, low, high) in enumerate(rows):
        assert name == NAMES[i]
        np.testing.assert_allclose([median, low, high], np.quantile(at[:, i], [0.5, 0.05, 0.95]), rtol=1e-12)
    back = WindowResult.from_dict(json.loads(json.dumps(result.to_dict())))
    assert outcomes_at_best(back) == (ph, rows)
    assert f"at pH {result.best_ph:.2f}: median" in result.report()
    # a window.json written before the outcomes at the best set point were recorded: the nearest scanned pH
    old = result.to_dict()
    del old["best_outcomes"]
    ph_old, rows_old = outcomes_at_best(WindowResult.from_dict(old))
    k = int(np.argmin(np.abs(grid - result.best_ph)))
    assert ph_old == grid[k]
    assert rows_old[0][1] == pytest.approx(result.outcome_median[NAMES[0]][k])


def test_two_dimensional_map_slice_equals_one_dimensional_scan():
    draws = np.tile(TRUTH, (3, 1))
    taus = [2.2, 2.6, 3.0]
    result = compute_window(outcome_fn, draws, GRID, SPECS, 0.95, 0.3, factor_grid=taus,
                            outcome_names=NAMES, factor_name="log10 tau", factor_unit="-")
    assert result.map_probability.shape == (GRID.size, 3)
    for k, tau in enumerate(taus):
        one = compute_window(lambda d, ph: outcome_fn(d, ph, tau), draws, GRID, SPECS, 0.95, 0.3,
                             outcome_names=NAMES)
        np.testing.assert_array_equal(result.map_probability[:, k], one.probability)
        assert result.map_windows[k] == one.windows
    # a longer reaction (larger tau) converts more at low pH: lower edge moves down
    lows = [w[0][0] for w in result.map_windows]
    assert lows[0] > lows[1] > lows[2]
    assert result.nominal_factor == 2.6


def test_failed_draws_count_as_failing_and_are_reported():
    def flaky(d, ph):
        out = outcome_fn(d, ph)
        out[0, :, 0] = np.nan
        return out
    draws = np.tile(TRUTH, (10, 1))
    result = compute_window(flaky, draws, GRID, SPECS, 0.5, 0.3, outcome_names=NAMES, batch_size=5)
    assert result.n_failed_draws == 2           # first draw of each of the two batches
    assert result.probability.max() == pytest.approx(0.8)
    assert any("non-finite" in w for w in result.warnings)


def test_warnings_no_window_and_edge():
    draws = TRUTH[None, :]
    strict = [Specification("percent", ("PB",), ">=", 99.9)]
    result = compute_window(outcome_fn, draws, GRID, strict, outcome_names=NAMES)
    assert result.windows == [] and result.primary_window is None
    assert any("no pH meets every specification with probability >= 0.95" in w for w in result.warnings)
    loose = [Specification("percent", ("PB",), ">=", 50.0)]
    result = compute_window(outcome_fn, draws, GRID, loose, outcome_names=NAMES)
    assert any("end of the scanned range" in w and "extend the pH grid" in w for w in result.warnings)


def test_result_round_trip_report_and_json():
    rng = np.random.default_rng(2)
    draws = TRUTH + 0.05 * rng.standard_normal((50, TRUTH.size))
    result = compute_window(outcome_fn, draws, GRID[::4], SPECS, factor_grid=[2.4, 2.6],
                            outcome_names=NAMES, uncertainty_source=COVARIANCE_SOURCE,
                            factor_name="log10 tau", factor_unit="-")
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    back = WindowResult.from_dict(data)
    assert back.to_dict() == data
    np.testing.assert_array_equal(back.probability, result.probability)
    assert back.windows == result.windows and back.specifications == result.specifications
    text = result.report()
    positions = [text.index(h) for h in REPORT_HEADINGS]
    assert positions == sorted(positions)
    assert COVARIANCE_SOURCE in text and "only 50 draws" in text


def test_progress_and_errors():
    calls = []
    compute_window(outcome_fn, np.tile(TRUTH, (7, 1)), GRID, SPECS, outcome_names=NAMES,
                   batch_size=3, progress=lambda done, total: calls.append((done, total)))
    assert calls == [(3, 7), (6, 7), (7, 7)]
    with pytest.raises(SolverError, match="NaN"):
        compute_window(outcome_fn, np.full((2, 5), np.nan), GRID, SPECS, outcome_names=NAMES)
    with pytest.raises(ValueError, match="not among the outcomes"):
        compute_window(outcome_fn, TRUTH[None, :], GRID, [Specification("percent", ("X",), ">=", 1)],
                       outcome_names=NAMES)
    with pytest.raises(ValueError, match="returned shape"):
        compute_window(lambda d, ph: np.zeros((1, 2, 3)), TRUTH[None, :], GRID, SPECS,
                       outcome_names=NAMES)


def test_per_draw_robust_window_inside_curve_robust_window():
    rng = np.random.default_rng(9)
    draws = TRUTH + 0.1 * rng.standard_normal((300, TRUTH.size))
    loose = [Specification("percent", ("PB",), ">=", 50.0)]   # window reaches pH 2
    for specs in (SPECS, loose):
        result = compute_window(outcome_fn, draws, GRID, specs, 0.9, 0.3, outcome_names=NAMES)
        for a, b in result.robust_windows_per_draw:
            assert GRID[0] + 0.3 - 1e-9 <= a <= b <= GRID[-1] - 0.3 + 1e-9
            assert any(lo - 1e-9 <= a and b <= hi + 1e-9 for lo, hi in result.robust_windows)
