"""Model file: the medium's pKw and shared quantities (invented models)."""

from __future__ import annotations

import math

import pytest

from speciakin.chemistry.equilibrium import solve_model_ph
from speciakin.chemistry.modelfile import dump_model, parse_model
from speciakin.errors import ModelFileError

BASE = """
[model]
name = "medium_test"

MEDIUM

[ions]
"Na+" = 1

[molecule.A]
role = "reagent"

[molecule.B]
role = "reagent"

[molecule.ACID]
role = "acid"

[step.water_A]
reactants = ["A", "water"]
products = { ACID = 1 }
k = "2e-4 1/s"

[step.water_B]
reactants = ["B", "water"]
products = { ACID = 1 }
K_B
"""


def text(medium: str = "", k_b: str = 'k = "1e-4 1/s"') -> str:
    return BASE.replace("MEDIUM", medium).replace("K_B", k_b)


def test_medium_pkw_fixed_fitted_and_round_trip():
    m = parse_model(text('[medium]\nname = "water/THF 70:30 (invented)"\npkw = 14.6'))
    assert m.pkw.value == 14.6 and not m.pkw.fit and m.pkw.name == "pKw[medium]"
    assert m.medium == "water/THF 70:30 (invented)"
    assert m.quantities()[-1] is m.pkw
    fitted = parse_model(text("[medium]\npkw = { value = 14.6, fit = true, lower = -0.5, upper = 0.5, spread = 0.3 }"))
    q = fitted.pkw
    assert q.fit and q.shift and (q.lower, q.upper) == (-0.5, 0.5) and q.prior.parameters["sd"] == 0.3
    assert parse_model(dump_model(fitted)) == fitted
    assert parse_model(text()).pkw is None                       # water by default


def test_medium_pkw_out_of_range_is_located():
    with pytest.raises(ModelFileError, match=r"key 'medium\.pkw': pKw of the medium out of range \(value 24"):
        parse_model(text("[medium]\npkw = 24"))


def test_equilibrium_uses_the_medium_pkw():
    # neutral solution: [H+] = [OH-], so pH = pKw / 2 (definition of neutrality)
    m = parse_model(text("[medium]\npkw = 15.0"))
    assert solve_model_ph(m, {}).ph == pytest.approx(7.5, abs=1e-9)


def test_shared_rate_constant_takes_the_value_and_round_trips():
    m = parse_model(text(k_b='k = { same_as = "log10k[water_A]" }'))
    a, b = m.steps
    assert b.log10_k.same_as == "log10k[water_A]" and b.log10_k.value == pytest.approx(math.log10(2e-4))
    assert not b.log10_k.fit
    assert parse_model(dump_model(m)) == m


@pytest.mark.parametrize("k_b, words", [
    ('k = { same_as = "log10k[nope]" }', "same_as names no quantity"),
    ('k = { same_as = "Ea[water_A]" }', "another kind"),
    ('k = { same_as = "log10k[water_A]", fit = true }', "unknown key"),
])
def test_shared_quantity_errors_name_the_key(k_b, words):
    with pytest.raises(ModelFileError) as info:
        parse_model(text(k_b=k_b))
    message = str(info.value)
    assert "key 'step.water_B.k" in message and words in message


def test_davies_is_refused_with_a_reason():
    with pytest.raises(ModelFileError, match=r"key 'model\.activity'.*not by the kinetics simulation"):
        parse_model(text().replace('name = "medium_test"', 'name = "medium_test"\nactivity = "davies"'))


def test_log_thinning_is_an_explicit_option():
    assert "log_thinning" not in parse_model(text() + "\n[fit]\nstarts = 2\n").extra["fit"]
    m = parse_model(text() + "\n[fit]\nlog_thinning = { titrant = 40, ph = 240 }\n")
    assert m.extra["fit"]["log_thinning"] == {"titrant": 40, "ph": 240}
    with pytest.raises(ModelFileError, match=r"key 'fit\.log_thinning\.ph': too few readings \(value 1"):
        parse_model(text() + "\n[fit]\nlog_thinning = { ph = 1 }\n")
