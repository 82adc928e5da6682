"""A long, noisy pH log is smoothed (``runs_layout.smooth_ph_log``).

The scatter estimate against noise of known size, the fallbacks to straight
lines between readings, and the kernel's pH against the smoothing spline that
scipy's FITPACK (``UnivariateSpline``, Dierckx's curfit) makes of the same
readings; the kernel's amounts against scipy's Radau on that smoothed model
are in ``test_against_scipy.py`` and, for a titrated run, in
``test_titrant_conventions.py``.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy.interpolate import UnivariateSpline

from sim_models import two_site_model, two_site_run
from speciakin.chemistry.model import PhControl
from speciakin.simulation import compile_model, compile_runs, simulate
from speciakin.simulation.runs_layout import SMOOTH_LOG_MIN_READINGS, log_scatter, smooth_ph_log


def _gsj_scatter(t, v):
    """The pseudo-residual scatter of Gasser, Sroka and Jennen-Steinmetz (Biometrika 1986, 73, 625),
    written out here reading by reading: e_i = a v_(i-1) + b v_(i+1) - v_i over sqrt(a^2 + b^2 + 1),
    and 1.4826 times the median of |e_i| (the normal consistency factor of the median absolute deviation)."""
    e = []
    for i in range(1, len(t) - 1):
        a = (t[i + 1] - t[i]) / (t[i + 1] - t[i - 1])
        b = (t[i] - t[i - 1]) / (t[i + 1] - t[i - 1])
        e.append(abs(a * v[i - 1] + b * v[i + 1] - v[i]) / np.sqrt(a * a + b * b + 1.0))
    return 1.4826 * float(np.median(e))


def _noisy_log(n, sd, seed, end=7200.0):
    t = np.linspace(0.0, end, n)
    truth = 7.0 + 1.5 * np.sin(2.0 * np.pi * t / end) - 0.5 * t / end
    return t, truth + np.random.default_rng(seed).normal(0.0, sd, n), truth


def test_scatter_of_noise_of_known_size():
    # readings = a smooth curve + normal noise of sd 0.02 (by construction): the estimate is
    # within 8 % of it for 2000 readings (the median's standard error is about 1.25 sd / sqrt(n))
    t, v, _ = _noisy_log(2000, 0.02, 3)
    assert abs(log_scatter(t, v) / 0.02 - 1.0) < 0.08
    assert abs(log_scatter(t, v) / _gsj_scatter(t, v) - 1.0) < 1e-12
    # a straight line, even unevenly spaced, has no scatter (the pseudo-residuals remove lines exactly)
    tu = np.cumsum(np.random.default_rng(4).uniform(10.0, 90.0, 50))
    assert log_scatter(tu, 5.0 + 1e-4 * tu) < 1e-14


def test_short_and_exact_logs_stay_straight_lines():
    t, v, _ = _noisy_log(SMOOTH_LOG_MIN_READINGS - 1, 0.02, 5)
    assert smooth_ph_log(t, v) is None
    t = np.linspace(0.0, 7200.0, 60)
    assert smooth_ph_log(t, np.full(60, 7.0)) is None
    compiled = compile_model(two_site_model())
    # a step from 7 to 8 between two readings: no scatter about a smooth curve at most readings
    # (the median), so it stays straight lines with the two knots where the slope changes
    step = np.where(t < 3600.0, 7.0, 8.0)
    run = two_site_run(PhControl("logged", log_times=tuple(t), log_ph=tuple(step)), end=7200.0, dose_minutes=0.0)
    cruns = compile_runs(compiled, [run], [[0.0, 7200.0]])
    assert cruns.arrays.log_smooth[0] == 0
    i = int(np.searchsorted(t, 3600.0))
    np.testing.assert_array_equal(cruns.arrays.bp[0, :cruns.arrays.n_bp[0]], [t[i - 1], t[i], 7200.0])


def test_smoothed_log_is_fitpacks_smoothing_spline():
    # 121 readings every minute, sd 0.03: the kernel's pH (plus the run's offset) is scipy's
    # UnivariateSpline with s = n sigma^2 (sigma: the scatter written out above), to rounding
    t, v, _ = _noisy_log(121, 0.03, 7)
    sigma = _gsj_scatter(t, v)
    spline = UnivariateSpline(t, v, k=3, s=t.size * sigma ** 2)
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    run = dataclasses.replace(two_site_run(PhControl("logged", log_times=tuple(t), log_ph=tuple(v)), end=7200.0),
                              ph_offset=0.1)
    times = np.linspace(0.0, 7200.0, 301)
    res = simulate(model, run, times=times)
    np.testing.assert_allclose(res.ph, spline(times) + 0.1, rtol=0, atol=1e-12)
    # every reading entered it: the readings' mean squared deviation is sigma^2 (FITPACK meets s to 0.1 %)
    assert abs(np.mean((spline(t) - v) ** 2) / sigma ** 2 - 1.0) < 1e-3
    # and it lies nearer the smooth curve the noise was added to than the readings joined by
    # lines (root mean square over the run, measured 0.015 against 0.022)
    dense = np.linspace(0.0, 7200.0, 7201)
    curve = 7.0 + 1.5 * np.sin(2.0 * np.pi * dense / 7200.0) - 0.5 * dense / 7200.0
    assert np.sqrt(np.mean((spline(dense) - curve) ** 2)) < np.sqrt(np.mean((np.interp(dense, t, v) - curve) ** 2))
    # no breakpoint at the readings (the spline is twice continuously differentiable): the
    # dose's end and the run's end only
    cruns = compile_runs(compile_model(model), [run], [times])
    np.testing.assert_array_equal(cruns.arrays.bp[0, :cruns.arrays.n_bp[0]], [1800.0, 7200.0])
