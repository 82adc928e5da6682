"""What to do next when a window is not established: each failing trust gate gives its action, with the
numbers of the gate's own figures; an established window gives none."""

from __future__ import annotations

import json
import math

import numpy as np

from speciakin.decision import Specification, WindowResult, compute_window
from speciakin.decision.gates import assess
from speciakin.decision.next_steps import next_steps
from speciakin.decision.trust_inputs import apply_gates

from test_gates import CLEAN, inputs


def steps(**change):
    return next_steps(assess(inputs(**change))[2], best_ph=5.4)


def test_an_established_window_has_no_next_step():
    assert steps() == []


def test_every_gate_has_its_action():
    from speciakin.decision.gates import GATES
    from speciakin.decision.next_steps import ACTIONS

    assert set(ACTIONS) == set(GATES)


def test_process_outside_the_runs_asks_for_a_run_at_the_process_conditions():
    process = dict(CLEAN["process"], dosing_time=45.0)   # the runs dosed over 10 min
    out = steps(process=process)
    assert len(out) == 1
    assert out[0].startswith("Run the process as planned once in the lab: pH 5.40 held (the best set point), "
                             "1.3 eq of reagent, dosed over 45 min, ended at 120 min, at 25 C")
    # no window, no best set point: no confirmation run is proposed
    assert next_steps(assess(inputs(process=process))[2], best_ph=None) == []


def test_window_edge_beyond_the_runs_asks_for_a_run_at_that_edge():
    # runs cover pH 4.5 to 7.0; the low edge 4.0 lies 0.5 below, the high edge 6.0 inside
    out = steps(windows=[(4.0, 6.0)])
    assert out == ["Add a run at pH 4.0: the window's edge lies outside the pH 4.50 to 7.00 the runs covered."]
    out = steps(windows=[(4.0, 7.6)])
    assert out[0].startswith("Add a run at pH 4.0 and at pH 7.6:")


def test_each_other_gate_names_its_action():
    shift = {"specification": "P >= 90 %", "ph": 5.0, "margin": 1.0, "change": 7.5}
    small = dict(shift, change=0.4)                      # open, but moves the outcome less than its margin
    out = steps(open_profiles=[{"name": "pKa[S.N]", "side": "below", "shifts": [shift]},
                               {"name": "k_small", "side": "above", "shifts": [small]}])
    assert out == ["Add runs that inform pKa[S.N]: 'speciakin suggest' ranks candidate runs by how much each "
                   "would firm up the window."]
    failed = dict(shift, change=math.inf)                # cannot be computed: null in window.json
    gates = json.loads(json.dumps(assess(inputs(open_profiles=[{"name": "k", "side": "both", "shifts": [failed]}]))[2]))
    assert next_steps(gates, 5.4)[0].startswith("Add runs that inform k:")
    assert steps(r_hat=[1.3, 1.0])[0].startswith("Sample the posterior longer")
    assert steps(source="least-squares covariance", r_hat=None, ess=None,
                 posterior_converged=None)[0].startswith("Sample the posterior ('speciakin sample'")
    d = np.random.default_rng(1).uniform([-0.5, -2.0], [0.5, 2.0], (400, 2))
    d[:200, 1] = -3.0                                     # half the draws of b on its lower bound
    assert steps(draws=d) == ["Review the model-file bounds of b: widen them where the chemistry allows, or "
                              "fix the parameter, and fit again."]
    assert steps(chi_square=450.0)[0].startswith("State the data's errors")
    # 40 draws cannot show 0.95 against Monte Carlo error (the gate's own count of draws needed)
    # (59: the smallest n with 0.95**n <= 0.05, the one-sided Clopper-Pearson bound when every draw passes)
    few = steps(draws=inputs().draws[:40], level=0.95, mc_confidence=None)
    assert few == ["Compute the window with more draws (--draws 59 or more)."]
    assert steps(level=0.95, mc_confidence=None) == ["Compute the window with its Monte Carlo guard on "
                                                     "(the default)."]


def test_next_steps_land_in_the_window_text_and_json_and_older_files_get_them():
    from decision_synthetic import NAMES, TRUTH, outcome_fn

    specs = [Specification("percent", ("PB",), ">=", 90.0), Specification("percent", ("S",), "<=", 1.0)]
    result = compute_window(outcome_fn, np.tile(TRUTH, (4, 1)), np.arange(2.0, 8.01, 0.5), specs,
                            outcome_names=NAMES)
    apply_gates(result, inputs(windows=result.windows, run_ph_range=(2.5, 3.0)))
    assert result.windows and result.next_steps and result.next_steps[0].startswith("Add a run at pH ")
    assert f"  next: {result.next_steps[0]}" in result.report()
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    assert data["next_steps"] == result.next_steps
    older = {k: v for k, v in data.items() if k != "next_steps"}   # a window.json from before
    assert WindowResult.from_dict(older).next_steps == result.next_steps
