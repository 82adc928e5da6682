"""Specification registry and evaluation (hand calculations)."""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.decision.specs import (
    OPERATORS,
    OUTCOME_KINDS,
    Specification,
    evaluate_each_spec,
    evaluate_specs,
    specification_value,
)

NAMES = ["S", "PA", "PB", "PAB"]


def table():
    # two draws x three pH points, mole % (invented numbers)
    s = np.array([[0.5, 2.0, 0.0], [0.2, 0.0, 0.0]])
    pa = np.array([5.0, 8.0, 0.0], dtype=float)[None, :].repeat(2, axis=0)
    pb = np.array([[93.0, 89.0, 0.0], [94.0, 91.0, 0.0]])
    pab = np.array([[1.5, 1.0, 0.0], [0.8, 1.0, 0.0]])
    return {"S": s, "PA": pa, "PB": pb, "PAB": pab}


def test_kinds_by_hand():
    t = table()
    total = specification_value(t, Specification("percent", ("PA", "PAB"), "<=", 10))
    np.testing.assert_allclose(total, t["PA"] + t["PAB"])
    conv = specification_value(t, Specification("conversion", ("S",), ">=", 99))
    np.testing.assert_allclose(conv, 100 - t["S"])
    ratio = specification_value(t, Specification("ratio", ("PB",), ">=", 10, per=("PA",)))
    assert ratio[0, 0] == pytest.approx(93.0 / 5.0)


def test_evaluate_all_specs_by_hand():
    t = table()
    specs = [Specification("percent", ("PB",), ">=", 90), Specification("percent", ("PAB",), "<=", 1.0),
             Specification("conversion", ("S",), ">=", 99)]
    # draw 0: pH0 PAB 1.5 fails; pH1 PB 89 fails; pH2 PB 0 fails
    # draw 1: pH0 passes; pH1 PB 91, PAB 1.0, conv 100 passes; pH2 fails
    expected = np.array([[False, False, False], [True, True, False]])
    np.testing.assert_array_equal(evaluate_specs(t, specs), expected)
    array = np.stack([t[n] for n in NAMES], axis=-1)
    np.testing.assert_array_equal(evaluate_specs(array, specs, NAMES), expected)
    each = evaluate_each_spec(t, specs)
    assert each.shape == (3, 2, 3)


def test_ratio_zero_over_zero_fails_and_x_over_zero_is_infinite():
    t = table()
    higher = Specification("ratio", ("PB",), ">=", 10, per=("PA",))
    lower = Specification("ratio", ("PA",), "<=", 0.1, per=("PB",))
    assert not evaluate_specs(t, [higher])[0, 2]        # 0 / 0 -> NaN -> fails
    t["PB"][0, 2] = 1.0                                 # 1 / 0 -> inf >= 10
    assert evaluate_specs(t, [higher])[0, 2]
    assert evaluate_specs(t, [lower])[0, 2]             # 0 / 1 = 0 <= 0.1


def test_nan_outcome_fails_every_operator():
    t = {"S": np.array([np.nan])}
    for op in OPERATORS:
        assert not evaluate_specs(t, [Specification("percent", ("S",), op, 50)])[0]


def test_registry_and_describe():
    assert set(OUTCOME_KINDS) == {"percent", "ratio", "conversion", "area%"}
    spec = Specification("percent", ("PB",), ">=", 90, label="desired product")
    assert spec.describe() == "desired product: mole % of PB >= 90 %"
    assert Specification.from_dict(spec.to_dict()) == spec
    with pytest.raises(KeyError, match="no outcome for X"):
        specification_value(table(), Specification("percent", ("X",), ">=", 1))
    with pytest.raises(ValueError, match="names"):
        evaluate_specs(np.zeros((2, 3)), [spec])
    assert evaluate_specs(table(), []).all()


def test_specification_checks_itself():
    with pytest.raises(ValueError, match="unknown outcome kind"):
        Specification("yield", ("P",), ">=", 1)
    with pytest.raises(ValueError, match="unknown operator"):
        Specification("percent", ("P",), "=>", 1)
    with pytest.raises(ValueError, match="'per' must be given"):
        Specification("ratio", ("P",), ">=", 1)
    with pytest.raises(ValueError, match="finite"):
        Specification("percent", ("P",), ">=", float("nan"))
