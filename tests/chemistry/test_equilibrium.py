"""Charge-balance solver against analytic solutions, numpy.roots and scipy."""

import json

import numpy as np
import pytest
from hypothesis import example, given
from hypothesis import strategies as st
from scipy import optimize

from speciakin.chemistry import equilibrium as eq
from speciakin.chemistry import water
from speciakin.chemistry.model import Interaction, Ion, Model, Molecule, Quantity, Site
from speciakin.errors import InputError

KW25 = water.ion_product(298.15)


def acid(name, pka):
    return eq.IonizableSpecies(name, np.array([pka]), np.zeros((1, 1)), np.array([0.0]), np.array([-1.0]))


def base(name, pka):
    return eq.IonizableSpecies(name, np.array([pka]), np.zeros((1, 1)), np.array([1.0]), np.array([0.0]))


def test_pure_water_is_neutral():
    # analytic: [H+] = [OH-] = sqrt(Kw), pH = pKw / 2
    r = eq.solve_ph([], [], 0.0, 298.15)
    assert r.ph == pytest.approx(water.pkw(298.15) / 2, abs=1e-12)
    r = eq.solve_ph([], [], 0.0, 323.15)
    assert r.ph == pytest.approx(water.pkw(323.15) / 2, abs=1e-12)


@pytest.mark.parametrize("c", [1e-8, 1e-6, 1e-3, 0.1, 2.0])
def test_strong_acid_and_base(c):
    # analytic: strong acid c, [H+] = (c + sqrt(c^2 + 4 Kw)) / 2 (Harris, chapter
    # "Monoprotic acid-base equilibria", strong acids)
    h = (c + np.sqrt(c * c + 4 * KW25)) / 2
    r = eq.solve_ph([], [], -c)
    assert r.ph == pytest.approx(-np.log10(h), abs=1e-10)
    r = eq.solve_ph([], [], +c)
    assert r.ph == pytest.approx(-np.log10(KW25 / h), abs=1e-10)


def _positive_real_root(coefficients):
    roots = np.roots(coefficients)
    real = roots[(np.abs(roots.imag) < 1e-12 * np.abs(roots)) & (roots.real > 0)].real
    assert real.size == 1
    return real[0]


@pytest.mark.parametrize("c, pka", [(0.1, 4.76), (1e-4, 4.76), (0.05, 9.24), (1e-6, 6.0)])
def test_weak_acid_against_cubic(c, pka):
    # exact weak acid HA: h^3 + Ka h^2 - (Ka C + Kw) h - Ka Kw = 0 (Harris, chapter
    # "Monoprotic acid-base equilibria", systematic treatment), solved by numpy.roots.
    # acetic acid 4.76, boric acid 9.24 (CRC Handbook, from memory)
    ka = 10.0**-pka
    h = _positive_real_root([1.0, ka, -(ka * c + KW25), -ka * KW25])
    r = eq.solve_ph([acid("HA", pka)], [c])
    assert r.ph == pytest.approx(-np.log10(h), abs=1e-9)
    assert r.relative_residual < 1e-10


def test_weak_acid_textbook_value():
    # 0.100 M acetic acid (pKa 4.76): pH 2.88 (textbook classic, e.g. Harris
    # monoprotic chapter, from memory)
    r = eq.solve_ph([acid("acetic", 4.76)], [0.1])
    assert r.ph == pytest.approx(2.88, abs=0.005)


def test_davies_weak_acid_against_independent_formulation():
    # Independent formulation with conditional constants (Harris, chapter
    # "Activity"): Ka' = Ka / g^2, Kw' = Kw / g^2 with g = gamma(+-1) from Davies;
    # unknowns [H+] and I solved together by scipy.optimize.fsolve.
    c, nb, pka = 0.02, 0.01, 4.76
    ka = 10.0**-pka

    def equations(x):
        log_h, strength = x
        h = 10.0**log_h
        g = 10.0 ** water.davies_log10_gamma(1, max(strength, 0.0))
        kap, kwp = ka / g**2, KW25 / g**2
        a = c * kap / (kap + h)
        return [(h + nb - kwp / h - a) / c, strength - 0.5 * (h + nb + kwp / h + a)]

    log_h, strength = optimize.fsolve(equations, [-4.7, 0.01], xtol=1e-14)
    g = 10 ** water.davies_log10_gamma(1, strength)
    r = eq.solve_ph([acid("HA", pka)], [c], nb, activity="davies")
    assert r.ph == pytest.approx(-np.log10(g * 10**log_h), abs=1e-8)
    assert r.ionic_strength == pytest.approx(strength, rel=1e-8)
    assert r.activity_coefficient == pytest.approx(g, rel=1e-8)
    # activity lowers the apparent pKa of a neutral acid: pH below the ideal value
    assert r.ph < eq.solve_ph([acid("HA", pka)], [c], nb).ph


def test_extremes_converge():
    zw = eq.IonizableSpecies("Z", np.linspace(0, 14, 10), np.zeros((10, 10)),
                             np.array([1.0] * 5 + [0.0] * 5), np.array([0.0] * 5 + [-1.0] * 5))
    for strong in (-10.0, -1e-3, 0.0, 1e-9, 1e-3, 10.0):
        r = eq.solve_ph([zw, acid("HA", 4.0), base("B", 10.5)], [0.5, 1e-3, 1e-12], strong)
        assert np.isfinite(r.ph)
        assert r.relative_residual < 1e-10
    r = eq.solve_ph([acid("HA", 4.0)], [0.0])
    assert r.ph == pytest.approx(water.pkw(298.15) / 2, abs=1e-9)


def test_result_report_and_dict():
    r = eq.solve_ph([acid("HA", 4.76)], [0.1], 0.05, activity="davies")
    d = r.to_dict()
    json.dumps(d)
    assert set(d) >= {"ph", "ionic_strength_mol_per_L", "iterations", "relative_residual"}
    text = r.report()
    for heading in ("Solution equilibrium", "Mean charge", "Solver"):
        assert heading in text


def test_model_wrapper_matches_direct_solve():
    mol = Molecule("S", (Site("N1", "base", Quantity(9.3)), Site("N2", "base", Quantity(4.6))),
                   (Interaction("N1", "N2", Quantity(0.4)),))
    model = Model("m", (mol,), ions=(Ion("Na+", 1), Ion("Cl-", -1)))
    r1 = eq.solve_model_ph(model, {"S": 0.01, "Cl-": 0.015})
    sp = eq.IonizableSpecies("S", np.array([9.3, 4.6]), np.array([[0, 0.4], [0.4, 0]]),
                             np.array([1.0, 1.0]), np.array([0.0, 0.0]))
    r2 = eq.solve_ph([sp], [0.01], -0.015, spectator_ionic_strength=0.0075)
    assert r1.ph == pytest.approx(r2.ph, abs=1e-12)
    # 1.5 equivalents of acid on a dibasic compound: mean charge 1.5 minus what
    # the free H+ carries; between the two pKa values
    assert 4.0 < r1.ph < 9.0
    with pytest.raises(InputError, match="unknown molecule or ion"):
        eq.solve_model_ph(model, {"X": 1.0})


@pytest.mark.parametrize("kwargs, match", [
    ({"concentrations": [-1e-3]}, "non-negative"),
    ({"concentrations": [np.nan]}, "non-negative"),
    ({"concentrations": [1e-3], "strong_ion_charge": np.inf}, "not finite"),
    ({"concentrations": [1e-3], "activity": "extended"}, "unknown activity"),
    ({"concentrations": [1e-3, 1e-3]}, "one concentration per molecule"),
])
def test_bad_input(kwargs, match):
    with pytest.raises(InputError, match=match):
        eq.solve_ph([acid("HA", 4.76)], **kwargs)


species_strategy = st.lists(
    st.tuples(st.lists(st.floats(0, 14), min_size=1, max_size=3),
              st.lists(st.sampled_from([(1.0, 0.0), (0.0, -1.0)]), min_size=3, max_size=3),
              st.floats(1e-6, 0.5), st.floats(0, 2)),
    min_size=1, max_size=3)


@given(spec=species_strategy, strong=st.floats(-0.5, 0.5), davies=st.booleans())
# found by hypothesis: a fully dissociated acid balancing the strong ions leaves a nearly flat charge
# balance, whose pH moved by 8e-11 between starting points while the activity coefficients repeated
@example(spec=[([0.0], [(0.0, -1.0)] * 3, 0.5, 0.0)], strong=0.5, davies=True)
# found by hypothesis: at I = 1.77 mol/L (beyond the Davies range) plain substitution of the ionic strength
# oscillated without converging in 100 passes
@example(spec=[([0.0, 0.0], [(1.0, 0.0)] * 3, 0.5, 0.0), ([0.0, 0.0, 0.0], [(0.0, -1.0)] * 3, 0.5, 0.0)],
         strong=0.0, davies=True)
def test_residual_small_and_root_matches_brentq(spec, strong, davies):
    species, conc = [], []
    for j, (pka, charges, c, w) in enumerate(spec):
        n = len(pka)
        inter = np.full((n, n), w)
        np.fill_diagonal(inter, 0.0)
        zp = np.array([ch[0] for ch in charges[:n]])
        zd = np.array([ch[1] for ch in charges[:n]])
        species.append(eq.IonizableSpecies(f"M{j}", np.array(pka), inter, zp, zd))
        conc.append(c)
    r = eq.solve_ph(species, conc, strong, activity="davies" if davies else "ideal")
    # charge-balance residual below 1e-10 of the largest ionic term: the solver's
    # relative residual is taken against the sum of the (3 + molecules) absolute
    # terms, which is at most that many times the largest one
    assert r.relative_residual * (3 + len(species)) < 1e-10
    if not davies:
        # root of the same charge balance by scipy.optimize.brentq (reference library)
        tables = [s.tables() for s in species]
        pkw = water.pkw(298.15)
        root = optimize.brentq(lambda p: eq.charge_balance(p, tables, conc, strong, pkw)[0], -3, 17,
                               xtol=1e-14, rtol=1e-15)
        assert r.ph == pytest.approx(root, abs=1e-8)


def test_grouped_tables_equal_microstate_tables():
    # identity: grouping microstates by bound protons (binding polynomial) gives
    # the same charge balance as the full microstate sum
    from speciakin.chemistry import microstates as ms

    pka = np.array([9.3, 4.6, 10.1])
    w = np.array([[0, 0.4, 0.7], [0.4, 0, 0], [0.7, 0, 0]])
    zp, zd = np.array([1.0, 1.0, 0.0]), np.array([0.0, 0.0, -1.0])
    sp = eq.IonizableSpecies("S", pka, w, zp, zd, 1.0)
    full = (ms.microstate_constant_log_weights(pka, w), ms.bound_protons(3).astype(float),
            ms.microstate_charges(zp, zd, 1.0))
    pkw = water.pkw(298.15)
    for ph in (-1.0, 3.3, 7.0, 10.2, 15.0):
        a = eq.charge_balance(ph, [sp.tables()], [0.02], -0.01, pkw)
        b = eq.charge_balance(ph, [full], [0.02], -0.01, pkw)
        np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-18)
    with pytest.raises(InputError, match="exceed"):
        eq.IonizableSpecies("X", np.array([5.0]), None, np.array([1.0]), np.array([-1.0]))
