"""Process file: parsing, round trip, every error path, model checks, runs."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

from speciakin.chemistry.model import Ion, Model, Molecule
from speciakin.decision import (
    load_process,
    parse_process,
    process_runs,
    process_to_toml,
    validate_process,
)
from speciakin.errors import InputError, ModelFileError

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "process_two_amines.toml"
SKELETON = ROOT / "src" / "speciakin" / "decision" / "templates" / "process_skeleton.toml"

# Invented model with the names of examples/two_amines.toml.
MODEL = Model(
    "two_amines",
    molecules=(
        Molecule("S", moieties={"core": 1}, role="substrate"),
        Molecule("ANH", moieties={"acyl": 2}, role="reagent"),
        Molecule("ACD", moieties={"acyl": 1}, role="acid"),
        Molecule("P_alkyl", moieties={"core": 1, "acyl": 1}, role="product"),
        Molecule("P_aryl", moieties={"core": 1, "acyl": 1}, role="byproduct"),
        Molecule("P_double", moieties={"core": 1, "acyl": 2}, role="byproduct"),
    ),
    ions=(Ion("Na+", 1), Ion("Cl-", -1)),
)

BASE = """
[process]
substrate = "S"
substrate_amount = "50 mmol"
volume = "500 mL"
reagent = "ANH"
equivalents = 1.05
dosing_time = "30 min"
hold_time = "1 h"
temperature = "20 C"
titrant = "Na+"
titrant_concentration = "2 M"

[[specification]]
species = "P_alkyl"
rule = ">= 90 %"
"""


def write(tmp_path, text, name="process.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_example_and_skeleton_parse():
    process = load_process(EXAMPLE, MODEL)
    assert process.substrate_amount == pytest.approx(0.2)   # 0.20 M x 1.0 L
    assert process.dosing_time == 2700.0 and process.temperature == pytest.approx(293.15)
    assert len(process.specifications) == 4
    assert process.second_factor.values == (1.0, 1.025, 1.05, 1.075, 1.1)
    skeleton = load_process(SKELETON)
    assert skeleton.ph_values()[0] == 2.0 and skeleton.ph_values()[-1] == 12.0
    assert skeleton.ph_values().size == 41


def test_example_against_the_example_model_file():
    from speciakin.chemistry import modelfile

    model = modelfile.load_model(ROOT / "examples" / "two_amines.toml")
    process = load_process(EXAMPLE, model)
    assert process.moiety == "core"


def test_defaults_and_round_trip(tmp_path):
    process = load_process(write(tmp_path, BASE))
    assert (process.ph_from, process.ph_to, process.ph_step) == (2.0, 12.0, 0.25)
    assert (process.level, process.ph_tolerance, process.n_draws) == (0.95, 0.3, 500)
    assert process.name == "process" and process.feed_volume == 0.0
    for original in (process, load_process(EXAMPLE)):
        again = parse_process(tomllib.loads(process_to_toml(original)),
                              original.source)
        assert again == original


def test_temperature_factor_range_and_round_trip(tmp_path):
    text = BASE.replace("[[specification]]", '[scan.second_factor]\nkind = "temperature"\n'
                        'from = "10 C"\nto = "30 C"\nstep = "5 K"\n\n[[specification]]')
    process = load_process(write(tmp_path, text))
    np.testing.assert_allclose(process.second_factor.values, [283.15, 288.15, 293.15, 298.15, 303.15])
    np.testing.assert_allclose(process.second_factor.display_values(), [10, 15, 20, 25, 30])
    again = parse_process(tomllib.loads(process_to_toml(process)), process.source)
    assert again == process


def test_process_runs_amounts_by_hand():
    process = load_process(EXAMPLE, MODEL)
    runs = process_runs(process, MODEL, [7.0, 9.5])
    assert [r.ph.setpoint for r in runs] == [7.0, 9.5]
    run = runs[0]
    # hand calculation: 0.20 mol/L x 1.0 L = 0.20 mol substrate; 1.05 eq -> 0.21 mol
    # anhydride fed from 0 to 45 min = 2700 s with 0.060 L; ends at 2700 + 3600 s.
    assert run.charges == {"S": pytest.approx(0.2)}
    assert run.volume == 1.0
    (dose,) = run.doses
    assert (dose.species, dose.start, dose.end) == ("ANH", 0.0, 2700.0)
    assert dose.amount == pytest.approx(0.21) and dose.volume == pytest.approx(0.06)
    assert run.end_time == 6300.0
    assert run.ph.mode == "held" and run.ph.titrant == "Na+" and run.ph.titrant_concentration == 2.0
    assert run.temperature.temperatures == (pytest.approx(293.15),)
    # second factor: 1.10 eq -> 0.22 mol
    (run,) = process_runs(process, MODEL, [8.0], second_factor_value=1.1)
    assert run.doses[0].amount == pytest.approx(0.22)


def test_process_runs_other_factors_and_errors(tmp_path):
    text = BASE.replace("[[specification]]", '[scan.second_factor]\nkind = "dosing_time"\n'
                        'values = ["10 min", "1 h"]\n\n[[specification]]')
    process = load_process(write(tmp_path, text))
    (run,) = process_runs(process, MODEL, [5.0], second_factor_value=600.0)
    assert run.doses[0].end == 600.0 and run.end_time == 600.0 + 3600.0
    base = load_process(write(tmp_path, BASE, "b.toml"))
    with pytest.raises(InputError, match="no second factor"):
        process_runs(base, MODEL, [5.0], second_factor_value=1.0)
    other = Model("m", (Molecule("S"),), ions=(Ion("Na+", 1),))
    with pytest.raises(InputError, match="process.reagent"):
        process_runs(base, other, [5.0])


def test_extra_charges(tmp_path):
    text = BASE.replace('titrant_concentration = "2 M"',
                        'titrant_concentration = "2 M"\n\n[process.initial]\n"Cl-" = "5 mmol"\n')
    process = load_process(write(tmp_path, text), MODEL)
    (run,) = process_runs(process, MODEL, [5.0])
    assert run.charges["Cl-"] == pytest.approx(0.005)


@pytest.mark.parametrize("old, new, key, words", [
    ('substrate_amount = "50 mmol"', "", "process.substrate_amount", "missing"),
    ('substrate_amount = "50 mmol"', 'substrate_amount = "50 mmol/kg"', "process.substrate_amount",
     "unknown unit"),
    ('substrate_amount = "50 mmol"', 'substrate_amount = "-5 mmol"', "process.substrate_amount",
     "must be positive"),
    ('volume = "500 mL"', 'volume = "500"', "process.volume", "has no unit"),
    ("equivalents = 1.05", 'equivalents = "lots"', "process.equivalents", "equivalents"),
    ("equivalents = 1.05", "equivalents = 0", "process.equivalents", "> 0"),
    ('temperature = "20 C"', 'temperature = "20 min"', "process.temperature", "unknown unit"),
    ('hold_time = "1 h"', 'hold_time = "1 h"\nstirring = "fast"', "process.stirring", "unknown key"),
    ('rule = ">= 90 %"', 'rule = "about 90"', "specification[1].rule", "unreadable rule"),
    ('rule = ">= 90 %"', 'rule = ">= 190 %"', "specification[1].rule", "between 0 and 100"),
    ('species = "P_alkyl"', 'species = "P_alkyl"\noutcome = "yield"', "specification[1].outcome",
     "unknown outcome kind"),
    ('species = "P_alkyl"', 'species = "P_alkyl"\noutcome = "ratio"', "specification[1].per",
     "needs 'per'"),
    ('species = "P_alkyl"', 'species = 3', "specification[1].species", "molecule name"),
    ('rule = ">= 90 %"', 'rule = ">= 90 %"\n\n[scan]\nlevel = 1.5', "scan.level", "out of range"),
    ('rule = ">= 90 %"', 'rule = ">= 90 %"\n\n[scan]\nph_from = 9\nph_to = 3', "scan.ph_to",
     "above ph_from"),
    ('rule = ">= 90 %"', 'rule = ">= 90 %"\n\n[scan]\ndraws = 2.5', "scan.draws", "whole number"),
    ('rule = ">= 90 %"', 'rule = ">= 90 %"\n\n[scan.second_factor]\nkind = "stirring"',
     "scan.second_factor.kind", "unknown factor kind"),
    ('rule = ">= 90 %"', 'rule = ">= 90 %"\n\n[scan.second_factor]\nkind = "temperature"\n'
     'values = ["30 C", "20 C"]', "scan.second_factor.values", "increasing"),
    ('titrant_concentration = "2 M"', 'titrant_concentration = "2 M"\nopposite_titrant_concentration = "1 M"',
     "process.opposite_titrant_concentration", "without opposite_titrant"),
    ('titrant_concentration = "2 M"', 'titrant_concentration = "2 M"\nopposite_titrant = "Cl-"',
     "process.opposite_titrant_concentration", "missing"),
    ('titrant_concentration = "2 M"', 'titrant_concentration = "2 M"\nstart_adjustment = "later"',
     "process.start_adjustment", "unknown start adjustment"),
    ('titrant_concentration = "2 M"', 'titrant_concentration = "2 M"\n\n[process.charges]\n"Cl-" = "5 mmol"',
     "process.charges", "renamed to 'initial'"),
    ('titrant_concentration = "2 M"', 'titrant_concentration = "2 M"\n\n[process.initial]\n"Cl-" = "-5 mmol"',
     "process.initial.Cl-", "must not be negative"),
])
def test_every_error_names_the_key(tmp_path, old, new, key, words):
    text = BASE.replace(old, new)
    assert text != BASE
    path = write(tmp_path, text)
    with pytest.raises(ModelFileError, match=re.escape(f"key '{key}'")) as info:
        load_process(path)
    message = str(info.value)
    assert words in message and str(path) in message
    assert path.read_text(encoding="utf-8") == text     # input never modified


def test_a_key_in_other_letter_case_or_misspelt_is_told_its_spelling(tmp_path):
    # one error for 'Hold_time', naming the spelling (no second 'missing' error), and a close match named
    text = BASE.replace('hold_time = "1 h"', 'Hold_time = "1 h"').replace("equivalents = 1.05", "equivalent = 1.05")
    with pytest.raises(ModelFileError) as info:
        load_process(write(tmp_path, text))
    found = {p.location.key: p.message for p in info.value.problems}
    assert found["process.Hold_time"] == "unknown key: keys are written in lower case, write 'hold_time'"
    assert found["process.equivalent"] == "unknown key: did you mean 'equivalents'?"
    assert "process.hold_time" not in found


def test_line_numbers_and_several_problems_at_once(tmp_path):
    text = BASE.replace('volume = "500 mL"', 'volume = "500 apples"').replace(
        "equivalents = 1.05", "equivalents = -1")
    with pytest.raises(ModelFileError, match="2 problems") as info:
        load_process(write(tmp_path, text))
    problems = info.value.problems
    lines = text.splitlines()
    for problem in problems:
        assert problem.location.line is not None
        assert problem.location.key.split(".")[-1] in lines[problem.location.line - 1]


def test_file_and_syntax_errors(tmp_path):
    with pytest.raises(ModelFileError, match="not found"):
        load_process(tmp_path / "missing.toml")
    with pytest.raises(ModelFileError, match="line 3") as info:
        load_process(write(tmp_path, "[process]\nname = 'x'\nvolume = \n"))
    assert "TOML syntax error" in str(info.value)
    with pytest.raises(ModelFileError, match="decimal comma") as info:  # pKa 9,9 typed the continental way
        load_process(write(tmp_path, "[process]\nname = 'x'\nvolume = 2,5\n"))
    assert info.value.location.line == 3 and "9.5, not 9,5" in str(info.value)
    with pytest.raises(ModelFileError, match="key 'process'"):
        load_process(write(tmp_path, "[scan]\nlevel = 0.9\n"))
    with pytest.raises(ModelFileError, match="key 'specification'"):
        load_process(write(tmp_path, BASE.split("[[specification]]")[0]))


def test_names_checked_against_model(tmp_path):
    text = BASE.replace('reagent = "ANH"', 'reagent = "XYZ"').replace(
        'species = "P_alkyl"', 'species = "P_unknown"').replace('titrant = "Na+"', 'titrant = "K+"')
    with pytest.raises(ModelFileError, match="3 problems") as info:
        load_process(write(tmp_path, text), MODEL)
    message = str(info.value)
    assert "key 'process.reagent'" in message and "'XYZ'" in message
    assert "one of S, ANH, ACD, P_alkyl, P_aryl, P_double" in message
    assert "key 'specification[1].species'" in message and "key 'process.titrant'" in message


def test_moiety_checks(tmp_path):
    process = load_process(write(tmp_path, BASE))
    assert validate_process(process, MODEL).moiety == "core"      # the substrate's only moiety
    text = BASE.replace('species = "P_alkyl"', 'species = "ACD"')
    with pytest.raises(ModelFileError, match="does not carry the substrate moiety 'core'"):
        load_process(write(tmp_path, text), MODEL)
    text = BASE.replace('titrant = "Na+"', 'titrant = "Na+"\nmoiety = "acyl"')
    with pytest.raises(ModelFileError, match="key 'process.moiety'"):
        load_process(write(tmp_path, text), MODEL)
    two = Model("m", (Molecule("S", moieties={"core": 1, "tag": 1}), Molecule("ANH"),
                      Molecule("P_alkyl", moieties={"core": 1})), ions=(Ion("Na+", 1),))
    with pytest.raises(ModelFileError, match="name the one to count"):
        validate_process(process, two)


def test_documented_example_parses_and_validates():
    # The TOML block of docs/decision.md is executed so that it cannot go stale.
    text = (ROOT / "docs" / "decision.md").read_text(encoding="utf-8")
    block = text.split("```toml\n", 1)[1].split("```", 1)[0]
    process = validate_process(parse_process(tomllib.loads(block), "docs", block), MODEL)
    assert process.extra_charges == {"Cl-": pytest.approx(0.005)}
    assert [s.kind for s in process.specifications] == ["percent", "area%", "ratio"]
    assert process.second_factor.values == (1.0, 1.1, 1.2)
    # an area% limit is written back as read
    again = parse_process(tomllib.loads(process_to_toml(process)))
    assert again.specifications == process.specifications


def test_titrants_and_start_adjustment_reach_the_runs(tmp_path):
    # the process uses the lab runs' conventions: the same PhControl fields
    text = BASE.replace('titrant_concentration = "2 M"',
                        'titrant_concentration = "2 M"\nopposite_titrant = "Cl-"\n'
                        'opposite_titrant_concentration = "1 M"\nstart_adjustment = "titrant"\n'
                        'start_base = "Na+"')
    process = load_process(write(tmp_path, text), MODEL)
    assert parse_process(tomllib.loads(process_to_toml(process))) == \
        parse_process(tomllib.loads(process_to_toml(process)))
    again = parse_process(tomllib.loads(process_to_toml(process)))
    assert (again.opposite_titrant, again.opposite_titrant_concentration, again.start_adjustment,
            again.start_base) == ("Cl-", 1.0, "titrant", "Na+")
    (run,) = process_runs(process, MODEL, [6.0])
    ph = run.ph
    assert (ph.titrant, ph.titrant_concentration, ph.opposite_titrant, ph.opposite_titrant_concentration,
            ph.start_adjustment, ph.start_acid, ph.start_base) == ("Na+", 2.0, "Cl-", 1.0, "titrant", None, "Na+")
    default = process_runs(load_process(write(tmp_path, BASE, "plain.toml"), MODEL), MODEL, [6.0])[0]
    assert default.ph.start_adjustment == "computed" and default.ph.opposite_titrant is None


def test_titrant_signs_checked_against_model(tmp_path):
    text = BASE.replace('titrant_concentration = "2 M"',
                        'titrant_concentration = "2 M"\nopposite_titrant = "Na+"\n'
                        'opposite_titrant_concentration = "1 M"\nstart_acid = "Na+"')
    with pytest.raises(ModelFileError) as info:
        load_process(write(tmp_path, text), MODEL)
    message = str(info.value)
    assert "key 'process.opposite_titrant'" in message and "opposite charge" in message
    assert "key 'process.start_acid'" in message and "negative charge" in message


def test_window_set_point_the_titrant_cannot_hold_is_a_located_error(tmp_path):
    # invented amine S (pKa 9) brought to pH 5 by the titrant alone (base): impossible; the
    # window's outcome function names the process file, the key and the set point
    from speciakin.chemistry.model import Quantity, Site
    from speciakin.pipeline.window import process_outcome_function
    from speciakin.simulation import compile_model

    amine = Model("amine", molecules=(
        Molecule("S", sites=(Site("N", "base", Quantity(9.0)),), moieties={"core": 1}, role="substrate"),
        Molecule("ANH", moieties={"acyl": 2}, role="reagent"),
        Molecule("P_alkyl", moieties={"core": 1, "acyl": 1}, role="product")),
        ions=(Ion("Na+", 1), Ion("Cl-", -1)))
    text = BASE.replace('titrant_concentration = "2 M"',
                        'titrant_concentration = "2 M"\nstart_adjustment = "titrant"')
    path = write(tmp_path, text)
    process = load_process(path, amine)
    compiled = compile_model(amine)

    class Objective:                      # the few members the outcome function reads
        model, rtol, atol, parallel = amine, 1e-6, 1e-10, False

        def kernel_inputs(self, draws):
            return np.repeat(compiled.nominal[None, :], len(draws), axis=0), None, None

    Objective.compiled = compiled
    outcome = process_outcome_function(Objective(), process)
    with pytest.raises(InputError) as info:
        outcome(np.zeros((1, 0)), [5.0, 10.5])
    message = str(info.value)
    assert str(path) in message and "key 'process.titrant'" in message and "set point pH 5" in message
    # acid inside the start volume (the default) reaches pH 5
    ok = load_process(write(tmp_path, BASE, "ok.toml"), amine)
    values = process_outcome_function(Objective(), ok)(np.zeros((1, 0)), [5.0, 10.5])
    assert np.all(np.isfinite(values))
