"""Model file: every error class names the key path, the line and the value."""

from __future__ import annotations

import re

import pytest

from speciakin.chemistry.modelfile import load_model, parse_model
from speciakin.errors import ModelFileError

from test_modelfile import BASE  # noqa: E402  (shared minimal model)

HELD = 'ph = { mode = "held", setpoint = 7.0, titrant = "Na+", titrant_concentration = "0.5 M" }'


def line_of(text: str, needle: str, occurrence: int = 1) -> int:
    """1-based line of the n-th line containing ``needle`` (the test's own look-up)."""
    found = [i for i, line in enumerate(text.splitlines(), start=1) if needle in line]
    return found[occurrence - 1]


def check(text: str, pattern: str) -> ModelFileError:
    with pytest.raises(ModelFileError, match=pattern) as info:
        parse_model(text, source="m.toml")
    return info.value


def test_toml_syntax_error_names_line_and_column():
    text = BASE.replace('role = "reagent"', 'role = "reagent')
    n = line_of(text, 'role = "reagent')
    err = check(text, rf"m\.toml, line {n}: TOML syntax error: .*line {n}, column \d+")
    assert err.location.line == n


def test_a_decimal_comma_is_named_at_its_line():
    # TOML numbers take a decimal point (TOML 1.0 specification, "Float"); 9,0 is a syntax error there
    text = BASE.replace("pka = 9.0", "pka = 9,0", 1)
    n = line_of(text, "pka = 9,0")
    err = check(text, rf"m\.toml, line {n}: TOML syntax error: a number written with a decimal comma")
    assert err.problems[0].value == "pka = 9,0" and "9.5, not 9,5" in str(err)
    check(BASE.replace('role = "reagent"', 'role = "reagent'), r"TOML syntax error: (?!a number)")


def test_unknown_key_lists_allowed_ones():
    text = BASE.replace('kind = "base"\npka = 9.0', 'kind = "base"\npkaa = 9.0')
    n = line_of(text, "pkaa")
    check(text, rf"line {n}, key 'molecule\.S\.site\[1\]\.pkaa': unknown key: did you mean 'pka'\? \(value 'pkaa'; "
                r"expected one of: name, kind, pka, enthalpy\)")


def test_unknown_top_level_table():
    check(BASE + "\n[moleculez.X]\n", r"key 'moleculez': unknown key: did you mean 'molecule'\? "
                                      r".*expected one of: model, ions, molecule")


def test_wrong_type():
    text = BASE.replace("pka = 5.0", 'pka = "five"')
    n = line_of(text, 'pka = "five"')
    check(text, rf"line {n}, key 'molecule\.S\.site\[2\]\.pka': wrong type \(value 'five'; expected a pKa value")


def test_unknown_site_kind():
    text = BASE.replace('name = "N2"\nkind = "base"', 'name = "N2"\nkind = "amine"')
    n = line_of(text, 'kind = "amine"')
    check(text, rf"line {n}, key 'molecule\.S\.site\[2\]\.kind': unknown site kind \(value 'amine'; "
                r"expected one of: base, acid\)")


def test_duplicate_site_name():
    text = BASE.replace('name = "N2"', 'name = "N1"')
    n = line_of(text, 'name = "N1"', 2)
    check(text, rf"line {n}, key 'molecule\.S\.site\[2\]\.name': duplicate site name")


def test_duplicate_name_across_molecules_and_ions():
    text = BASE + '\n[molecule."Na+"]\nrole = "buffer"\n'
    check(text, r"key 'molecule\.\"Na\+\"': duplicate name \(molecules and ions share one namespace\)")


def test_duplicate_step_from_hydrolysis_shorthand():
    text = BASE + ('\n[step.hydrolysis_water_E]\nreactants = ["E", "water"]\nproducts = {}\nlog10_k = -4\n'
                   '\n[hydrolysis.E]\nproducts = {}\nwater = { log10_k = -4 }\n')
    # the name clash is reported where the shorthand generates the second step
    check(text, r"key 'hydrolysis\.E\.water': duplicate step name \(value 'hydrolysis_water_E'")


def test_toml_duplicate_key_is_a_syntax_error():
    text = BASE.replace('[molecule.E]', '[molecule.S]')
    check(text, r"TOML syntax error")


def test_unknown_molecule_in_step():
    text = BASE.replace('"E"]', '"F"]')
    n = line_of(text, '"F"]')
    check(text, rf"line {n}, key 'step\.attack\.reactants\[2\]': unknown reactant \(value 'F'; "
                r"expected one of: S, E, P, water, hydroxide\)")


def test_required_site_missing_on_molecule():
    text = BASE.replace("requires = { N1 = ", "requires = { N3 = ")
    n = line_of(text, "N3")
    check(text, rf"line {n}, key 'step\.attack\.reactants\[1\]\.requires\.N3': molecule 'S' has no site 'N3' "
                r"\(value 'N3'; expected one of: N1, N2\)")


def test_unknown_site_state():
    text = BASE.replace('N1 = "deprotonated"', 'N1 = "free"')
    check(text, r"key 'step\.attack\.reactants\[1\]\.requires\.N1': unknown site state \(value 'free'; "
                r"expected one of: deprotonated, protonated\)")


def test_step_without_reactants():
    text = BASE.replace('reactants = [{ species = "S", requires = { N1 = "deprotonated" } }, "E"]',
                        'reactants = []')
    n = line_of(text, "reactants = []")
    check(text, rf"line {n}, key 'step\.attack\.reactants': a step needs at least one reactant")


def test_unknown_product():
    check(BASE.replace("products = { P = 1 }", "products = { Q = 1 }"),
          r"key 'step\.attack\.products\.Q': unknown product \(value 'Q'; expected a molecule: S, E, P\)")


def test_rate_constant_unit_does_not_match_order():
    text = BASE.replace('k = "35 L/(mol*s)"', 'k = "35 1/s"')
    n = line_of(text, 'k = "35 1/s"')
    check(text, rf"line {n}, key 'step\.attack\.k': unit '1/s' does not fit a step of order 2")


def test_rate_constant_given_twice():
    check(BASE.replace('k = "35 L/(mol*s)"', 'k = "35 L/(mol*s)"\nlog10_k = 1.5'),
          r"key 'step\.attack': give the rate constant once")


def test_negative_amount():
    text = BASE.replace('initial = { S = "1 mmol" }', 'initial = { S = "-1 mmol" }')
    n = line_of(text, "-1 mmol")
    check(text, rf"line {n}, key 'run\.r1\.initial\.S': must not be negative \(value '-1 mmol'")


def test_bad_unit():
    check(BASE.replace('volume = "50 mL"', 'volume = "50 furlongs"'),
          r"key 'run\.r1\.volume': unknown unit 'furlongs'; accepted: L, mL, uL, m3")


DOSE = '\n[[run.r1.dosing]]\nspecies = "E"\namount = "1 mmol"\nstart = {start}\nend = {end}\n'


@pytest.mark.parametrize("start, end, key, pattern", [
    ('"-5 min"', '"10 min"', "start", r"key 'run\.r1\.dosing\[1\]\.start': dosing starts before the run \(value -300\.0"),
    ('"10 min"', '"5 min"', "end", r"key 'run\.r1\.dosing\[1\]\.end': dosing ends before it starts \(value 'start=600 s, end=300 s'"),
    ('"10 min"', '"90 min"', "end", r"key 'run\.r1\.dosing\[1\]\.end': dosing ends after the run \(value 'end=5400 s, end_time=3600 s'"),
])
def test_dosing_outside_the_run(start, end, key, pattern):
    text = BASE + DOSE.format(start=start, end=end)
    n = line_of(text, f"{key} = ")
    check(text, rf"line {n}, {pattern}")


def test_dose_of_unknown_species():
    check(BASE + DOSE.format(start=0, end=10).replace('"E"', '"X"'),
          r"key 'run\.r1\.dosing\[1\]\.species': unknown species in dosing \(value 'X'")


def test_logged_run_without_data():
    check(BASE.replace(HELD, 'ph = { mode = "logged" }'),
          r"key 'run\.r1\.ph': a logged-pH run has no pH data")


def test_logged_run_not_covering_the_horizon():
    text = BASE.replace(HELD, 'ph = { mode = "logged", times = [0, 30], values = [7, 6.9] }')
    n = line_of(text, 'mode = "logged"')
    check(text, rf"line {n}, key 'run\.r1\.ph': pH log does not cover the run \(value 'log from 0 s to 1800 s, "
                r"run from 0 s to 3600 s'")


def test_logged_csv_missing(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text(BASE.replace(HELD, 'ph = { mode = "logged", file = "nope.csv" }'))
    with pytest.raises(ModelFileError, match=r"key 'run\.r1\.ph\.file': cannot read pH log"):
        load_model(path)


def test_logged_csv_bad_row(tmp_path):
    (tmp_path / "log.csv").write_text("time [min],pH\n0,7\n30,abc\n60,6.9\n")
    path = tmp_path / "m.toml"
    path.write_text(BASE.replace(HELD, 'ph = { mode = "logged", file = "log.csv" }'))
    with pytest.raises(ModelFileError, match=r"log\.csv, row 3: not a number"):
        load_model(path)


@pytest.mark.parametrize("ph, pattern", [
    ('ph = { mode = "held", titrant = "Na+", titrant_concentration = "0.5 M" }',
     r"key 'run\.r1\.ph': a held-pH run needs a setpoint"),
    ('ph = { mode = "held", setpoint = 7.0, titrant_concentration = "0.5 M" }',
     r"key 'run\.r1\.ph': a held-pH run needs a titrant ion"),
    ('ph = { mode = "held", setpoint = 7.0, titrant = "K+", titrant_concentration = "0.5 M" }',
     r"key 'run\.r1\.ph\.titrant': titrant is not a declared ion \(value 'K\+'; expected one of the \[ions\]: Na\+\)"),
    ('ph = { mode = "held", setpoint = 7.0, titrant = "Na+" }',
     r"key 'run\.r1\.ph': the base titrant 'Na\+' needs its concentration"),
    ('ph = { mode = "stat" }', r"key 'run\.r1\.ph\.mode': unknown pH mode \(value 'stat'; expected one of: held, logged, free\)"),
])
def test_held_run_needs_setpoint_and_titrant(ph, pattern):
    text = BASE.replace(HELD, ph)
    n = line_of(text, "ph = {")
    check(text, rf"line {n}, {pattern}")


def test_bounds_in_wrong_order():
    text = BASE.replace("pka = 9.0", "pka = { value = 9.0, fit = true, lower = 1, upper = -1 }")
    n = line_of(text, "lower = 1")
    check(text, rf"line {n}, key 'molecule\.S\.site\[1\]\.pka\.lower': pKa\[S\.N1\]: lower bound is not below "
                r"the upper bound \(value 'lower=1, upper=-1'; expected lower < upper\)")


def test_value_outside_bounds():
    text = BASE.replace('k = "35 L/(mol*s)"', 'k = { value = "35 L/(mol*s)", fit = true, lower = 2, upper = 4 }')
    n = line_of(text, "lower = 2")
    check(text, rf"line {n}, key 'step\.attack\.k\.lower': log10k\[attack\]: value lies below the lower bound \(value 'value=1\.54407, lower=2'")


def test_pka_shift_bounds_must_contain_zero():
    check(BASE.replace("pka = 9.0", "pka = { value = 9.0, fit = true, lower = 0.2, upper = 1 }"),
          r"pKa\[S\.N1\]: shift 0 \(the file value\) lies below the lower bound")


def test_unknown_prior_family():
    text = BASE.replace("pka = 9.0", 'pka = { value = 9.0, fit = true, prior = { family = "gauss", sd = 1 } }')
    n = line_of(text, "gauss")
    check(text, rf"line {n}, key 'molecule\.S\.site\[1\]\.pka\.prior\.family': unknown prior family \(value 'gauss'; "
                r"expected one of: normal, lognormal, uniform, halfnormal")


def test_missing_prior_parameter():
    check(BASE.replace("pka = 9.0", 'pka = { value = 9.0, fit = true, prior = { family = "normal", mean = 0 } }'),
          r"key 'molecule\.S\.site\[1\]\.pka\.prior': prior 'normal' needs parameter 'sd'")


def test_bad_prior_parameter_value():
    check(BASE.replace("pka = 9.0", 'pka = { value = 9.0, fit = true, prior = { family = "normal", mean = 0, sd = -1 } }'),
          r"key 'molecule\.S\.site\[1\]\.pka\.prior\.sd': must be positive")


def test_unknown_run_in_fit_options():
    check(BASE + '\n[fit]\nprobe_offset = { runs = ["r9"] }\n',
          r"key 'fit\.probe_offset\.runs': unknown run \(value 'r9'; expected one of: r1\)")


def test_errors_are_gathered_in_one_pass():
    text = BASE.replace('kind = "base"\npka = 9.0', 'kind = "amine"\npka = 9.0')
    text = text.replace("products = { P = 1 }", "products = { Q = 1 }")
    text = text.replace('volume = "50 mL"', 'volume = "50 mL"\ncolour = "red"')
    err = check(text, r"^3 problems:")
    keys = {p.location.key for p in err.problems}
    assert keys == {"molecule.S.site[1].kind", "step.attack.products.Q", "run.r1.colour"}
    assert all(p.location.file == "m.toml" and p.location.line for p in err.problems)


def test_missing_file_is_a_clear_error(tmp_path):
    with pytest.raises(ModelFileError, match=re.escape(str(tmp_path / "none.toml")) + ": cannot read model file"):
        load_model(tmp_path / "none.toml")


def test_hydrolysis_problem_points_at_shorthand():
    text = BASE + '\n[hydrolysis.E]\nproducts = { Q = 2 }\nwater = { log10_k = -4 }\n'
    n = line_of(text, "products = { Q = 2 }")
    check(text, rf"line {n}, key 'hydrolysis\.E\.products\.Q': unknown product")  # generated step -> shorthand


def test_dosed_concentration_needs_a_volume():
    text = BASE + '\n[[run.r1.dosing]]\nspecies = "E"\namount = "0.5 M"\nstart = 0\n'
    n = line_of(text, 'amount = "0.5 M"')
    check(text, rf"line {n}, key 'run\.r1\.dosing\[1\]\.amount': a concentration needs a volume")


def test_moiety_imbalance_is_only_a_warning():
    from speciakin.chemistry.modelfile import validate_model
    m = parse_model(BASE.replace("moieties = { core = 1 }\n\n[step", "moieties = { core = 2 }\n\n[step"))
    problems = validate_model(m)
    assert [p.severity for p in problems] == ["warning"]
    assert problems[0].location.key == "step.attack"
    assert problems[0].code == "moiety_balance" and "core: 1 in the reactants, 2 in the products" in problems[0].message
    # the parsed model carries its file's warnings, located by key and line, for check to report
    (w,) = m.warnings
    assert (w.code, w.location.key) == ("moiety_balance", "step.attack") and w.location.line > 0


def test_sample_outside_the_run():
    text = BASE + '\n[[run.r1.withdrawal]]\ntime = "75 min"\nvolume = "0.2 mL"\n'
    n = line_of(text, 'time = "75 min"')
    check(text, rf"line {n}, key 'run\.r1\.withdrawal\[1\]\.time': sample taken outside the run \(value 4500\.0")


def test_compact_samples_need_times_and_volume():
    text = BASE.replace('volume = "50 mL"', 'volume = "50 mL"\nsamples = { times = [10, 20] }')
    n = line_of(text, "samples = ")
    check(text, rf"line {n}, key 'run\.r1\.samples': missing key 'volume'")


def test_negative_interaction_is_a_warning_not_an_error():
    from speciakin.chemistry.modelfile import validate_model
    m = parse_model(BASE + '\n[[molecule.S.interaction]]\nsites = ["N1", "N2"]\nw = -0.2\n')
    problems = validate_model(m)
    assert [(p.severity, p.location.key) for p in problems] == [("warning", "molecule.S.interaction[1].w")]


def test_interaction_with_unknown_site():
    text = BASE + '\n[[molecule.S.interaction]]\nsites = ["N1", "N9"]\nw = 0.2\n'
    n = line_of(text, '"N9"')
    check(text, rf"line {n}, key 'molecule\.S\.interaction\[1\]\.sites': unknown site of molecule 'S' "
                r"\(value 'N9'; expected one of: N1, N2\)")


def test_a_key_in_other_letter_case_is_told_its_spelling_once():
    # 'pKa' is how the trade writes it; the model file's keys are lower case: one error that names the
    # spelling, and no second 'missing key' error for the same site
    text = BASE.replace("pka = 9.0", "pKa = 9.0", 1)
    n = line_of(text, "pKa = 9.0")
    err = check(text, rf"line {n}, key 'molecule\.S\.site\[\d\]\.pKa': unknown key: keys are written in lower case, "
                      r"write 'pka'")
    assert not [p for p in err.problems if p.code == "missing"], [p.describe() for p in err.problems]
    # nor a later error of a step that names the site (the site keeps its name)
    assert len(err.problems) == 1, [p.describe() for p in err.problems]


def test_a_misspelt_key_is_told_the_close_one():
    text = BASE.replace("pka = 9.0", "pka = 9.0\nenthalpie = 40", 1)
    check(text, r"unknown key: did you mean 'enthalpy'\?")
