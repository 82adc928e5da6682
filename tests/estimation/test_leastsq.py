"""Multistart fit: recovery, error paths, NaN handling, warnings, round trips."""

import json
import math

import lmfit
import numpy as np
import pytest
from scipy import optimize

from speciakin.errors import InputError, SolverError
from speciakin.estimation import FitResult, ParameterSpec, fit_least_squares
from speciakin.estimation.covariance import covariance_from_jacobian
from speciakin.estimation.jacobian import central_difference_jacobian, complex_step_jacobian

T = np.linspace(0.5, 30.0, 25)  # [min], invented sampling times


def first_order(b, t=T):
    """Invented first-order formation curve y = A (1 - exp(-k t))."""
    return b[0] * (1.0 - np.exp(-b[1] * t))


def make_data(seed, a=2.0, k=0.2, absolute=0.01, relative=0.02):
    rng = np.random.default_rng(seed)
    truth = first_order([a, k])
    sigma = np.sqrt(absolute ** 2 + (relative * truth) ** 2)
    return truth + rng.normal(0.0, sigma), sigma


SPECS = [ParameterSpec("A", 1.0, 0.0, 100.0, unit="mmol/L"), ParameterSpec("k", 0.05, 1e-4, 10.0, unit="1/min")]


def test_agrees_with_scipy_curve_fit():
    # Reference: scipy.optimize.curve_fit (general-purpose library) on the same weighted problem.
    y, sigma = make_data(1)
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, SPECS, seed=0)
    popt, pcov = optimize.curve_fit(lambda t, a, k: first_order([a, k], t), T, y, p0=[1.5, 0.1], sigma=sigma)
    np.testing.assert_allclose(fit.value_vector, popt, rtol=1e-6)
    np.testing.assert_allclose([p.standard_error for p in fit.parameters], np.sqrt(np.diag(pcov)), rtol=1e-4)


def test_linear_model_covariance_is_exact():
    # Analytic: for a straight line the covariance s^2 (X^T X)^-1 is exact (any regression text,
    # e.g. Draper & Smith, Applied Regression Analysis, 3rd ed., 1998, ch. 1).
    rng = np.random.default_rng(5)
    x = np.linspace(0, 10, 30)
    y = 1.5 + 0.7 * x + rng.normal(0, 0.3, x.size)
    fit = fit_least_squares(lambda b: y - (b[0] + b[1] * x), [ParameterSpec("a", 0.0), ParameterSpec("b", 0.0)],
                            starts=3, seed=1)
    X = np.column_stack([np.ones_like(x), x])
    beta, rss, *_ = np.linalg.lstsq(X, y, rcond=None)
    cov = rss[0] / (x.size - 2) * np.linalg.inv(X.T @ X)
    np.testing.assert_allclose(fit.value_vector, beta, rtol=1e-9)
    np.testing.assert_allclose(fit.covariance, cov, rtol=1e-6)


def test_jacobians_agree_with_analytic_derivative():
    # Analytic derivative of A (1 - exp(-k t)).
    b = np.array([2.0, 0.2])
    exact = np.column_stack([1 - np.exp(-b[1] * T), b[0] * T * np.exp(-b[1] * T)])
    np.testing.assert_allclose(central_difference_jacobian(first_order, b), exact, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(complex_step_jacobian(first_order, b), exact, rtol=1e-14, atol=1e-15)


def test_user_jacobian_and_fixed_parameter():
    y, sigma = make_data(2)

    def jac(b):
        return -np.column_stack([1 - np.exp(-b[1] * T), b[0] * T * np.exp(-b[1] * T)]) / sigma[:, None]
    specs = [ParameterSpec("A", 2.0, vary=False), ParameterSpec("k", 0.1, 0.0, 5.0)]
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, specs, jacobian=jac, starts=2, seed=0)
    assert fit.parameter("A").standard_error is None and fit.parameter("A").value == 2.0
    assert fit.n_varying == 1 and fit.jacobian_method == "user"


def test_user_jacobian_of_selected_columns_gives_the_same_fit():
    # A Jacobian function with a ``columns`` keyword is asked only for the varying columns; the fit
    # (values, covariance, evaluations) is the same as with a function returning every column.
    y, sigma = make_data(2)
    asked = []

    def full(b):
        return -np.column_stack([1 - np.exp(-b[1] * T), b[0] * T * np.exp(-b[1] * T)]) / sigma[:, None]

    def selected(b, columns=None):
        asked.append(list(columns))
        return full(b)[:, columns]

    specs = [ParameterSpec("A", 2.0, vary=False), ParameterSpec("k", 0.1, 0.0, 5.0)]
    residual = lambda b: (y - first_order(b)) / sigma  # noqa: E731
    a = fit_least_squares(residual, specs, jacobian=full, starts=2, seed=0)
    b = fit_least_squares(residual, specs, jacobian=selected, starts=2, seed=0)
    assert asked and all(c == [1] for c in asked)
    assert np.array_equal(a.value_vector, b.value_vector) and np.array_equal(a.covariance, b.covariance)
    assert a.n_evaluations == b.n_evaluations
    with pytest.raises(InputError, match="one column per requested column"):
        fit_least_squares(residual, specs, jacobian=lambda b, columns=None: full(b), starts=1, seed=0)


def test_nan_at_a_start_fails_that_start_only():
    y, sigma = make_data(3)

    def residual(b):
        if b[1] > 1.0:  # the function cannot be evaluated there
            return np.full(T.size, np.nan)
        return (y - first_order(b)) / sigma
    starts = np.array([[2.0, 5.0], [1.0, 0.1], [3.0, 0.3]])
    fit = fit_least_squares(residual, SPECS, starts=starts)
    assert not fit.starts[0].success and fit.starts[1].success
    assert any("starts failed" in w for w in fit.warnings)


def test_unconverged_start_is_reported_but_never_a_success():
    """One start cut off after 3 evaluations ends at finite residuals: the fit reports it as not
    converged, with a warning, instead of stopping."""
    y, sigma = make_data(1)
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, SPECS, starts=1, max_evaluations=3)
    assert not fit.success and not fit.starts[0].success
    assert fit.warnings[0].startswith("no start converged (1 tried)") and "try more starts" in fit.warnings[0]
    assert math.isfinite(fit.chisqr)


def test_no_start_succeeds_raises_solver_error():
    with pytest.raises(SolverError, match="no start converged"):
        fit_least_squares(lambda b: np.full(5, np.nan), [ParameterSpec("a", 1.0)], starts=2, seed=0)


@pytest.mark.parametrize("specs, match", [
    ([ParameterSpec("a", 1.0), ParameterSpec("a", 2.0)], "used twice"),
    ([ParameterSpec("a", 5.0, 0.0, 1.0)], "outside its bounds"),
    ([ParameterSpec("a", math.nan)], "not a finite number"),
    ([ParameterSpec("a", 1.0, vary=False)], "no parameter is free"),
    ([ParameterSpec("1a", 1.0)], "not a valid identifier"),
])
def test_bad_parameters(specs, match):
    with pytest.raises(InputError, match=match):
        fit_least_squares(lambda b: np.ones(5) * b[0], specs)


def test_bad_options():
    res = lambda b: T - b[0]  # noqa: E731
    with pytest.raises(InputError, match="unknown fitting method"):
        fit_least_squares(res, [ParameterSpec("a", 1.0)], method="simplex")
    with pytest.raises(InputError, match="unknown Jacobian"):
        fit_least_squares(res, [ParameterSpec("a", 1.0)], jacobian="forward")
    with pytest.raises(InputError, match="wrong shape"):
        fit_least_squares(res, [ParameterSpec("a", 1.0)], starts=np.ones((2, 3)))
    with pytest.raises(InputError, match="one group label per residual"):
        fit_least_squares(res, [ParameterSpec("a", 1.0)], groups=["x"])
    with pytest.raises(InputError, match="does not keep complex"):
        fit_least_squares(lambda b: T - np.real(b[0]), [ParameterSpec("a", 1.0)], jacobian="complex", starts=1)


def test_lmfit_parameters_accepted_and_bound_warning():
    params = lmfit.Parameters()
    params.add("A", value=1.0, min=0.0, max=1.5)  # truth 2.0 lies outside: the fit must sit at the bound
    params.add("k", value=0.1, min=0.0, max=5.0)
    y, sigma = make_data(4)
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, params, starts=3, seed=0)
    assert fit.parameter("A").at_bound == "upper"
    assert any("at its upper bound" in w for w in fit.warnings)


def test_report_round_trip_groups_and_progress():
    y, sigma = make_data(6)
    calls = []
    groups = ["early"] * 10 + ["late"] * 15
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, SPECS, starts=4, seed=3, groups=groups,
                            progress=lambda d, t, c: calls.append((d, t)))
    assert calls[-1] == (4, 4)
    text = fit.report()
    for heading in ("Fit statistics", "Parameters", "Correlations", "Starts", "Warnings"):
        assert heading in text
    assert set(fit.group_residual_sd) == {"early", "late"}
    data = json.loads(json.dumps(fit.to_dict()))
    back = FitResult.from_dict(data)
    assert back.to_dict() == fit.to_dict()
    np.testing.assert_array_equal(back.covariance, fit.covariance)


def test_non_finite_numbers_are_null_in_json():
    """to_dict goes through the one JSON codec: NaN and infinities are null (strict JSON, no strings);
    from_dict reads null back as NaN where a number is expected and as None where None is allowed."""
    import dataclasses

    y, sigma = make_data(6)
    fit = fit_least_squares(lambda b: (y - first_order(b)) / sigma, SPECS, starts=2, seed=3)
    correlation = fit.correlation.copy()
    correlation[0, 1] = correlation[1, 0] = math.nan
    first = dataclasses.replace(fit.parameters[0], standard_error=math.nan)
    odd = dataclasses.replace(fit, aic=-math.inf, correlation=correlation, parameters=[first, *fit.parameters[1:]])
    text = json.dumps(odd.to_dict(), allow_nan=False)
    assert '"nan"' not in text and '"-inf"' not in text
    data = json.loads(text)
    assert data["aic"] is None and data["correlation"][0][1] is None
    back = FitResult.from_dict(data)
    assert math.isnan(back.aic) and math.isnan(back.correlation[0, 1]) and back.correlation[0, 0] == 1.0
    assert back.parameters[0].standard_error is None  # a standard error may be None: null stays None
    # files written before the codec spelled non-finite numbers as strings: still read
    data["aic"], data["correlation"][0][1] = "-inf", "nan"
    earlier = FitResult.from_dict(data)
    assert earlier.aic == -math.inf and math.isnan(earlier.correlation[0, 1])


def test_singular_jacobian_detected():
    # Two parameters entering only as a product: J has rank 1 (analytic).
    jac = np.column_stack([T, 2 * T])
    cov = covariance_from_jacobian(jac, 1.0, T.size)
    assert cov.singular and cov.rank == 1 and np.all(np.isinf(cov.standard_errors))


def test_strong_correlation_warning_names_pair():
    x = np.linspace(1.0, 1.1, 20)
    rng = np.random.default_rng(0)
    y = 1.0 + 2.0 * x + rng.normal(0, 0.01, x.size)
    fit = fit_least_squares(lambda b: y - (b[0] + b[1] * x), [ParameterSpec("a", 0.0), ParameterSpec("b", 1.0)],
                            starts=2, seed=0)
    assert any("a and b are strongly correlated" in w for w in fit.warnings)
