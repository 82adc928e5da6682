"""Convergence diagnostics against analytic values and ArviZ/emcee conventions."""

import math

import numpy as np
import pytest

from speciakin.estimation.diagnostics import (
    autocorrelation_time,
    choose_burn_in_and_thin,
    convergence_diagnostics,
    diagnose_chain,
    effective_sample_size,
    monte_carlo_standard_error,
    rank_normalised_r_hat,
)


def ar1_chain(phi, n_steps, n_walkers, n_params, seed):
    """AR(1) chains x_t = phi x_{t-1} + e_t, started in the stationary law."""
    rng = np.random.default_rng(seed)
    x = np.empty((n_steps, n_walkers, n_params))
    x[0] = rng.standard_normal((n_walkers, n_params)) / math.sqrt(1 - phi ** 2)
    noise = rng.standard_normal((n_steps, n_walkers, n_params))
    for t in range(1, n_steps):
        x[t] = phi * x[t - 1] + noise[t]
    return x


def test_autocorrelation_time_of_ar1_matches_analytic_value():
    # Analytic: AR(1) has rho(t) = phi^|t|, so tau = 1 + 2 sum_{t>=1} phi^t = (1 + phi)/(1 - phi)
    # (definition of tau as in Sokal 1997).  phi = 0.8 -> tau = 9.  Estimator
    # error with 16 x 4000 steps is a few percent (Sokal 1997: var(tau)/tau^2
    # ~ 2(2M+1)/N, from memory); 10 % allowed.
    chain = ar1_chain(0.8, 4000, 16, 2, seed=1)
    np.testing.assert_allclose(autocorrelation_time(chain), 9.0, rtol=0.10)


def test_r_hat_near_one_for_independent_draws():
    # Vehtari et al. 2021: R-hat of well-mixed chains is close to 1 (< 1.01).
    draws = np.random.default_rng(2).standard_normal((8, 1000))
    assert 0.995 < rank_normalised_r_hat(draws) < 1.01


def test_r_hat_flags_chains_stuck_in_different_places():
    rng = np.random.default_rng(3)
    offsets = np.array([0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0])  # half the chains sit 1 sd away
    draws = rng.standard_normal((8, 1000)) + offsets[:, None]
    assert rank_normalised_r_hat(draws) > 1.05


def test_ess_of_independent_draws_is_about_n():
    # For iid draws the effective sample size equals the number of draws
    # (Vehtari et al. 2021, section 3.2); the estimator scatters by a few percent.
    draws = np.random.default_rng(4).standard_normal((4, 2000))
    for kind in ("bulk", "tail"):
        assert 0.85 * 8000 < effective_sample_size(draws, kind) < 1.15 * 8000


def test_burn_in_and_thin_rules():
    assert choose_burn_in_and_thin(np.array([10.0, 20.0]), 1000) == (40, 5)
    assert choose_burn_in_and_thin(np.array([400.0]), 1000) == (500, 200)
    assert choose_burn_in_and_thin(np.array([np.inf]), 100) == (50, 1)


def test_short_chain_warned_in_plain_words():
    chain = ar1_chain(0.95, 300, 8, 1, seed=5)  # tau = 39: 300 steps is about 8 tau
    d = convergence_diagnostics(chain, np.full(8, 0.3), ["pKa shift"], burn_in=50)
    assert not d.converged and not d.long_enough
    assert any(w.startswith("not converged: chain length is") and "50 x is needed" in w for w in d.warnings)
    text = d.report()
    assert text.splitlines()[0] == "Convergence" and "NOT converged" in text


def test_long_iid_chain_passes():
    chain = np.random.default_rng(6).standard_normal((2000, 8, 2))
    d = convergence_diagnostics(chain, np.full(8, 0.35), ["a", "b"], burn_in=0)
    assert d.converged and d.warnings == []
    assert d.to_dict()["converged"] is True


def test_too_few_effective_samples_is_not_converged():
    # 2 walkers x 180 iid steps: long enough (tau ~ 1) and R-hat ~ 1, but about 360 draws in all,
    # below the 400 of Vehtari et al. 2021 (bulk and tail ESS), which the stop rule requires too
    chain = np.random.default_rng(3).standard_normal((180, 2, 1))
    d = convergence_diagnostics(chain, np.full(2, 0.3), ["a"], burn_in=0)
    assert d.long_enough and d.r_hat[0] <= 1.01 and min(d.ess_bulk[0], d.ess_tail[0]) < 400
    assert not d.converged and any("effective sample size below 400" in w for w in d.warnings)


def test_diagnose_chain_needs_no_acceptance_and_ignores_it_for_convergence():
    chain = np.random.default_rng(6).standard_normal((600, 8, 2))
    with_acceptance, burn_in, thin = diagnose_chain(chain, np.full(8, 0.01), ["a", "b"])
    without, burn_in_2, thin_2 = diagnose_chain(chain, None, ["a", "b"])
    assert (burn_in, thin) == (burn_in_2, thin_2) == choose_burn_in_and_thin(autocorrelation_time(chain), 600)
    assert with_acceptance.converged and without.converged
    assert any("acceptance" in w for w in with_acceptance.warnings)
    assert not any("acceptance" in w for w in without.warnings)
    assert without.r_hat == with_acceptance.r_hat and without.ess_tail == with_acceptance.ess_tail


@pytest.mark.parametrize("acceptance, expected", [(0.05, True), (0.8, True), (0.3, False)])
def test_acceptance_fraction_warning(acceptance, expected):
    chain = np.random.default_rng(7).standard_normal((500, 8, 1))
    d = convergence_diagnostics(chain, np.full(8, acceptance), ["a"], burn_in=0)
    assert any("acceptance fraction" in w for w in d.warnings) == expected


@pytest.mark.parametrize("proposal, acceptance, expected", [
    ("stretch", 0.68, True), ("stretch", 0.10, True), ("adaptive", 0.68, False), ("adaptive", 0.97, False),
    ("adaptive", 0.10, True), ("laplace", 0.68, False), ("laplace", 0.10, True)])
def test_acceptance_is_judged_by_the_moves_range(proposal, acceptance, expected):
    # the stretch move's 0.15-0.6 (common practice); a mixture with an independence proposal warns only below
    # 0.15: an independence proposal equal to the posterior accepts every proposal (the Metropolis-Hastings
    # ratio pi(y) q(x) / (pi(x) q(y)) is 1 when q = pi; Hastings 1970)
    from speciakin.estimation.proposals import PROPOSALS

    chain = np.random.default_rng(7).standard_normal((500, 8, 1))
    d, _, _ = diagnose_chain(chain, np.full(8, acceptance), ["a"],
                             acceptance_range=PROPOSALS[proposal].acceptance_range)
    assert any("acceptance fraction" in w for w in d.warnings) == expected


def test_stuck_walker_and_constant_parameter_are_reported():
    chain = np.random.default_rng(8).standard_normal((400, 8, 1))
    chain[:, 3, 0] = 2.0  # one walker never moves
    acceptance = np.full(8, 0.4)
    acceptance[3] = 0.0
    d = convergence_diagnostics(chain, acceptance, ["a"], burn_in=0)
    assert any("may be stuck" in w for w in d.warnings)
    constant = np.ones((100, 4, 1))
    d2 = convergence_diagnostics(constant, np.full(4, 0.0), ["flat"], burn_in=0)
    assert not d2.converged and any("cannot be estimated" in w for w in d2.warnings)


# ---------------------------------------------------------------------------
# Our Vehtari et al. (2021) implementation against ArviZ (general-purpose
# reference library implementing the same paper).  Small differences come from
# where each truncates Geyer's sequence; 2 % allowed for ESS, 1e-9 for R-hat.
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def arviz():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        return pytest.importorskip("arviz")


@pytest.mark.parametrize("case", ["iid", "ar1", "offset", "skewed"])
def test_matches_arviz(arviz, case):
    rng = np.random.default_rng(10)
    if case == "iid":
        draws = rng.standard_normal((6, 800))
    elif case == "ar1":
        draws = ar1_chain(0.9, 801, 6, 1, seed=11)[:, :, 0].T
    elif case == "offset":
        draws = rng.standard_normal((6, 800)) + np.arange(6)[:, None] * 0.3
    else:
        draws = rng.lognormal(0.0, 1.0, size=(6, 800))
    assert rank_normalised_r_hat(draws) == pytest.approx(float(arviz.rhat(draws, method="rank")), rel=1e-9)
    for kind in ("bulk", "tail"):
        assert effective_sample_size(draws, kind) == pytest.approx(float(arviz.ess(draws, method=kind)), rel=0.02)
    reference = float(np.asarray(arviz.mcse(draws, method="mean")).reshape(-1)[0])
    assert monte_carlo_standard_error(draws) == pytest.approx(reference, rel=0.02)
