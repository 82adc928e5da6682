"""Trust gates on plain inputs: each gate fires on its own condition, the
status combines them, thresholds sit where docs/decision.md says."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from speciakin.decision import Specification, WindowResult, compute_window
from speciakin.decision.gates import (
    GATES,
    NOT_CHECKED,
    NOT_ESTABLISHED,
    PASS,
    PROVISIONAL,
    GateInputs,
    assess,
    specification_margin,
)
from speciakin.decision.trust_inputs import apply_gates

CLEAN = dict(source="posterior", parameter_names=["a", "b"], posterior_converged=True, r_hat=[1.002, 1.004],
             ess=[900.0, 1200.0], lower=[-1.0, -3.0], upper=[1.0, 3.0], open_profiles=[],
             windows=[(5.0, 6.0)], run_ph_range=(4.5, 7.0),
             process={"equivalents": 1.3, "dosing_time": 10.0, "end_time": 120.0, "temperature": 25.0,
                      "ph_mode": "held"},
             runs={"equivalents": [1.3, 1.3], "dosing_time": [10.0, 10.0], "end_time": [120.0, 120.0],
                   "temperature": [25.0, 25.0], "ph_mode": ["held", "held"]},
             chi_square=95.0, degrees_of_freedom=100)


def inputs(**change):
    data = dict(CLEAN)
    data["draws"] = np.random.default_rng(0).uniform([-0.5, -2.0], [0.5, 2.0], (400, 2))
    data.update(change)
    return GateInputs(**data)


def verdict(name, x):
    return GATES[name].function(x)


def test_clean_inputs_are_established():
    status, reasons, gates = assess(inputs())
    assert status == "established" and reasons == []
    assert [g["name"] for g in gates] == list(GATES)
    json.dumps(gates, allow_nan=False)


@pytest.mark.parametrize("r_hat, ess, converged, expected", [
    ([1.005, 1.0], [500, 500], True, PASS),
    ([1.05, 1.0], [500, 500], True, PROVISIONAL),          # above 1.01 (Vehtari et al. 2021)
    ([1.2, 1.0], [500, 500], False, NOT_ESTABLISHED),      # above 1.1 (BDA3 section 11.4)
    ([math.inf, 1.0], [500, 500], False, NOT_ESTABLISHED),  # a walker-stuck parameter
    ([1.0, 1.0], [250, 500], True, PROVISIONAL),
    ([1.0, 1.0], [40, 500], True, NOT_ESTABLISHED),
    ([1.0, 1.0], [500, 500], False, PROVISIONAL),          # the sampler's own verdict
])
def test_convergence_gate_thresholds(r_hat, ess, converged, expected):
    v = verdict("convergence", inputs(r_hat=r_hat, ess=ess, posterior_converged=converged))
    assert v.verdict == expected
    status, reasons, _ = assess(inputs(r_hat=r_hat, ess=ess, posterior_converged=converged))
    assert (status == "established") == (expected == PASS)
    if expected != PASS:
        assert reasons


def test_covariance_draws_are_provisional():
    v = verdict("convergence", inputs(source="least-squares covariance (multivariate normal)", r_hat=None,
                                      ess=None, posterior_converged=None))
    assert v.verdict == PROVISIONAL and "no posterior was sampled" in v.reasons[0]


def test_draws_piled_on_a_bound():
    d = np.random.default_rng(1).uniform([-0.5, -2.0], [0.5, 2.0], (400, 2))
    d[:200, 1] = -3.0                         # half the draws at the lower bound of b
    v = verdict("draws on a bound", inputs(draws=d))
    assert v.verdict == PROVISIONAL and "50% of the draws of b lie at its lower bound -3" in v.reasons[0]
    d[:200, 1] = -2.95                        # inside 1 % of the 6-unit range (0.06): still piled
    assert verdict("draws on a bound", inputs(draws=d)).verdict == PROVISIONAL
    d[:200, 1] = -2.9                         # outside the zone
    assert verdict("draws on a bound", inputs(draws=d)).verdict == PASS


def test_identifiability_gate_uses_the_spec_margin():
    spec = Specification("percent", ("P",), ">=", 90.0)
    assert specification_margin(spec) == 1.0
    assert specification_margin(Specification("ratio", ("P",), ">=", 30.0, per=("Q",))) == pytest.approx(3.0)
    shift = {"specification": spec.describe(), "ph": 5.0, "margin": 1.0}
    small = [{"name": "pKa[S.N]", "side": "below", "shifts": [dict(shift, change=0.4)]}]
    large = [{"name": "pKa[S.N]", "side": "below", "shifts": [dict(shift, change=7.5)]}]
    assert verdict("identifiability", inputs(open_profiles=small)).verdict == PASS
    v = verdict("identifiability", inputs(open_profiles=large))
    assert v.verdict == NOT_ESTABLISHED and "pKa[S.N] is not identified" in v.reasons[0]
    assert "moves by 7.5" in v.reasons[0]
    failed = [{"name": "k", "side": "both", "shifts": [dict(shift, change=math.inf)]}]
    assert verdict("identifiability", inputs(open_profiles=failed)).verdict == NOT_ESTABLISHED
    assert verdict("identifiability", inputs(open_profiles=None)).verdict == NOT_CHECKED
    assert assess(inputs(open_profiles=None))[0] == "established"     # not checked does not lower


@pytest.mark.parametrize("window, expected, text", [
    ((4.5, 7.0), PASS, None),
    ((4.45, 7.0), PASS, None),                                  # 0.05 pH: within 0.1
    ((4.0, 6.0), PROVISIONAL, "window edge pH 4.00 lies 0.50 pH below the lowest run pH"),
    ((2.8, 6.0), NOT_ESTABLISHED, "lies 1.70 pH below"),
    ((5.0, 8.2), NOT_ESTABLISHED, "lies 1.20 pH above the highest run pH"),
    ((7.6, 8.0), PROVISIONAL, "window edge pH 7.60 lies 0.60 pH above the highest run pH"),
])
def test_ph_coverage_gate(window, expected, text):
    v = verdict("pH coverage", inputs(windows=[window]))
    assert v.verdict == expected
    if text:
        assert text in v.reasons[0]


def test_process_envelope_gate():
    process = dict(CLEAN["process"])
    assert verdict("process envelope", inputs()).verdict == PASS
    process["dosing_time"] = 45.0
    v = verdict("process envelope", inputs(process=process))
    assert v.verdict == PROVISIONAL and "dosing time 45 min differs from every run's 10 min (by 35 min)" \
        in v.reasons[0]
    runs = dict(CLEAN["runs"], dosing_time=[10.0, 20.0])
    v = verdict("process envelope", inputs(process=process, runs=runs))
    assert "dosing time 45 min lies outside the runs' 10 to 20 min (by 25 min)" in v.reasons[0]
    process = dict(CLEAN["process"], equivalents=1.4)           # 7.7 % above: inside the 10 % slack
    assert verdict("process envelope", inputs(process=process)).verdict == PASS
    process = dict(CLEAN["process"], temperature=28.0)          # 3 K above: outside the 2 K slack
    assert verdict("process envelope", inputs(process=process)).verdict == PROVISIONAL
    runs = dict(CLEAN["runs"], ph_mode=["logged", "free"])
    v = verdict("process envelope", inputs(runs=runs))
    assert v.verdict == PROVISIONAL and "no lab run did" in v.reasons[0]


@pytest.mark.parametrize("chi_square, expected", [
    (120.0, PASS),
    (149.0, PASS),               # the 0.999 quantile of chi2(100) is 149.45 (scipy.stats.chi2;
    (150.0, PROVISIONAL),        # Abramowitz and Stegun 1964, table 26.8)
    (399.0, PROVISIONAL),
    (450.0, NOT_ESTABLISHED),    # reduced chi-square 4.5 > 4
    (math.inf, NOT_ESTABLISHED),
])
def test_error_model_gate(chi_square, expected):
    v = verdict("error model", inputs(chi_square=chi_square, degrees_of_freedom=100))
    assert v.verdict == expected
    if expected == NOT_ESTABLISHED and math.isfinite(chi_square):
        assert "scatter 2.12 times more than the stated error model allows" in v.reasons[0]
    assert verdict("error model", inputs(chi_square=None)).verdict == NOT_CHECKED


def test_status_is_the_worst_gate_and_lands_in_the_result():
    from decision_synthetic import NAMES, TRUTH, outcome_fn

    specs = [Specification("percent", ("PB",), ">=", 90.0), Specification("percent", ("S",), "<=", 1.0)]
    result = compute_window(outcome_fn, np.tile(TRUTH, (4, 1)), np.arange(2.0, 8.01, 0.5), specs,
                            outcome_names=NAMES)
    assert result.status is None and "not assessed" in result.report()
    apply_gates(result, inputs(r_hat=[1.3, 1.0], windows=result.windows, run_ph_range=(2.5, 3.0)))
    assert result.status == "not established"
    assert "posterior not converged: R-hat above 1.1 for a (1.3)" in result.status_reasons
    assert any("above the highest run pH" in r for r in result.status_reasons)
    text = result.report()
    assert "NOT ESTABLISHED" in text and "R-hat above 1.1 for a (1.3)" in text
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    assert data["status"] == "not established" and data["status_reasons"] == result.status_reasons
    assert [g["name"] for g in data["gates"]] == list(GATES)
    back = WindowResult.from_dict(data)
    assert back.to_dict() == data and back.status == result.status
