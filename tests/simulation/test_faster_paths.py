"""The cheaper paths of the demo likelihood against outside references.

* Segments cross the knots of a logged temperature or pH where the profile's
  slope does not change (``runs_layout.kinks``).
* Microstate populations as products of one power of ten per site and per
  interaction (``speciation_kernel.molecule_populations``).
* The last Newton step of the free-pH charge balance carries the populations
  to the root to first order (``speciation_kernel.NEWTON_LINEAR``).
* Rate constants k(T) from one exponential (``rhs_kernel.set_temperature``).
* A held pH under a temperature ramp: the coefficients carried as cubics in the
  temperature (``held_ramp_kernel``), or in time when the range is too wide.

Every invented model and run here is invented for the tests.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from sim_models import radau_piecewise, two_site_model, two_site_run
from speciakin.chemistry.model import PhControl, TemperatureProfile
from speciakin.chemistry.water import pkw
from speciakin.simulation import compile_model, compile_runs, simulate
from speciakin.simulation.runs_layout import kinks
from speciakin.simulation.speciation_kernel import mean_charges, molecule_populations, solve_charge_balance
from test_against_scipy import _varying_reference


def test_kinks_are_the_knots_where_the_slope_changes():
    # worked by hand: slopes 0 | 1 | 1 | 0 | 0 | -1 | 0 (held constant outside the knots)
    times = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]
    values = [0.0, 1.0, 2.0, 2.0, 2.0, 1.0]
    assert kinks(times, values) == [0.0, 2.0, 4.0, 5.0]
    # a flat profile and a single knot have none
    assert kinks([0.0, 5.0, 9.0], [3.0, 3.0, 3.0]) == []
    assert kinks([0.0], [3.0]) == []
    # a profile starting later than t = 0 breaks at its first knot when it rises from there
    assert kinks([10.0, 20.0], [1.0, 2.0]) == [10.0, 20.0]


def test_flat_stretches_of_the_logs_are_crossed_and_match_radau():
    # a logged pH and a logged temperature with flat stretches (repeated readings,
    # as a probe rounded to 0.1 C gives): the segments run through the flat knots,
    # and the result still agrees with scipy's Radau at rtol 1e-10 integrated piecewise
    # between every knot (the reference of test_against_scipy, an independent numpy
    # right-hand side)
    knots_t = np.array([0.0, 900.0, 1800.0, 2700.0, 3600.0, 4500.0, 5400.0, 7200.0])
    knots_ph = np.array([5.0, 7.0, 7.0, 7.0, 7.0, 6.0, 6.0, 6.0])
    temp_t = np.array([0.0, 1200.0, 2400.0, 3600.0, 4800.0, 6000.0, 7200.0])
    temp_k = np.array([295.15, 297.15, 297.15, 297.15, 297.15, 296.15, 296.15])
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5), log10k_aryl=-2.0)
    run = two_site_run(PhControl("logged", log_times=tuple(knots_t), log_ph=tuple(knots_ph)), end=7200.0,
                       dose_minutes=0.0, temperature=TemperatureProfile(tuple(temp_t), tuple(temp_k)))
    times = np.linspace(0.0, 7200.0, 25)
    compiled = compile_model(model)
    cruns = compile_runs(compiled, [run], [times])
    bps = cruns.arrays.bp[0, :cruns.arrays.n_bp[0]]
    # worked by hand: pH knots 1800, 2700 and 5400 and temperature knots 2400 and 3600 lie
    # inside flat stretches; 6000 ends the fall of the temperature; the end time is kept
    np.testing.assert_array_equal(bps, [900.0, 1200.0, 3600.0, 4500.0, 4800.0, 6000.0, 7200.0])
    res = simulate(model, run, times=times)
    ref = _varying_reference(knots_t, knots_ph, temp_t, temp_k, times, lambda t: float(pkw(t)))
    assert np.allclose(res.ph, np.interp(times, knots_t, knots_ph), atol=1e-12)
    assert np.allclose(res.temperature, np.interp(times, temp_t, temp_k), atol=1e-9)
    # rtol 1e-6 per step: the global error stays within 1e-6 of the largest amount
    assert np.max(np.abs(res.concentrations[:, :6] - ref)) / 0.105 < 1e-6


def _direct_populations(pka, pairs, w, ph):
    """Site-binding model of Borkovec and Koper (J. Phys. Chem. 1992, 96, 6038):
    log10 w(s) = sum_i s_i (pKa_i - pH) - sum_(i<j) s_i s_j W_ij, normalised;
    written here with numpy in log-sum-exp form (one term per microstate)."""
    n = len(pka)
    lw = np.empty(1 << n)
    for s in range(1 << n):
        bits = [(s >> i) & 1 for i in range(n)]
        lw[s] = sum(b * (p - ph) for b, p in zip(bits, pka)) - sum(
            wk for (a, b), wk in zip(pairs, w) if bits[a] and bits[b])
    p = 10.0 ** (lw - lw.max())
    return p / p.sum()


@pytest.mark.parametrize("n_sites", [0, 1, 2, 3, 4])
def test_product_populations_match_the_site_binding_model(n_sites):
    rng = np.random.default_rng(20261203 + n_sites)
    pairs = list(itertools.combinations(range(n_sites), 2))
    for trial in range(40):
        pka = rng.uniform(-1.0, 15.0, n_sites)
        w = rng.uniform(-1.5, 3.0, len(pairs))
        if trial == 0 and pairs:
            w[:] = 400.0  # weights beyond the floating-point range: the log-sum-exp fallback
        ph = rng.uniform(-2.0, 16.0)
        out = np.full((1 << n_sites) + 2, np.nan)
        molecule_populations(pka, 0, n_sites, np.array([a for a, _ in pairs], np.int64),
                             np.array([b for _, b in pairs], np.int64), w, 0, len(pairs), ph, out, 1)
        ref = _direct_populations(pka, pairs, w, ph)
        np.testing.assert_allclose(out[1:-1], ref, rtol=1e-12, atol=1e-300)
        assert math.isnan(out[0]) and math.isnan(out[-1])


def test_free_ph_charge_balance_matches_brentq():
    # a weak acid (pKa 4.76) and a two-site base with an interaction, sodium and chloride:
    # the pH of the charge balance and the populations at that pH against scipy's brentq
    # on the balance written here from the site-binding model (populations as above)
    pka = np.array([4.76, 9.3, 4.6])
    site_start = np.array([0, 1, 3], np.int64)
    micro_start = np.array([0, 2, 6], np.int64)
    micro_charge = np.array([-1.0, 0.0, 0.0, 1.0, 1.0, 2.0])
    micro_protons = np.array([0.0, 1.0, 0.0, 1.0, 1.0, 2.0])
    inter_a, inter_b, inter_w = np.array([0], np.int64), np.array([1], np.int64), np.array([0.8])
    inter_start = np.array([0, 0, 1], np.int64)
    species_charge = np.array([0.0, 0.0, 1.0, -1.0])
    pkw_value = float(pkw(298.15))
    pops, zbar, var = np.empty(6), np.empty(2), np.empty(2)

    def balance(ph, conc):
        acid = _direct_populations([4.76], [], [], ph)
        base = _direct_populations([9.3, 4.6], [(0, 1)], [0.8], ph)
        z = conc[0] * (-acid[0]) + conc[1] * (base[1] + base[2] + 2 * base[3])
        return z + conc[2] - conc[3] + 10.0 ** -ph - 10.0 ** (ph - pkw_value)

    for acid_c, base_c, na, cl in ((0.01, 0.0, 0.0, 0.0), (0.05, 0.02, 0.03, 0.0), (0.0, 0.02, 0.0, 0.035),
                                   (0.02, 0.05, 0.0, 0.01), (1e-6, 1e-6, 0.0, 0.0)):
        conc = np.array([acid_c, base_c, na, cl])
        expected = brentq(balance, -2.0, 16.0, args=(conc,), xtol=1e-15, rtol=1e-15)
        for guess in (7.0, expected + 0.3, expected - 1e-4, expected + 2e-8):
            ph, _ = solve_charge_balance(conc, species_charge, 2, 4, pka, site_start, micro_start, inter_a, inter_b,
                                         inter_w, inter_start, micro_charge, micro_protons, pkw_value, guess, pops,
                                         zbar, var)
            assert abs(ph - expected) < 1e-11
            np.testing.assert_allclose(pops[:2], _direct_populations([4.76], [], [], ph), rtol=1e-11, atol=1e-300)
            np.testing.assert_allclose(pops[2:], _direct_populations([9.3, 4.6], [(0, 1)], [0.8], ph), rtol=1e-11,
                                       atol=1e-300)
            zb, vb = np.empty(2), np.empty(2)
            mean_charges(pops, micro_charge, micro_protons, micro_start, 2, zb, vb)
            np.testing.assert_array_equal(zb, zbar)


def test_free_ph_run_with_a_temperature_ramp_matches_radau():
    # a free-pH acylation whose released acid lowers the pH, under a temperature ramp
    # (pKa by van 't Hoff, k by Arrhenius, Kw by IAPWS R11-07 change along it), against a
    # numpy right-hand side written here (pH by brentq on the charge balance at every call)
    # integrated with scipy's Radau at rtol 1e-10 piecewise between the temperature knots
    r_gas = 8.314462618
    t_ref = 298.15
    temp_t = np.array([0.0, 1800.0, 3600.0, 7200.0])
    temp_k = np.array([293.15, 303.15, 303.15, 298.15])
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5), log10k_aryl=-2.0)
    run = two_site_run(PhControl("free"), end=7200.0, dose_minutes=0.0, sodium=0.15,
                       temperature=TemperatureProfile(tuple(temp_t), tuple(temp_k)))
    times = np.linspace(0.0, 7200.0, 13)
    res = simulate(model, run, times=times, rtol=1e-6)

    def vant_hoff(p, dh, temp):
        return p + dh * 1000.0 / (r_gas * math.log(10.0)) * (1.0 / temp - 1.0 / t_ref)

    def arrhenius(lk, ea, temp):
        return 10.0 ** lk * math.exp(-ea * 1000.0 / r_gas * (1.0 / temp - 1.0 / t_ref))

    def one_site(pka, ph):
        """(deprotonated, protonated) populations of a single site."""
        protonated = 1.0 / (1.0 + 10.0 ** (ph - pka))
        return 1.0 - protonated, protonated

    def speciation(ph, temp):
        # the two-site substrate as in _direct_populations, written out for speed
        a, b = vant_hoff(9.3, 50.0, temp) - ph, vant_hoff(4.6, 30.0, temp) - ph
        lw = np.array([0.0, a, b, a + b - 0.8])
        s = 10.0 ** (lw - lw.max())
        s /= s.sum()
        # P_alkyl keeps its aryl amine (pKa 4.6 - 0.5), P_aryl its alkyl amine (9.3 - 0.3)
        return s, one_site(4.1, ph), one_site(9.0, ph), one_site(4.76, ph)

    last = [7.0]

    def ph_of(c, temp):
        kw_p = float(pkw(temp))

        def g(ph):
            s, p_alk, p_ar, ha = speciation(ph, temp)
            z = (c[0] * (s[1] + s[2] + 2 * s[3]) + c[2] * p_alk[1] + c[3] * p_ar[1] - c[5] * ha[0]
                 + c[6] - c[7])
            return z + 10.0 ** -ph - 10.0 ** (ph - kw_p)

        lo, hi = last[0] - 0.5, last[0] + 0.5
        if g(lo) * g(hi) > 0.0:
            lo, hi = -2.0, 16.0
        last[0] = brentq(g, lo, hi, xtol=1e-14)
        return last[0], kw_p

    def rhs(t, c):
        temp = float(np.interp(t, temp_t, temp_k))
        ph, kw_p = ph_of(c, temp)
        s, p_alk, p_ar, ha = speciation(ph, temp)
        f_alk, f_ar = s[0] + s[2], s[0] + s[1]
        k = [arrhenius(math.log10(0.3), 45.0, temp), arrhenius(-2.0, 40.0, temp),
             arrhenius(math.log10(0.3) - 0.3, 0.0, temp), arrhenius(-2.3, 0.0, temp),
             arrhenius(-4.5, 0.0, temp), arrhenius(0.5, 0.0, temp)]
        oh = 10.0 ** (ph - kw_p)
        sub, e = c[0], c[1]
        r = [k[0] * sub * f_alk * e, k[1] * sub * f_ar * e, k[2] * c[3] * p_ar[0] * e,
             k[3] * c[2] * p_alk[0] * e, k[4] * e, k[5] * oh * e]
        return [-r[0] - r[1], -sum(r), r[0] - r[3], r[1] - r[2], r[2] + r[3],
                r[0] + r[1] + r[2] + r[3] + 2 * r[4] + 2 * r[5], 0.0, 0.0]

    ref = radau_piecewise(rhs, [0.1, 0.105, 0.0, 0.0, 0.0, 0.0, 0.15, 0.0], temp_t, times)
    ref_ph = np.array([ph_of(row, float(np.interp(t, temp_t, temp_k)))[0] for t, row in zip(times, ref)])
    # columns: S, E, P_alkyl, P_aryl, P_both, HA, Na, Cl (volume 1 L)
    assert np.max(np.abs(res.concentrations[:, :6] - ref[:, :6])) / 0.105 < 1e-6
    assert np.max(np.abs(res.ph - ref_ph)) < 1e-5
    assert res.ph[-1] < res.ph[0] - 0.5  # the released acid moves the pH: the free path is exercised


@pytest.mark.parametrize("temp_k", [
    # a narrow range (2 K): the coefficients carried as cubics in the temperature on a few pieces
    (296.15, 298.15, 297.15),
    # a wide range (20 K): the pieces fail their check and the run takes the cubics in time
    (288.15, 308.15, 298.15),
])
def test_held_ph_under_a_temperature_ramp_matches_radau(temp_k):
    # held pH under a temperature ramp (held_ramp_kernel): the titrant (invented, 1e9 mol/L)
    # adds no volume worth counting (below 1e-9 L here), so the amounts of the molecules follow
    # the chemistry of a constant pH, the reference of test_against_scipy (scipy's Radau at
    # rtol 1e-10 with pKa(T), k(T) and Kw(T) written there)
    temp_t = np.array([0.0, 2400.0, 7200.0])
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5), log10k_aryl=-2.0)
    run = two_site_run(PhControl("held", setpoint=6.0, titrant="Na", titrant_concentration=1e9), end=7200.0,
                       dose_minutes=0.0, temperature=TemperatureProfile(tuple(temp_t), temp_k))
    times = np.linspace(0.0, 7200.0, 25)
    res = simulate(model, run, times=times)
    ref = _varying_reference(np.array([0.0, 7200.0]), np.array([6.0, 6.0]), temp_t, np.array(temp_k), times,
                             lambda t: float(pkw(t)))
    assert np.allclose(res.ph, 6.0, atol=1e-12)
    assert np.max(np.abs(res.volume - 1.0)) < 1e-9
    amounts = res.concentrations[:, :6] * res.volume[:, None]
    # rtol 1e-6 per step: the global error stays within 1e-6 of the largest amount
    assert np.max(np.abs(amounts - ref)) / 0.105 < 1e-6
