"""One fixture per error class of the campaign import, asserting the exact cell.

Source of the expected locations: the invented campaign of data_factory.py
written in the template layout (header = row 1, as a spreadsheet program
shows it); each test breaks one known cell and expects that cell back.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from data_factory import (build_campaign, csv_campaign, drop_column, edit, rename_header)
from speciakin.chemistry.model import Ion, Model, Molecule
from speciakin.data import check_campaign, load_campaign, write_campaign
from speciakin.errors import DataError


def _only(report, code):
    found = [p for p in report.problems if p.code == code]
    assert found, f"no {code} problem in:\n{report.report()}"
    return found[0]


def _assert_at(problem, sheet, row, column):
    assert problem.location.sheet == sheet
    assert problem.location.row == row
    assert problem.location.column == column
    assert problem.location.file


@pytest.fixture
def folder(tmp_path):
    return csv_campaign(tmp_path)


def test_valid_campaign_has_no_errors(folder):
    report = check_campaign(folder)
    assert report.ok, report.report()
    assert report.runs == 3


def test_missing_sheet(folder):
    os.remove(folder / "compounds.csv")
    report = check_campaign(folder)
    p = _only(report, "missing_sheet")
    assert p.location.sheet == "Compounds" and p.severity == "error"
    with pytest.raises(DataError, match="required sheet is missing"):
        load_campaign(folder)


def test_missing_column(folder):
    drop_column(folder, "runs.csv", "start volume [mL]")
    p = _only(check_campaign(folder), "missing_column")
    _assert_at(p, "runs", 1, "start volume [mL]")


def test_unknown_unit_names_header_cell(folder):
    rename_header(folder, "hplc_results.csv", "time [min]", "time [fortnights]")
    p = _only(check_campaign(folder), "unknown_unit")
    _assert_at(p, "hplc_results", 1, "B (time [fortnights])")
    assert p.value == "fortnights" and "min" in p.expected


def test_header_without_unit(folder):
    rename_header(folder, "runs.csv", "start volume [mL]", "start volume")
    p = _only(check_campaign(folder), "missing_unit")
    _assert_at(p, "runs", 1, "N (start volume)")


def test_non_numeric_value(folder):
    edit(folder, "runs.csv", 2, "temperature [C]", "warm")
    p = _only(check_campaign(folder), "not_numeric")
    _assert_at(p, "runs", 2, "M (temperature [C])")
    assert p.value == "warm"


def test_non_numeric_hplc_value(folder):
    edit(folder, "hplc_results.csv", 7, "value", "12..5")
    p = _only(check_campaign(folder), "not_numeric")
    _assert_at(p, "hplc_results", 7, "E (value)")


def test_negative_value(folder):
    edit(folder, "dosing.csv", 2, "amount [mmol]", "-1")
    p = _only(check_campaign(folder), "negative")
    _assert_at(p, "dosing", 2, "C (amount [mmol])")


def test_duplicate_run_identifier(folder):
    edit(folder, "runs.csv", 3, "run", "R01")
    p = _only(check_campaign(folder), "duplicate_run")
    _assert_at(p, "runs", 3, "A (run)")
    assert "row 2" in p.message


def test_hplc_rows_for_missing_run(folder):
    edit(folder, "hplc_results.csv", 10, "run", "R09")
    p = _only(check_campaign(folder), "unknown_run")
    _assert_at(p, "hplc_results", 10, "A (run)")
    assert p.value == "R09"


def test_compound_without_model_molecule(folder):
    edit(folder, "compounds.csv", 3, "model molecule", "")
    p = _only(check_campaign(folder), "unmapped_compound")
    _assert_at(p, "compounds", 3, "B (model molecule)")


def test_hplc_compound_not_listed(folder):
    edit(folder, "hplc_results.csv", 7, "compound", "X-peak")
    p = _only(check_campaign(folder), "unmapped_compound")
    _assert_at(p, "hplc_results", 7, "D (compound)")


def _model(names):
    # Cl- lets a held run's start solution be brought down to its set point (a computed start adjustment
    # needs an ion of each sign the start may need: docs/data.md)
    return Model("invented", tuple(Molecule(n, role="substrate" if n == "S" else "") for n in names),
                 ions=(Ion("Na+", 1), Ion("Cl-", -1)), source="invented-model")


def test_compound_mapped_to_name_the_model_lacks(folder):
    report = check_campaign(folder, model=_model(["S", "E", "P1", "P2", "A"]))  # no P12
    p = _only(report, "unknown_molecule")
    _assert_at(p, "compounds", 5, "B (model molecule)")
    assert p.value == "P12"


def test_complete_model_passes(folder):
    report = check_campaign(folder, model=_model(["S", "E", "P1", "P2", "P12", "A"]))
    assert report.ok, report.report()


def test_ph_setpoint_out_of_range(folder):
    edit(folder, "runs.csv", 2, "pH setpoint", "15")
    p = _only(check_campaign(folder), "out_of_range")
    _assert_at(p, "runs", 2, "C (pH setpoint)")


def test_logged_ph_out_of_range(folder):
    edit(folder, "probe_log.csv", 12, "pH", "-0.5")
    p = _only(check_campaign(folder), "out_of_range")
    _assert_at(p, "probe_log", 12, "C (pH)")


def test_held_run_without_setpoint(folder):
    edit(folder, "runs.csv", 2, "pH setpoint", "")
    p = _only(check_campaign(folder), "missing_setpoint")
    _assert_at(p, "runs", 2, "C (pH setpoint)")


def test_all_errors_in_one_pass(folder):
    edit(folder, "runs.csv", 2, "pH setpoint", "")
    edit(folder, "hplc_results.csv", 10, "run", "R09")
    edit(folder, "dosing.csv", 2, "amount [mmol]", "-1")
    with pytest.raises(DataError) as info:
        load_campaign(folder)
    codes = {p.code for p in info.value.problems}
    assert {"missing_setpoint", "unknown_run", "negative"} <= codes
    assert info.value.exit_code == 2          # fit and run stop on it as on any bad input
    assert "3 problems" in str(info.value)


def test_workbook_locations_use_sheet_titles(tmp_path):
    import openpyxl

    path = tmp_path / "campaign.xlsx"
    write_campaign(build_campaign(), path)
    wb = openpyxl.load_workbook(path)
    wb["Runs"]["C2"] = None          # setpoint of the held run R01
    wb["HPLC results"]["B6"] = "five"
    wb.save(path)
    report = check_campaign(path)
    _assert_at(_only(report, "missing_setpoint"), "Runs", 2, "C (pH setpoint)")
    _assert_at(_only(report, "not_numeric"), "HPLC results", 6, "B (time [min])")
    assert report.exit_code == 1


def test_not_a_workbook(tmp_path):
    bad = tmp_path / "campaign.xlsx"
    bad.write_text("this is not a workbook")
    with pytest.raises(DataError, match="not an XLSX workbook"):
        load_campaign(bad)


def test_missing_campaign_path(tmp_path):
    with pytest.raises(DataError, match="campaign not found"):
        load_campaign(tmp_path / "nothing-here")


@pytest.mark.parametrize("written, told", [("25 °C", True), ("50 mL", True), ("1.5e-3 mol", True), ("abc", False)])
def test_a_number_written_with_its_unit_is_told_the_header_gives_the_unit(folder, written, told):
    edit(folder, "runs.csv", 2, "start volume [mL]", written)
    problem = _only(check_campaign(folder), "not_numeric")
    assert (problem.location.row, problem.location.column[1:]) == (2, " (start volume [mL])")
    assert ("the unit is the column header's ('start volume [mL]')" in problem.expected) == told, problem.expected


def test_a_cell_gets_one_error_the_first():
    from speciakin.errors import Location, ProblemCollector

    c = ProblemCollector()
    cell = Location(file="c.xlsx", sheet="Runs", row=3, column="C (pH setpoint)")
    c.error("first, the specific finding", cell, "x")
    c.error("second, a later check of the same cell", cell, "x")
    c.error("another cell", Location(file="c.xlsx", sheet="Runs", row=4, column="C (pH setpoint)"), "y")
    c.error("a key, not a cell", Location(file="m.toml", key="a.b"))
    c.error("the same key again", Location(file="m.toml", key="a.b"))
    c.warning("a warning at the cell is kept", cell)
    assert [p.message for p in c.errors] == ["first, the specific finding", "another cell", "a key, not a cell",
                                             "the same key again"]
    assert len(c.warnings) == 1


def test_a_number_with_a_unit_in_a_column_without_one_is_told_to_write_it_alone(folder):
    # the Compounds LOQ has no unit in its header (it is on the scale of the compound's values)
    edit(folder, "compounds.csv", 2, "LOQ", "0.05 %")
    problem = _only(check_campaign(folder), "not_numeric")
    assert (problem.location.row, problem.location.column[1:]) == (2, " (LOQ)")
    assert "a number alone, without a unit" in problem.expected and "header's" not in problem.expected


def test_an_area_percent_value_may_end_in_a_percent_sign(folder):
    # exports write '100.0 %' and '<0.04%': an area% value with its sign reads as the number; on a
    # concentration the sign is still an error
    edit(folder, "hplc_results.csv", 2, "value", "100.0 %")
    edit(folder, "hplc_results.csv", 3, "value", "<0.04%")
    before = load_campaign(csv_campaign(folder.parent / "plain"))
    after = load_campaign(folder)
    np.testing.assert_array_equal(after.runs[0].hplc.value, before.runs[0].hplc.value)
    np.testing.assert_array_equal(after.runs[0].hplc.loq, before.runs[0].hplc.loq)
    np.testing.assert_array_equal(after.runs[0].hplc.censored, before.runs[0].hplc.censored)
    edit(folder, "hplc_results.csv", 2, "kind", "concentration")
    assert _only(check_campaign(folder), "not_numeric").value == "100.0 %"
