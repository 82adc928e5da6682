"""Units chemists write in a model file: masses with the molar mass, equivalents of the substrate,
rate constants in L/mol/s and L/(mol*min)."""

from __future__ import annotations

import math

import pytest

from speciakin.chemistry.modelfile import parse_model
from speciakin.chemistry.modelfile.units import parse_equivalents, parse_rate_constant
from speciakin.data.example import example_source
from speciakin.errors import InputError

BASE = (example_source() / "model.toml").read_text()


def _run(initial: str, dosing_amount: str) -> str:
    return BASE + f"""
[run.R1]
volume = "40 mL"
end_time = "60 min"
initial = {{ {initial} }}
ph = {{ mode = "held", setpoint = 6.0, titrant = "Na+", titrant_concentration = "1 M" }}

[[run.R1.dosing]]
species = "REA"
amount = "{dosing_amount}"
start = "0 min"
end = "15 min"
"""


def test_mass_with_molar_mass_and_equivalents_of_the_substrate():
    model = parse_model(_run('SUB = "424.6 mg"', "1.2 eq"))
    run = model.runs[0]
    # 424.6 mg / 212.3 g/mol (molar_mass of SUB in the example) = 2.000 mmol (hand arithmetic)
    assert math.isclose(run.charges["SUB"], 2.0e-3, rel_tol=1e-12)
    # 1.2 eq of 2.000 mmol = 2.400 mmol
    assert math.isclose(run.doses[0].amount, 2.4e-3, rel_tol=1e-12)


def test_mass_of_the_reagent_uses_its_own_molar_mass():
    model = parse_model(_run('SUB = "2 mmol"', "0.5 g"))
    # 0.5 g / 174.2 g/mol (molar_mass of REA) = 2.8703 mmol (hand arithmetic: 500/174.2 = 2.87026)
    assert math.isclose(model.runs[0].doses[0].amount, 0.5 / 174.2, rel_tol=1e-12)


def test_mass_without_molar_mass_is_a_located_error():
    with pytest.raises(InputError) as e:
        parse_model(_run('SUB = "2 mmol", ACID = "10 mg"', "1 eq"))
    p = e.value.problems[0]
    assert p.location.key == "run.R1.initial.ACID" and "molar mass" in p.message


def test_equivalents_without_the_substrate_is_a_located_error():
    with pytest.raises(InputError) as e:
        parse_model(_run('"Cl-" = "1 mmol"', "1.1 eq"))
    p = e.value.problems[0]
    assert p.location.key == "run.R1.dosing[1].amount" and "substrate" in p.message


def test_equivalents_text():
    assert parse_equivalents("1.05 eq") == 1.05 and parse_equivalents("2 equiv") == 2.0
    assert parse_equivalents("1.05 mmol") is None
    with pytest.raises(ValueError):
        parse_equivalents("0 eq")


@pytest.mark.parametrize("text, k_per_second", [
    ("0.5 L/mol/s", 0.5),                 # L/mol/s = L/(mol*s)
    ("30 L/(mol*min)", 0.5),              # 30 / 60 s = 0.5 L/(mol*s)
    ("30 L/mol/min", 0.5),
    ("1800 L/(mol*h)", 0.5),              # 1800 / 3600 s = 0.5
    ("500 mL/(mmol*s)", 500.0),           # 500e-3 L / 1e-3 mol = 500 L/(mol*s)
])
def test_second_order_rate_constant_units(text, k_per_second):
    # IUPAC Gold Book "rate constant": unit concentration^(1-n) time^-1; conversions by hand
    assert math.isclose(parse_rate_constant(text, 2), math.log10(k_per_second), rel_tol=0, abs_tol=1e-12)


def test_rate_constant_unit_of_the_wrong_order_is_refused():
    with pytest.raises(ValueError):
        parse_rate_constant("0.5 L/mol/s", 1)
    with pytest.raises(ValueError):
        parse_rate_constant("0.5 L/mol/", 2)
