"""Tests of the report assembly (build_report) and the ``speciakin report`` command.

Scenario (invented): the fictional amine "QX-5" (S) has two basic sites; an
invented reagent E acylates either, giving PA (desired) or PB.  Every number
is invented.  The synthetic HPLC data follow the documented error model
y_obs = y_true + N(0, sqrt(0.1^2 + (0.02 y_true)^2)) (docs/estimation.md).
"""

from __future__ import annotations

import base64
import json
import re
from pathlib import Path

import numpy as np
import pytest

from speciakin.chemistry.modelfile import parse_model
from speciakin.data.campaign import Campaign, CampaignRun, Compound, HplcData, TitrantLog
from speciakin.decision import Specification, compute_window
from speciakin.decision.draws import COVARIANCE_SOURCE
from speciakin.errors import InputError
from speciakin.pipeline.fit import fit_campaign
from speciakin.pipeline.objective import CampaignObjective
from speciakin.pipeline.predictions import predict
from speciakin.report import render_all
from speciakin.report.assemble import NOT_RUN, REPORT_SECTION_TITLES, ReportInputs, build_report
from speciakin.report.assemble.inputs import file_sha256
from speciakin.simulation.api import simulate

MODEL_TEXT = '''
# INVENTED EXAMPLE: "QX-5" is a fictional amine; every number is invented.
[model]
name = "qx5_invented"
description = "Invented: acylation of the fictional amine QX-5 at two sites"
reference_temperature = "25 C"

[ions]
"Na+" = 1
"Cl-" = -1

[molecule.S]
label = "QX-5 (invented)"
role = "substrate"
moieties = { core = 1 }
[[molecule.S.site]]
name = "N_a"
kind = "base"
pka = { value = 8.0, fit = true, lower = -1.0, upper = 1.0 }
[[molecule.S.site]]
name = "N_b"
kind = "base"
pka = 5.0

[molecule.E]
role = "reagent"
moieties = { acyl = 1 }

[molecule.ACD]
role = "acid"
[[molecule.ACD.site]]
name = "COOH"
kind = "acid"
pka = 4.5

[molecule.PA]
role = "product"
moieties = { core = 1, acyl = 1 }

[molecule.PB]
role = "byproduct"
moieties = { core = 1, acyl = 1 }

[step.attack_a]
reactants = [{ species = "S", requires = { N_a = "deprotonated" } }, "E"]
products = { PA = 1, ACD = 1 }
k = { value = "0.2 L/(mol*s)", fit = true, lower = -3.0, upper = 2.0 }

[step.attack_b]
reactants = [{ species = "S", requires = { N_b = "deprotonated" } }, "E"]
products = { PB = 1, ACD = 1 }
log10_k = -1.5

[run.held_pH6]
volume = "50 mL"
temperature = "25 C"
end_time = "60 min"
initial = { S = "1.0 mmol", E = "1.2 mmol" }
ph = { mode = "held", setpoint = 6.0, titrant = "Na+", titrant_concentration = "1 M" }

[run.held_pH8]
volume = "50 mL"
temperature = "25 C"
end_time = "60 min"
initial = { S = "1.0 mmol", E = "1.2 mmol" }
ph = { mode = "held", setpoint = 8.0, titrant = "Na+", titrant_concentration = "1 M" }
'''

#: HPLC compounds: (compound, molecule, RRF); invented.
COMPOUNDS = [("QX-5", "S", 1.0), ("PA", "PA", 1.2), ("PB", "PB", 0.9)]
LOQ = 0.05
SAMPLE_MIN = np.array([2, 5, 10, 20, 40, 60], float)


def synthetic_campaign(model, seed: int = 1) -> Campaign:
    """Noisy area% and titrant logs simulated from the model-file values."""
    rng = np.random.default_rng(seed)
    t = SAMPLE_MIN * 60.0
    runs = []
    for run in model.runs:
        sim = simulate(model, run, np.concatenate([[0.0], t]))
        times, comps, mols, values = [], [], [], []
        for k, ti in enumerate(t):
            n = np.array([sim.amounts[k + 1, sim.species_names.index(m)] * r for _, m, r in COMPOUNDS])
            area = 100.0 * n / n.sum()
            for (c, m, _), a in zip(COMPOUNDS, area):
                times.append(ti)
                comps.append(c)
                mols.append(m)
                values.append(a + rng.normal(0.0, np.hypot(0.1, 0.02 * a)))
        v = np.array(values)
        cens = v < LOQ
        n_obs = v.size
        rrf = dict((c, r) for c, _, r in COMPOUNDS)
        hplc = HplcData(np.array(times), np.array(comps), np.array(mols), np.full(n_obs, "area_percent"),
                        np.where(cens, np.nan, v), cens, np.full(n_obs, LOQ), np.array([rrf[c] for c in comps]),
                        np.arange(n_obs) + 2, "area_percent")
        titrant = TitrantLog(sim.times[1:], sim.titrant[1:] * (1 + rng.normal(0, 0.01, t.size)), np.arange(t.size))
        runs.append(CampaignRun(run, hplc, titrant))
    return Campaign(tuple(runs), tuple(Compound(c, m, r, loq=LOQ) for c, m, r in COMPOUNDS),
                    source="synthetic (invented)", basis="area_percent")


def closed_form_outcomes(draws: np.ndarray, ph: np.ndarray) -> np.ndarray:
    """Mole % of S, PA, PB at the end of parallel pseudo-first-order attack at two
    basic sites (analytic solution of parallel first-order reactions, e.g. Atkins
    and de Paula, "Physical Chemistry", section on parallel reactions).
    Columns of a draw: log10 k_a, log10 k_b, pKa_a, pKa_b, log10 tau (invented)."""
    d = np.atleast_2d(draws)
    x = np.asarray(ph)[None, :]
    ra = 10 ** d[:, [0]] / (1 + 10 ** (d[:, [2]] - x))
    rb = 10 ** d[:, [1]] / (1 + 10 ** (d[:, [3]] - x))
    s = 100 * np.exp(-10 ** d[:, [4]] * (ra + rb))
    return np.stack([s, (100 - s) * ra / (ra + rb), (100 - s) * rb / (ra + rb)], axis=-1)


def synthetic_window():
    rng = np.random.default_rng(3)
    truth = np.array([1.0, -0.5, 9.0, 4.5, 1.5])   # invented
    draws = truth + rng.normal(0.0, [0.05, 0.05, 0.1, 0.1, 0.02], size=(200, 5))
    specs = [Specification("percent", ("PA",), ">=", 85.0), Specification("percent", ("S",), "<=", 2.0)]
    return compute_window(closed_form_outcomes, draws, np.linspace(6.0, 11.0, 51), specs, level=0.9,
                          tolerance=0.2, outcome_names=["S", "PA", "PB"], uncertainty_source=COVARIANCE_SOURCE)


@pytest.fixture(scope="module")
def setup():
    model = parse_model(MODEL_TEXT)
    campaign = synthetic_campaign(model)
    objective = CampaignObjective(model, campaign, parallel=False)
    fit = fit_campaign(objective, starts=1, profiles=True, profile_points=4)
    window = synthetic_window()
    return model, campaign, objective, fit, window


def fake_posterior(fit, seed: int = 5):
    """A small PosteriorResult from independent normal draws around the fit (not a
    real sampler run): enough to exercise every posterior part of the report."""
    from speciakin.estimation.diagnostics import convergence_diagnostics
    from speciakin.estimation.sampling import PosteriorResult, summarise

    rng = np.random.default_rng(seed)
    sd = np.sqrt(np.diag(fit.covariance))
    chain = fit.theta + sd * rng.standard_normal((80, 8, len(fit.names)))
    acceptance = np.full(8, 0.4)
    burn_in = 10
    diag = convergence_diagnostics(chain, acceptance, fit.names, burn_in)
    samples = chain[burn_in:].reshape(-1, chain.shape[2])
    return PosteriorResult(parameter_names=list(fit.names), chain=chain, log_prob=np.zeros(chain.shape[:2]),
                           acceptance_fraction=acceptance, burn_in=burn_in, thin=1, samples=samples,
                           summary=summarise(fit.names, samples, diag), diagnostics=diag,
                           priors=["normal(mean=0, sd=0.5)", "uniform(lower=-3, upper=2)"],
                           n_walkers=8, n_steps=80, seed=seed)


def pdf_text(path: Path) -> str:
    from pypdf import PdfReader

    return "\n".join(page.extract_text() or "" for page in PdfReader(str(path)).pages)


@pytest.fixture(scope="module")
def rendered(setup, tmp_path_factory):
    model, campaign, objective, fit, window = setup
    folder = tmp_path_factory.mktemp("report")
    model_file = folder / "model.toml"
    model_file.write_text(MODEL_TEXT, encoding="utf-8")
    inputs = ReportInputs(model=model, campaign=campaign, predictions=predict(objective, fit), fit=fit,
                          window=window,
                          command="speciakin report out", software_version="0.0-test",
                          extra_inputs=[("model file", str(model_file))], invented=True)
    doc = build_report(inputs)
    paths = render_all(doc, folder)
    return doc, paths, model_file


def test_sections_in_order(rendered):
    doc, _, _ = rendered
    assert [s.title for s in doc.sections] == [t for t in REPORT_SECTION_TITLES if t != "Next-run suggestion"]
    assert doc.callouts("decision")


def test_html_decision_before_parameters_and_images_embedded(rendered):
    _, paths, _ = rendered
    html = paths["html"].read_text(encoding="utf-8")
    assert html.index("Decision summary") < html.index("Least-squares estimates")
    images = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', html)
    assert len(images) >= 6
    # PNG signature, ISO/IEC 15948 section 5.2
    assert all(base64.b64decode(img[:24])[:8] == b"\x89PNG\r\n\x1a\n" for img in images)
    assert 'src="http' not in html and "<script" not in html      # self-contained page


def test_pdf_contains_cautions_window_and_parameters(rendered, setup):
    _, paths, _ = rendered
    _, _, _, fit, window = setup
    text = pdf_text(paths["pdf"])
    flat = re.sub(r"\s+", " ", text)
    assert "Cautions" in flat
    assert "Assumptions and limitations" in flat
    lo, hi = window.primary_window
    assert f"pH {lo:.2f} to {hi:.2f}" in flat
    for name in fit.names:
        assert name in flat.replace(" ", "") or name in flat


def test_xlsx_parameter_sheet_has_numbers(rendered, setup):
    from openpyxl import load_workbook

    _, paths, _ = rendered
    _, _, objective, fit, _ = setup
    wb = load_workbook(paths["xlsx"])
    assert {"parameters", "intervals", "correlation", "observations", "window"} <= set(wb.sheetnames)
    ws = wb["parameters"]
    header = [c.value for c in ws[1]]
    col = next(i for i, h in enumerate(header) if h.startswith("least-squares value"))
    values = {ws.cell(row=r, column=1).value: ws.cell(row=r, column=col + 1).value for r in range(2, ws.max_row + 1)}
    for name, value in zip(fit.names, fit.theta):
        assert isinstance(values[name], float)
        assert values[name] == pytest.approx(value, rel=1e-12)
    obs = wb["observations"]
    assert obs.max_row - 1 == objective.n_hplc + objective.n_titrant


def test_observation_residuals_match_objective(rendered, setup):
    """The sheet's weighted residuals are the objective's own residual vector."""
    doc, _, _ = rendered
    _, _, objective, fit, _ = setup
    table = next(t for t in doc.tables_for_workbook if t.sheet_name == "observations")
    column = table.columns.index("weighted residual")
    sheet = np.array([np.nan if r[column] is None else r[column] for r in table.rows], float)
    np.testing.assert_allclose(sheet, objective.residuals(fit.theta), rtol=1e-12)
    # chi-square of the fit = sum of squared weighted residuals (definition of weighted least squares)
    assert np.sum(sheet ** 2) == pytest.approx(fit.fit.chisqr, rel=1e-6)


def test_missing_posterior_gives_not_run_note(rendered):
    doc, paths, _ = rendered
    texts = [b.text for _, b in doc.blocks("paragraph")]
    assert any("Posterior sampling: not run" in t for t in texts)
    assert "Posterior sampling: not run" in paths["html"].read_text(encoding="utf-8")


def test_input_file_hash_is_sha256_of_the_file(rendered):
    import hashlib

    doc, _, model_file = rendered
    table = next(b for _, b in doc.blocks("table") if b.title == "Input files")
    row = next(r for r in table.rows if r[0] == "model file")
    # reference: hashlib (Python standard library implementation of FIPS 180-4)
    assert row[2] == hashlib.sha256(model_file.read_bytes()).hexdigest()
    assert file_sha256(model_file)[1] == model_file.stat().st_size


def test_window_sheet_matches_result(rendered, setup):
    doc, _, _ = rendered
    window = setup[4]
    table = next(t for t in doc.tables_for_workbook if t.sheet_name == "window")
    np.testing.assert_allclose([r[1] for r in table.rows], window.probability)
    lo, hi = window.robust_windows[0]
    flags = [r[5] for r in table.rows]
    expected = ["yes" if lo - 1e-9 <= x <= hi + 1e-9 else "no" for x in window.ph]
    assert flags == expected


def test_nothing_but_model_and_campaign(setup, tmp_path):
    model, campaign = setup[0], setup[1]
    doc = build_report(ReportInputs(model=model, campaign=campaign))
    assert [s.title for s in doc.sections] == [t for t in REPORT_SECTION_TITLES if t != "Next-run suggestion"]
    text = json.dumps(doc.to_dict())
    assert NOT_RUN in text
    assert doc.callouts("decision")[0].title == "pH window not computed"
    # it says how to get the window: the command, and that the report is then written again
    assert "'speciakin window'" in text and "write the report again" in text
    paths = render_all(doc, tmp_path, formats=("html", "xlsx"))
    assert paths["html"].exists()


def test_with_fake_posterior(setup, tmp_path):
    """Posterior parts: table columns, convergence, trace and corner (no run plots here,
    to keep the suite fast; the predictive band is checked on runs_section below)."""
    model, campaign, objective, fit, window = setup
    posterior = fake_posterior(fit)
    doc = build_report(ReportInputs(model=model, campaign=campaign, fit=fit, posterior=posterior))
    captions = [b.caption for _, b in doc.blocks("figure")]
    assert any("Walker traces" in c for c in captions)
    assert any("pairwise densities" in c for c in captions)
    table = next(t for t in doc.tables_for_workbook if t.sheet_name == "parameters")
    med, low, high = (table.columns.index(c) for c in ("posterior median", "credible 2.5 %", "credible 97.5 %"))
    for row in table.rows:
        x = posterior.samples[:, posterior.parameter_names.index(row[0])]
        # reference: numpy quantiles of the kept samples (central 95 % interval)
        assert row[med] == pytest.approx(float(np.median(x)))
        assert row[low] == pytest.approx(float(np.quantile(x, 0.025)))
        assert row[high] == pytest.approx(float(np.quantile(x, 0.975)))
    paths = render_all(doc, tmp_path, formats=("html",))
    html = paths["html"].read_text(encoding="utf-8")
    assert "Convergence diagnostics" in html and "Posterior sampling: not run" not in html


def test_predictive_band_from_posterior_draws(setup):
    from speciakin.pipeline.predictions import figure_keys, posterior_draws

    _, _, objective, fit, _ = setup
    posterior = fake_posterior(fit)
    predictions = predict(objective, fit, posterior, band_draws=40, seed=0)
    direct = objective.curves_batch(posterior_draws(objective, posterior, 40, seed=0), 121)
    keys = figure_keys(objective)
    assert predictions.band_draws == 40
    for run in predictions.runs:
        assert run.n_band == 40
        for compound, curves in direct[run.name]["values"].items():
            # reference: numpy percentiles of the same draws' curves, computed here
            np.testing.assert_allclose(run.low[keys[compound]], np.percentile(curves, 5, axis=0))
            np.testing.assert_allclose(run.high[keys[compound]], np.percentile(curves, 95, axis=0))
        np.testing.assert_allclose(run.time, direct[run.name]["time"] / 60.0)


def test_posterior_of_another_model_is_refused(setup):
    model, campaign, objective, fit, _ = setup
    posterior = fake_posterior(fit)
    posterior.parameter_names = ["a", "b"]
    with pytest.raises(InputError, match="posterior does not belong"):
        predict(objective, fit, posterior)


def test_missing_extra_input_is_an_input_error(setup, tmp_path):
    model, campaign = setup[0], setup[1]
    with pytest.raises(InputError, match="cannot read input file"):
        build_report(ReportInputs(model=model, campaign=campaign,
                                  extra_inputs=[("process file", str(tmp_path / "absent.toml"))]))


# ----------------------------------------------------------------- the command
@pytest.fixture(scope="module")
def result_folder(setup, tmp_path_factory):
    """An output folder as fit and window leave it: fit.json naming model and campaign files."""
    from speciakin.data import write_campaign

    model, campaign, _, fit, window = setup
    folder = tmp_path_factory.mktemp("results")
    (folder / "model.toml").write_text(MODEL_TEXT, encoding="utf-8")
    write_campaign(campaign, folder / "campaign.xlsx")
    data = fit.to_dict()
    data["model"], data["campaign"] = str(folder / "model.toml"), str(folder / "campaign.xlsx")
    (folder / "fit.json").write_text(json.dumps(data), encoding="utf-8")
    (folder / "window.json").write_text(json.dumps(window.to_dict()), encoding="utf-8")
    return folder


def test_command_writes_report_and_keeps_inputs(result_folder, capsys):
    import hashlib

    from speciakin.cli.main import main

    before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in result_folder.iterdir() if p.is_file()}
    code = main(["report", str(result_folder), "--formats", "html,xlsx"])
    out = capsys.readouterr().out
    assert code == 0
    assert (result_folder / "report.html").exists() and (result_folder / "report.xlsx").exists()
    assert not (result_folder / "report.pdf").exists()
    assert "report.html" in out and "posterior" in out
    html = (result_folder / "report.html").read_text(encoding="utf-8")
    # a bare window computation carries no gate verdict: not presented as established
    assert "Status: not checked" in html and "Recommended: pH" not in html and "Posterior sampling: not run" in html
    assert before["campaign.xlsx"] in html            # the workbook's SHA-256 is listed
    after = {name: hashlib.sha256((result_folder / name).read_bytes()).hexdigest() for name in before}
    assert after == before                            # inputs are never modified
    assert not [p for p in result_folder.iterdir() if p.name.endswith(".tmp")]


@pytest.mark.parametrize("case, message", [
    ("missing folder", "output folder not found"),
    ("bad json", "fit result is not valid JSON"),
    ("no fit, no model", "no model file given and none recorded in fit.json"),
    ("model gone", "model file named in fit.json no longer exists"),
    ("format", "unknown report format"),
    ("model option", "model file not found"),
    ("incomplete fit", "fit result is incomplete or malformed"),
])
def test_command_errors(case, message, setup, tmp_path, capsys):
    from speciakin.cli.main import main

    folder = tmp_path / "out"
    folder.mkdir()
    args = ["report", str(folder)]
    if case == "missing folder":
        args = ["report", str(tmp_path / "absent")]
    elif case == "bad json":
        (folder / "fit.json").write_text("{not json", encoding="utf-8")
    elif case == "model gone":
        data = setup[3].to_dict()
        data["model"], data["campaign"] = "gone.toml", "gone.xlsx"
        (folder / "fit.json").write_text(json.dumps(data), encoding="utf-8")
    elif case == "model option":
        args += ["--model", str(tmp_path / "absent.toml")]
    elif case == "incomplete fit":
        (folder / "fit.json").write_text(json.dumps({"model": "m.toml", "campaign": "c.xlsx"}))
    elif case == "format":
        args += ["--formats", "html,docx"]
    code = main(args)
    err = capsys.readouterr().err
    assert code != 0
    assert message in err
    assert "Traceback" not in err


def test_planned_process_in_display_units():
    from speciakin.decision import ProcessPlan
    from speciakin.report.assemble.decision import process_block

    # invented plan: 1 mmol substrate in 50 mL, 1.2 eq over 30 min, hold 60 min at 20 C
    plan = ProcessPlan(name="invented plan", substrate="S", substrate_amount=1e-3, volume=0.05, reagent="E",
                       equivalents=1.2, dosing_time=1800.0, hold_time=3600.0, temperature=293.15,
                       titrant="Na+", titrant_concentration=1.0)
    rows = dict(process_block(plan).rows)
    assert rows["Initial volume [mL]"] == pytest.approx(50.0)
    assert rows["Dosing time [min]"] == pytest.approx(30.0)
    assert rows["Temperature [C]"] == pytest.approx(20.0)   # 293.15 K - 273.15 (SI definition of the Celsius scale)
    assert rows["Substrate"] == "S, 1 mmol"


def test_posterior_without_fit(setup):
    """Only a posterior: parameter and correlation tables come from its samples."""
    model, campaign, _, fit, _ = setup
    posterior = fake_posterior(fit)
    doc = build_report(ReportInputs(model=model, campaign=campaign, posterior=posterior))
    table = next(t for t in doc.tables_for_workbook if t.sheet_name == "parameters")
    assert [r[0] for r in table.rows] == posterior.parameter_names
    assert all(r[table.columns.index("least-squares value")] is None for r in table.rows)
    corr = next(t for t in doc.tables_for_workbook if t.sheet_name == "correlation")
    # reference: numpy.corrcoef of the kept samples
    expected = np.corrcoef(posterior.samples.T)
    np.testing.assert_allclose([r[1:] for r in corr.rows], expected, atol=1e-12)
    assert "posterior samples" in corr.note


def test_window_section_with_design_space_map():
    from speciakin.report.assemble import species_colors
    from speciakin.report.assemble.decision import window_section

    rng = np.random.default_rng(4)
    draws = np.array([1.0, -0.5, 9.0, 4.5, 1.5]) + rng.normal(0.0, 0.05, size=(60, 5))   # invented

    def outcome(batch, ph, factor=None):
        d = np.array(batch, float)
        if factor is not None:
            d[:, 4] = factor
        return closed_form_outcomes(d, ph)

    specs = [Specification("percent", ("PA",), ">=", 85.0), Specification("percent", ("S",), "<=", 2.0)]
    window = compute_window(outcome, draws, np.linspace(6.0, 11.0, 26), specs, level=0.9, tolerance=0.2,
                            factor_grid=[0.5, 1.0, 1.5], outcome_names=["S", "PA", "PB"],
                            factor_name="log10 time scale", factor_unit="-")
    model = parse_model(MODEL_TEXT)
    section = window_section(window, species_colors(model))
    captions = [b.caption for b in section.blocks if b.block_kind == "figure"]
    assert any("over pH and log10 time scale" in c for c in captions)
    table = next(b for b in section.blocks if b.block_kind == "table" and b.title == "Windows by second factor")
    assert [r[0] for r in table.rows] == [0.5, 1.0, 1.5]


def test_fit_figure_set_names_and_png(setup):
    from speciakin.report.assemble.figures import fit_figure_set

    _, _, objective, fit, _ = setup
    figures = fit_figure_set(objective.model, predict(objective, fit), fit)
    expected = {f"run_{r}" for r in objective.run_names} | {f"titrant_{r}" for r in objective.run_names}
    assert expected | {"residuals", "profiles", "correlation"} == set(figures)
    assert all(png.startswith(b"\x89PNG\r\n\x1a\n") for png in figures.values())


def test_parameters_state_the_degrees_of_freedom_and_what_they_leave_out(rendered, setup):
    _, paths, _ = rendered
    fit = setup[3]
    flat = re.sub(r"\s+", " ", pdf_text(paths["pdf"]))
    st = fit.fit
    assert f"Degrees of freedom {st.degrees_of_freedom:.4g}" in flat
    # the reduced chi-square a reader can redo from the two numbers beside it
    assert st.reduced_chisqr == pytest.approx(st.chisqr / st.degrees_of_freedom)
    said = "that the model meets exactly and no parameter moves" in flat
    assert said == (st.n_inactive > 0)
    if said:
        assert f"less {st.n_inactive} value" in flat
