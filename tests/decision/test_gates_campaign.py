"""Trust gates on a real (synthetic, invented) campaign through the project's
fit, sampler and window: runs that all sit below a site's pKa leave that pKa
unidentified (open profile) and fire the identifiability gate; a process
scanned above the runs' pH fires the pH-coverage gate; a posterior cut short
fires the convergence gate, and window.json / window.txt carry the status."""

from __future__ import annotations

import json

import numpy as np
import pytest

from estimation.campaign_synthetic import SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model, \
    synthetic_campaign
from speciakin.decision import Specification, validate_process
from speciakin.decision.process_plan import ProcessPlan
from speciakin.decision.gates import NOT_ESTABLISHED, PASS

# All numbers invented.  N_b of the substrate has pKa 5.0 in the data (5.2 in the file,
# shift bounds +/- 1); both runs sit 2.5-3 units below it, where mainly k_b * Ka(N_b) is seen.
SETPOINTS = (2.0, 2.5)


def make_process(model):
    plan = ProcessPlan(name="INVENTED test process", substrate="S", substrate_amount=1e-3, volume=0.05,
                       reagent="ANH", equivalents=1.3, dosing_time=600.0, hold_time=6600.0,
                       temperature=298.15, titrant="Na+", titrant_concentration=1.0, feed_volume=0.002,
                       ph_from=3.5, ph_to=10.5, ph_step=0.5, level=0.9, ph_tolerance=0.3, n_draws=40,
                       specifications=(Specification("percent", ("S",), "<=", 5.0, label="substrate left"),))
    return validate_process(plan, model)


@pytest.fixture(scope="module")
def below_pka():
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.objective import CampaignObjective

    model = small_model(setpoints=SETPOINTS)
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=21)
    objective = CampaignObjective(model, campaign, parallel=False)
    fit = fit_campaign(objective, starts=1, profiles=True, profile_points=8)
    return objective, fit, make_process(model)


def gate(result, name):
    return next(g for g in result.gates if g["name"] == name)


def test_runs_below_a_pka_fire_the_identifiability_gate(below_pka, tmp_path):
    from speciakin.pipeline.window import window_draws, window_for_campaign

    objective, fit, process = below_pka
    rows = {r["name"]: r for r in fit.rows()}
    assert rows["pKa[S.N_b]"]["profile_open_below"] or rows["pKa[S.N_b]"]["profile_open_above"]
    theta, source, _ = window_draws(fit, None, 40, 1)
    result = window_for_campaign(objective, process, theta, source, fit=fit)
    assert result.windows, "the process must have a window for the edges to be checked"
    ident = gate(result, "identifiability")
    assert ident["verdict"] == NOT_ESTABLISHED
    assert any("pKa[S.N_b] is not identified" in r for r in ident["reasons"])
    # the process is scanned far above the runs' pH (2.0-2.5): extrapolation
    coverage = gate(result, "pH coverage")
    assert coverage["verdict"] != PASS
    assert any("above the highest run pH" in r for r in coverage["reasons"])
    assert result.status == "not established"
    # covariance draws: no posterior, so the convergence gate is provisional at best
    assert gate(result, "convergence")["verdict"] != PASS


def test_unconverged_posterior_fires_the_convergence_gate(below_pka, tmp_path):
    from speciakin import workflow
    from speciakin.pipeline.posterior import sample_campaign

    objective, fit, process = below_pka
    se = np.array([r["standard_error"] or 0.05 for r in fit.rows()], float)
    posterior = sample_campaign(objective, np.asarray(fit.theta), se, n_steps=30, seed=3, progress=False)
    assert not posterior.converged                                     # 30 steps cannot be enough
    result = workflow.window_step(objective, process, tmp_path, fit=fit, posterior=posterior, draws=40, seed=1)
    conv = gate(result, "convergence")
    assert conv["verdict"] != PASS and result.status != "established"
    data = json.loads((tmp_path / "window.json").read_text())
    assert data["status"] == result.status and data["status_reasons"] == result.status_reasons
    text = (tmp_path / "window.txt").read_text()
    assert result.status.upper() in text
    assert any(("R-hat" in r or "effective sample size" in r or "not converged" in r) for r in result.status_reasons)


def test_data_noisier_than_stated_fire_the_error_model_gate():
    # data made with 20x the noise the model file states (absolute 2 area%, relative 20 %)
    from speciakin.pipeline.window import window_draws, window_for_campaign
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.objective import CampaignObjective

    model = small_model()
    campaign = synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=22,
                                  noise=(2.0, 0.2))
    objective = CampaignObjective(model, campaign, parallel=False)
    fit = fit_campaign(objective, starts=1, profiles=False)
    theta, source, _ = window_draws(fit, None, 20, 1)
    result = window_for_campaign(objective, make_process(model), theta, source, fit=fit)
    error_model = gate(result, "error model")
    assert error_model["verdict"] == NOT_ESTABLISHED
    assert error_model["figures"]["reduced_chi_square"] > 4
    assert result.status == "not established"
    assert gate(result, "identifiability")["verdict"] == "not checked"        # fit without profiles


def test_gates_that_runs_lift_name_their_runs_and_start_the_suggestion(below_pka, tmp_path):
    # the same campaign: pKa[S.N_b] unidentified and the window above the runs' pH 2.0-2.5, so the
    # window's next steps ask for runs, and the pipeline's suggestion step ranks candidate runs
    from speciakin.pipeline.steps import suggest_step
    from speciakin.pipeline.window import window_draws, window_for_campaign

    objective, fit, process = below_pka
    theta, source, _ = window_draws(fit, None, 40, 1)
    result = window_for_campaign(objective, process, theta, source, fit=fit)
    assert any(s.startswith("Add runs that inform pKa[S.N_b]") for s in result.next_steps)
    assert any(s.startswith("Add a run at pH ") and "2.00 to 2.50 the runs covered" in s for s in result.next_steps)
    suggestion = suggest_step(objective, process, result, tmp_path, fit=fit, seed=1)
    assert suggestion is not None and suggestion.candidates
    data = json.loads((tmp_path / "suggest.json").read_text())
    assert data["candidates"][0]["conditions"]["setpoint_pH"] == suggestion.candidates[0].conditions["setpoint_pH"]
    # a window whose failing gates runs do not lift (here: none fails) makes no suggestion and writes nothing
    result.gates = [dict(g, verdict=PASS) for g in result.gates]
    assert suggest_step(objective, process, result, tmp_path / "none", fit=fit, seed=1) is None
    assert not (tmp_path / "none").exists()
