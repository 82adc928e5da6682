"""Conservation, charge balance, titrant accounting and pH-steered selectivity."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from sim_models import held, two_site_model, two_site_run
from speciakin.chemistry.model import Ion, Model, Molecule, PhControl, Run, Site, TemperatureProfile
from speciakin.errors import InputError
from speciakin.simulation import simulate


def _populations(pka, w, ph):
    """Independent 2-site populations (Borkovec and Koper 1992 site-binding model):
    states ordered (none, site0, site1, both) protonated."""
    lw = np.array([0.0, pka[0] - ph, pka[1] - ph, pka[0] + pka[1] - 2 * ph - w])
    p = 10.0 ** (lw - lw.max())
    return p / p.sum()


def _protonated(pka, ph):
    """Henderson-Hasselbalch fraction protonated of a single site."""
    return 1.0 / (1.0 + 10.0 ** (ph - pka))


def _mean_charges(model, ph):
    """Mean charge of each molecule at ``ph`` from the independent formulas above."""
    out = []
    for m in model.molecules:
        if len(m.sites) == 0:
            out.append(float(m.fixed_charge))
        elif len(m.sites) == 1:
            s = m.sites[0]
            th = _protonated(s.pka.value, ph)
            out.append(th if s.kind == "base" else th - 1.0)
        else:
            p = _populations([s.pka.value for s in m.sites], m.interactions[0].w.value, ph)
            out.append(p[1] + p[2] + 2 * p[3])  # two bases
    return np.array(out)


MODES = {
    "held": held(7.5),
    "logged": PhControl("logged", log_times=(0.0, 3600.0, 10800.0), log_ph=(6.5, 8.0, 7.0)),
    "free": PhControl("free"),
}


@pytest.mark.parametrize("mode", list(MODES))
def test_substrate_and_acyl_moieties_conserved(mode):
    # mass balance: the substrate core and the acyl groups are neither made nor lost
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    run = two_site_run(MODES[mode], chloride=0.1, sodium=0.25, withdrawals=((5400.0, 0.02),))
    res = simulate(model, run, times=np.linspace(0, 10800.0, 37))
    # the sample at 90 min takes 0.02 L of the volume present then
    factor = np.where(res.times > 5400.0, 1.0 - 0.02 / np.interp(5400.0, res.times, res.volume), 1.0)
    np.testing.assert_allclose(res.moiety_amount("core"), 0.1 * factor, rtol=1e-9)
    acyl = res.moiety_amount("acyl")
    dosed = np.minimum(res.times, 1800.0) / 1800.0 * 0.105
    # the anhydride carries two acyl groups
    np.testing.assert_allclose(acyl, 2.0 * dosed * factor, rtol=1e-9, atol=1e-15)
    assert np.all(np.isfinite(res.amounts))


@pytest.mark.parametrize("mode", ["held", "free"])
def test_electroneutrality_held_and_free(mode):
    # charge balance sum n zbar + sum z n_ion + V([H+] - [OH-]) = 0 (proton balance)
    # with speciation from the independent formulas; Kw from the chemistry layer.
    water = pytest.importorskip("speciakin.chemistry.water")
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    run = two_site_run(MODES[mode], chloride=0.1, sodium=0.25)
    res = simulate(model, run, times=np.linspace(0, 10800.0, 19))
    kw = 10 ** -water.pkw(298.15)
    for i, ph in enumerate(res.ph):
        z = _mean_charges(model, ph)
        n = res.amounts[i]
        h = 10 ** -ph
        charge = n[:6] @ z + n[6] - n[7] + res.volume[i] * (h - kw / h)
        scale = n[:6] @ np.abs(z) + n[6] + n[7]
        assert abs(charge) <= 1e-9 * scale


def test_held_titrant_counts_released_acid_and_speciation_shift():
    # Titrant consumed = acid released (one per acylation, two per anhydride hydrolysis),
    # times its dissociated fraction at the held pH, plus protons freed by the consumed
    # substrate amine, minus the water term of the added volume (proton bookkeeping,
    # Henderson-Hasselbalch fractions computed here).
    water = pytest.importorskip("speciakin.chemistry.water")
    ph = 10.0
    model = two_site_model(double=False, hydrolysis=(-4.0, 0.8))
    run = two_site_run(held(ph, conc=2.0), chloride=0.0)
    res = simulate(model, run, times=np.linspace(0, 10800.0, 13))
    alpha = 1.0 - _protonated(4.76, ph)
    pka_alk, pka_ar = 9.3, 4.6
    pop = _populations([pka_alk, pka_ar], 0.8, ph)
    bound_s = pop[1] + pop[2] + 2 * pop[3]
    bound_p_alkyl = _protonated(pka_ar - 0.5, ph)
    bound_p_aryl = _protonated(pka_alk - 0.3, ph)
    n_p = res.amount("P_alkyl") + res.amount("P_aryl")
    dosed = np.minimum(res.times, 1800.0) / 1800.0 * 0.105
    hydrolysed = dosed - res.amount("E") - n_p
    acid = n_p + 2.0 * hydrolysed
    np.testing.assert_allclose(res.amount("HA"), acid, rtol=1e-9, atol=1e-15)
    freed = (0.1 - res.amount("S")) * bound_s - res.amount("P_alkyl") * bound_p_alkyl \
        - res.amount("P_aryl") * bound_p_aryl
    kw = 10 ** -water.pkw(298.15)
    water_term = (res.volume - res.volume[0]) * (10 ** -ph - kw / 10 ** -ph)
    expected = acid * alpha + freed - water_term
    np.testing.assert_allclose(res.titrant, expected, rtol=1e-7, atol=1e-12)
    # the start: bringing 0.1 mol of the free diamine to pH 10 takes acid; by default it is
    # added inside the start volume (Cl-, the model's only negative ion): the charge balance
    # at pH 10 fixes its amount, and no titrant is used
    excess = 10 ** -ph - kw / 10 ** -ph
    assert res.start_adjustment == pytest.approx(-(0.1 * bound_s + 1.0 * excess), rel=1e-9)
    assert res.initial_titrant == 0.0 and res.volume[0] == 1.0
    # brought by the titrants instead: the base titrant cannot, the opposite (acid) titrant
    # does, and its own volume (0.5 mol/L) carries water of the held pH too
    two_sided = PhControl("held", setpoint=ph, titrant="Na", titrant_concentration=2.0,
                          opposite_titrant="Cl", opposite_titrant_concentration=0.5,
                          start_adjustment="titrant")
    res2 = simulate(model, two_site_run(two_sided), times=np.linspace(0, 10800.0, 13))
    start = (0.1 * bound_s + 1.0 * excess) / (1.0 - excess / 0.5)
    assert res2.initial_opposite_titrant == pytest.approx(start, rel=1e-9)
    assert res2.initial_titrant == 0.0
    assert res2.volume[0] == pytest.approx(1.0 + start / 0.5, rel=1e-12)
    with pytest.raises(InputError, match=r"set point pH 10 cannot be reached.*opposite titrant"):
        simulate(model, two_site_run(PhControl("held", setpoint=ph, titrant="Na", titrant_concentration=2.0,
                                               start_adjustment="titrant")))


def test_competition_ratio_at_held_ph():
    # two sites, no double reaction, reagent charged at once: d[Pa]/d[Pb] =
    # (k_a f_a)/(k_b f_b) at all times (parallel reactions with a common reagent), so the ratio of the
    # products is that constant.
    ph = 6.0
    model = two_site_model(double=False)
    run = two_site_run(held(ph), dose_minutes=0.0)
    res = simulate(model, run, times=np.linspace(0, 10800.0, 10)[1:])
    pop = _populations([9.3, 4.6], 0.8, ph)
    f_alkyl = pop[0] + pop[2]   # alkyl site free: states none, aryl-protonated
    f_aryl = pop[0] + pop[1]
    expected = (0.3 * f_alkyl) / (0.01 * f_aryl)
    np.testing.assert_allclose(res.amount("P_alkyl") / res.amount("P_aryl"), expected, rtol=1e-6)


@pytest.mark.parametrize("ph, winner", [(4.0, "P_aryl"), (11.0, "P_alkyl")])
def test_selectivity_follows_ph(ph, winner):
    # Common practice: aryl amine pKa ~4.6, alkyl amine ~9.3, the alkyl amine 10-100x
    # more nucleophilic: near pH 4 the aryl product dominates, near pH 11 the alkyl one.
    model = two_site_model(double=False)
    res = simulate(model, two_site_run(held(ph)), times=[0.0, 10800.0])
    other = "P_alkyl" if winner == "P_aryl" else "P_aryl"
    assert res.amount(winner)[-1] > 10 * res.amount(other)[-1]
    assert res.amount(winner)[-1] > 0.01


def test_almost_nothing_reacts_below_ph_2():
    # Common practice: both amines protonated below pH 2, so the acylation stalls:
    # over the time the pH-4 run needs to convert most substrate, the pH-1.5 run
    # converts less than a tenth of that.
    model = two_site_model(double=False)
    # at pH 1.5 the reagent feed's own liquid needs acid to stay at the set point: a
    # two-sided pH-stat (the base titrant alone would have to be withdrawn)
    two_sided = PhControl("held", setpoint=1.5, titrant="Na", titrant_concentration=1.0,
                          opposite_titrant="Cl", opposite_titrant_concentration=1.0)
    low = simulate(model, two_site_run(two_sided), times=[0.0, 10800.0])
    assert low.opposite_titrant[-1] > 0 and low.titrant[-1] >= 0
    mid = simulate(model, two_site_run(held(4.0)), times=[0.0, 10800.0])
    assert mid.conversion("S")[-1] > 0.5
    assert low.conversion("S")[-1] < 0.1 * mid.conversion("S")[-1]


def test_free_mode_ph_of_weak_acid_matches_independent_solution():
    # 0.01 mol/L of a weak acid (pKa 4.76): pH from [H+] = [A-] + [OH-] solved here
    # with scipy brentq (textbook weak-acid equilibrium, e.g. Harris, Quantitative
    # Chemical Analysis); about 3.38 (from memory).
    water = pytest.importorskip("speciakin.chemistry.water")
    acid = Molecule("HA", sites=(Site("O", "acid", __import__("sim_models").q(4.76)),))
    model = Model("weak acid (invented run)", (acid,), ions=(Ion("Na", 1),))
    run = Run("free", {"HA": 0.01}, 1.0, TemperatureProfile((0.0,), (298.15,)), PhControl("free"), 60.0)
    res = simulate(model, run, times=[0.0, 60.0])
    kw = 10 ** -water.pkw(298.15)
    f = lambda x: 10 ** -x - 0.01 / (1 + 10 ** (4.76 - x)) - kw / 10 ** -x  # noqa: E731
    expected = brentq(f, 1.0, 7.0, xtol=1e-14)
    np.testing.assert_allclose(res.ph, expected, atol=1e-9)
    assert abs(expected - 3.38) < 0.01


def test_free_mode_agrees_with_chemistry_equilibrium():
    equilibrium = pytest.importorskip("speciakin.chemistry.equilibrium")
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    run = two_site_run(PhControl("free"), chloride=0.12, sodium=0.2)
    res = simulate(model, run, times=np.linspace(0, 10800.0, 5))
    for i in range(len(res.times)):
        conc = {n: float(c) for n, c in zip(res.species_names, res.concentrations[i])}
        ref = equilibrium.solve_model_ph(model, conc)
        assert abs(ref.ph - res.ph[i]) < 1e-7


def test_logged_ph_is_interpolated_plus_offset():
    model = two_site_model()
    ctrl = PhControl("logged", log_times=(0.0, 3600.0, 10800.0), log_ph=(6.0, 8.0, 7.0))
    run = two_site_run(ctrl)
    run = Run(run.name, run.charges, run.volume, run.temperature, ctrl, run.end_time, doses=run.doses,
              ph_offset=0.15)
    res = simulate(model, run, times=[0.0, 1800.0, 3600.0, 7200.0])
    np.testing.assert_allclose(res.ph, np.array([6.0, 7.0, 8.0, 7.5]) + 0.15, atol=1e-12)
    assert np.all(res.titrant == 0.0)


def test_temperature_ramp_in_held_mode_keeps_charge_balance():
    # the held-pH controller follows the drift of pKa (van 't Hoff) and Kw with T
    water = pytest.importorskip("speciakin.chemistry.water")
    model = two_site_model(double=False)
    ramp = TemperatureProfile((0.0, 3600.0), (288.15, 308.15))
    run = two_site_run(held(9.0), temperature=ramp, end=5400.0)
    # with T(t) the balance is no longer a linear invariant of the state, so it holds
    # to the integration tolerance: integrate tightly
    res = simulate(model, run, times=np.linspace(0, 5400.0, 10), rtol=1e-10, atol=1e-14)
    r_gas = 8.314462618
    for i, ph in enumerate(res.ph):
        temp = res.temperature[i]
        shift = lambda dh: dh * 1000 / (r_gas * math.log(10)) * (1 / temp - 1 / 298.15)  # noqa: E731
        pop = _populations([9.3 + shift(50.0), 4.6 + shift(30.0)], 0.8, ph)
        z = np.array([pop[1] + pop[2] + 2 * pop[3], 0.0, _protonated(4.1, ph), _protonated(9.0, ph), 0.0,
                      _protonated(4.76, ph) - 1.0])
        n = res.amounts[i]
        kw = 10 ** -water.pkw(temp)
        charge = n[:6] @ z + n[6] - n[7] + res.volume[i] * (10 ** -ph - kw / 10 ** -ph)
        assert abs(charge) < 1e-9 * 0.3
