"""The kernel honours the medium's pKw and shared quantities (invented models)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from speciakin.chemistry.model import Ion, Model, Molecule, PhControl, Quantity, Reactant, Run, Step
from speciakin.chemistry.model import TemperatureProfile
from speciakin.simulation import compile_model, simulate

T25 = 298.15


def _model(pkw=None, shared=False):
    ester_a = Molecule("A", role="reagent")
    ester_b = Molecule("B", role="reagent")
    acid = Molecule("ACID", role="acid")
    k_b = Quantity(math.nan, name="log10k[oh_B]", same_as="log10k[oh_A]") if shared \
        else Quantity(math.log10(5.0), name="log10k[oh_B]")
    steps = (Step("oh_A", (Reactant("A"), Reactant("hydroxide")), (("ACID", 1.0),), Quantity(math.log10(50.0),
                                                                                            name="log10k[oh_A]")),
             Step("oh_B", (Reactant("B"), Reactant("hydroxide")), (("ACID", 1.0),), k_b))
    return Model("ester hydrolysis (invented)", (ester_a, ester_b, acid), steps,
                 ions=(Ion("Na+", 1), Ion("Cl-", -1)), pkw=pkw)


def _run(end=1800.0):
    ph = PhControl("held", setpoint=10.0, titrant="Na+", titrant_concentration=1.0)
    return Run("r", {"A": 0.01, "B": 0.01}, 1.0, TemperatureProfile((0.0,), (T25,)), ph, end)


def test_hydroxide_rate_follows_the_medium_pkw():
    # rate = k_OH [OH-][A], [OH-] = 10**(pH - pKw): first order with k' = k_OH 10**(pH - pKw)
    # (closed form, first-order decay); pKw of the invented medium 15.0 at 25 C
    model = _model(pkw=Quantity(15.0, name="pKw[medium]", shift=True))
    t = np.linspace(0, 1800.0, 7)
    res = simulate(model, _run(), times=t, rtol=1e-9, atol=1e-14)
    k1 = 50.0 * 10 ** (10.0 - 15.0)
    np.testing.assert_allclose(res.amount("A"), 0.01 * np.exp(-k1 * t), rtol=1e-7)
    compiled = compile_model(model)
    assert compiled.quantity_names[-1] == "pKw[medium]" and compiled.nominal[-1] == 15.0
    # the parameter vector moves it: pKw 14.5 gives a rate 10**0.5 faster
    q = compiled.nominal.copy()
    q[-1] = 14.5
    res2 = simulate(compiled, _run(), times=t, q=q, rtol=1e-9, atol=1e-14)
    np.testing.assert_allclose(res2.amount("A"), 0.01 * np.exp(-k1 * 10 ** 0.5 * t), rtol=1e-7)


def test_shared_rate_constant_uses_the_target_entry():
    model = _model(shared=True)
    from speciakin.chemistry.modelfile.quantity import share_quantities
    problems = []
    model = share_quantities(model, lambda *a: problems.append(a))
    assert not problems
    compiled = compile_model(model)
    t = np.linspace(0, 1800.0, 5)
    res = simulate(compiled, _run(), times=t)
    np.testing.assert_allclose(res.amount("B"), res.amount("A"), rtol=1e-9)
    # moving the target moves both; the shared entry of q is not read
    q = compiled.nominal.copy()
    q[compiled.quantity_names.index("log10k[oh_A]")] += 0.3
    q[compiled.quantity_names.index("log10k[oh_B]")] = -20.0
    res2 = simulate(compiled, _run(), times=t, q=q)
    np.testing.assert_allclose(res2.amount("B"), res2.amount("A"), rtol=1e-9)
    assert res2.amount("A")[-1] < res.amount("A")[-1]
