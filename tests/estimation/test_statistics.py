"""AIC/BIC, Akaike weights and model comparison against hand calculations."""

import math

import numpy as np
import pytest

from speciakin.errors import InputError
from speciakin.estimation import ComparisonResult, ParameterSpec, compare_models, fit_least_squares
from speciakin.estimation.statistics import (akaike_information_criterion, akaike_weights,
                                             bayesian_information_criterion)


def test_akaike_weights_hand_calculation():
    # Hand calculation (Burnham & Anderson 2002, eq. 2.14): AIC = 100, 102, 110 ->
    # delta = 0, 2, 10; exp(-delta/2) = 1, e^-1 = 0.3678794412, e^-5 = 0.0067379470;
    # sum = 1.3746173882; weights = 0.7274751, 0.2676231, 0.0049017.
    w = akaike_weights([102.0, 100.0, 110.0])
    np.testing.assert_allclose(w, [0.2676231, 0.7274751, 0.0049017], atol=1e-7)


def test_information_criteria_formulas():
    # n ln(chi2/n) + 2p and n ln(chi2/n) + ln(n) p (lmfit documentation, "fit statistics").
    assert akaike_information_criterion(2.0, 10, 3) == pytest.approx(10 * math.log(0.2) + 6)
    assert bayesian_information_criterion(2.0, 10, 3) == pytest.approx(10 * math.log(0.2) + math.log(10) * 3)


def test_compare_models_ranks_true_model_first():
    rng = np.random.default_rng(11)
    t = np.linspace(0.5, 30, 40)
    y = 2.0 * (1 - np.exp(-0.2 * t)) + rng.normal(0, 0.02, t.size)  # invented data
    first = fit_least_squares(lambda b: y - b[0] * (1 - np.exp(-b[1] * t)),
                              [ParameterSpec("A", 1.0), ParameterSpec("k", 0.1, 0, 5)], seed=0, starts=3)
    line = fit_least_squares(lambda b: y - (b[0] + b[1] * t), [ParameterSpec("a", 0.0), ParameterSpec("b", 0.0)],
                             seed=0, starts=2)
    comp = compare_models({"first-order": first, "straight line": line})
    assert comp.names[0] == "first-order"
    expected = akaike_weights([first.aic, line.aic])
    assert comp.akaike_weights[0] == pytest.approx(expected[0])
    assert sum(comp.akaike_weights) == pytest.approx(1.0)
    assert "Model comparison" in comp.report()
    assert ComparisonResult.from_dict(comp.to_dict()) == comp
    with pytest.raises(InputError, match="at least two"):
        compare_models({"one": first})
