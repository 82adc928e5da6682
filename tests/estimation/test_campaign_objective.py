"""CampaignObjective: observation model, censoring, titrant residuals, parameter mapping,
Jacobian, and the errors a user sees for a model/campaign mismatch.

The synthetic campaign (tests/estimation/campaign_synthetic.py) is INVENTED:
fictional diamine SK-301, invented constants.
"""

from dataclasses import replace

import numpy as np
import pytest
from scipy.stats import norm

from speciakin.data.campaign import Compound
from speciakin.errors import InputError
from speciakin.pipeline import objective_jacobian
from speciakin.pipeline.objective import CampaignObjective
from speciakin.simulation.api import simulate

from .campaign_synthetic import (SAMPLE_TIMES, SMALL_COMPOUNDS, SMALL_TRUTH, small_model, synthetic_campaign,
                                 truth_vector)

#: Fitted vector at the truth, in fit order: pKa shift of N_b (5.0 - 5.2), log10 k_a, log10 k_b.
THETA_TRUE = np.array([-0.2, 1.0, 0.0])


@pytest.fixture(scope="module")
def model():
    return small_model()


@pytest.fixture(scope="module")
def campaign(model):
    return synthetic_campaign(model, model.runs, SMALL_TRUTH, SAMPLE_TIMES, SMALL_COMPOUNDS, seed=11)


@pytest.fixture(scope="module")
def objective(model, campaign):
    return CampaignObjective(model, campaign, parallel=False)


def test_parameter_order_and_start(objective):
    assert objective.names == ["pKa[S.N_b]", "log10k[acyl_a]", "log10k[acyl_b]"]
    # start: the shift starts at 0, rate constants at the file values log10(30), log10(0.3)
    np.testing.assert_allclose(objective.start, [0.0, np.log10(30.0), np.log10(0.3)], rtol=1e-12)
    assert objective.n_hplc == 3 * 3 * SAMPLE_TIMES.size
    assert objective.n_titrant == 3 * SAMPLE_TIMES.size


def test_kernel_inputs_maps_pka_shift_onto_base(objective):
    q, offsets, factors = objective.kernel_inputs(np.array([[0.3, 1.2, -0.4], [-0.5, 0.1, 0.2]]))
    names = objective.compiled.quantity_names
    # a pKa shift adds to the file value 5.2 (the model file's rule: a fitted shift of the aqueous pKa)
    np.testing.assert_allclose(q[:, names.index("pKa[S.N_b]")], [5.5, 4.7], rtol=0, atol=1e-12)
    # rate constants replace the file value (log10 scale)
    np.testing.assert_allclose(q[:, names.index("log10k[acyl_a]")], [1.2, 0.1], rtol=0, atol=1e-12)
    np.testing.assert_allclose(q[:, names.index("log10k[acyl_b]")], [-0.4, 0.2], rtol=0, atol=1e-12)
    # fixed quantities keep their file values
    np.testing.assert_allclose(q[:, names.index("pKa[S.N_a]")], 8.8, rtol=0, atol=1e-12)
    assert offsets.shape == factors.shape == (2, 3)
    np.testing.assert_array_equal(offsets, 0.0)
    np.testing.assert_array_equal(factors, 1.0)


def test_area_percent_equals_hand_calculation(model, objective):
    # Area% of compound i = 100 n_i RRF_i / sum_j n_j RRF_j (Snyder, Kirkland and
    # Dolan, "Introduction to Modern Liquid Chromatography", 3rd ed., 2010, ch. 11), computed here by hand
    # from the simulated amounts of one sample (run ph7_0, 15 min).
    pred = objective.predict_batch(THETA_TRUE[None, :])
    run_index, t = 1, 15.0 * 60.0
    row = int(np.flatnonzero(np.isclose(objective.output_times[run_index], t))[0])
    amounts = pred.outputs[0, run_index, row]
    moles = {c: amounts[objective.compiled.species_index(m)] for c, (m, _) in SMALL_COMPOUNDS.items()}
    total = sum(moles[c] * rrf for c, (_, rrf) in SMALL_COMPOUNDS.items())
    for compound, (_, rrf) in SMALL_COMPOUNDS.items():
        k = np.flatnonzero((objective.h_run == run_index) & (objective.h_compound == compound)
                           & (objective.h_t == row))
        assert k.size == 1
        expected = 100.0 * moles[compound] * rrf / total
        assert pred.hplc_model[0, k[0]] == pytest.approx(expected, rel=1e-12)
    # the same amounts as a separate simulation of the run (integrator tolerance rtol 1e-6)
    sim = simulate(model, model.runs[run_index], [0.0, t], q=truth_vector(model, SMALL_TRUTH))
    for compound, (molecule, _) in SMALL_COMPOUNDS.items():
        assert sim.amounts[1, sim.species_names.index(molecule)] == pytest.approx(moles[compound], rel=1e-4)
    # sums to 100 % over the sample (definition of area%)
    sample = objective.h_sample[k[0]]
    assert pred.hplc_model[0, objective.h_sample == sample].sum() == pytest.approx(100.0, rel=1e-12)


def _with_censored(campaign, run_index, entries):
    """Copy of the campaign where the HPLC values at ``entries`` (index -> LOQ) are reported <LOQ."""
    run = campaign.runs[run_index]
    h = run.hplc
    value, cens, loq = h.value.copy(), h.censored.copy(), h.loq.copy()
    for i, limit in entries.items():
        value[i], cens[i], loq[i] = np.nan, True, limit
    runs = list(campaign.runs)
    runs[run_index] = replace(run, hplc=replace(h, value=value, censored=cens, loq=loq))
    return replace(campaign, runs=tuple(runs))


def test_censored_point_residual(model, campaign, objective):
    # Censored value: residual max(y - LOQ, 0) / sigma_LOQ (objective docs; Tobin, Econometrica 1958, 26, 24
    # for the likelihood form).  Entry 0 of run ph5_0 is SK-301 at 3 min (about 84 area%).
    model_value = objective.predict_batch(THETA_TRUE[None, :]).hplc_model[0, 0]
    assert model_value > 50.0
    above, below = model_value + 5.0, model_value - 5.0
    for limit, positive in ((above, False), (below, True)):
        obj = CampaignObjective(model, _with_censored(campaign, 0, {0: limit}), parallel=False)
        r = obj.residuals(THETA_TRUE)
        sigma = np.sqrt(0.1 ** 2 + (0.02 * limit) ** 2)  # error model a = 0.1, r = 0.02 at the LOQ
        if positive:
            assert r[0] == pytest.approx((model_value - limit) / sigma, rel=1e-6)
            assert r[0] > 0
        else:
            assert r[0] == 0.0
        # the other residuals do not change
        np.testing.assert_allclose(r[1:], objective.residuals(THETA_TRUE)[1:], rtol=1e-12, atol=1e-12)


def test_log_likelihood_with_censored_point(model, campaign):
    # log L = -1/2 sum z^2 (quantified) + sum log Phi((LOQ - y)/sigma_LOQ) (censored) - 1/2 sum z_t^2,
    # constants dropped (Tobin 1958); Phi from scipy.stats.norm as the reference implementation.
    model_value = CampaignObjective(model, campaign, parallel=False).predict_batch(THETA_TRUE[None, :]).hplc_model[0, 0]
    limit = model_value + 1.5
    obj = CampaignObjective(model, _with_censored(campaign, 0, {0: limit}), parallel=False)
    pred = obj.predict_batch(THETA_TRUE[None, :])
    y, obs, sig, cens = pred.hplc_model[0], obj.h_obs, obj.h_sigma, obj.h_cens
    assert cens[0]
    z = (y[~cens] - obs[~cens]) / sig[~cens]
    zc = (obj.h_loq[cens] - y[cens]) / sig[cens]
    zt = (pred.titrant_model[0] - obj.t_obs) / obj.t_sigma
    expected = -0.5 * np.sum(z ** 2) + np.sum(norm.logcdf(zc)) - 0.5 * np.sum(zt ** 2)
    assert obj.log_likelihood_batch(THETA_TRUE[None, :])[0] == pytest.approx(expected, rel=1e-10)
    # the censored point's own term
    sigma0 = np.sqrt(0.1 ** 2 + (0.02 * limit) ** 2)
    assert zc[0] * sig[cens][0] == pytest.approx(limit - model_value, rel=1e-9)
    assert sig[cens][0] == pytest.approx(sigma0, rel=1e-12)


def test_titrant_residuals(model, campaign, objective):
    # Titrant residual = (model - logged) / sigma with sigma = sqrt((0.005 max|logged|)^2 + (0.01 logged)^2)
    # (objective's default titrant error model; 0.5 % of full scale is common practice for a dosing pump).
    r = objective.residuals(THETA_TRUE)[objective.n_hplc:]
    q = truth_vector(model, SMALL_TRUTH)
    offset = 0
    for run, crun in zip(model.runs, campaign.runs):
        logged = crun.titrant.amount
        sim = simulate(model, run, np.concatenate([[0.0], crun.titrant.time]), q=q)
        sigma = np.sqrt((0.005 * np.max(np.abs(logged))) ** 2 + (0.01 * logged) ** 2)
        expected = (sim.titrant[1:] - logged) / sigma
        np.testing.assert_allclose(r[offset:offset + logged.size], expected, rtol=1e-4, atol=1e-4)
        offset += logged.size
    assert offset == r.size


def test_jacobian_matches_fine_central_difference(model, campaign):
    # Independent check: a central difference with a 10x finer step at a tight integrator tolerance,
    # computed here from residuals() (truncation error O(h^2); Nocedal and Wright, "Numerical
    # Optimization", 2nd ed., 2006, section 8.1).
    obj = CampaignObjective(model, campaign, rtol=1e-10, atol=1e-14, parallel=False)
    theta = np.array([-0.1, 1.2, -0.2])
    jac = obj.jacobian(theta)
    h = 1e-4
    fd = np.empty_like(jac)
    for j in range(theta.size):
        e = np.zeros_like(theta)
        e[j] = h
        fd[:, j] = (obj.residuals(theta + e) - obj.residuals(theta - e)) / (2 * h)
    assert np.all(np.isfinite(jac))
    for j in range(theta.size):
        scale = np.linalg.norm(fd[:, j])
        assert scale > 1.0  # every parameter moves the residuals
        assert np.linalg.norm(jac[:, j] - fd[:, j]) / scale < 1e-3


@pytest.mark.parametrize("method", ["sensitivities", "differences"])
def test_jacobian_columns_and_the_remembered_point_equal_the_full_jacobian(model, campaign, method, monkeypatch):
    # A column depends on the point alone: each parameter set of a difference batch is simulated on its own,
    # and the sensitivities are computed for every column at once.  So columns asked alone, in another order,
    # or remembered from the last point equal the full Jacobian's bit for bit.
    obj = CampaignObjective(model, campaign, parallel=False)
    obj.jacobian_method = method
    theta = np.array([-0.1, 1.2, -0.2])
    full = obj.jacobian(theta)
    fresh = CampaignObjective(model, campaign, parallel=False)
    fresh.jacobian_method = method
    assert np.array_equal(fresh.jacobian(theta, columns=[2, 0]), full[:, [2, 0]])
    assert np.array_equal(fresh.jacobian(theta, columns=[1]), full[:, [1]])  # the missing column added
    calls = []
    fresh.residuals_batch = lambda *a, **k: calls.append(1)  # nothing may be simulated from here on
    monkeypatch.setattr(objective_jacobian, "simulate_sensitivities", lambda *a, **k: calls.append(1))
    assert np.array_equal(fresh.jacobian(theta), full)  # every column remembered
    assert np.array_equal(fresh.jacobian(theta.copy(), columns=np.array([1, 2])), full[:, [1, 2]])
    assert not calls
    remembered = fresh.jacobian(theta)
    remembered[:] = 0.0  # a caller changing its copy does not change what is remembered
    assert np.array_equal(fresh.jacobian(theta), full)
    other = theta + np.array([0.0, 0.0, 1e-9])  # another point is computed anew
    with pytest.raises((TypeError, AttributeError)):
        fresh.jacobian(other)


def test_sensitivity_jacobian_is_closer_than_differences(model, campaign):
    # Against the fine central difference of the test above (rtol 1e-10, step 1e-4): the forward sensitivities
    # (default) come within 3e-7 of each column, the central differences at rtol 1e-8 within 4e-6 (measured:
    # 2.6e-7, 3.4e-8, 2.0e-7 against 1.9e-6, 2.5e-6, 4.2e-6), the integrator's noise over their step.
    fine = CampaignObjective(model, campaign, rtol=1e-10, atol=1e-14, parallel=False)
    theta = np.array([-0.1, 1.2, -0.2])
    h = 1e-4
    fd = np.column_stack([(fine.residuals(theta + h * e) - fine.residuals(theta - h * e)) / (2 * h)
                          for e in np.eye(theta.size)])
    obj = CampaignObjective(model, campaign, parallel=False)
    sens = obj.jacobian(theta)
    assert obj.jacobian_label == "forward sensitivities"
    obj.jacobian_method = "differences"
    diff = obj.jacobian(theta)
    for j in range(theta.size):
        scale = np.linalg.norm(fd[:, j])
        assert np.linalg.norm(sens[:, j] - fd[:, j]) / scale < 1e-6
        assert np.linalg.norm(sens[:, j] - fd[:, j]) < np.linalg.norm(diff[:, j] - fd[:, j])


def test_sensitivity_jacobian_falls_back_to_differences(model, campaign, monkeypatch):
    # a run the sensitivity kernel cannot simulate: the columns come from central differences, and the label says so
    obj = CampaignObjective(model, campaign, parallel=False)
    theta = np.array([-0.1, 1.2, -0.2])
    real = objective_jacobian.simulate_sensitivities

    def failing(*args, **kwargs):
        result = real(*args, **kwargs)
        result.status[0] = 2
        return result

    monkeypatch.setattr(objective_jacobian, "simulate_sensitivities", failing)
    jac = obj.jacobian(theta)
    assert obj.jacobian_fallbacks == 1
    assert obj.jacobian_label == ("forward sensitivities (central differences at 1 point(s) where a run could not "
                                  "be simulated)")
    obj.jacobian_method = "differences"
    np.testing.assert_array_equal(jac, obj.jacobian(theta))
    assert obj.jacobian_label == "central differences"


# ------------------------------------------------------------------ bad input

def test_compound_mapped_to_unknown_molecule(model, campaign):
    bad = replace(campaign, compounds=campaign.compounds + (Compound("ghost peak", "XYZ", 1.0, row=9),))
    with pytest.raises(InputError, match=r"compound 'ghost peak' is mapped to 'XYZ'.*does not have") as info:
        CampaignObjective(model, bad, parallel=False)
    assert info.value.location.row == 9
    assert "compounds" in str(info.value)


def test_fit_option_names_run_the_campaign_lacks(campaign):
    # the model file declares runs ph5_0, ph7_0, ph8_5; the campaign holds only the first two
    model = small_model(extra_fit='probe_offset = { runs = ["ph8_5"], lower = -0.3, upper = 0.3 }')
    short = replace(campaign, runs=campaign.runs[:2])
    with pytest.raises(InputError, match=r"probe_offset names run 'ph8_5'.*campaign does not have") as info:
        CampaignObjective(model, short, parallel=False)
    assert info.value.location.key == "fit.probe_offset.runs"


def test_fit_option_names_unknown_run_in_model_file():
    with pytest.raises(InputError, match=r"fit.probe_offset.runs.*unknown run.*ph3_0"):
        small_model(extra_fit='probe_offset = { runs = ["ph3_0"], lower = -0.3, upper = 0.3 }')


def test_every_value_censored(model, campaign):
    run = campaign.runs[0]
    h = run.hplc
    everything = replace(h, value=np.full(h.value.size, np.nan), censored=np.ones(h.value.size, bool))
    bad = replace(campaign, runs=(replace(run, hplc=everything),))
    with pytest.raises(InputError, match=r"every HPLC value of the campaign is below the LOQ"):
        CampaignObjective(model, bad, parallel=False)


def test_censored_value_without_loq(model, campaign):
    bad = _with_censored(campaign, 0, {0: np.nan})
    with pytest.raises(InputError, match=r"below the LOQ but the compound has no LOQ"):
        CampaignObjective(model, bad, parallel=False)


def test_nothing_marked_fit(campaign):
    model = small_model(fit_pka=False, fit_ka=False, fit_kb=False)
    with pytest.raises(InputError, match=r"marks no quantity as fitted"):
        CampaignObjective(model, campaign, parallel=False)
