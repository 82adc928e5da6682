"""The bundled INVENTED demo campaign: imports, validates, matches its generator
and its stated truth.

The generator is scripts/make_demo_campaign.py; it is loaded here as a module
so that the tests use its TRUTH, NOISE and run designs (one source).
"""

from __future__ import annotations

import importlib.util
import json
import sys
from pathlib import Path

import numpy as np
import pytest

from speciakin.chemistry.modelfile import load_model
from speciakin.data import check_campaign, load_campaign, mole_fractions_from_signals
from speciakin.demo import DEMO_FILES, demo_dir, demo_file
from speciakin.errors import InputError
from speciakin.simulation.api import simulate

ROOT = Path(__file__).resolve().parents[2]
CHECKOUT_DEMO = ROOT / "data_templates" / "demo"


def _load_generator():
    path = ROOT / "scripts" / "make_demo_campaign.py"
    spec = importlib.util.spec_from_file_location("make_demo_campaign", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules["make_demo_campaign"] = module
    spec.loader.exec_module(module)
    return module


gen = _load_generator()


@pytest.fixture(scope="module")
def model():
    return load_model(demo_file("model"))


@pytest.fixture(scope="module")
def campaign():
    return load_campaign(demo_dir())


@pytest.fixture(scope="module")
def truth_file():
    return json.loads(demo_file("truth").read_text())


@pytest.fixture(scope="module")
def truth(model):
    return gen.simulate_truth(model)


# ``regenerated`` (tests/conftest.py): the generator run as a script, in the instruction set of the stored
# demo (tests/pinned_numbers.py; the noise-free curves of truth.json differ in the last bits from one CPU to
# another), beside the other tests.


# ------------------------------------------------------------------ bundle


def test_package_copy_equals_checkout_copy():
    # The package data and the checkout folder are written by one generator run.
    for name in DEMO_FILES.values():
        assert (demo_dir() / name).read_bytes() == (CHECKOUT_DEMO / name).read_bytes(), name


def test_every_file_is_labelled_invented():
    for role in ("model", "process", "readme"):
        assert "INVENTED" in demo_file(role).read_text(), role
    assert "INVENTED" in json.loads(demo_file("truth").read_text())["label"]


def test_unknown_demo_role_is_a_clear_error():
    with pytest.raises(InputError, match="unknown demo file.*expected one of: campaign"):
        demo_file("spreadsheet")


def test_demo_imports_and_validates_against_its_model(campaign):
    report = check_campaign(demo_dir(), model=demo_file("model"))
    assert report.errors == [], report.report()
    assert len(campaign.runs) == 6
    assert {r.recipe.ph.mode for r in campaign.runs} == {"held", "logged", "free"}
    assert campaign.basis == "area_percent"


def test_compound_mapping_is_complete(campaign, model):
    molecules = {m.name for m in model.molecules}
    mapped = {c.molecule for c in campaign.compounds}
    assert mapped <= molecules
    # every molecule that carries the substrate core is reported by HPLC
    core = {m.name for m in model.molecules if m.moieties.get("core", 0) > 0}
    assert core == mapped
    for run in campaign.runs:
        assert set(run.hplc.molecule) == core


def test_demo_has_censored_values_reported_as_loq_text(campaign):
    import openpyxl

    book = openpyxl.load_workbook(demo_file("campaign"), read_only=True)
    cells = [row[-1] for row in book["HPLC results"].iter_rows(min_row=2, values_only=True)]
    assert "<LOQ" in cells
    n_censored = sum(int(r.hplc.censored.sum()) for r in campaign.runs)
    assert n_censored == cells.count("<LOQ") > 0


# ------------------------------------------------------------ regeneration


def test_regeneration_is_byte_identical(regenerated):
    # Deterministic generator (fixed seed, fixed workbook properties and zip dates).
    for name in DEMO_FILES.values():
        assert (regenerated / name).read_bytes() == (CHECKOUT_DEMO / name).read_bytes(), name


def test_regenerated_campaign_equals_bundled_numerically(regenerated, campaign):
    again = load_campaign(regenerated)
    assert [r.name for r in again.runs] == [r.name for r in campaign.runs]
    for a, b in zip(again.runs, campaign.runs):
        np.testing.assert_array_equal(a.hplc.time, b.hplc.time)
        np.testing.assert_array_equal(a.hplc.censored, b.hplc.censored)
        np.testing.assert_array_equal(a.hplc.value, b.hplc.value)  # NaN == NaN here
        np.testing.assert_array_equal(a.ph_log.value, b.ph_log.value)
        if b.titrant is not None:
            np.testing.assert_array_equal(a.titrant.amount, b.titrant.amount)


def test_other_seed_gives_other_noise(truth):
    a = gen._noisy_campaign(truth, gen.SEED)
    b = gen._noisy_campaign(truth, gen.SEED + 1)
    assert not np.array_equal(np.nan_to_num(a.runs[0].hplc.value), np.nan_to_num(b.runs[0].hplc.value))


# ------------------------------------------------------------------- truth


def test_truth_names_are_model_quantities(model):
    compiled, q = gen.true_parameters(model)
    for name, value in gen.TRUTH.items():
        assert q[compiled.quantity_names.index(name)] == value
    # the model file states starting values that are not the truth
    nominal = dict(zip(compiled.quantity_names, compiled.nominal))
    for name, value in gen.TRUTH.items():
        assert abs(nominal[name] - value) >= 0.3, name


def test_truth_file_matches_a_fresh_simulation(truth, truth_file):
    assert truth_file["seed"] == gen.SEED
    assert truth_file["parameters"] == gen.TRUTH
    for name, t in truth.items():
        stored = truth_file["noise_free"][name]
        for j, (compound, _, _) in enumerate(gen.COMPOUNDS):
            np.testing.assert_allclose(stored["area_percent"][compound], t["area_percent"][:, j],
                                       rtol=1e-9, atol=1e-9)


def test_imported_recipes_are_the_true_recipes(campaign, truth):
    for run in campaign.runs:
        true_run = truth[run.name]["run"]
        r = run.recipe
        assert r.ph.mode == true_run.ph.mode and r.ph.setpoint == true_run.ph.setpoint
        for species, amount in true_run.charges.items():
            assert r.charges[species] == pytest.approx(amount, rel=1e-12)
        assert r.volume == pytest.approx(true_run.volume, rel=1e-12)
        assert r.end_time == pytest.approx(true_run.end_time, rel=1e-12)
        assert len(r.doses) == 1 and r.doses[0].amount == pytest.approx(true_run.doses[0].amount, rel=1e-12)
        assert r.doses[0].end == pytest.approx(true_run.doses[0].end, rel=1e-12)
        np.testing.assert_allclose([w.time for w in r.withdrawals], [w.time for w in true_run.withdrawals])
        # the logged temperature is the true profile (0.1 C readings)
        np.testing.assert_allclose(r.temperature.temperatures, true_run.temperature.temperatures, atol=1e-9)


def test_area_percent_inverts_to_true_mole_fractions(truth, model):
    # RRF correction: x_i = (A_i/RRF_i) / sum_j(A_j/RRF_j) (ICH Q2(R2); Snyder, Kirkland
    # and Dolan, Introduction to Modern Liquid Chromatography, 3rd ed., ch. 11).
    compiled, q = gen.true_parameters(model)
    rrf = np.array([c[2] for c in gen.COMPOUNDS])
    name = "R02-pH5.5"
    t = truth[name]
    res = simulate(compiled, t["run"], times=t["sample_times"], q=q, rtol=1e-8, atol=1e-12)
    moles = np.column_stack([res.amount(c[1]) for c in gen.COMPOUNDS])
    for k in range(moles.shape[0]):
        x = mole_fractions_from_signals(t["area_percent"][k], rrf)
        np.testing.assert_allclose(x, moles[k] / moles[k].sum(), rtol=1e-10)


def test_true_runs_conserve_core_and_acyl(truth, model):
    # Stoichiometry (analytic): without sampling, the substrate core is
    # conserved and every acyl group dosed ends in anhydride, acid or an amide
    # (acylation releases one acid, hydrolysis two).
    from dataclasses import replace

    compiled, q = gen.true_parameters(model)
    for name, t in truth.items():
        run = replace(t["run"], withdrawals=())
        res = simulate(compiled, run, times=[run.end_time], q=q, rtol=1e-8, atol=1e-12)
        core = sum(res.amount(m)[-1] for m in ("S", "P_aryl", "P_alkyl", "P_double"))
        assert core == pytest.approx(run.charges["S"], rel=1e-6), name
        acyl = (2 * res.amount("ANH")[-1] + res.amount("ACD")[-1] + res.amount("P_aryl")[-1]
                + res.amount("P_alkyl")[-1] + 2 * res.amount("P_double")[-1])
        assert acyl == pytest.approx(2 * run.doses[0].amount, rel=1e-6), name


def test_hplc_noise_follows_the_documented_model(campaign, truth):
    # Standardised residuals of the uncensored values should be N(0, 1): the
    # sample mean within 4 standard errors of 0 and the variance within the
    # chi-square 99.9 % range (scipy.stats.chi2 as the reference distribution).
    from scipy import stats

    a, r = gen.NOISE["hplc_absolute_area_percent"], gen.NOISE["hplc_relative"]
    z = []
    for run in campaign.runs:
        y = truth[run.name]["area_percent"].ravel()
        h = run.hplc
        ok = ~h.censored
        z.append((h.value[ok] - y[ok]) / np.sqrt(a ** 2 + (r * y[ok]) ** 2))
    z = np.concatenate(z)
    n = z.size
    assert abs(z.mean()) < 4 / np.sqrt(n)
    ss = float(np.sum(z ** 2))
    assert stats.chi2.ppf(0.0005, n) < ss < stats.chi2.ppf(0.9995, n)


def test_censored_values_are_truly_small(campaign, truth):
    a = gen.NOISE["hplc_absolute_area_percent"]
    loq = gen.NOISE["loq_area_percent"]
    for run in campaign.runs:
        y = truth[run.name]["area_percent"].ravel()
        c = run.hplc.censored
        assert np.all(y[c] < loq + 5 * a)  # 5 sigma of the absolute noise


def test_logs_stay_within_their_noise(campaign, truth):
    for run in campaign.runs:
        t = truth[run.name]
        if run.recipe.ph.mode == "held":
            true_ph = np.full(t["log_times"].size, run.recipe.ph.setpoint)
            tl = run.titrant
            true_ml = np.interp(tl.time, t["log_times"], t["titrant_log"]) / gen.TITRANT_CONCENTRATION / gen.ML
            got_ml = tl.amount / gen.TITRANT_CONCENTRATION / gen.ML
            tol = 5 * (gen.NOISE["titrant_relative_sd"] * true_ml + gen.NOISE["titrant_absolute_sd_mL"]) + 1e-3
            assert np.all(np.abs(got_ml - true_ml) < tol)
        elif run.recipe.ph.mode == "logged":
            true_ph = np.asarray(t["run"].ph.log_ph)
        else:
            true_ph = t["ph_log"]
        assert np.all(np.abs(run.ph_log.value - true_ph) < 5 * gen.NOISE["ph_sd"] + 0.005)


def test_logged_run_drifts_and_free_run_acidifies(campaign, truth):
    drift = campaign.run("R05-drift").ph_log.value
    assert drift[0] == pytest.approx(6.0, abs=0.06) and drift[-1] == pytest.approx(5.3, abs=0.06)
    free = truth["R06-free"]["ph_log"]
    assert free[-1] < free[0] - 1.0


def test_true_window_is_a_clear_interval(truth_file):
    # Design requirement of the demo: with the true parameters the planned
    # process passes on one interval about 1-1.6 pH units wide, inside the
    # pH range covered by the lab runs.
    window = truth_file["true_window"]["planned"]
    assert len(window) == 1
    low, high = window[0]
    assert 1.0 <= high - low <= 1.6
    assert 4.0 <= low and high <= 7.0


@pytest.mark.slow
def test_demo_fit_recovers_the_truth(model, campaign):
    # Identifiability of the demo design: a global least-squares fit from the
    # model-file starting values (not the truth) recovers every true value
    # inside its 99 % covariance interval (normal quantile from scipy.stats).
    from scipy import stats

    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.objective import CampaignObjective

    objective = CampaignObjective(model, campaign)
    result = fit_campaign(objective, starts=1, profiles=False)
    rows = {row["name"]: row for row in result.rows()}
    z = stats.norm.ppf(0.995)
    assert set(rows) == set(gen.TRUTH)
    for name, true in gen.TRUTH.items():
        row = rows[name]
        # implied_value: the absolute pKa for a fitted shift, else the value itself
        assert abs(row["implied_value"] - true) <= z * row["standard_error"], (name, row, true)
