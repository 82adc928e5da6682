"""Profile likelihood: agreement with the exact interval of a linear model, open ends, round trip."""

import json

import numpy as np
import pytest
from scipy import stats

from speciakin.errors import InputError
from speciakin.estimation import ParameterSpec, Profile, fit_least_squares, profile_all, profile_likelihood
from speciakin.estimation.profile import profile_threshold


def test_linear_model_profile_equals_t_interval():
    # Analytic: for a model linear in its parameters the profile interval with
    # Delta chi2 = s^2 F(1, n-p) equals the t interval b -+ t se (Bates & Watts 1988, section 6.1).
    rng = np.random.default_rng(7)
    x = np.linspace(0, 10, 20)
    y = 0.5 + 1.2 * x + rng.normal(0, 0.4, x.size)
    res = lambda b: y - (b[0] + b[1] * x)  # noqa: E731
    fit = fit_least_squares(res, [ParameterSpec("a", 0.0), ParameterSpec("b", 1.0)], starts=2, seed=0)
    prof = profile_likelihood(res, fit, "b")
    lo, hi = fit.parameter("b").covariance_interval
    assert prof.lower == pytest.approx(lo, rel=1e-6)
    assert prof.upper == pytest.approx(hi, rel=1e-6)
    assert not prof.open_below and not prof.open_above and not prof.flat


def test_threshold_values():
    # chi2_1(0.95) = 3.841458821 (any chi-square table, e.g. Abramowitz & Stegun table 26.8).
    assert profile_threshold(0.95, 10.0, 8, "known") == pytest.approx(3.841458821, rel=1e-9)
    # s^2 F(1, 8; 0.95) with s^2 = 10/8; F(1,8;0.95) = 5.317655 (F table, from memory; cross-check t_8^2 = 2.306004^2)
    assert profile_threshold(0.95, 10.0, 8, "estimated") == pytest.approx(1.25 * stats.t.ppf(0.975, 8) ** 2)
    assert profile_threshold(0.95, 10.0, 8, "estimated") == pytest.approx(1.25 * 5.317655, rel=1e-6)
    with pytest.raises(InputError, match="unknown profile scale"):
        profile_threshold(0.95, 1.0, 3, "guess")


def test_undetermined_rate_constant_is_open_above():
    # Invented data: sampling only long after the reaction is complete, so any large k fits
    # equally well; the profile of k must be open above (None), never a number.
    rng = np.random.default_rng(3)
    t = np.linspace(50, 100, 10)
    y = 2.0 + rng.normal(0, 0.02, t.size)
    res = lambda b: y - b[0] * (1 - np.exp(-b[1] * t))  # noqa: E731
    fit = fit_least_squares(res, [ParameterSpec("A", 1.0), ParameterSpec("k", 0.5, 0.0, 10.0)], seed=1)
    prof = profile_likelihood(res, fit, "k")
    assert prof.upper is None and prof.open_above
    assert any("no upper limit on k" in w for w in prof.warnings)
    merged = fit.with_profiles({"k": prof})
    assert merged.parameter("k").profile_upper is None and merged.parameter("k").profile_open_above
    assert "open above" in merged.report()


def test_flat_profile_reports_cannot_determine():
    # A parameter that does not enter the model at all.
    rng = np.random.default_rng(4)
    x = np.linspace(0, 1, 15)
    y = 3.0 * x + rng.normal(0, 0.1, x.size)
    res = lambda b: y - b[0] * x + 0.0 * b[1]  # noqa: E731
    fit = fit_least_squares(res, [ParameterSpec("slope", 1.0), ParameterSpec("ghost", 1.0, -5.0, 5.0)],
                            starts=2, seed=0)
    assert not fit.success  # singular Jacobian
    prof = profile_likelihood(res, fit, "ghost")
    assert prof.flat and prof.lower is None and prof.upper is None
    assert any("cannot determine ghost" in w for w in prof.warnings)


def test_profile_all_round_trip_and_errors():
    rng = np.random.default_rng(9)
    t = np.linspace(0.5, 30, 25)
    y = 2.0 * (1 - np.exp(-0.2 * t)) + rng.normal(0, 0.02, t.size)
    res = lambda b: y - b[0] * (1 - np.exp(-b[1] * t))  # noqa: E731
    fit = fit_least_squares(res, [ParameterSpec("A", 1.0), ParameterSpec("k", 0.1, 0.0, 5.0)], seed=0, starts=3)
    calls = []
    profiles = profile_all(res, fit, progress=lambda d, n, c: calls.append(d))
    assert calls == [1, 2]
    for name, prof in profiles.items():
        lo, hi = fit.parameter(name).covariance_interval
        # near-linear problem: profile and covariance intervals agree to a few per cent
        assert prof.lower == pytest.approx(lo, rel=0.03) and prof.upper == pytest.approx(hi, rel=0.03)
        back = Profile.from_dict(json.loads(json.dumps(prof.to_dict())))
        assert back.to_dict() == prof.to_dict()
        assert "Profile of" in prof.report()
    with pytest.raises(InputError, match="no such parameter"):
        profile_likelihood(res, fit, "kk")
