"""Error paths and the batched entry point."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from sim_models import held, logged_constant, q, two_site_model, two_site_run
from speciakin.chemistry.model import Dose, PhControl, Reactant, Requirement, Step
from speciakin.errors import InputError, ModelFileError, SolverError
from speciakin.simulation import (
    batch_log_likelihood,
    compile_model,
    compile_runs,
    simulate,
    simulate_batch,
)


def _with_step(model, step):
    return dataclasses.replace(model, steps=model.steps + (step,))


def test_unknown_species_in_step():
    model = _with_step(two_site_model(), Step("bad", (Reactant("Q"),), (("HA", 1.0),), q(0.0)))
    with pytest.raises(ModelFileError, match=r"step\.bad\.reactant\.Q.*unknown reactant"):
        compile_model(model)


def test_unknown_site_in_requirement():
    step = Step("bad", (Reactant("S", (Requirement("N_nowhere"),)),), (("HA", 1.0),), q(0.0))
    with pytest.raises(ModelFileError, match=r"unknown site.*N_nowhere"):
        compile_model(_with_step(two_site_model(), step))


def test_unknown_product_and_state_gathered_in_one_message():
    step = Step("bad", (Reactant("S", (Requirement("N_aryl", "half"),)),), (("Nothing", 1.0),), q(0.0))
    with pytest.raises(ModelFileError, match=r"2 problems:(.|\n)*unknown site state(.|\n)*unknown product"):
        compile_model(_with_step(two_site_model(), step))


def test_negative_amount():
    run = dataclasses.replace(two_site_run(held(7.0)), charges={"S": -0.1})
    with pytest.raises(ModelFileError, match=r"run\.r\.charges\.S.*non-negative.*-0\.1"):
        simulate(two_site_model(), run)


def test_dose_outside_run():
    run = dataclasses.replace(two_site_run(held(7.0)), doses=(Dose("E", 0.1, 0.0, 20000.0),))
    with pytest.raises(ModelFileError, match=r"doses\[0\].*outside the run"):
        simulate(two_site_model(), run)


def test_logged_ph_not_covering_horizon():
    run = two_site_run(PhControl("logged", log_times=(0.0, 600.0), log_ph=(7.0, 7.1)))
    with pytest.raises(ModelFileError, match=r"pH log does not cover the run"):
        simulate(two_site_model(), run)


def test_held_without_titrant_ion():
    run = two_site_run(PhControl("held", setpoint=7.0, titrant="KOH", titrant_concentration=1.0))
    with pytest.raises(ModelFileError, match=r"titrant ion.*KOH"):
        simulate(two_site_model(), run)


def test_output_times_outside_run():
    with pytest.raises(ModelFileError, match=r"output times"):
        simulate(two_site_model(), two_site_run(held(7.0)), times=[0.0, 1e6])


def test_wrong_parameter_vector():
    with pytest.raises(InputError, match=r"wrong length"):
        simulate(two_site_model(), two_site_run(held(7.0)), q=[1.0, 2.0])


def test_integrator_failure_raises_solver_error_with_run_and_time():
    # withdrawing more liquid than the vessel holds stops the run
    run = two_site_run(held(7.0), withdrawals=((600.0, 5.0),), name="overdrawn")
    with pytest.raises(SolverError, match=r"run 'overdrawn'.*t = 600 s.*volume") as info:
        simulate(two_site_model(), run)
    assert info.value.exit_code == 3


@pytest.fixture(scope="module")
def batch_setup():
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    compiled = compile_model(model)
    runs = [two_site_run(held(ph), name=f"pH{ph}") for ph in (5.0, 8.0)]
    runs.append(two_site_run(logged_constant(7.0, 10800.0), name="logged"))
    times = [np.linspace(0, 10800.0, 13), np.linspace(0, 10800.0, 7), np.linspace(0, 5400.0, 4)]
    return model, compiled, runs, times, compile_runs(compiled, runs, times)


def test_batch_equals_single_and_serial_equals_parallel(batch_setup):
    model, compiled, runs, times, cruns = batch_setup
    rng = np.random.default_rng(7)
    q_sets = compiled.nominal + rng.normal(0.0, 0.2, size=(5, compiled.nominal.size))
    par = simulate_batch(compiled, cruns, q_sets, parallel=True)
    ser = simulate_batch(compiled, cruns, q_sets, parallel=False)
    assert np.all(par.status == 0)
    np.testing.assert_array_equal(par.outputs, ser.outputs)
    for r, run in enumerate(runs):
        single = simulate(compiled, run, times=times[r], q=q_sets[3])
        n = len(times[r])
        np.testing.assert_array_equal(par.outputs[3, r, :n, :compiled.n_species], single.amounts)
        assert np.all(np.isnan(par.outputs[3, r, n:]))


def test_parallel_batches_from_several_threads_at_once(batch_setup):
    # the one compiled entry point releases the GIL and keeps no state between calls: batches started
    # from two threads at the same time (a web job beside a fit, say) give the serial results
    from concurrent.futures import ThreadPoolExecutor

    model, compiled, runs, times, cruns = batch_setup
    rng = np.random.default_rng(11)
    q_sets = [compiled.nominal + rng.normal(0.0, 0.2, size=(4, compiled.nominal.size)) for _ in range(2)]
    with ThreadPoolExecutor(max_workers=2) as pool:
        results = list(pool.map(lambda qs: simulate_batch(compiled, cruns, qs, parallel=True), q_sets))
    for qs, res in zip(q_sets, results):
        ser = simulate_batch(compiled, cruns, qs, parallel=False)
        np.testing.assert_array_equal(res.outputs, ser.outputs)
        np.testing.assert_array_equal(res.status, ser.status)


def test_batch_ph_offset_equals_shifted_setpoint(batch_setup):
    model, compiled, runs, times, cruns = batch_setup
    off = np.zeros((1, 3))
    off[0, 0] = 0.3
    res = simulate_batch(compiled, cruns, compiled.nominal[None, :], ph_offset=off)
    shifted = simulate(compiled, two_site_run(held(5.3), name="x"), times=times[0])
    np.testing.assert_allclose(res.outputs[0, 0, :13, :compiled.n_species], shifted.amounts, rtol=1e-12,
                               atol=1e-18)


def test_batch_reports_failure_in_status(batch_setup):
    model, compiled, runs, times, cruns = batch_setup
    bad_runs = [runs[0], two_site_run(held(7.0), withdrawals=((600.0, 5.0),), name="overdrawn")]
    c2 = compile_runs(compiled, bad_runs, [times[0], times[0]])
    res = simulate_batch(compiled, c2, compiled.nominal[None, :])
    assert res.status[0, 0] == 0 and res.status[0, 1] == 5
    assert res.failure_time[0, 1] == 600.0
    data = np.full(res.outputs.shape[1:], np.nan)
    data[0, 1:, 0] = 0.05
    loglik, _ = batch_log_likelihood(compiled, c2, compiled.nominal[None, :], data, np.ones_like(data))
    assert loglik[0] == -np.inf


def test_log_likelihood_against_numpy(batch_setup):
    # the compiled Gaussian log-likelihood equals the textbook formula evaluated with numpy
    model, compiled, runs, times, cruns = batch_setup
    res = simulate_batch(compiled, cruns, compiled.nominal[None, :])
    rng = np.random.default_rng(3)
    nsp = compiled.n_species
    conc = res.outputs[0, :, :, :nsp] / res.outputs[0, :, :, nsp:nsp + 1]
    data = np.full(res.outputs.shape[1:], np.nan)
    data[:, :, :nsp] = conc + rng.normal(0, 1e-3, conc.shape)
    sigma = np.full(data.shape, 2e-3)
    loglik, _ = batch_log_likelihood(compiled, cruns, compiled.nominal[None, :], data, sigma)
    m = np.isfinite(data)
    z = (data[m] - conc[m[:, :, :nsp]]) / sigma[m]
    expected = np.sum(-0.5 * z ** 2 - np.log(sigma[m]) - 0.5 * np.log(2 * np.pi))
    assert loglik[0] == pytest.approx(expected, rel=1e-12)


def test_sigma_must_be_positive_where_data_are_observed(batch_setup):
    model, compiled, runs, times, cruns = batch_setup
    shape = simulate_batch(compiled, cruns, compiled.nominal[None, :]).outputs.shape[1:]
    data = np.full(shape, np.nan)
    data[0, 1, 0] = 0.05
    sigma = np.ones(shape)
    sigma[0, 2, 0] = 0.0  # not observed there: allowed
    loglik, _ = batch_log_likelihood(compiled, cruns, compiled.nominal[None, :], data, sigma)
    assert np.isfinite(loglik[0])
    sigma[0, 1, 0] = 0.0  # observed there: refused
    with pytest.raises(InputError, match="sigma must be positive"):
        batch_log_likelihood(compiled, cruns, compiled.nominal[None, :], data, sigma)


def test_amount_factor_scales_substrate(batch_setup):
    model, compiled, runs, times, cruns = batch_setup
    res = simulate_batch(compiled, cruns, compiled.nominal[None, :], amount_factor=1.1)
    assert res.outputs[0, 0, 0, 0] == pytest.approx(0.11, rel=1e-12)


def test_microstates_sum_to_molecule_amounts():
    model = two_site_model(double=True)
    res = simulate(model, two_site_run(held(6.5)), times=[0.0, 3600.0, 7200.0], microstates=True)
    compiled = compile_model(model)
    for m in range(compiled.n_molecules):
        cols = compiled.microstate_molecule == m
        np.testing.assert_allclose(res.microstate_amounts[:, cols].sum(axis=1), res.amounts[:, m], rtol=1e-12)
    assert "S[N_alkyl,N_aryl]" in res.microstate_names
    frame = res.to_frame()
    assert "S [mol/L]" in frame.columns and "time [min]" in frame.columns
    d = res.to_dict()
    assert d["run_name"] == "r" and len(d["ph"]) == 3
    assert "Final amounts" in res.report()


def test_microstates_agree_with_chemistry_layer():
    micro = pytest.importorskip("speciakin.chemistry.microstates")
    model = two_site_model()
    res = simulate(model, two_site_run(held(8.7)), times=[0.0, 60.0], microstates=True)
    w = np.array([[0.0, 0.8], [0.8, 0.0]])
    pops = micro.microstate_populations(np.array([9.3, 4.6]), w, 8.7)
    np.testing.assert_allclose(res.microstate_amounts[0, :4] / res.amounts[0, 0], pops, rtol=1e-12)
