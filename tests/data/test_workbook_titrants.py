"""Workbook runs state their titrants and start adjustment as model-file runs do.

An invented reaction (amine S + anhydride E -> amide P + acid HA, E + water
-> 2 HA, a second amine B fed as a base) written twice: as runs of a model
file (docs/model-file.md, "Titrants and the start of a run") and as rows of
a campaign workbook (CSV folder, docs/data.md).  The workbook's runs must
become the same recipes and the same simulations; the two-sided pH-stat with
acid added inside the start volume must also agree with the independent
scipy simulator of tests/simulation/independent_sim.py (its tolerance
reasoning is in tests/simulation/test_titrant_conventions.py).
Everything here is invented.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "simulation"))

from independent_sim import IndependentRun, Scenario, Species  # noqa: E402
from speciakin.chemistry.modelfile import load_model  # noqa: E402
from speciakin.data import check_campaign, load_campaign, write_campaign  # noqa: E402
from speciakin.errors import DataError  # noqa: E402

MIN, MMOL, ML = 60.0, 1e-3, 1e-3
K_COUPLING, K_WATER = 0.5, 2e-4          # [L/(mol*s)], [1/s], invented

MODEL = f"""
# INVENTED model for the tests
[model]
name = "workbook titrants (invented)"
reference_temperature = "25 C"

[ions]
"Na+" = 1
"Cl-" = -1

[molecule.S]
role = "substrate"
moieties = {{ core = 1 }}
[[molecule.S.site]]
name = "N"
kind = "base"
pka = 8.0

[molecule.E]
role = "reagent"
moieties = {{ acyl = 2 }}

[molecule.P]
role = "product"
moieties = {{ core = 1, acyl = 1 }}

[molecule.HA]
role = "acid"
moieties = {{ acyl = 1 }}
[[molecule.HA.site]]
name = "O"
kind = "acid"
pka = 4.5

[molecule.B]
role = "buffer"
[[molecule.B.site]]
name = "N"
kind = "base"
pka = 9.0

[step.coupling]
reactants = [{{ species = "S", requires = {{ N = "deprotonated" }} }}, "E"]
products = {{ P = 1, HA = 1 }}
log10_k = {math.log10(K_COUPLING)!r}

[step.water]
reactants = ["E", "water"]
products = {{ HA = 2 }}
log10_k = {math.log10(K_WATER)!r}

# acid inside the start volume (computed), then a two-sided pH-stat: 0.5 M NaOH and 1 M HCl
[run.W1]
volume = "50 mL"
temperature = "25 C"
end_time = "120 min"
initial = {{ S = "1 mmol", E = "1.1 mmol" }}
ph = {{ mode = "held", setpoint = 7.0, titrant = "Na+", titrant_concentration = "0.5 M", opposite_titrant = "Cl-", opposite_titrant_concentration = "1 M", start_adjustment = "computed", start_acid = "Cl-" }}
[[run.W1.dosing]]
species = "B"
amount = "1.5 mmol"
start = "0 min"
end = "20 min"
volume = "2 mL"

# a given amount of acid inside the start volume, base titrant only
[run.W2]
volume = "50 mL"
temperature = "25 C"
end_time = "90 min"
initial = {{ S = "1 mmol", "Cl-" = "0.95 mmol" }}
ph = {{ mode = "held", setpoint = 6.5, titrant = "Na+", titrant_concentration = "0.5 M", start_adjustment = "given", start_acid = "Cl-" }}
[[run.W2.dosing]]
species = "E"
amount = "1.2 mmol"
start = "0 min"
end = "15 min"
volume = "5 mL"

# a logged pH followed with base while it rises and acid while it falls
[run.W3]
volume = "50 mL"
temperature = "25 C"
end_time = "100 min"
initial = {{ S = "1 mmol", "Cl-" = "1 mmol", E = "0.4 mmol" }}
ph = {{ mode = "logged", times = [0, 40, 100], values = [6.0, 7.5, 5.5], titrant = "Na+", titrant_concentration = "0.5 M", opposite_titrant = "Cl-", opposite_titrant_concentration = "0.5 M" }}
"""

#: The same three runs as workbook rows; concentrations in other units to exercise the unit code.
RUNS_HEADER = ("run,pH mode,pH setpoint,titrant ion,titrant concentration [mol/L],opposite titrant ion,"
               "opposite titrant concentration [mmol/L],start adjustment,start acid ion,start acid amount [umol],"
               "temperature [C],start volume [mL],duration [min],initial S [mmol],initial E [mmol],"
               "initial Cl- [mmol]")
RUNS_ROWS = {
    "W1": "W1,held,7.0,Na+,0.5,Cl-,1000,computed,Cl-,,25,50,120,1,1.1,",
    "W2": "W2,held,6.5,Na+,0.5,,,given,Cl-,950,25,50,90,1,,",
    "W3": "W3,logged,,Na+,0.5,Cl-,500,,,,25,50,100,1,0.4,1",
}
DOSING = "run,species,amount [mmol],start [min],end [min],volume [mL]\nW1,B,1.5,0,20,2\nW2,E,1.2,0,15,5\n"
PROBE = "run,time [min],pH\nW3,0,6.0\nW3,40,7.5\nW3,100,5.5\n"
COMPOUNDS = "compound,model molecule\nS,S\nP,P\n"
HPLC = "run,time [min],kind,compound,value\n" + "".join(
    f"{r},{t},area%,S,{100 - t / 2}\n{r},{t},area%,P,{t / 2}\n" for r in ("W1", "W2", "W3") for t in (0, 30, 60))


def _folder(tmp_path: Path, rows: dict[str, str] | None = None, header: str = RUNS_HEADER) -> Path:
    folder = tmp_path / "campaign"
    folder.mkdir()
    (folder / "model.toml").write_text(MODEL, encoding="utf-8")
    body = "\n".join((rows or RUNS_ROWS).values())
    (folder / "runs.csv").write_text(f"{header}\n{body}\n", encoding="utf-8")
    (folder / "dosing.csv").write_text(DOSING, encoding="utf-8")
    (folder / "probe_log.csv").write_text(PROBE, encoding="utf-8")
    (folder / "compounds.csv").write_text(COMPOUNDS, encoding="utf-8")
    (folder / "hplc_results.csv").write_text(HPLC, encoding="utf-8")
    return folder


def _simulate(model, run, times):
    from speciakin.simulation import simulate

    return simulate(model, run, times=times, rtol=1e-10, atol=1e-15)


def test_workbook_runs_equal_the_model_file_runs(tmp_path):
    folder = _folder(tmp_path)
    model = load_model(folder / "model.toml")
    campaign = load_campaign(folder, model=model)
    for name in RUNS_ROWS:
        mine, ref = campaign.run(name).recipe, next(r for r in model.runs if r.name == name)
        # every pH-control field, the initial amounts (a given start acid added to them) and the doses
        for field in ("mode", "setpoint", "titrant", "titrant_concentration", "opposite_titrant",
                      "opposite_titrant_concentration", "start_adjustment", "start_acid", "start_base",
                      "log_times", "log_ph"):
            a, b = getattr(mine.ph, field), getattr(ref.ph, field)
            assert a == pytest.approx(b, rel=1e-12) if isinstance(b, float) else a == b, (name, field, a, b)
        assert set(mine.charges) == set(ref.charges)
        for species, amount in ref.charges.items():
            assert mine.charges[species] == pytest.approx(amount, rel=1e-12), (name, species)
        assert mine.volume == pytest.approx(ref.volume, rel=1e-12)
        assert mine.end_time == pytest.approx(ref.end_time, rel=1e-12)
        assert len(mine.doses) == len(ref.doses)
        times = np.linspace(0.0, ref.end_time, 13)
        a, b = _simulate(model, mine, times), _simulate(model, ref, times)
        # the same recipe in the same kernel: identical to rounding of the unit conversions
        for column in ("volume", "titrant", "opposite_titrant"):
            np.testing.assert_allclose(getattr(a, column), getattr(b, column), rtol=1e-9, atol=1e-15)
        for species in ("S", "E", "P", "HA", "B", "Na+", "Cl-"):
            np.testing.assert_allclose(a.amount(species), b.amount(species), rtol=1e-9, atol=1e-15)


def test_workbook_two_sided_run_with_acid_inside_the_start_volume_agrees_with_the_independent_simulator(
        tmp_path):
    folder = _folder(tmp_path)
    model = load_model(folder / "model.toml")
    run = load_campaign(folder, model=model).run("W1").recipe
    times = np.linspace(0.0, 120 * MIN, 25)
    res = _simulate(model, run, times)
    species = [Species("S", "base", 8.0), Species("E"), Species("P"), Species("HA", "acid", 4.5),
               Species("B", "base", 9.0)]
    sc = Scenario(species, {"S": 1 * MMOL, "E": 1.1 * MMOL}, 50 * ML, lambda t: 7.0, [20 * MIN], 120 * MIN,
                  K_COUPLING, K_WATER, feeds=[("B", 1.5 * MMOL, 0.0, 20 * MIN, 2 * ML)], base_conc=0.5,
                  acid_conc=1.0, start="computed")
    ref, start = IndependentRun(sc).simulate(times)
    names = ["S", "E", "P", "HA", "B", "Na+", "Cl-"]
    mine = np.column_stack([res.amount(n) for n in names] + [res.volume, res.titrant, res.opposite_titrant])
    # tolerances as in tests/simulation/test_titrant_conventions.py (1e-6 of the largest amount)
    scale = np.max(np.abs(ref[:, :7]))
    np.testing.assert_allclose(mine[:, :7], ref[:, :7], rtol=0, atol=1e-6 * scale)
    np.testing.assert_allclose(mine[:, 7], ref[:, 7], rtol=0, atol=1e-6 * scale / 0.5)
    np.testing.assert_allclose(mine[:, 8:], ref[:, 8:], rtol=0, atol=1e-6 * scale)
    assert start < 0 and res.start_adjustment == pytest.approx(start, rel=1e-8)   # acid was added
    assert res.volume[0] == pytest.approx(50 * ML, rel=1e-12)                     # inside the start volume
    assert res.titrant[-1] > 0.1 * MMOL and res.opposite_titrant[-1] > 0.1 * MMOL  # both titrants dosed


def test_workbook_round_trip_keeps_the_titrant_columns(tmp_path):
    folder = _folder(tmp_path)
    model = load_model(folder / "model.toml")
    campaign = load_campaign(folder, model=model)
    write_campaign(campaign, tmp_path / "again.xlsx")
    again = load_campaign(tmp_path / "again.xlsx", model=model)
    for name in RUNS_ROWS:
        assert again.run(name).recipe.ph == campaign.run(name).recipe.ph
        assert again.run(name).recipe.charges == pytest.approx(campaign.run(name).recipe.charges, rel=1e-12)


def _errors(folder, model=True):
    report = check_campaign(folder, model=folder / "model.toml" if model else None)
    return report.errors


def _only(errors, code):
    found = [p for p in errors if p.code == code]
    assert len(found) == 1, [p.describe() for p in errors]
    return found[0]


def test_acid_titrant_without_a_concentration_is_located(tmp_path):
    rows = dict(RUNS_ROWS, W1="W1,held,7.0,Na+,0.5,Cl-,,computed,Cl-,,25,50,120,1,1.1,")
    problem = _only(_errors(_folder(tmp_path, rows), model=False), "missing_value")
    loc = problem.location
    assert (loc.sheet, loc.row, loc.column) == ("runs", 2, "G (opposite titrant concentration [mmol/L])")
    assert "opposite titrant Cl-" in problem.message and "concentration" in problem.expected
    with pytest.raises(DataError) as info:
        load_campaign(tmp_path / "campaign")
    assert info.value.exit_code == DataError.exit_code     # a campaign that does not import (docs/data.md)


def test_negative_start_amount_is_located(tmp_path):
    rows = dict(RUNS_ROWS, W2="W2,held,6.5,Na+,0.5,,,given,Cl-,-950,25,50,90,1,,")
    problem = _only(_errors(_folder(tmp_path, rows), model=False), "negative")
    assert (problem.location.row, problem.location.column) == (3, "J (start acid amount [umol])")
    assert float(problem.value) == -950.0 and problem.expected == "a number >= 0"


def test_start_amount_needs_a_given_adjustment_and_its_ion(tmp_path):
    rows = dict(RUNS_ROWS, W2="W2,held,6.5,Na+,0.5,,,computed,,950,25,50,90,1,,",
                W1="W1,held,7.0,Na+,0.5,Cl-,1000,sometimes,Cl-,,25,50,120,1,1.1,")
    errors = _errors(_folder(tmp_path, rows), model=False)
    assert [p.code for p in errors] == ["invalid_choice", "invalid_choice"]
    assert {(p.location.row, p.location.column) for p in errors} == {
        (2, "H (start adjustment)"), (3, "J (start acid amount [umol])")}


def test_unknown_start_word_and_blank_with_amount(tmp_path):
    # blank start adjustment with a stated amount reads as 'given'; an amount without its ion is an error
    rows = dict(RUNS_ROWS, W2="W2,held,6.5,Na+,0.5,,,,,950,25,50,90,1,,")
    problem = _only(_errors(_folder(tmp_path, rows), model=False), "missing_value")
    assert (problem.location.row, problem.location.column) == (3, "I (start acid ion)")


def test_unreachable_set_point_is_located(tmp_path):
    # W1 by titrant with the base titrant only: the free amine at pH 7 needs acid at the start
    rows = dict(RUNS_ROWS, W1="W1,held,7.0,Na+,0.5,,,titrant,,,25,50,120,1,1.1,")
    errors = _errors(_folder(tmp_path, rows))
    problem = _only(errors, "unreachable_ph")
    loc = problem.location
    assert (loc.sheet, loc.row, loc.column) == ("runs", 2, "H (start adjustment)")
    assert problem.value == 7.0 and "cannot be reached or held at the start" in problem.message
    assert "opposite titrant (acid)" in problem.expected
    from speciakin.cli.main import main
    from speciakin.data.check import CHECK_FAILED
    assert main(["check", str(tmp_path / "campaign")]) == CHECK_FAILED   # check's own exit code (docs/data.md)


def test_fit_stops_at_the_unreachable_set_point_cell(tmp_path, capsys):
    # the fit loads the workbook with the model, so it names the cell instead of failing to converge
    from speciakin.cli.main import main

    folder = _folder(tmp_path, dict(RUNS_ROWS, W1="W1,held,7.0,Na+,0.5,,,titrant,,,25,50,120,1,1.1,"))
    text = (folder / "model.toml").read_text(encoding="utf-8")
    fitted = f"log10_k = {{ value = {math.log10(K_COUPLING)!r}, fit = true, lower = -3, upper = 3 }}"
    (folder / "model.toml").write_text(text.replace(f"log10_k = {math.log10(K_COUPLING)!r}", fitted, 1),
                                       encoding="utf-8")
    assert main(["fit", str(folder)]) == DataError.exit_code
    err = capsys.readouterr().err
    assert "row 2, column 'H (start adjustment)'" in err and "cannot be reached or held" in err


def test_titrant_that_would_be_withdrawn_in_a_logged_run_is_located(tmp_path):
    # W3 with the base titrant only: while the log falls the base would have to be taken out
    rows = dict(RUNS_ROWS, W3="W3,logged,,Na+,0.5,,,,,,25,50,100,1,0.4,1")
    problem = _only(_errors(_folder(tmp_path, rows)), "unreachable_ph")
    assert (problem.location.row, problem.location.column) == (4, "F (opposite titrant ion)")
    assert "at t = " in problem.message


def test_opposite_titrant_of_the_same_sign_is_located(tmp_path):
    rows = dict(RUNS_ROWS, W1="W1,held,7.0,Na+,0.5,Na+,1000,computed,Cl-,,25,50,120,1,1.1,")
    problem = _only(_errors(_folder(tmp_path, rows)), "invalid_choice")
    assert (problem.location.row, problem.location.column) == (2, "F (opposite titrant ion)")


@pytest.mark.parametrize("written, hint", [("NaOH", "Na+ for NaOH"), ("HCl", "Cl- for HCl"), ("KOH", None)])
def test_a_titrant_named_as_its_reagent_is_located_with_the_ion_it_brings(tmp_path, written, hint):
    # the model's ions are Na+ and Cl-: NaOH brings Na+, HCl brings Cl- (hints); KOH brings no ion of the model
    rows = dict(RUNS_ROWS, W2=f"W2,held,6.5,{written},0.5,,,given,Cl-,950,25,50,90,1,,")
    problem = _only(_errors(_folder(tmp_path, rows)), "unknown_species")
    assert (problem.location.row, problem.location.column) == (3, "D (titrant ion)") and problem.value == written
    assert (hint in problem.expected) if hint else "brings" not in problem.expected, problem.expected


def test_ph_stat_is_a_held_run(tmp_path):
    # 'pH-stat' is the lab's word for a pH held by a dosing controller (common practice)
    rows = dict(RUNS_ROWS, W1=RUNS_ROWS["W1"].replace(",held,", ",pH-stat,"))
    (tmp_path / "b").mkdir()
    assert load_campaign(_folder(tmp_path, rows)).run("W1").recipe.ph == load_campaign(
        _folder(tmp_path / "b", RUNS_ROWS)).run("W1").recipe.ph
