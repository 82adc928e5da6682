"""Model file: parsing, unit conversion, names, round trip, examples.

Expected numbers are hand calculations from the unit definitions (SI
prefixes: 1 min = 60 s, 1 mL = 1e-3 L, 1 mmol = 1e-3 mol, T[K] = t[C] + 273.15,
the thermodynamic definition of the Celsius scale, BIPM SI Brochure 9th ed.).
"""

from __future__ import annotations

import dataclasses
import math
from importlib import resources
from pathlib import Path

import pytest

from speciakin.chemistry.model import Prior
from speciakin.chemistry.modelfile import (
    dump_model,
    load_model,
    model_summary,
    parse_model,
    validate_model,
)
from speciakin.chemistry.modelfile.units import parse_rate_constant
from speciakin.errors import ModelFileError

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "two_amines.toml"

BASE = """
[model]
name = "mini"
reference_temperature = "25 C"

[ions]
"Na+" = 1

[molecule.S]
role = "substrate"
moieties = { core = 1 }

[[molecule.S.site]]
name = "N1"
kind = "base"
pka = 9.0

[[molecule.S.site]]
name = "N2"
kind = "base"
pka = 5.0

[molecule.E]
role = "reagent"

[molecule.P]
role = "product"
moieties = { core = 1 }

[step.attack]
reactants = [{ species = "S", requires = { N1 = "deprotonated" } }, "E"]
products = { P = 1 }
k = "35 L/(mol*s)"

[run.r1]
volume = "50 mL"
end_time = "60 min"
initial = { S = "1 mmol" }
ph = { mode = "held", setpoint = 7.0, titrant = "Na+", titrant_concentration = "0.5 M" }
"""


def test_minimal_file_values_in_internal_units():
    m = parse_model(BASE)
    assert m.reference_temperature == pytest.approx(298.15)
    run = m.runs[0]
    assert run.volume == pytest.approx(0.050)
    assert run.end_time == pytest.approx(3600.0)
    assert run.charges["S"] == pytest.approx(1e-3)
    assert run.ph.titrant_concentration == pytest.approx(0.5)
    assert run.temperature.temperatures == (pytest.approx(298.15),)  # default 25 C
    assert m.source == ""
    assert validate_model(m) == []


@pytest.mark.parametrize("text, order, expected", [
    ("35 L/(mol*s)", 2, math.log10(35.0)),
    ("2.1 L/(mol*min)", 2, math.log10(2.1 / 60.0)),   # 1 min = 60 s
    ("1.2e-4 1/s", 1, math.log10(1.2e-4)),
    ("3 1/min", 1, math.log10(3.0 / 60.0)),
    ("0.5 M-1 s-1", 2, math.log10(0.5)),
    ("7 1/(mM*h)", 2, math.log10(7.0 / (1e-3 * 3600.0))),  # 1 mM = 1e-3 mol/L, 1 h = 3600 s
    ("4 L^2/(mol^2*s)", 3, math.log10(4.0)),
])
def test_rate_constant_units_hand_calculation(text, order, expected):
    assert parse_rate_constant(text, order) == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize("text, order", [("35 1/s", 2), ("35 L/(mol*s)", 1), ("35", 2), ("-3 1/s", 1),
                                         ("5 L/(mol*furlong)", 2)])
def test_rate_constant_unit_mismatch_is_refused(text, order):
    with pytest.raises(ValueError):
        parse_rate_constant(text, order)


def test_step_rate_constant_forms_agree():
    a = parse_model(BASE)
    b = parse_model(BASE.replace('k = "35 L/(mol*s)"', f"log10_k = {math.log10(35)!r}"))
    c = parse_model(BASE.replace('k = "35 L/(mol*s)"', 'k = "2100 L/(mol*min)"'))
    assert a.steps[0].log10_k.value == pytest.approx(b.steps[0].log10_k.value, abs=1e-12)
    assert c.steps[0].log10_k.value == pytest.approx(math.log10(35.0), abs=1e-12)
    assert a.steps[0].log10_k.unit == "log10(L/(mol*s))"


def test_arrhenius_fields():
    text = BASE.replace('k = "35 L/(mol*s)"', 'k = "35 L/(mol*s)"\nactivation_energy = "12 kcal/mol"')
    text = text.replace('reference_temperature = "25 C"', 'reference_temperature = "310.15 K"')
    m = parse_model(text)
    step = m.steps[0]
    # 1 kcal = 4.184 kJ (thermochemical calorie, NIST SP 811)
    assert step.activation_energy.value == pytest.approx(12 * 4.184)
    assert step.activation_energy.unit == "kJ/mol"
    assert step.activation_energy.name == "Ea[attack]"
    assert m.reference_temperature == pytest.approx(310.15)
    # bare number: kJ/mol; J/mol converted
    m2 = parse_model(BASE.replace('k = "35 L/(mol*s)"',
                                  'k = "35 L/(mol*s)"\nactivation_energy = { value = 45000, fit = true, '
                                  'lower = "20 kJ/mol", upper = "90000 J/mol" }'.replace("45000", '"45000 J/mol"')))
    ea = m2.steps[0].activation_energy
    assert (ea.value, ea.lower, ea.upper, ea.fit) == (pytest.approx(45.0), 20.0, 90.0, True)
    # default: no activation energy -> 0 kJ/mol (k independent of T)
    assert parse_model(BASE).steps[0].activation_energy.value == 0.0


def test_site_enthalpy_units():
    m = parse_model(BASE.replace("pka = 9.0", 'pka = 9.0\nenthalpy = "52000 J/mol"'))
    assert m.molecule("S").sites[0].enthalpy.value == pytest.approx(52.0)
    assert m.molecule("S").sites[0].enthalpy.name == "dH[S.N1]"


def test_quantity_names_and_fit_specs():
    text = BASE.replace("pka = 9.0", "pka = { value = 9.0, fit = true, lower = -1, upper = 1, spread = 0.3 }")
    text = text.replace("pka = 5.0", 'pka = { value = 5.0, fit = true, prior = { family = "uniform", '
                                      'lower = -0.5, upper = 0.5 } }')
    text = text.replace('k = "35 L/(mol*s)"', 'k = { value = "35 L/(mol*s)", fit = true, '
                                               'lower = "1 L/(mol*s)", upper = 4 }')
    text += '\n[[molecule.S.interaction]]\nsites = ["N1", "N2"]\nw = { value = 0.4, fit = true, lower = 0, upper = 2 }\n'
    m = parse_model(text)
    s = m.molecule("S")
    p1, p2 = s.sites[0].pka, s.sites[1].pka
    assert p1.name == "pKa[S.N1]" and p1.shift and p1.fit
    assert (p1.lower, p1.upper) == (-1.0, 1.0)
    assert p1.prior == Prior("normal", {"mean": 0.0, "sd": 0.3})
    assert p2.prior == Prior("uniform", {"lower": -0.5, "upper": 0.5})
    k = m.steps[0].log10_k
    assert k.name == "log10k[attack]" and k.fit
    assert k.lower == pytest.approx(0.0) and k.upper == 4.0   # "1 L/(mol*s)" -> log10(1) = 0
    w = s.interactions[0].w
    assert w.name == "W[S.N1~N2]" and w.fit and not w.shift
    names = [q.name for q in m.quantities()]
    assert len(set(names)) == len(names)
    # a fitted pKa without spread or prior gets the documented default normal(0, 0.5)
    m3 = parse_model(BASE.replace("pka = 9.0", "pka = { value = 9.0, fit = true }"))
    assert m3.molecule("S").sites[0].pka.prior == Prior("normal", {"mean": 0.0, "sd": 0.5})
    # a bare number is fixed
    assert not m3.molecule("S").sites[1].pka.fit


def test_concentration_charges_use_run_volume():
    m = parse_model(BASE.replace('initial = { S = "1 mmol" }', 'initial = { S = "20 mM", "Na+" = 0.5 }'))
    assert m.runs[0].charges["S"] == pytest.approx(20e-3 * 0.050)   # 20 mmol/L x 50 mL = 1 mmol
    assert m.runs[0].charges["Na+"] == pytest.approx(0.5e-3)       # bare number = mmol


def test_doses_withdrawals_and_profiles():
    text = BASE + """
[[run.r1.dosing]]
species = "E"
amount = "1.1 mmol"
start = "5 min"
end = "35 min"
volume = "5 mL"

[[run.r1.dosing]]
species = "E"
amount = "0.2 M"
start = 40
volume = "1 mL"

[[run.r1.withdrawal]]
time = "30 min"
volume = "0.25 mL"
"""
    text = text.replace("[run.r1]\n", '[run.r1]\ntemperature = { times = [0, 30], values = ["20 C", "303.15 K"] }\n')
    run = parse_model(text).runs[0]
    d1, d2 = run.doses
    assert (d1.amount, d1.start, d1.end, d1.volume) == pytest.approx((1.1e-3, 300.0, 2100.0, 5e-3))
    assert d2.start == d2.end == pytest.approx(2400.0)     # instant event, bare number = min
    assert d2.amount == pytest.approx(0.2 * 1e-3)          # 0.2 mol/L x 1 mL
    assert run.withdrawals[0].time == pytest.approx(1800.0)
    assert run.withdrawals[0].volume == pytest.approx(0.25e-3)
    assert run.temperature.times == pytest.approx((0.0, 1800.0))
    assert run.temperature.temperatures == pytest.approx((293.15, 303.15))


def test_logged_inline_and_csv(tmp_path):
    text = BASE.replace('ph = { mode = "held", setpoint = 7.0, titrant = "Na+", titrant_concentration = "0.5 M" }',
                        'ph = { mode = "logged", times = [0, 30, 60], values = [7.0, 6.8, 6.7] }')
    run = parse_model(text).runs[0]
    assert run.ph.log_times == pytest.approx((0.0, 1800.0, 3600.0))
    assert run.ph.log_ph == (7.0, 6.8, 6.7)
    (tmp_path / "log.csv").write_text("time [h],pH,temp\n0,7.1,25\n0.5,6.9,25\n1,6.8,25\n")
    model_file = tmp_path / "m.toml"
    model_file.write_text(BASE.replace(
        'ph = { mode = "held", setpoint = 7.0, titrant = "Na+", titrant_concentration = "0.5 M" }',
        'ph = { mode = "logged", file = "log.csv" }'))
    run = load_model(model_file).runs[0]
    assert run.ph.log_times == pytest.approx((0.0, 1800.0, 3600.0))
    assert run.ph.log_ph == (7.1, 6.9, 6.8)


def test_load_model_does_not_modify_the_file(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text(BASE)
    before = (path.read_bytes(), path.stat().st_mtime_ns)
    m = load_model(path)
    assert m.source == str(path)
    assert (path.read_bytes(), path.stat().st_mtime_ns) == before


def test_example_parses_validates_and_round_trips():
    m = load_model(EXAMPLE)
    assert [p for p in validate_model(m) if p.severity == "error"] == []
    assert {r.ph.mode for r in m.runs} == {"held", "logged", "free"}
    assert [r.ph.setpoint for r in m.runs if r.ph.mode == "held"] == [4.0, 7.0, 10.0]
    assert {s.name for s in m.steps} >= {"hydrolysis_water_ANH", "hydrolysis_hydroxide_ANH"}
    water = next(s for s in m.steps if s.name == "hydrolysis_water_ANH")
    assert [r.species for r in water.reactants] == ["ANH", "water"]
    assert water.log10_k.value == pytest.approx(math.log10(1.2e-4))
    assert water.log10_k.unit == "log10(1/s)"   # water is the solvent: first order overall
    hydroxide = next(s for s in m.steps if s.name == "hydrolysis_hydroxide_ANH")
    assert hydroxide.log10_k.unit == "log10(L/(mol*s))"
    assert dict(water.products) == {"ACD": 2.0}
    assert m.extra["fit"]["probe_offset"]["runs"] == ["logged"]
    pH10 = next(r for r in m.runs if r.name == "held_pH10")   # compact 'samples' form
    assert [w.time for w in pH10.withdrawals] == pytest.approx([900.0, 2700.0, 5400.0])
    assert [w.volume for w in pH10.withdrawals] == pytest.approx([0.2e-3] * 3)
    again = parse_model(dump_model(m))
    assert again == dataclasses.replace(m, source="")


def test_round_trip_of_a_varied_model():
    text = BASE.replace("pka = 9.0", 'pka = { value = 9.0, fit = true, prior = { family = "student_t", '
                                      'degrees_of_freedom = 4, mean = 0, scale = 0.4 } }\nenthalpy = 45')
    text = text.replace('"E"]', '{ species = "E", coefficient = 2 }]')
    text = text.replace('k = "35 L/(mol*s)"', 'k = "35 L^2/(mol^2*s)"\nlabel = "odd \\"quoted\\" step"')
    text += '\n[molecule."Odd name.1"]\ncharge = 1\nmolar_mass = 99.5\n'
    text += '\n[fit]\nprobe_offset = true\nerror_model = { absolute = 0.05 }\n'
    m = parse_model(text)
    assert parse_model(dump_model(m)) == m
    assert m.molecule("Odd name.1").fixed_charge == 1


def test_skeleton_parses():
    text = resources.files("speciakin.chemistry").joinpath("templates/model_skeleton.toml").read_text()
    m = parse_model(text, source="model_skeleton.toml")
    assert m.molecules and m.steps and not m.runs   # a campaign's runs are its workbook's
    assert [p for p in validate_model(m) if p.severity == "error"] == []
    # the run sections it shows for `speciakin simulate`, switched on, parse and validate too
    runs = parse_model(text.replace("#! ", ""), source="model_skeleton.toml")
    assert [r.name for r in runs.runs] == ["pH8"] and runs.runs[0].doses and runs.runs[0].withdrawals
    assert [p for p in validate_model(runs) if p.severity == "error"] == []


def test_summary_shows_the_scheme():
    text = model_summary(load_model(EXAMPLE))
    for heading in ("Ions", "Molecules", "Steps", "Runs", "Fitted quantities"):
        assert f"\n{heading}" in text
    assert "S[N_alkyl free] + ANH -> P_alkyl + ACD" in text
    assert "k = 35 L/(mol*s)" in text
    assert "ANH + OH- -> 2 ACD" in text


def test_a_registered_prior_family_is_read_by_the_model_file_and_the_sampler():
    """One registry: a family added once is accepted by the parser and built by the sampler."""
    import dataclasses as dc

    from speciakin.chemistry.prior_families import PRIOR_FAMILIES, register_prior_family
    from speciakin.estimation.priors import build_prior

    # a renamed copy of the normal family (log-density: Gelman et al., BDA 3rd ed., appendix A)
    register_prior_family(dc.replace(PRIOR_FAMILIES["normal"], name="gauss_copy",
                                     parameter_names=("centre", "width"),
                                     constraints={"centre": PRIOR_FAMILIES["normal"].constraints["mean"],
                                                  "width": PRIOR_FAMILIES["normal"].constraints["sd"]}))
    try:
        text = BASE.replace("pka = 9.0", 'pka = { value = 9.0, fit = true, prior = { family = "gauss_copy", '
                                          'centre = 0, width = 0.4 } }')
        prior = parse_model(text).molecule("S").sites[0].pka.prior
        assert prior == Prior("gauss_copy", {"centre": 0.0, "width": 0.4})
        assert build_prior(prior).family == "gauss_copy"
    finally:
        del PRIOR_FAMILIES["gauss_copy"]


def test_validate_model_works_on_models_built_in_code():
    m = parse_model(BASE)
    bad = dataclasses.replace(m, activity="debye")
    problems = validate_model(bad)
    assert any(p.location.key == "model.activity" for p in problems)


def test_syntax_error_has_line():
    with pytest.raises(ModelFileError, match=r"<string>, line 3: TOML syntax error"):
        parse_model('[model]\nname = "x"\nbad key here\n')


from hypothesis import given, strategies as st  # noqa: E402

_finite = dict(allow_nan=False, allow_infinity=False)


@given(pka=st.floats(0.0, 14.0, **_finite), shift=st.floats(0.01, 3.0, **_finite),
       log10_k=st.floats(-12.0, 12.0, **_finite), ea=st.floats(0.0, 200.0, **_finite),
       amount=st.floats(1e-9, 1e3, **_finite), volume=st.floats(1e-3, 1e4, **_finite),
       hours=st.floats(0.01, 100.0, **_finite), celsius=st.floats(-20.0, 150.0, **_finite))
def test_round_trip_keeps_every_float_exactly(pka, shift, log10_k, ea, amount, volume, hours, celsius):
    text = BASE.replace("pka = 9.0", f"pka = {{ value = {pka!r}, fit = true, lower = {-shift!r}, upper = {shift!r} }}")
    text = text.replace('k = "35 L/(mol*s)"', f"log10_k = {log10_k!r}\nactivation_energy = {ea!r}")
    text = text.replace('initial = { S = "1 mmol" }', f'initial = {{ S = "{amount!r} mmol" }}')
    text = text.replace('volume = "50 mL"', f'volume = "{volume!r} mL"\ntemperature = "{celsius!r} C"')
    text = text.replace('end_time = "60 min"', f'end_time = "{hours!r} h"')
    m = parse_model(text)
    assert parse_model(dump_model(m)) == m
