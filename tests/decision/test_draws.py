"""Multivariate-normal draws from a covariance matrix."""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.decision.draws import draws_from_covariance
from speciakin.errors import SolverError


def test_mean_and_covariance_recovered():
    mean = np.array([2.0, -1.0, 9.4])
    cov = np.array([[0.04, 0.01, 0.0], [0.01, 0.09, -0.02], [0.0, -0.02, 0.25]])
    out = draws_from_covariance(mean, cov, 20000, seed=1)
    assert out.draws.shape == (20000, 3) and out.n_rejected == 0 and out.n_clipped == 0
    np.testing.assert_allclose(out.draws.mean(axis=0), mean, atol=0.015)
    np.testing.assert_allclose(np.cov(out.draws.T), cov, atol=0.006)
    again = draws_from_covariance(mean, cov, 20000, seed=1)
    np.testing.assert_array_equal(again.draws, out.draws)


def test_rejection_gives_truncated_normal():
    # A standard normal truncated at 0 is half-normal with mean sqrt(2/pi)
    # (analytic result of the half-normal distribution).
    out = draws_from_covariance([0.0], [[1.0]], 20000, seed=3, bounds=[(0.0, None)])
    assert out.draws.min() >= 0.0 and out.n_clipped == 0 and out.n_rejected > 0
    assert out.draws.mean() == pytest.approx(np.sqrt(2 / np.pi), abs=0.02)


def test_clipping_fallback_when_bounds_are_far_in_the_tail():
    out = draws_from_covariance([0.0], [[1.0]], 50, seed=3, bounds=[(8.0, 9.0)], max_rounds=2)
    assert out.n_clipped == 50 and np.all(out.draws == 8.0)


def test_singular_covariance_is_accepted():
    out = draws_from_covariance([1.0, 1.0], [[1.0, 1.0], [1.0, 1.0]], 500, seed=2)
    np.testing.assert_allclose(out.draws[:, 0], out.draws[:, 1], atol=1e-10)


def test_bad_covariance_raises():
    with pytest.raises(SolverError, match="positive semi-definite"):
        draws_from_covariance([0, 0], [[1.0, 2.0], [2.0, 1.0]], 10, seed=0)
    with pytest.raises(SolverError, match="not symmetric"):
        draws_from_covariance([0, 0], [[1.0, 0.5], [0.0, 1.0]], 10, seed=0)
    with pytest.raises(SolverError, match="NaN"):
        draws_from_covariance([0, np.nan], np.eye(2), 10, seed=0)
    with pytest.raises(ValueError, match="covariance has shape"):
        draws_from_covariance([0, 0, 0], np.eye(2), 10, seed=0)
