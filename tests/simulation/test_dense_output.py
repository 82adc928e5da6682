"""Outputs between integration steps (continuous extension) and the held/logged-pH path."""

from __future__ import annotations

import math

import numpy as np
import pytest

from sim_models import constant_temperature, held, logged_constant, q, two_site_model, two_site_run
from speciakin.chemistry.model import Ion, Model, Molecule, PhControl, Reactant, Run, Step, TemperatureProfile
from speciakin.simulation import simulate


def _ab_model(k):
    a = Molecule("A", moieties={"core": 1}, role="substrate")
    b = Molecule("B")
    p = Molecule("P", moieties={"core": 1})
    step = Step("ab", (Reactant("A"), Reactant("B")), (("P", 1.0),), q(math.log10(k)))
    return Model("a+b (invented)", (a, b, p), (step,), ions=(Ion("Na", 1),))


def test_many_irregular_outputs_match_closed_form_and_do_not_force_steps():
    # A + B -> P with [A]0 != [B]0: [A] = [A]0 ([B]0 - [A]0) / ([B]0 e^{([B]0-[A]0) k t} - [A]0)
    # (Atkins' Physical Chemistry, integrated second-order rate law).
    k, a0, b0 = 0.05, 0.10, 0.15
    end = 7200.0
    run = Run("ab", {"A": a0, "B": b0}, 1.0, constant_temperature(), logged_constant(7.0, end), end)
    rng = np.random.default_rng(11)
    dense = np.unique(np.concatenate([[0.0, end], rng.uniform(0.0, end, 400)]))
    sparse = np.array([0.0, end])
    res_dense = simulate(_ab_model(k), run, times=dense)
    res_sparse = simulate(_ab_model(k), run, times=sparse)
    a_exact = a0 * (b0 - a0) / (b0 * np.exp((b0 - a0) * k * dense) - a0)
    np.testing.assert_allclose(res_dense.concentration("A"), a_exact, rtol=2e-5, atol=1e-9)
    # outputs are interpolated, so the integrator takes the same steps for 2 or 402 outputs
    assert res_dense.steps == res_sparse.steps
    np.testing.assert_allclose(res_dense.concentration("A")[-1], res_sparse.concentration("A")[-1], rtol=1e-12)


def test_outputs_inside_steps_agree_with_outputs_at_step_ends():
    # the continuous extension is one order below the steps: an output read from it
    # must still agree with the same run integrated to that time (tolerance 1e-6
    # relative to the series maximum, the integrator's own rtol)
    # (free pH: the pH of an output is that of the charge balance at the interpolated state)
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    runs = (two_site_run(held(7.5)), two_site_run(logged_constant(8.0, 10800.0)),
            two_site_run(PhControl("free"), chloride=0.12, sodium=0.2))
    for run in runs:
        t = np.linspace(0.0, 10800.0, 97)
        full = simulate(model, run, times=t)
        for i in (13, 40, 77):
            short = simulate(model, run, times=[0.0, t[i]])
            for name in ("S", "P_alkyl", "P_aryl", "P_both", "E"):
                scale = np.max(np.abs(full.amount(name)))
                assert abs(full.amount(name)[i] - short.amount(name)[-1]) <= 1e-6 * scale + 1e-12
            assert abs(full.ph[i] - short.ph[-1]) <= 1e-5


def test_held_ph_under_temperature_ramp_is_consistent_with_constant_temperature_limit():
    # a ramp of 1e-9 K over the run is physically a constant temperature: the ramp path
    # (coefficients as cubics in time, with the d zbar/dT terms) must reproduce the
    # constant-coefficient path
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    flat = two_site_run(held(6.5))
    ramp = two_site_run(held(6.5), temperature=TemperatureProfile((0.0, 10800.0), (298.15, 298.15 + 1e-9)))
    t = np.linspace(0.0, 10800.0, 31)
    a = simulate(model, flat, times=t)
    b = simulate(model, ramp, times=t)
    for name in ("S", "P_alkyl", "P_aryl", "P_both"):
        scale = np.max(np.abs(a.amount(name)))
        np.testing.assert_allclose(b.amount(name), a.amount(name), atol=5e-6 * scale)
    np.testing.assert_allclose(b.titrant, a.titrant, atol=5e-6 * np.max(np.abs(a.titrant)))


def test_mean_charge_temperature_slope_far_from_the_pka_values():
    # two independent sites (no interaction) far below both pKa values, as a phenol and an amine at pH 1.5:
    # d zbar/dT = sum_i ln10 theta_i (1 - theta_i) dpKa_i/dT, with 1 - theta_i = x / (1 + x), x = 10^(pH - pKa_i)
    # written without cancellation (van 't Hoff, Atkins' Physical Chemistry).  The difference <zL> - <z><L>
    # lost about 5e-9 of this covariance to rounding, which kept the coefficient cubics of a held pH under
    # a temperature ramp from their 1e-9 check (docs/simulation.md, Known limitations).
    from speciakin.simulation.speciation_kernel import all_populations, mean_charge_temperature_slopes

    pka, dh, temp, ph = np.array([9.0, 10.5]), np.array([50.0, 25.0]), 295.15, 1.5  # invented sites
    pops = np.empty(4)
    all_populations(pka, np.array([0, 2]), np.array([0, 4]), np.zeros(0, np.int64), np.zeros(0, np.int64),
                    np.zeros(0), np.array([0, 0]), 1, ph, pops)
    out = np.empty(1)
    # charge = bound protons - 1 (a phenolate and a free amine when nothing is bound)
    mean_charge_temperature_slopes(pops, dh, temp, np.array([0, 2]), np.array([0, 4]),
                                   np.array([-1.0, 0.0, 0.0, 1.0]), 1, np.empty(2), out)
    x = 10.0 ** (ph - pka)
    theta, free = 1.0 / (1.0 + x), x / (1.0 + x)
    slopes = -dh * 1000.0 / (8.314462618 * math.log(10.0) * temp ** 2)
    expected = float(np.sum(math.log(10.0) * theta * free * slopes))
    assert out[0] == pytest.approx(expected, rel=1e-12)


def test_mean_charge_temperature_slope_closed_form_single_base_site():
    # one base site: zbar = theta = 1 / (1 + 10^(pH - pKa)), so d zbar/dT = ln10 theta (1 - theta) dpKa/dT
    # with van 't Hoff dpKa/dT = -dH / (R ln10 T^2) (Atkins' Physical Chemistry, van 't Hoff equation)
    from speciakin.simulation.speciation_kernel import mean_charge_temperature_slopes
    from speciakin.simulation.speciation_kernel import all_populations

    pka, dh, temp, ph = 8.2, 42.0, 305.0, 7.9  # invented site; dH [kJ/mol], T [K]
    pops = np.empty(2)
    all_populations(np.array([pka]), np.array([0, 1]), np.array([0, 2]), np.zeros(0, np.int64),
                    np.zeros(0, np.int64), np.zeros(0), np.array([0, 0]), 1, ph, pops)
    out = np.empty(1)
    mean_charge_temperature_slopes(pops, np.array([dh]), temp, np.array([0, 1]), np.array([0, 2]),
                                   np.array([0.0, 1.0]), 1, np.empty(1), out)
    theta = 1.0 / (1.0 + 10.0 ** (ph - pka))
    expected = math.log(10.0) * theta * (1 - theta) * (-dh * 1000.0 / (8.314462618 * math.log(10.0) * temp ** 2))
    assert out[0] == pytest.approx(expected, rel=1e-12)
