"""Model-file plausibility (speciakin.chemistry.modelfile.plausibility), through the model validation."""

from __future__ import annotations

import pytest

from speciakin.chemistry.modelfile import parse_model
from speciakin.errors import ModelFileError

BASE = """
[model]
name = "mini"
reference_temperature = "25 C"

[ions]
"Na+" = 1

[molecule.S]
role = "substrate"

[[molecule.S.site]]
name = "N1"
kind = "base"
pka = PKA

[molecule.E]
role = "reagent"

[molecule.P]
role = "product"

[step.attack]
reactants = [{ species = "S", requires = { N1 = "deprotonated" } }, "E"]
products = { P = 1 }
k = K

[run.r1]
volume = "50 mL"
end_time = "60 min"
initial = { S = "1 mmol" }
ph = { mode = "free" }
"""


def _model(pka="9.0", k='"35 L/(mol*s)"', extra="", **replace):
    text = BASE.replace("PKA", pka).replace("K\n", k + "\n", 1).replace("k = K", f"k = {k}") + extra
    for old, new in replace.items():
        text = text.replace(old.replace("_", " "), new)
    return parse_model(text, source="mini.toml")


def _codes(model) -> dict[str, list]:
    from speciakin.chemistry.modelfile import validate_model

    out: dict[str, list] = {}
    for p in validate_model(model):
        out.setdefault(p.code, []).append(p)
    return out


def test_clean_model_has_no_findings():
    assert not {"pka_range", "prior_outside_bounds", "reaction_cycle"} & set(_codes(_model()))


@pytest.mark.parametrize("pka, flagged", [("40", True), ("-5", True), ("15.9", False), ("-1.9", False)])
def test_pka_outside_the_water_range_warns(pka, flagged):
    # range -2..16: pH scale 0..14 with a margin of two units (common practice)
    found = _codes(_model(pka=pka)).get("pka_range", [])
    assert bool(found) is flagged
    if found:
        assert found[0].location.key == "molecule.S.site[1].pka" and found[0].severity == "warning"


def test_prior_centred_outside_its_bounds_warns():
    k = '{ value = "35 L/(mol*s)", fit = true, lower = 0, upper = 3, prior = { family = "normal", mean = 9, sd = 0.5 } }'
    (p,) = _codes(_model(k=k))["prior_outside_bounds"]
    assert p.location.key.endswith("prior") and "centre 9" in str(p.value)


def test_uniform_prior_disjoint_from_bounds_is_an_error():
    k = '{ value = "35 L/(mol*s)", fit = true, lower = 0, upper = 3, prior = { family = "uniform", lower = 5, upper = 6 } }'
    with pytest.raises(ModelFileError, match="does not overlap"):
        _model(k=k)


def test_self_loop_is_an_error():
    extra = '\n[step.nothing]\nreactants = ["P"]\nproducts = { P = 1 }\nk = "1 1/s"\n'
    with pytest.raises(ModelFileError, match="changes nothing"):
        _model(extra=extra)


def test_cycle_warns_and_a_catalyst_does_not():
    back = '\n[step.back]\nreactants = ["P"]\nproducts = { S = 1 }\nk = "1 1/s"\n'
    (p,) = _codes(_model(extra=back))["reaction_cycle"]
    assert p.message.endswith(("S -> P -> S", "P -> S -> P")), p.message
    catalysed = '\n[step.cat]\nreactants = ["E", "P"]\nproducts = { P = 1, S = 1 }\nk = "1 L/(mol*s)"\n'
    assert "reaction_cycle" not in _codes(_model(extra=catalysed))  # P is not consumed: no path back from P


def test_a_process_at_22_kelvin_is_an_error():
    with pytest.raises(ModelFileError, match="not plausible"):
        parse_model(BASE.replace("PKA", "9.0").replace("k = K", 'k = "35 L/(mol*s)"')
                    .replace('reference_temperature = "25 C"', 'reference_temperature = "22 K"'), source="m.toml")


@pytest.mark.parametrize("line, flagged", [('enthalpy = "45 kJ/mol"', False), ('enthalpy = -380', False),
                                           ('enthalpy = 108188996995.0', True), ('enthalpy = "-500 kJ/mol"', True)])
def test_an_ionization_enthalpy_beyond_400_kj_per_mol_is_an_error(line, flagged):
    # ionization enthalpies in water lie within about -60..+60 kJ/mol (Goldberg et al., J. Phys. Chem.
    # Ref. Data 31 (2002) 231; from memory); 1e11 kJ/mol moved a pKa by about 1e7 units per kelvin
    # and the simulation divided by zero (a bare number is read in kJ/mol)
    text = BASE.replace("PKA", f"9.0\n{line}").replace("k = K", 'k = "35 L/(mol*s)"')
    if flagged:
        with pytest.raises(ModelFileError, match="ionization enthalpy of S.N1 is not plausible") as info:
            parse_model(text, source="m.toml")
        assert info.value.location.key == "molecule.S.site[1].enthalpy"
    else:
        assert "implausible" not in _codes(parse_model(text, source="m.toml"))


def test_an_activation_energy_beyond_400_kj_per_mol_is_an_error():
    # activation energies of solution reactions are mostly 20-150 kJ/mol (common practice)
    text = BASE.replace("PKA", "9.0").replace("k = K", 'k = "35 L/(mol*s)"\nactivation_energy = "2000 kJ/mol"')
    with pytest.raises(ModelFileError, match="activation energy of attack is not plausible"):
        parse_model(text, source="m.toml")
