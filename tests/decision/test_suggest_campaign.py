"""Next-run suggestion on synthetic campaigns (kernel, fit, glue and command).

The campaigns (tests/decision/suggest_synthetic.py, invented) are simulated
from known parameters with the campaign's own noise model.  Chemistry behind
the expectations: a basic site with pKa K is free to the fraction
1 / (1 + 10^(K - pH)) (Henderson-Hasselbalch); far below K the rate of its
reaction is k 10^(pH - K), so runs there fix only k 10^-K (the fit warns of a
correlation of +1 and an open profile, Raue et al., Bioinformatics 2009, 25,
1923); a run within about 1.5 units of K, where the fraction is between 3 %
and 97 %, separates k from K.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

from suggest_synthetic import COMPOUNDS, LOW_SETPOINTS, TRUTH, build  # noqa: E402

from speciakin.cli.main import main  # noqa: E402
from speciakin.data import write_campaign  # noqa: E402
from speciakin.decision.process import process_to_toml  # noqa: E402
from speciakin.pipeline.suggest import (  # noqa: E402
    candidate_conditions,
    candidate_runs,
    suggest_for_campaign,
    template_index,
)
from speciakin.errors import InputError  # noqa: E402
from speciakin.pipeline.fit import fit_campaign  # noqa: E402
from speciakin.pipeline.objective import CampaignObjective  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "estimation"))
from campaign_synthetic import SAMPLE_TIMES, synthetic_campaign  # noqa: E402

PKA = "pKa[S.N_a]"


@pytest.fixture(scope="module")
def low_campaign():
    model, campaign, process = build()
    objective = CampaignObjective(model, campaign)
    fit = fit_campaign(objective, profiles=True, profile_points=8)
    return model, campaign, process, objective, fit


@pytest.fixture(scope="module")
def low_suggestion(low_campaign):
    _, _, process, objective, fit = low_campaign
    return suggest_for_campaign(objective, fit=fit, process=process, n_draws=400, seed=1, check=True)


def _row(fit, name):
    return {r["name"]: r for r in fit.rows()}[name]


def test_low_ph_runs_leave_the_pka_open(low_campaign):
    fit = low_campaign[4]
    row = _row(fit, PKA)
    assert row["profile_open_above"] or row["profile_open_below"]


def test_top_suggestion_sits_near_the_undetermined_pka(low_suggestion):
    top = low_suggestion.candidates[0]
    assert abs(top.conditions["setpoint_pH"] - TRUTH[PKA]) <= 1.5
    assert low_suggestion.helps
    # every low-pH candidate (at or below the campaign's runs) is ranked below the top one
    # and is expected to narrow the high edge by less
    low = [c for c in low_suggestion.candidates if c.conditions["setpoint_pH"] <= max(LOW_SETPOINTS)]
    assert all(c.edge_reduction < top.edge_reduction for c in low)
    assert PKA in low_suggestion.moving
    assert low_suggestion.method == "fisher"
    assert "fisher method: linearised at 40 of the draws" in low_suggestion.notes
    # the pre-posterior simulation, run as a check, expects the fisher method's best run to
    # narrow the edges within the "helps much" threshold of its own best, which is also near the pKa
    check = low_suggestion.check
    assert check["method"] == "preposterior"
    assert 0.0 <= check["shortfall_pH"] <= 0.1
    assert abs(check["best_candidate"]["conditions"]["setpoint_pH"] - TRUTH[PKA]) <= 1.5


def test_adding_the_suggested_run_closes_the_pka_interval(low_campaign, low_suggestion):
    model, _, process, objective, _ = low_campaign
    top = low_suggestion.candidates[0]
    index = template_index(objective)
    runs, times = candidate_runs(objective, [top.conditions], index, SAMPLE_TIMES)
    assert runs[0].ph.setpoint == top.conditions["setpoint_pH"]
    np.testing.assert_array_equal(times[0], SAMPLE_TIMES)
    # same seed: the first runs get the same noise as the original campaign
    extended = synthetic_campaign(model, list(model.runs) + runs, dict(TRUTH), SAMPLE_TIMES, COMPOUNDS,
                                  seed=3)
    fit = fit_campaign(CampaignObjective(model, extended), profiles=True, profile_points=8)
    row = _row(fit, PKA)
    assert not row["profile_open_above"] and not row["profile_open_below"]
    lo, hi = row["profile_interval"]
    base = row["shift_of"]
    assert base + lo < TRUTH[PKA] < base + hi
    assert hi - lo < 0.5


def test_campaign_that_pins_everything_reports_no_help():
    model, campaign, process = build(setpoints=(3.5, 5.0, 6.5, 7.5, 8.5, 9.5))
    objective = CampaignObjective(model, campaign)
    fit = fit_campaign(objective, profiles=False)
    result = suggest_for_campaign(objective, fit=fit, process=process, n_draws=300, seed=2)
    assert not result.helps
    assert result.message.startswith("No candidate helps much")
    assert result.candidates[0].edge_reduction < 0.1


def test_bad_input_is_a_located_error(low_campaign):
    _, _, process, objective, fit = low_campaign
    with pytest.raises(InputError, match="no candidate run is left"):
        candidate_conditions((8.0, 7.0))
    with pytest.raises(InputError, match="no candidate run is left"):
        candidate_conditions((3.0, 6.0), plant_ph=(7.0, 9.0))
    with pytest.raises(InputError, match="outside the range the model is valid for") as err:
        candidate_conditions((3.0, 15.0))
    assert err.value.exit_code == 2
    with pytest.raises(InputError, match="outside the range the model is valid for"):
        candidate_conditions((3.0, 6.0), temperatures_c=[25.0, 180.0])
    with pytest.raises(InputError, match="equivalents must be positive"):
        candidate_conditions((3.0, 6.0), equivalents=[0.0])
    with pytest.raises(InputError, match="no fit or posterior"):
        suggest_for_campaign(objective, process=process)
    with pytest.raises(InputError, match="no such run"):
        template_index(objective, "not-a-run")


def test_command_writes_suggestions_and_figure(tmp_path, capsys):
    model, campaign, process = build()
    folder = tmp_path / "campaign"
    folder.mkdir()
    write_campaign(campaign, folder / "campaign.xlsx")
    from suggest_synthetic import model_text

    (folder / "model.toml").write_text(model_text())
    (folder / "process.toml").write_text(process_to_toml(process))
    out = tmp_path / "out"
    # no fit yet: a clear error, exit code 2
    assert main(["suggest", str(folder), "--out", str(out), "--quiet"]) == 2
    assert "no fit or posterior" in capsys.readouterr().err
    assert main(["fit", str(folder), "--out", str(out), "--starts", "1", "--no-profiles", "--quiet"]) == 0
    assert main(["suggest", str(folder), "--out", str(out), "--ph-range", "9", "8", "--quiet"]) == 2
    assert "no candidate run is left" in capsys.readouterr().err
    assert main(["suggest", str(folder), "--out", str(out), "--plant-ph", "3", "20", "--quiet"]) == 2
    assert main(["suggest", str(folder), "--out", str(out), "--plant-ph", "3", "10", "--batch", "2",
                 "--draws", "200", "--quiet"]) == 0
    data = json.loads((out / "suggest.json").read_text())
    assert data["schema"] == "speciakin.suggest/1"
    assert len(data["batch"]) == 2 and data["batch"][0]["candidate"] != data["batch"][1]["candidate"]
    first = data["candidates"][0]
    assert 3.0 <= first["conditions"]["setpoint_pH"] <= 10.0
    assert first["reason"].startswith("expected to")
    assert first["expected"]["window_edge_credible_width_pH"]["high"]["before"] >= \
        first["expected"]["window_edge_credible_width_pH"]["high"]["after"]
    png = (out / "figures" / "suggest_shrinkage.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert (out / "suggest.txt").read_text().startswith("Suggested next runs")


def test_candidate_runs_copy_the_protocol_with_the_stated_changes(low_campaign):
    objective = low_campaign[3]
    index = template_index(objective)
    template = objective.runs[index].recipe
    conditions = candidate_conditions((7.0, 7.0), temperatures_c=[30.0], equivalents=[2.0],
                                      dosing_times_min=[20.0], sample_times_min=[0.0, 5.0, 60.0])
    assert len(conditions) == 1
    (run,), (times,) = candidate_runs(objective, conditions, index, SAMPLE_TIMES)
    # hand values: 2.0 eq of the 1.0 mmol substrate charged, fed from 0 to 20 min, 30 C = 303.15 K
    assert run.ph.mode == "held" and run.ph.setpoint == 7.0
    assert run.ph.titrant == template.ph.titrant
    assert run.ph.titrant_concentration == template.ph.titrant_concentration
    assert run.temperature.temperatures == (303.15,)
    (dose,) = run.doses
    assert dose.species == "ANH"
    assert dose.amount == pytest.approx(2.0e-3, rel=1e-12)
    assert (dose.start, dose.end) == (0.0, 1200.0)
    assert dose.volume == template.doses[0].volume
    assert run.charges == template.charges and run.volume == template.volume
    np.testing.assert_array_equal(times, [300.0, 3600.0])
    assert run.end_time == template.end_time


def test_posterior_draws_are_used_when_given(low_campaign):
    from speciakin.pipeline.window import window_draws

    _, _, process, objective, fit = low_campaign

    class Posterior:                       # the one method window_draws needs of a PosteriorResult
        parameter_names = objective.names

        def draws(self, n, seed):
            return window_draws(fit, None, n, seed)[0]

    result = suggest_for_campaign(objective, fit=None, posterior=Posterior(), process=process, n_draws=200,
                                  ph_range=(5.0, 9.0), ph_step=1.0, check=True)
    assert result.notes[0].startswith("parameter draws: posterior (200 draws)")
    assert {c.conditions["setpoint_pH"] for c in result.candidates} == {5.0, 6.0, 7.0, 8.0, 9.0}
    assert "Check by the preposterior method" in result.report()
