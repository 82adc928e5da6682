"""resample(): explicit linear resampling of logs.

Source: analytic — linear interpolation reproduces a straight line exactly
and matches numpy.interp (general-purpose reference library).
"""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.data import resample
from data_factory import build_campaign


def test_linear_log_is_reproduced():
    t = np.arange(0.0, 86_400.0, 1.0)
    ph = 7.0 + 1e-5 * t
    new = np.linspace(0.0, 86_000.0, 37)
    np.testing.assert_allclose(resample(t, ph, new), 7.0 + 1e-5 * new, rtol=1e-13)


def test_matches_numpy_interp_and_holds_ends():
    rng = np.random.default_rng(7)
    t = np.sort(rng.uniform(0, 100, 50))
    v = rng.normal(size=50)
    new = np.array([-5.0, 3.3, 50.0, 99.0, 200.0])
    np.testing.assert_allclose(resample(t, v, new), np.interp(new, t, v))


def test_repeated_times_are_averaged_and_nan_ignored():
    out = resample(np.array([0.0, 1.0, 1.0, 2.0, 3.0]), np.array([0.0, 1.0, 3.0, np.nan, 4.0]),
                   np.array([1.0, 2.0]))
    np.testing.assert_allclose(out, [2.0, 3.0])


def test_empty_log_raises():
    with pytest.raises(ValueError):
        resample(np.array([np.nan]), np.array([1.0]), np.array([0.0]))


def test_run_with_resampled_ph_log():
    run = build_campaign().run("R02")
    new = np.arange(0.0, 4801.0, 600.0)
    out = run.with_resampled_ph_log(new)
    assert out.recipe.ph.log_times == tuple(new)
    np.testing.assert_allclose(out.recipe.ph.log_ph, 7.0 + 0.3 * np.exp(-new / 2000.0))
    assert len(out.ph_log) == len(run.ph_log)   # the raw log is kept
