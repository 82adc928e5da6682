"""Pure window functions: edges, robust window, MC error, against hand
calculations, the binomial formula and a brute-force scan."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from speciakin.decision.window import (
    binomial_standard_error,
    interval_containing,
    per_draw_robust_probability,
    probability_curve,
    robust_window,
    range_end_warning,
    range_ends_reached,
    touches_range_edge,
    widest_interval,
    window_edges,
    worst_case_probability,
)

GRID = np.round(np.arange(2.0, 12.0001, 0.1), 10)


def step_probability(low: float, high: float, inside: float = 1.0, outside: float = 0.0):
    return np.where((GRID >= low - 1e-9) & (GRID <= high + 1e-9), inside, outside)


def test_edges_of_clean_step_by_hand():
    # Hand calculation: p jumps 0 -> 1 between 4.9 and 5.0; the line reaches
    # 0.95 at 4.9 + 0.95 * 0.1 = 4.995; symmetric on the right: 8.1 - 0.095 = 8.005.
    p = step_probability(5.0, 8.0)
    (low, high), = window_edges(GRID, p, 0.95)
    assert low == pytest.approx(4.995, abs=1e-12)
    assert high == pytest.approx(8.005, abs=1e-12)


def test_edges_interpolate_partial_values_by_hand():
    # Hand calculation: between 4.9 (p = 0.5) and 5.0 (p = 0.97) the line
    # reaches 0.95 at 4.9 + (0.95 - 0.5) / (0.97 - 0.5) * 0.1.
    p = step_probability(5.0, 8.0, inside=0.97, outside=0.5)
    (low, _), = window_edges(GRID, p, 0.95)
    assert low == pytest.approx(4.9 + 0.45 / 0.47 * 0.1, abs=1e-12)


def test_several_windows_and_selection():
    p = np.maximum(step_probability(3.0, 4.0), step_probability(6.0, 9.0))
    wins = window_edges(GRID, p, 0.95)
    assert len(wins) == 2
    assert widest_interval(wins) == wins[1]
    assert interval_containing(wins, 3.5) == wins[0]
    assert interval_containing(wins, 5.0) is None


def test_window_reaching_grid_end_stops_there_and_is_flagged():
    p = step_probability(2.0, 4.0)
    (low, high), = window_edges(GRID, p, 0.95)
    assert low == GRID[0]
    assert touches_range_edge([(low, high)], GRID)
    assert not touches_range_edge([(5.0, 6.0)], GRID)
    # the warning names the end, its pH and the process file's key that moves it
    first, last = GRID[0], GRID[-1]
    assert range_ends_reached([(low, high)], GRID) == ["lower"]
    text = range_end_warning([(low, high)], GRID)
    assert f"touches the lower end of the scanned range (pH {first:.2f})" in text and "ph_from under [scan]" in text
    assert range_ends_reached([(first, 4.0), (5.0, last)], GRID) == ["lower", "upper"]
    text = range_end_warning([(first, last)], GRID)
    assert f"lower and upper ends of the scanned range (pH {first:.2f} and {last:.2f})" in text
    assert "ph_from and ph_to" in text
    assert range_end_warning([(5.0, 6.0)], GRID) is None


def test_no_window():
    assert window_edges(GRID, np.full(GRID.shape, 0.9), 0.95) == []
    assert robust_window(GRID, np.full(GRID.shape, 0.9), 0.95, 0.3) == []


def test_robust_window_shrinks_step_by_tolerance_by_hand():
    # Window [4.995, 8.005] (hand calculation above); tolerance 0.3 ->
    # set points [5.295, 7.705].
    p = step_probability(5.0, 8.0)
    (low, high), = robust_window(GRID, p, 0.95, 0.3)
    assert low == pytest.approx(5.295, abs=1e-12)
    assert high == pytest.approx(7.705, abs=1e-12)


def test_robust_window_vanishes_when_window_is_narrower_than_band():
    p = step_probability(5.0, 5.3)      # window 4.995..5.305, width 0.31 < 0.6
    assert window_edges(GRID, p, 0.95)
    assert robust_window(GRID, p, 0.95, 0.3) == []


def test_robust_window_at_grid_end_does_not_assume_unknown_drift():
    p = step_probability(2.0, 4.0)
    (low, _), = robust_window(GRID, p, 0.95, 0.3)
    assert low == pytest.approx(2.3, abs=1e-12)


@given(st.lists(st.floats(0.0, 1.0), min_size=101, max_size=101),
       st.floats(0.0, 1.0), st.floats(0.5, 0.99))
def test_robust_window_inside_window_and_agrees_with_worst_case(values, tolerance, level):
    p = np.asarray(values)
    wins = window_edges(GRID, p, level)
    robust = robust_window(GRID, p, level, tolerance)
    for a, b in robust:
        assert any(lo - 1e-9 <= a and b <= hi + 1e-9 for lo, hi in wins)
    # the grid-evaluated worst case over the drift band must agree with the
    # interval construction (both use the piecewise-linear curve)
    worst = worst_case_probability(GRID, p, tolerance)
    for k, x in enumerate(GRID):
        if not np.isfinite(worst[k]):
            continue
        inside = interval_containing(robust, x) is not None
        near_edge = any(min(abs(x - a), abs(x - b)) < 1e-6 for a, b in robust)
        if not near_edge:
            assert inside == (worst[k] >= level), (x, worst[k])


def test_worst_case_probability_by_hand():
    p = step_probability(5.0, 8.0)
    worst = worst_case_probability(GRID, p, 0.3)
    k = int(np.argmin(np.abs(GRID - 6.0)))
    assert worst[k] == 1.0
    k = int(np.argmin(np.abs(GRID - 5.2)))     # band reaches 4.9 where p = 0
    assert worst[k] == 0.0
    assert np.isnan(worst[0]) and np.isnan(worst[-1])   # band leaves the grid


def test_binomial_standard_error_formula():
    # Binomial proportion: se = sqrt(p (1 - p) / n) (Agresti, Categorical Data Analysis, 1.3).
    assert binomial_standard_error(0.3, 1000) == pytest.approx(np.sqrt(0.21 / 1000), rel=1e-14)
    passes = np.zeros((400, 3), dtype=bool)
    passes[:100, 0] = True
    passes[:, 1] = True
    p, se = probability_curve(passes)
    np.testing.assert_allclose(p, [0.25, 1.0, 0.0])
    np.testing.assert_allclose(se, [np.sqrt(0.25 * 0.75 / 400), 0.0, 0.0])


def test_standard_error_matches_spread_of_repeated_estimates():
    # Repeated Monte Carlo estimates of a known p = 0.9 with n = 500 draws:
    # their standard deviation is the binomial standard error.
    rng = np.random.default_rng(7)
    n, p_true, repeats = 500, 0.9, 2000
    estimates = (rng.random((repeats, n)) < p_true).mean(axis=1)
    expected = float(binomial_standard_error(p_true, n))
    # the sd of 2000 estimates has a relative sampling error near 1/sqrt(2*2000) = 1.6 %
    assert np.std(estimates, ddof=1) == pytest.approx(expected, rel=0.06)


def test_per_draw_robust_probability_is_stricter():
    rng = np.random.default_rng(3)
    edges_low = 5.0 + 0.3 * rng.standard_normal(300)
    edges_high = 8.0 + 0.3 * rng.standard_normal(300)
    passes = (GRID[None, :] >= edges_low[:, None]) & (GRID[None, :] <= edges_high[:, None])
    p, _ = probability_curve(passes)
    worst = worst_case_probability(GRID, p, 0.3)
    per_draw = per_draw_robust_probability(GRID, passes, 0.3)
    ok = np.isfinite(worst)
    assert np.array_equal(ok, np.isfinite(per_draw))
    assert np.all(per_draw[ok] <= worst[ok] + 1e-12)
    # hand check at one set point: a draw passes the band [6.2, 6.8] iff its
    # window covers it
    k = int(np.argmin(np.abs(GRID - 6.5)))
    expected = np.mean((edges_low <= 6.2 + 1e-9) & (edges_high >= 6.8 - 1e-9))
    assert per_draw[k] == pytest.approx(expected)


def test_bad_arguments():
    with pytest.raises(ValueError, match="strictly increasing"):
        window_edges([3.0, 2.0], [1.0, 1.0], 0.95)
    with pytest.raises(ValueError, match="tolerance"):
        robust_window(GRID, step_probability(5, 8), 0.95, -0.1)
    with pytest.raises(ValueError, match="n_draws"):
        binomial_standard_error(0.5, 0)


@pytest.mark.parametrize("tolerance", [0.25, 0.3, 0.37])
def test_per_draw_never_above_worst_case_when_band_ends_fall_between_grid_points(tolerance):
    rng = np.random.default_rng(13)
    low = 5.0 + 0.2 * rng.standard_normal(200)
    high = 8.0 + 0.2 * rng.standard_normal(200)
    passes = (GRID[None, :] >= low[:, None]) & (GRID[None, :] <= high[:, None])
    p, _ = probability_curve(passes)
    worst = worst_case_probability(GRID, p, tolerance)
    per_draw = per_draw_robust_probability(GRID, passes, tolerance)
    ok = np.isfinite(worst)
    assert np.all(per_draw[ok] <= worst[ok] + 1e-12)
    # hand check: set point 6.5 with tolerance 0.25 -> band [6.25, 6.75],
    # bracketed by grid points 6.2 and 6.8
    if tolerance == 0.25:
        k = int(np.argmin(np.abs(GRID - 6.5)))
        expected = np.mean((low <= 6.2 + 1e-9) & (high >= 6.8 - 1e-9))
        assert per_draw[k] == pytest.approx(expected)
